//! The files a build writes: each predict's and export's `write:`, the report and the
//! `--json` summary. Each is resolved once to an absolute path and checked before
//! anything runs, so that nothing stet writes can replace a file it reads, the
//! document, another output, or what belongs to version control or the cache.
//!
//! A path is resolved by following the folders that exist (links included) and taking
//! the rest as written, with `.` and `..` applied: every way of naming a file (bare,
//! `./`, `sub/../`, absolute, through a linked folder) gives the same path, so two
//! names for one file are caught as one.

use std::ops::Range;
use std::path::{Component, Path, PathBuf};

use crate::document::Problem;
use crate::plan::PlannedStep;
use crate::plan::confinement;

/// Words a YAML reader takes for "no value"; as a file name they are a slip.
const EMPTY_WORDS: &[&str] = &["~", "null", "Null", "NULL"];
/// Folders that belong to version control: writing there can wreck a repository.
const VERSION_CONTROL: &[&str] = &[".git", ".hg", ".svn"];
/// The file that marks a project's root (see `confinement`).
pub(crate) const PROJECT_MARKER: &str = ".stet-project";

/// Why a path may not be written.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub(crate) enum Refusal {
    #[error("'{0}' names no file")]
    NoFile(String),
    #[error("{0:?} contains a NUL character")]
    Nul(String),
    #[error("'{0}' names a folder, not a file")]
    Folder(String),
    #[error("'{0}' exists and is not a regular file")]
    NotRegular(String),
    #[error("'{written}' is inside the version-control folder {folder}")]
    VersionControl { written: String, folder: String },
    #[error("'{0}' is the project marker")]
    Marker(String),
    #[error("'{written}' is outside this document's project ({})", root.display())]
    Outside { written: String, root: PathBuf },
    #[error("'{written}' lies under {}, which is a file, not a folder", parent.display())]
    ParentIsFile { written: String, parent: PathBuf },
    #[error(
        "the folder of '{written}' does not exist, and stet creates folders only inside the project ({})",
        root.display()
    )]
    NoFolder { written: String, root: PathBuf },
    #[error("'{written}' would overwrite {other}")]
    Taken { written: String, other: String },
}

impl Refusal {
    /// What to do instead.
    pub(crate) fn help(&self) -> &'static str {
        match self {
            Refusal::NoFile(_) | Refusal::Nul(_) | Refusal::Folder(_) | Refusal::NotRegular(_) => {
                "name a file, such as predictions.csv"
            }
            Refusal::VersionControl { .. } | Refusal::Marker(_) => {
                "those files belong to version control or mark the project; write elsewhere"
            }
            Refusal::Outside { .. } => {
                "a document writes only under its project folder; pass --allow-outside if you trust it"
            }
            Refusal::ParentIsFile { .. } | Refusal::NoFolder { .. } => {
                "create the folder first, or write inside the project"
            }
            Refusal::Taken { .. } => {
                "each output needs a file of its own that the build does not read; choose another name"
            }
        }
    }

    /// The refusal as a document problem at `span` (the `write:` line).
    pub(crate) fn at(&self, span: Range<usize>) -> Problem {
        Problem::new(span, self.to_string()).with_help(self.help())
    }
}

/// Resolves a step's `write:` (relative to the document's folder) and checks that it
/// names a file that may be written: inside `confine_to` when given (the project,
/// unless `--allow-outside`).
pub(crate) fn step_output(
    base_dir: &Path,
    written: &str,
    confine_to: Option<&Path>,
) -> Result<PathBuf, Refusal> {
    check_name(written)?;
    let base = absolute_folder(base_dir);
    let path = resolve(&base.join(written));
    let project = confinement::project_root(&base);
    check_place(&path, written, &project)?;
    if let Some(root) = confine_to
        && !path.starts_with(root)
    {
        return Err(Refusal::Outside {
            written: written.to_string(),
            root: root.to_path_buf(),
        });
    }
    Ok(path)
}

