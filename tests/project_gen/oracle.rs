//! The oracle: a generated project is written to a fresh folder (a `.stet-project`
//! inside a folder that stands for the rest of the disk), built through `stet::build`
//! with its own cache, and judged. A build must finish within the deadline without a
//! panic; exit 2 must come with problems that each lie inside the document, rendered
//! without a panic, and with nothing written but cache entries; exit 0 or 1 must write the report; and
//! whatever happens, the document and the CSV files its steps read keep their bytes and nothing
//! appears outside the project.

use std::collections::BTreeMap;
use std::fmt;
use std::panic::AssertUnwindSafe;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::sync::mpsc;
use std::time::Duration;

use stet::document::Decoration;
use stet::plan::PlanOptions;
use stet::{BuildOptions, BuildSummary, CacheChoice, Error};

use super::{DOCUMENT, OUTSIDE, Project};

/// The longest a build of a generated project may take (issue 11's "no hang over 10 s").
pub const DEADLINE: Duration = Duration::from_secs(10);

/// A readable file outside the project, for documents that try to read it.
const SECRET: &str = "secret.csv";

/// One way a build broke a promise.
#[derive(Clone, Debug)]
pub enum Failure {
    Panic {
        message: String,
        location: String,
    },
    Hang,
    /// Exit 2 for a reason that names no line of the document.
    Unlocated(String),
    /// A problem whose span does not lie inside the document (on character boundaries).
    SpanOutside {
        message: String,
    },
    /// Drawing a problem's diagnostic as the command line does panicked.
    DiagnosticPanic {
        message: String,
    },
    /// Exit 2, but files outside the cache appeared or changed in the project.
    WroteOnRefusal(Vec<String>),
    NoReport,
    /// The document or a CSV file named in a `file:` line lost its bytes.
    InputChanged(String),
    /// Something was written outside the project folder.
    WroteOutside(Vec<String>),
}

impl Failure {
    /// What failures of the same cause share, to group them: numbers, quoted values and
    /// folders are left out.
    pub fn class(&self) -> String {
        match self {
            Failure::Panic { location, message } => {
                format!("panic at {location}: {}", generalise(message))
            }
            Failure::Hang => "no result within the deadline".into(),
            Failure::Unlocated(message) => {
                format!("exit 2 without a line: {}", generalise(message))
            }
            Failure::SpanOutside { message } => format!("span outside: {}", generalise(message)),
            Failure::DiagnosticPanic { message } => {
                format!("diagnostic panicked: {}", generalise(message))
            }
            Failure::WroteOnRefusal(_) => "exit 2 after writing files".into(),
            Failure::NoReport => "exit 0/1 without a report".into(),
            Failure::InputChanged(path) => format!("an input was overwritten: {path}"),
            Failure::WroteOutside(_) => "wrote outside the project".into(),
        }
    }
}

impl fmt::Display for Failure {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Failure::Panic { message, location } => write!(f, "panic at {location}: {message}"),
            Failure::WroteOnRefusal(paths) => write!(f, "exit 2 after writing {paths:?}"),
            Failure::WroteOutside(paths) => write!(f, "wrote outside the project: {paths:?}"),
            other => write!(f, "{}", other.class()),
        }
    }
}

/// Digits become `#` and the text inside quotes `'…'`, so messages about different
/// values fall into one class; only the first line counts.
fn generalise(message: &str) -> String {
    let first = message.lines().next().unwrap_or_default();
    let mut out = String::new();
    let mut quoted = false;
    for c in first.chars() {
        match c {
            '\'' => {
                quoted = !quoted;
                if quoted {
                    out.push_str("'…");
                } else {
                    out.push('\'');
                }
            }
            _ if quoted => {}
            '0'..='9' if out.ends_with('#') => {}
            '0'..='9' => out.push('#'),
            _ => out.push(c),
        }
    }
    out.chars().take(120).collect()
}

/// What one build did and every promise it broke.
#[derive(Debug)]
pub struct Verdict {
    /// 0, 1 or 2 as the command line maps the result; `None` after a panic or a hang.
    pub exit: Option<u8>,
    /// Problems of an exit-2 build whose location was checked.
    pub located: usize,
    pub failures: Vec<Failure>,
}

