//! Shared helpers for the integration tests: a fresh folder per test, the real binary,
//! and the `--json` summary parsed.

#![allow(dead_code)] // each test file uses its own subset

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

use serde_json::Value;

/// The project root, where `experiments/`, `demo-data/` and `tests/data/` live.
pub fn project() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A temporary folder that holds copies of the demo data and documents, laid out as in
/// the project so that relative paths keep working.
pub struct Workspace {
    pub dir: tempfile::TempDir,
}

impl Workspace {
    pub fn new() -> Workspace {
        let dir = tempfile::tempdir().expect("a temporary folder");
        for folder in ["experiments", "demo-data"] {
            std::fs::create_dir_all(dir.path().join(folder)).unwrap();
        }
        for name in [
            "hives.csv",
            "greenhouse.csv",
            "hives-new.csv",
            "hives-week7.csv",
            "greenhouse-new.csv",
        ] {
            std::fs::copy(
                project().join("demo-data").join(name),
                dir.path().join("demo-data").join(name),
            )
            .unwrap();
        }
        std::fs::copy(
            project().join("tests/data/iris.csv"),
            dir.path().join("iris.csv"),
        )
        .unwrap();
        // The workspace is one project, as the repository is, so `../demo-data` is inside.
        std::fs::write(dir.path().join(".stet-project"), "").unwrap();
        Workspace { dir }
    }

    pub fn path(&self, relative: &str) -> PathBuf {
        self.dir.path().join(relative)
    }

    /// Writes a file into the workspace.
    pub fn write(&self, relative: &str, text: &str) -> PathBuf {
        let path = self.path(relative);
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, text).unwrap();
        path
    }

    /// Copies a demo document into the workspace's `experiments/`.
    pub fn demo(&self, name: &str) -> PathBuf {
        let target = self.path(&format!("experiments/{name}"));
        std::fs::copy(project().join("experiments").join(name), &target).unwrap();
        target
    }

    /// Runs `stet build DOC --json …` with extra arguments; returns the output and summary.
    pub fn build(&self, document: &Path, extra: &[&str]) -> (Output, Option<Value>) {
        let json = self.path("summary.json");
        let _ = std::fs::remove_file(&json);
        let mut args = vec!["build".to_string(), document.display().to_string()];
        args.push("--json".into());
        args.push(json.display().to_string());
        args.extend(extra.iter().map(|s| s.to_string()));
        let output = stet(&args, self.dir.path());
        let summary = std::fs::read(&json)
            .ok()
            .map(|bytes| serde_json::from_slice(&bytes).unwrap());
        (output, summary)
    }

    /// A build that must succeed; returns its summary.
    pub fn build_ok(&self, document: &Path, extra: &[&str]) -> Value {
        let (output, summary) = self.build(document, extra);
        assert!(
            output.status.success(),
            "stet build failed: {}",
            String::from_utf8_lossy(&output.stderr)
        );
        summary.expect("a JSON summary")
    }
}

/// A document problem as `(line:column, message, help)`.
pub type Located = (String, String, Option<String>);

/// Every problem `stet::load` finds in `text`, written as `doc.md` in `ws`.
pub fn problems_in(ws: &Workspace, text: &str) -> Vec<Located> {
    let path = ws.write("doc.md", text);
    match stet::load(&path, &stet::plan::PlanOptions::default()) {
        Ok(_) => Vec::new(),
        Err(stet::Error::Document(errors)) => errors
            .problems
            .iter()
            .map(|p| {
                let location = errors.location(p);
                let short = location.rsplit_once("doc.md:").unwrap().1.to_string();
                (short, p.message.clone(), p.help.clone())
            })
            .collect(),
        Err(other) => panic!("not a document error: {other}"),
    }
}

/// Every problem in `text`, in a fresh workspace.
pub fn problems(text: &str) -> Vec<Located> {
    problems_in(&Workspace::new(), text)
}

/// The one problem in `text`, in a fresh workspace.
pub fn one_problem(text: &str) -> Located {
    let mut found = problems(text);
    assert_eq!(found.len(), 1, "{found:?}");
    found.remove(0)
}

