//! What a build or dispatch leaves behind, and what it does before it writes (issue 12,
//! item 6): stale temporary files of ours are removed, `dispatch` checks for Slurm and
//! reads its answers strictly before trusting them, and a missing templates folder is
//! an error. Slurm is played by small shell scripts on PATH in a temporary folder.

#![cfg(unix)]

mod common;

use std::os::unix::fs::PermissionsExt;
use std::path::Path;
use std::process::{Command, Output};
use std::time::{Duration, SystemTime};

use common::Workspace;

/// A small document on Fisher's Iris data (tests/data).
const DOC: &str = r#"# Leftovers

```yaml data iris
file: iris.csv
target: species
```

```yaml net small
hidden: [4]
```

```yaml train quick
data: iris
net: small
epochs: 20
```
"#;

fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// A file last modified `age` ago.
fn write_aged(path: &Path, age: Duration) {
    std::fs::write(path, "half a report").unwrap();
    let file = std::fs::File::options().write(true).open(path).unwrap();
    file.set_modified(SystemTime::now() - age).unwrap();
}

#[test]
fn stale_temporary_files_of_ours_beside_the_report_are_removed_by_the_next_build() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    // As a SIGKILL leaves them: `.stet-tmp-` and six random characters.
    let stale = ws.path(".stet-tmp-a1B2c3");
    let fresh = ws.path(".stet-tmp-d4E5f6");
    let not_ours = ws.path(".stet-tmp-notes.txt");
    write_aged(&stale, Duration::from_secs(600));
    write_aged(&fresh, Duration::from_secs(1));
    write_aged(&not_ours, Duration::from_secs(600));
    ws.build_ok(&doc, &[]);
    assert!(!stale.exists(), "the stale temporary file is still there");
    assert!(
        fresh.exists(),
        "a temporary file still being written was removed"
    );
    assert!(not_ours.exists(), "a file of another naming was removed");
}

#[test]
fn a_templates_folder_that_does_not_exist_is_an_error() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let (output, summary) = ws.build(&doc, &["--templates", "/nonexistent-stet-templates"]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(stderr(&output).contains("/nonexistent-stet-templates"));
    assert!(summary.is_none() && !ws.path("doc.html").exists());
}

/// A folder of fake Slurm programs, each a shell script, to put on PATH.
struct FakeSlurm {
    dir: tempfile::TempDir,
}

impl FakeSlurm {
    fn new(programs: &[(&str, &str)]) -> FakeSlurm {
        let dir = tempfile::tempdir().unwrap();
        for (name, body) in programs {
            let path = dir.path().join(name);
            std::fs::write(&path, format!("#!/bin/sh\n{body}\n")).unwrap();
            std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755)).unwrap();
        }
        FakeSlurm { dir }
    }

    /// How many times `squeue` ran (each run appends a line to `calls`).
    fn squeue_calls(&self) -> usize {
        std::fs::read_to_string(self.dir.path().join("calls"))
            .map_or(0, |calls| calls.lines().count())
    }

    /// Runs `stet dispatch doc.md --cache cache …` with this folder, then the system's
    /// own (for the scripts' `wc`), on PATH.
    fn dispatch(&self, ws: &Workspace, extra: &[&str]) -> Output {
        let path = format!("{}:/usr/bin:/bin", self.dir.path().display());
        self.dispatch_with_path(ws, extra, &path)
    }

    /// Like [`FakeSlurm::dispatch`] with only this folder on PATH, so that a real Slurm
    /// installed on the machine stays out of sight.
    fn dispatch_alone(&self, ws: &Workspace, extra: &[&str]) -> Output {
        self.dispatch_with_path(ws, extra, &self.dir.path().display().to_string())
    }

    fn dispatch_with_path(&self, ws: &Workspace, extra: &[&str], path: &str) -> Output {
        Command::new(env!("CARGO_BIN_EXE_stet"))
            .args(["dispatch", "doc.md", "--tasks", "2", "--cache", "cache"])
            .args(extra)
            .current_dir(ws.dir.path())
            .env_remove("STET_CACHE")
            .env("PATH", path)
            .env("CALLS", self.dir.path().join("calls"))
            .output()
            .expect("the stet binary runs")
    }
}

#[test]
fn dispatch_without_sbatch_writes_nothing() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let slurm = FakeSlurm::new(&[]);
    let output = slurm.dispatch_alone(&ws, &[]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(
        stderr(&output).contains("sbatch is not on PATH"),
        "{}",
        stderr(&output)
    );
    assert!(
        !ws.path("cache").exists(),
        "dispatch wrote into the cache first"
    );
}

#[test]
fn dispatch_with_wait_and_without_squeue_writes_nothing() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let slurm = FakeSlurm::new(&[("sbatch", "echo 4242")]);
    let output = slurm.dispatch_alone(&ws, &["--wait"]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(
        stderr(&output).contains("squeue is not on PATH"),
        "{}",
        stderr(&output)
    );
    assert!(
        !ws.path("cache").exists(),
        "dispatch wrote into the cache first"
    );
}

#[test]
fn sbatch_output_that_is_no_job_id_is_refused() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let slurm = FakeSlurm::new(&[("sbatch", "echo garbage output")]);
    let output = slurm.dispatch(&ws, &[]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(stderr(&output).contains("where a job id was expected"));
    assert!(String::from_utf8_lossy(&output.stdout).trim().is_empty());
}

#[test]
fn a_failing_squeue_is_asked_again_before_the_job_counts_as_finished() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    // squeue fails twice as an unreachable controller would, then finds the job gone.
    let squeue = r#"echo call >> "$CALLS"
if [ "$(wc -l < "$CALLS")" -le 2 ]; then
  echo "controller not reachable" >&2
  exit 1
fi"#;
    let slurm = FakeSlurm::new(&[("sbatch", "echo '4242;cluster'"), ("squeue", squeue)]);
    let output = slurm.dispatch(&ws, &["--wait"]);
    assert_eq!(slurm.squeue_calls(), 3, "{}", stderr(&output));
    // No task ran (sbatch is a fake), so the runs are still missing: exit 1.
    assert_eq!(output.status.code(), Some(1), "{}", stderr(&output));
    assert!(stderr(&output).contains("runs are still not in the cache"));
}

#[test]
fn waiting_for_a_job_gives_up_after_the_wait_timeout() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let running = "echo call >> \"$CALLS\"\necho 4242_1";
    let slurm = FakeSlurm::new(&[("sbatch", "echo 4242"), ("squeue", running)]);
    let started = std::time::Instant::now();
    let output = slurm.dispatch(&ws, &["--wait", "--wait-timeout", "3s"]);
    assert_eq!(output.status.code(), Some(2), "{}", stderr(&output));
    assert!(
        stderr(&output).contains("job 4242 is still running after 3s"),
        "{}",
        stderr(&output)
    );
    assert!(slurm.squeue_calls() >= 2);
    assert!(started.elapsed() < Duration::from_secs(30));
}