/// Builds `project` in a fresh folder and judges the result.
pub fn check(project: &Project) -> Verdict {
    let outer = tempfile::tempdir().expect("a temporary folder");
    let root = outer.path().join("project");
    let inputs = lay_out(project, outer.path(), &root);
    let before = Listing::of(outer.path());
    let options = build_options(&root);
    let Some(result) = build_within_deadline(options) else {
        // The build is still running in its thread: leave its folder for it.
        let _ = outer.keep();
        return Verdict {
            exit: None,
            located: 0,
            failures: vec![Failure::Hang],
        };
    };
    let mut verdict = judge_result(result, &root);
    let after = Listing::of(outer.path());
    if verdict.exit == Some(2) {
        // The cache may keep what was computed before the refusal; nothing else may change.
        let changed: Vec<String> = before
            .changed_in(&after, Path::new("project"))
            .into_iter()
            .filter(|path| !Path::new(path).starts_with("project/.stet"))
            .collect();
        if !changed.is_empty() {
            verdict.failures.push(Failure::WroteOnRefusal(changed));
        }
    }
    let outside = before.changed_outside(&after, Path::new("project"));
    if !outside.is_empty() {
        verdict.failures.push(Failure::WroteOutside(outside));
    }
    for (path, bytes) in &inputs {
        let read = path == DOCUMENT || named_as_file(&project.document, path);
        if read && std::fs::read(root.join(path)).ok().as_ref() != Some(bytes) {
            verdict.failures.push(Failure::InputChanged(path.clone()));
        }
    }
    verdict
}

/// Whether a `file:` line of the document names `path` (by its last component, so any
/// spelling of the path counts). A CSV no step reads is the document's to overwrite
/// with a `write:`, as a rebuild overwrites its last predictions.
fn named_as_file(document: &[u8], path: &str) -> bool {
    let name = path.rsplit('/').next().unwrap_or(path);
    String::from_utf8_lossy(document)
        .split(['\n', '\r'])
        .filter_map(|line| line.trim_start().strip_prefix("file:"))
        .any(|value| value.contains(name))
}

/// Writes the project under `root` and a secret file and a link beside and into it;
/// returns the files the build reads, with their bytes.
fn lay_out(project: &Project, outer: &Path, root: &Path) -> Vec<(String, Vec<u8>)> {
    // `sub` is a folder, so `file:` and `write:` can name one.
    std::fs::create_dir_all(root.join("sub")).expect("the project folder");
    std::fs::write(root.join(".stet-project"), "").expect("the project marker");
    std::fs::write(outer.join(SECRET), "password,x\nhunter2,1\n").expect("the secret");
    #[cfg(unix)]
    std::os::unix::fs::symlink(outer, root.join("link")).expect("a link out of the project");
    let outside = outer.display().to_string();
    let document = replace_bytes(&project.document, OUTSIDE.as_bytes(), outside.as_bytes());
    let mut inputs = vec![(DOCUMENT.to_string(), document)];
    inputs.extend(project.files.iter().cloned());
    for (path, bytes) in &inputs {
        std::fs::write(root.join(path), bytes).expect("a project file");
    }
    inputs
}

fn replace_bytes(haystack: &[u8], from: &[u8], to: &[u8]) -> Vec<u8> {
    let mut out = Vec::with_capacity(haystack.len());
    let mut rest = haystack;
    while !rest.is_empty() {
        if rest.starts_with(from) {
            out.extend_from_slice(to);
            rest = &rest[from.len()..];
        } else {
            out.push(rest[0]);
            rest = &rest[1..];
        }
    }
    out
}

fn build_options(root: &Path) -> BuildOptions {
    BuildOptions {
        document: root.join(DOCUMENT),
        output: Some(root.join("report.html")),
        json: Some(root.join("summary.json")),
        cache: CacheChoice::Dir(root.join(".stet")),
        jobs: 1,
        templates: None,
        allow_html: false,
        embed_limit: Some(stet::DEFAULT_EMBED_MB << 20),
        plan: PlanOptions::default(),
    }
}

type Built = Result<Result<BuildSummary, Error>, Failure>;

/// Runs the build on a thread of its own; `None` when it is not done by the deadline.
fn build_within_deadline(options: BuildOptions) -> Option<Built> {
    let (send, receive) = mpsc::channel();
    std::thread::spawn(move || {
        let result = std::panic::catch_unwind(AssertUnwindSafe(|| stet::build(&options)));
        let _ = send.send(result.map_err(|payload| panic_failure(&*payload)));
    });
    receive.recv_timeout(DEADLINE).ok()
}