/// Resolves a path named on the command line (`-o`, `--json`; relative to the current
/// folder) and checks that it names a file that may be written. It may lie outside
/// `project`, but a missing folder is created only inside it.
pub(crate) fn command_output(written: &Path, project: &Path) -> Result<PathBuf, Refusal> {
    let text = written.display().to_string();
    check_name(&text)?;
    let path = absolute(written);
    check_place(&path, &text, project)?;
    Ok(path)
}

/// A step's `write:`, resolved.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) struct Output {
    pub path: PathBuf,
    /// As the document wrote it, for messages.
    pub(crate) written: String,
}

/// Another use of a path, which no output may take.
#[derive(Clone, Debug)]
pub(crate) struct Claim {
    pub path: PathBuf,
    /// The use, as it reads after "would overwrite": "the report", "the file step 'hives' reads".
    pub(crate) what: String,
}

impl Claim {
    pub(crate) fn new(path: PathBuf, what: impl Into<String>) -> Claim {
        Claim {
            path,
            what: what.into(),
        }
    }
}

/// The first claim that `path` would overwrite: the same file, or a file inside a
/// claimed folder, or a folder around a claimed file.
pub(crate) fn check_free(path: &Path, written: &str, claims: &[Claim]) -> Result<(), Refusal> {
    match claims
        .iter()
        .find(|claim| path.starts_with(&claim.path) || claim.path.starts_with(path))
    {
        Some(claim) => Err(Refusal::Taken {
            written: written.to_string(),
            other: claim.what.clone(),
        }),
        None => Ok(()),
    }
}

/// The files the plan's steps read, each named by its step.
pub(crate) fn input_claims(steps: &[PlannedStep]) -> Vec<Claim> {
    steps
        .iter()
        .flat_map(|step| {
            step.files.iter().map(|file| {
                Claim::new(
                    absolute(&file.path),
                    format!("the file step '{}' reads", step.id),
                )
            })
        })
        .collect()
}

/// Steps whose `write:` takes a file another step reads or writes: each step's index
/// and why. The planner places each at the step's `write:` line.
pub(crate) fn step_clashes(steps: &[PlannedStep]) -> Vec<(usize, Refusal)> {
    let inputs = input_claims(steps);
    steps
        .iter()
        .enumerate()
        .filter_map(|(index, step)| {
            let output = step.output.as_ref()?;
            let other_writes = steps.iter().enumerate().filter_map(|(other, step)| {
                let output = step.output.as_ref().filter(|_| other != index)?;
                Some(Claim::new(
                    output.path.clone(),
                    format!("the file step '{}' writes", step.id),
                ))
            });
            let claims: Vec<Claim> = inputs.iter().cloned().chain(other_writes).collect();
            check_free(&output.path, &output.written, &claims)
                .err()
                .map(|refusal| (index, refusal))
        })
        .collect()
}

/// A path relative to the current folder, resolved (see [`resolve`]).
pub(crate) fn absolute(path: &Path) -> PathBuf {
    resolve(&absolute_folder(Path::new(".")).join(path))
}

/// Where a build writes its report and summary, resolved.
#[derive(Clone, Debug)]
pub(crate) struct BuildTargets {
    pub(crate) report: PathBuf,
    pub(crate) json: Option<PathBuf>,
}

/// What a build may not write.
#[derive(Debug)]
pub(crate) enum BuildRefusal {
    /// The report or summary path, named by its flag.
    Flag {
        flag: &'static str,
        refusal: Refusal,
    },
    /// Steps whose `write:` takes the document, the report, the summary or the cache:
    /// each step's index and why.
    Steps(Vec<(usize, Refusal)>),
}

/// The paths a build is about to use besides its steps' files.
pub(crate) struct BuildPaths<'a> {
    pub(crate) document: &'a Path,
    /// The report path, and the flag that named it (or how it was chosen).
    pub(crate) report: (&'a Path, &'static str),
    pub(crate) json: Option<&'a Path>,
    pub(crate) cache: Option<&'a Path>,
}