/// Runs the stet binary in `dir` with `args`, with `STET_CACHE` unset.
pub fn stet(args: &[String], dir: &Path) -> Output {
    Command::new(env!("CARGO_BIN_EXE_stet"))
        .args(args)
        .current_dir(dir)
        .env_remove("STET_CACHE")
        .output()
        .expect("the stet binary runs")
}

/// The ids of the steps with a given status.
pub fn ids_with_status(summary: &Value, status: &str) -> Vec<String> {
    summary["steps"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|step| step["status"] == status)
        .map(|step| step["id"].as_str().unwrap().to_string())
        .collect()
}

/// A step's object in the summary.
pub fn step<'a>(summary: &'a Value, id: &str) -> &'a Value {
    summary["steps"]
        .as_array()
        .unwrap()
        .iter()
        .find(|step| step["id"] == id)
        .unwrap_or_else(|| panic!("no step {id}"))
}

/// A summary value with every `seconds` field removed, to compare two builds' numbers.
pub fn without_seconds(value: &Value) -> Value {
    match value {
        Value::Object(map) => Value::Object(
            map.iter()
                .filter(|(key, _)| key.as_str() != "seconds")
                .map(|(key, v)| (key.clone(), without_seconds(v)))
                .collect(),
        ),
        Value::Array(items) => Value::Array(items.iter().map(without_seconds).collect()),
        other => other.clone(),
    }
}

/// A summary's steps without what differs between building and reusing a result
/// (status, times, counts of runs trained): the numbers two builds must agree on.
pub fn numbers_only(value: &Value) -> Value {
    match value {
        Value::Object(map) => Value::Object(
            map.iter()
                .filter(|(key, _)| !matches!(key.as_str(), "status" | "seconds" | "runs_trained"))
                .map(|(key, v)| (key.clone(), numbers_only(v)))
                .collect(),
        ),
        Value::Array(items) => Value::Array(items.iter().map(numbers_only).collect()),
        other => other.clone(),
    }
}

/// The Python interpreter named by `STET_PYTHON` (with the reference libraries from
/// `.ci/run`), or `None` with a note on stderr so the caller can skip. CI sets
/// `STET_REQUIRE_PYTHON`, which turns a missing interpreter into a failure.
pub fn reference_python(check: &str) -> Option<PathBuf> {
    match std::env::var_os("STET_PYTHON") {
        Some(python) => Some(PathBuf::from(python)),
        None => {
            assert!(
                std::env::var_os("STET_REQUIRE_PYTHON").is_none(),
                "STET_REQUIRE_PYTHON is set but STET_PYTHON is not ({check})"
            );
            eprintln!("skipping {check}: STET_PYTHON is not set");
            None
        }
    }
}

/// Whether headless Chromium and chromedriver are installed (with selenium in the
/// reference Python) so a browser test can run; `false` with a note on stderr otherwise.
/// CI sets `STET_REQUIRE_BROWSER`, which turns a missing browser into a failure.
pub fn browser_available(check: &str) -> bool {
    let found = |program: &str| {
        Command::new(program)
            .arg("--version")
            .output()
            .is_ok_and(|out| out.status.success())
    };
    let ready = found("chromium") && found("chromedriver");
    if !ready {
        assert!(
            std::env::var_os("STET_REQUIRE_BROWSER").is_none(),
            "STET_REQUIRE_BROWSER is set but chromium or chromedriver is missing ({check})"
        );
        eprintln!("skipping {check}: chromium or chromedriver is not installed");
    }
    ready
}

/// Runs the reference script `tests/reference/<script>` with `python`, `request` as JSON
/// on its stdin, and returns the JSON it writes.
pub fn reference_script(python: &Path, script: &str, request: &Value) -> Value {
    use std::io::Write;
    use std::process::Stdio;
    let mut child = Command::new(python)
        .arg(project().join("tests/reference").join(script))
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .spawn()
        .expect("the reference Python starts");
    child
        .stdin
        .take()
        .unwrap()
        .write_all(request.to_string().as_bytes())
        .unwrap();
    let output = child.wait_with_output().unwrap();
    assert!(output.status.success(), "{script} failed");
    serde_json::from_slice(&output.stdout).expect("the script writes JSON")
}
