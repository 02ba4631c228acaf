//! `stet unpack`: the files to write for the experiment a report carries, into a
//! folder. Every path is checked, and every file that would be replaced, before the
//! command layer writes the first byte: a
//! path that is absolute, climbs with `..`, or passes through a symbolic link inside the
//! folder is refused, and an existing file is replaced only with `--force`.

use std::path::{Path, PathBuf};

use super::{CarriedFile, CarryError, Experiment, inputs};
use crate::plan::input_file;
use crate::plan::outputs::PROJECT_MARKER;

/// The largest report `unpack` reads: a report carries at most `--embed-data-mb` of
/// compressed files, plus its charts and text.
const MAX_REPORT_BYTES: u64 = 2 << 30;

/// What `stet unpack` wrote.
#[derive(Debug)]
pub struct Unpacked {
    /// The unpacked document, ready to build.
    pub document: PathBuf,
    /// Every file written, the document first.
    pub written: Vec<PathBuf>,
    /// The files the report could not include.
    pub missing: Vec<MissingFile>,
}

/// The files to write, each checked, the document first.
pub(crate) struct Unpacking {
    pub(crate) writes: Vec<(PathBuf, Vec<u8>)>,
    pub(crate) missing: Vec<MissingFile>,
}

/// A file the document reads that the report does not carry.
#[derive(Debug)]
pub struct MissingFile {
    /// Where the unpacked document expects it.
    pub place: PathBuf,
    pub blake3: String,
    /// Why the report left it out.
    pub why: String,
}

/// Why a report could not be unpacked; nothing was written.
#[derive(Debug, thiserror::Error)]
pub enum UnpackError {
    #[error("cannot read {}: {message}", report.display())]
    Unreadable { report: PathBuf, message: String },
    #[error("{}: {source}", report.display())]
    Carry { report: PathBuf, source: CarryError },
    #[error("{}: refusing to write '{path}', which would land outside {}: {why}", report.display(), dir.display())]
    Outside {
        report: PathBuf,
        path: String,
        dir: PathBuf,
        why: &'static str,
    },
    #[error("{}: the report names '{path}' twice", report.display())]
    Twice { report: PathBuf, path: String },
    #[error("{} is a symbolic link; unpack writes nothing through a link", .0.display())]
    Link(PathBuf),
    #[error("{} already exists; pass --force to replace it", .0.display())]
    Exists(PathBuf),
}

/// What unpacking `report` into `dir` (default: a folder named after the report in the
/// current one) writes, or why it must write nothing.
pub(crate) fn prepare(
    report: &Path,
    dir: Option<&Path>,
    force: bool,
) -> Result<Unpacking, UnpackError> {
    let html = input_file::read_regular(report, MAX_REPORT_BYTES).map_err(|error| {
        UnpackError::Unreadable {
            report: report.to_path_buf(),
            message: error.to_string(),
        }
    })?;
    let experiment = super::read(&html).map_err(|source| UnpackError::Carry {
        report: report.to_path_buf(),
        source,
    })?;
    let dir = dir.map_or_else(|| default_folder(report), Path::to_path_buf);
    let files = files_to_write(&experiment);
    let mut targets = Vec::new();
    for (path, _) in &files {
        let relative = safe_relative(path).map_err(|why| UnpackError::Outside {
            report: report.to_path_buf(),
            path: path.clone(),
            dir: dir.clone(),
            why,
        })?;
        if targets.contains(&relative) {
            return Err(UnpackError::Twice {
                report: report.to_path_buf(),
                path: path.clone(),
            });
        }
        check_target(&dir, &relative, force)?;
        targets.push(relative);
    }
    let mut writes: Vec<(PathBuf, Vec<u8>)> = targets
        .iter()
        .zip(files)
        .map(|(relative, (_, bytes))| (dir.join(relative), bytes))
        .collect();
    writes.extend(project_marker(&dir));
    Ok(Unpacking {
        writes,
        missing: missing_files(&experiment, &dir),
    })
}

/// The marker that makes the folder one project, so the document may read the files
/// unpacked above its own folder (`../data/x.csv`); one already there is left as it is.
fn project_marker(dir: &Path) -> Option<(PathBuf, Vec<u8>)> {
    let marker = dir.join(PROJECT_MARKER);
    std::fs::symlink_metadata(&marker)
        .is_err()
        .then(|| (marker, Vec::new()))
}

/// `NAME/` in the current folder for `NAME.html`.
fn default_folder(report: &Path) -> PathBuf {
    PathBuf::from(report.file_stem().unwrap_or(report.as_os_str()))
}

/// Each file to write as (path inside the folder, bytes): the document, the files the
/// report carries, and the record of those it does not.
fn files_to_write(experiment: &Experiment) -> Vec<(String, Vec<u8>)> {
    let document = &experiment.manifest.document;
    let mut files = vec![(document.path.clone(), experiment.document.clone())];
    files.extend(
        experiment
            .files
            .iter()
            .map(|(file, bytes)| (file.path.clone(), bytes.clone())),
    );
    let left_out: Vec<&CarriedFile> = experiment
        .manifest
        .files
        .iter()
        .filter(|file| file.left_out.is_some())
        .collect();
    if !left_out.is_empty() {
        let record = inputs::record_path(Path::new(&document.path));
        files.push((
            record.to_string_lossy().into_owned(),
            inputs::record(&left_out),
        ));
    }
    files
}

/// A path from the report as a relative path of plain names, or why it is refused.
fn safe_relative(path: &str) -> Result<PathBuf, &'static str> {
    if path.starts_with('/') || Path::new(path).is_absolute() {
        return Err("it is an absolute path");
    }
    let mut relative = PathBuf::new();
    for name in path.split('/') {
        match name {
            "" | "." => return Err("it has an empty or '.' part"),
            ".." => return Err("it climbs out with '..'"),
            name if name.contains('\\') || name.contains('\0') => {
                return Err("it holds a backslash or a zero byte");
            }
            name => relative.push(name),
        }
    }
    Ok(relative)
}

/// Refuses a target reached through a symbolic link below `dir`, and an existing file
/// unless `force`.
fn check_target(dir: &Path, relative: &Path, force: bool) -> Result<(), UnpackError> {
    let mut path = dir.to_path_buf();
    for name in relative.iter() {
        path.push(name);
        match std::fs::symlink_metadata(&path) {
            Ok(meta) if meta.file_type().is_symlink() => {
                return Err(UnpackError::Link(path));
            }
            Ok(_) if path.as_path() == dir.join(relative) && !force => {
                return Err(UnpackError::Exists(path));
            }
            _ => {}
        }
    }
    Ok(())
}

/// The files left out, where the unpacked document expects each.
fn missing_files(experiment: &Experiment, dir: &Path) -> Vec<MissingFile> {
    experiment
        .manifest
        .files
        .iter()
        .filter_map(|file| {
            let why = file.left_out.clone()?;
            let place = if Path::new(&file.written).is_absolute() {
                PathBuf::from(&file.written)
            } else {
                dir.join(&file.path)
            };
            Some(MissingFile {
                place,
                blake3: file.blake3.clone(),
                why,
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn only_plain_relative_names_are_safe() {
        assert!(safe_relative("experiments/doc.md").is_ok());
        for bad in [
            "/etc/passwd",
            "../x.csv",
            "a/../../x.csv",
            "a//b",
            "./a",
            "",
            "a\\..\\b",
        ] {
            assert!(safe_relative(bad).is_err(), "{bad}");
        }
    }
}