/// Checks the report and summary paths against the document, the files the steps read,
/// the cache and each other, then every step's `write:` against the document, the
/// report, the summary and the cache.
pub(crate) fn check_build(
    steps: &[PlannedStep],
    paths: &BuildPaths<'_>,
) -> Result<BuildTargets, BuildRefusal> {
    let project = confinement::project_root(paths.document.parent().unwrap_or(Path::new("")));
    let inputs = input_claims(steps);
    // What the build's own files may not take; each file found joins it.
    let mut claims = vec![Claim::new(absolute(paths.document), "this document")];
    claims.extend(
        paths
            .cache
            .map(|dir| Claim::new(absolute(dir), "the cache folder or what it holds")),
    );
    let (report_path, flag) = paths.report;
    let report = checked_command_output(report_path, flag, &project, &[&claims, &inputs])?;
    claims.push(Claim::new(report.clone(), "the report"));
    let json = paths
        .json
        .map(|path| checked_command_output(path, "--json", &project, &[&claims, &inputs]))
        .transpose()?;
    claims.extend(
        json.iter()
            .map(|path| Claim::new(path.clone(), "the JSON summary")),
    );
    let clashes: Vec<(usize, Refusal)> = steps
        .iter()
        .enumerate()
        .filter_map(|(index, step)| {
            let output = step.output.as_ref()?;
            check_free(&output.path, &output.written, &claims)
                .err()
                .map(|refusal| (index, refusal))
        })
        .collect();
    if !clashes.is_empty() {
        return Err(BuildRefusal::Steps(clashes));
    }
    Ok(BuildTargets { report, json })
}

fn checked_command_output(
    path: &Path,
    flag: &'static str,
    project: &Path,
    claims: &[&[Claim]],
) -> Result<PathBuf, BuildRefusal> {
    let refused = |refusal| BuildRefusal::Flag { flag, refusal };
    let resolved = command_output(path, project).map_err(refused)?;
    check_free(&resolved, &path.display().to_string(), &claims.concat()).map_err(refused)?;
    Ok(resolved)
}

/// The absolute, resolved form of a folder; "" (a document named without a folder)
/// is the current one.
pub(crate) fn absolute_folder(dir: &Path) -> PathBuf {
    let dir = if dir.as_os_str().is_empty() {
        Path::new(".")
    } else {
        dir
    };
    dir.canonicalize()
        .or_else(|_| std::path::absolute(dir))
        .unwrap_or_else(|_| dir.to_path_buf())
}

/// `path` (absolute) with every existing prefix resolved through its links and the
/// rest applied as written. A part that does not exist cannot be a link, so a `..`
/// after it simply steps back.
pub(crate) fn resolve(path: &Path) -> PathBuf {
    let mut resolved = PathBuf::new();
    for component in path.components() {
        match component {
            Component::Prefix(_) | Component::RootDir => resolved.push(component),
            Component::CurDir => {}
            Component::ParentDir => {
                resolved.pop();
            }
            Component::Normal(name) => {
                resolved.push(name);
                if let Ok(real) = resolved.canonicalize() {
                    resolved = real;
                }
            }
        }
    }
    resolved
}

/// The name alone: something that can be a file's name.
fn check_name(written: &str) -> Result<(), Refusal> {
    let owned = || written.to_string();
    if written.contains('\0') {
        return Err(Refusal::Nul(owned()));
    }
    if written.trim().is_empty() || EMPTY_WORDS.contains(&written.trim()) {
        return Err(Refusal::NoFile(owned()));
    }
    // `Path` forgets a trailing `/` or `/.`, so the text is checked.
    let last = written.rsplit('/').next().unwrap_or_default();
    if matches!(last, "" | "." | "..") {
        return Err(Refusal::Folder(owned()));
    }
    Ok(())
}