fn judge_result(result: Built, root: &Path) -> Verdict {
    let (exit, located, failures) = match result {
        Err(panic) => (None, 0, vec![panic]),
        Ok(Ok(summary)) => {
            let exit = if summary.failed.is_empty() { 0 } else { 1 };
            let written = root.join("report.html").is_file() && root.join("summary.json").is_file();
            (
                Some(exit),
                0,
                if written {
                    vec![]
                } else {
                    vec![Failure::NoReport]
                },
            )
        }
        Ok(Err(Error::Document(errors))) => (Some(2), errors.problems.len(), located(&errors)),
        Ok(Err(other)) => {
            let message = other
                .to_string()
                .replace(&root.display().to_string(), "<project>");
            (Some(2), 0, vec![Failure::Unlocated(message)])
        }
    };
    Verdict {
        exit,
        located,
        failures,
    }
}

/// Every problem lies inside the document and its diagnostic renders.
fn located(errors: &stet::document::DocumentErrors) -> Vec<Failure> {
    let source = &errors.source;
    let mut failures: Vec<Failure> = errors
        .problems
        .iter()
        .filter(|p| {
            let span = &p.span;
            span.start > span.end
                || span.end > source.len()
                || !source.is_char_boundary(span.start)
                || !source.is_char_boundary(span.end)
        })
        .map(|p| Failure::SpanOutside {
            message: p.message.clone(),
        })
        .collect();
    for decoration in [Decoration::Plain, Decoration::Terminal] {
        let rendered = std::panic::catch_unwind(AssertUnwindSafe(|| errors.rendered(decoration)));
        if let Err(payload) = rendered {
            let Failure::Panic { message, .. } = panic_failure(&*payload) else {
                unreachable!("panic_failure makes a panic");
            };
            failures.push(Failure::DiagnosticPanic { message });
        }
    }
    failures
}

/// Where the last panic happened, recorded by [`quiet_panics`]' hook.
static LAST_PANIC: Mutex<Option<String>> = Mutex::new(None);

/// Until dropped, a panic prints nothing and leaves a note of where it happened, which
/// [`check`] reads back: the test expects panics by the dozen on broken code and lists
/// them at the end. The fuzz target keeps libFuzzer's hook instead.
pub struct QuietPanics;

pub fn quiet_panics() -> QuietPanics {
    std::panic::set_hook(Box::new(|info| {
        let location = info
            .location()
            .map_or_else(|| "?".into(), |l| format!("{}:{}", l.file(), l.line()));
        *LAST_PANIC.lock().unwrap_or_else(|e| e.into_inner()) = Some(location);
    }));
    QuietPanics
}

impl Drop for QuietPanics {
    fn drop(&mut self) {
        // Back to the default hook, so the test's own failure is printed.
        let _ = std::panic::take_hook();
    }
}

fn panic_failure(payload: &(dyn std::any::Any + Send)) -> Failure {
    let message = payload
        .downcast_ref::<&str>()
        .map(|s| s.to_string())
        .or_else(|| payload.downcast_ref::<String>().cloned())
        .unwrap_or_else(|| "(not text)".into());
    let location = LAST_PANIC
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .take()
        .unwrap_or_else(|| "?".into());
    Failure::Panic { message, location }
}

/// Every file and folder under a folder with a hash of each file's bytes (links are
/// listed, not followed).
struct Listing(BTreeMap<PathBuf, Option<blake3::Hash>>);

impl Listing {
    fn of(dir: &Path) -> Listing {
        let mut entries = BTreeMap::new();
        let mut pending = vec![dir.to_path_buf()];
        while let Some(folder) = pending.pop() {
            let Ok(read) = std::fs::read_dir(&folder) else {
                continue;
            };
            for entry in read.flatten() {
                let path = entry.path();
                let relative = path.strip_prefix(dir).expect("under dir").to_path_buf();
                let kind = entry.file_type().expect("a file type");
                let hash = if kind.is_file() {
                    std::fs::read(&path).ok().map(|b| blake3::hash(&b))
                } else {
                    None
                };
                if kind.is_dir() {
                    pending.push(path);
                }
                entries.insert(relative, hash);
            }
        }
        Listing(entries)
    }

    /// Paths under `inside` that appeared, vanished or changed.
    fn changed_in(&self, after: &Listing, inside: &Path) -> Vec<String> {
        self.changed(after, |path| path.starts_with(inside))
    }

    /// Paths not under `inside` that appeared, vanished or changed.
    fn changed_outside(&self, after: &Listing, inside: &Path) -> Vec<String> {
        self.changed(after, |path| !path.starts_with(inside))
    }

    fn changed(&self, after: &Listing, keep: impl Fn(&Path) -> bool) -> Vec<String> {
        let paths: std::collections::BTreeSet<&PathBuf> =
            self.0.keys().chain(after.0.keys()).collect();
        paths
            .into_iter()
            .filter(|path| keep(path) && self.0.get(*path) != after.0.get(*path))
            .map(|path| path.display().to_string())
            .collect()
    }
}