/// The resolved path: a regular file or nothing yet, outside version control and the
/// marker, in a folder that exists or that stet may create (inside `project`).
fn check_place(path: &Path, written: &str, project: &Path) -> Result<(), Refusal> {
    let owned = || written.to_string();
    if let Ok(metadata) = std::fs::metadata(path) {
        if metadata.is_dir() {
            return Err(Refusal::Folder(owned()));
        }
        if !metadata.is_file() {
            return Err(Refusal::NotRegular(owned()));
        }
    }
    if let Some(folder) = path.components().find_map(|component| match component {
        Component::Normal(name) if VERSION_CONTROL.iter().any(|vc| name == *vc) => {
            Some(name.to_string_lossy().into_owned())
        }
        _ => None,
    }) {
        return Err(Refusal::VersionControl {
            written: owned(),
            folder,
        });
    }
    if path.file_name().is_some_and(|name| name == PROJECT_MARKER) {
        return Err(Refusal::Marker(owned()));
    }
    let parent = path.parent().unwrap_or(Path::new("/"));
    let existing = parent
        .ancestors()
        .find(|dir| dir.exists())
        .unwrap_or(Path::new("/"));
    if !existing.is_dir() {
        return Err(Refusal::ParentIsFile {
            written: owned(),
            parent: existing.to_path_buf(),
        });
    }
    if existing != parent && !existing.starts_with(project) {
        return Err(Refusal::NoFolder {
            written: owned(),
            root: project.to_path_buf(),
        });
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn project() -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let root = dir.path().canonicalize().unwrap();
        std::fs::write(root.join(PROJECT_MARKER), "").unwrap();
        std::fs::create_dir_all(root.join("sub")).unwrap();
        (dir, root)
    }

    #[test]
    fn a_step_back_that_lands_inside_the_project_is_the_same_file() {
        let (_dir, root) = project();
        let direct = step_output(&root, "x.csv", Some(&root)).unwrap();
        assert_eq!(direct, root.join("x.csv"));
        assert_eq!(
            step_output(&root, "sub/../x.csv", Some(&root)).unwrap(),
            direct
        );
        assert_eq!(
            step_output(&root, "new/../x.csv", Some(&root)).unwrap(),
            direct
        );
        assert_eq!(step_output(&root, "./x.csv", Some(&root)).unwrap(), direct);
    }

    #[test]
    fn a_step_back_out_of_the_project_is_outside() {
        let (_dir, root) = project();
        for written in ["../x.csv", "new/../../x.csv", "sub/../../x.csv"] {
            assert!(
                matches!(
                    step_output(&root, written, Some(&root)),
                    Err(Refusal::Outside { .. })
                ),
                "{written} was accepted"
            );
        }
    }

    #[test]
    fn names_that_are_no_file_are_refused() {
        let (_dir, root) = project();
        for written in ["~", "null", " ", "sub/", ".", "..", "sub/.", "a\0b"] {
            assert!(
                step_output(&root, written, Some(&root)).is_err(),
                "{written:?} was accepted"
            );
        }
        assert_eq!(
            step_output(&root, "sub", Some(&root)),
            Err(Refusal::Folder("sub".into()))
        );
    }

    #[test]
    fn version_control_and_the_marker_are_refused_even_when_outside_is_allowed() {
        let (_dir, root) = project();
        std::fs::create_dir_all(root.join(".git")).unwrap();
        assert!(matches!(
            step_output(&root, ".git/HEAD", None),
            Err(Refusal::VersionControl { .. })
        ));
        assert!(matches!(
            step_output(&root, ".hg/new/x", None),
            Err(Refusal::VersionControl { .. })
        ));
        assert_eq!(
            step_output(&root, "sub/../.stet-project", None),
            Err(Refusal::Marker("sub/../.stet-project".into()))
        );
    }

    #[test]
    fn folders_are_created_only_inside_the_project() {
        let (dir, root) = project();
        assert!(step_output(&root, "new/deeper/x.csv", Some(&root)).is_ok());
        let outside = dir
            .path()
            .parent()
            .unwrap()
            .join("stet-no-such-folder/x.csv");
        assert!(matches!(
            step_output(&root, outside.to_str().unwrap(), None),
            Err(Refusal::NoFolder { .. })
        ));
        std::fs::write(root.join("plain"), "").unwrap();
        assert!(matches!(
            step_output(&root, "plain/x.csv", Some(&root)),
            Err(Refusal::ParentIsFile { .. })
        ));
    }

    #[test]
    fn a_claimed_folder_covers_the_files_inside_it() {
        let claims = [Claim::new(PathBuf::from("/p/.stet"), "the cache folder")];
        assert!(check_free(Path::new("/p/.stet/entries/x"), "x", &claims).is_err());
        assert!(check_free(Path::new("/p/stet"), "x", &claims).is_ok());
    }
}
