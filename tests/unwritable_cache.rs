//! A cache folder that cannot be written is a warning, not a failure: the build runs
//! every step, writes a correct report and exits 0.
//!
//! The folder is made unwritable by placing it under a regular file, which fails for
//! root too (CI runs as root, and root ignores permission bits).

mod common;

use std::process::Output;

use common::{Workspace, ids_with_status, step, stet};
use serde_json::Value;

const DOC: &str = r#"# Unwritable cache

```yaml data iris
file: iris.csv
target: species
holdout: 0.2
seed: 1
```

```yaml net small
hidden: [6]
```

```yaml train fit
data: iris
net: small
learning_rate: 0.05
epochs: 60
```
"#;

const WARNING: &str = "warning: cannot write to the cache";

fn metrics(summary: &Value) -> Value {
    step(summary, "fit")["metrics"].clone()
}

fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

#[test]
fn a_cache_under_a_regular_file_warns_once_and_the_build_completes() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    let reference = ws.build_ok(&doc, &["--no-cache"]);
    std::fs::remove_file(ws.path("doc.html")).unwrap();

    ws.write("blocker", "a regular file, not a folder\n");
    for attempt in ["first", "second"] {
        let (output, summary) = ws.build(&doc, &["--cache", "blocker/cache"]);
        let stderr = stderr(&output);
        assert_eq!(output.status.code(), Some(0), "{attempt}: {stderr}");
        assert_eq!(stderr.matches(WARNING).count(), 1, "{attempt}: {stderr}");
        let summary = summary.expect("a JSON summary");
        // Nothing was kept, so the second build runs everything again.
        assert_eq!(ids_with_status(&summary, "ran").len(), 3, "{attempt}");
        assert_eq!(metrics(&summary), metrics(&reference), "{attempt}");
        let html = std::fs::read_to_string(ws.path("doc.html")).unwrap();
        assert!(html.trim_end().ends_with("</html>"), "{attempt}");
        assert!(html.contains("Unwritable cache"), "{attempt}");
    }
    assert!(
        ws.path("blocker").is_file(),
        "the blocking file is untouched"
    );
}

#[test]
fn stet_cache_naming_a_regular_file_warns_and_the_build_completes() {
    let ws = Workspace::new();
    ws.write("doc.md", DOC);
    let blocker = ws.write("blocker", "not a folder\n");
    let output = std::process::Command::new(env!("CARGO_BIN_EXE_stet"))
        .args(["build", "doc.md"])
        .current_dir(ws.dir.path())
        .env("STET_CACHE", &blocker)
        .output()
        .expect("the stet binary runs");
    let stderr = stderr(&output);
    assert!(output.status.success(), "{stderr}");
    assert_eq!(stderr.matches(WARNING).count(), 1, "{stderr}");
    assert!(
        stderr.contains("3 steps, 3 ran, 0 reused, 0 failed"),
        "{stderr}"
    );
    assert!(ws.path("doc.html").is_file());
}

#[test]
fn status_and_clean_with_an_unwritable_cache_do_not_fail() {
    let ws = Workspace::new();
    let doc = ws.write("doc.md", DOC);
    ws.write("blocker", "not a folder\n");
    let args = |command: &str| {
        vec![
            command.to_string(),
            doc.display().to_string(),
            "--cache".into(),
            "blocker/cache".into(),
        ]
    };
    let status = stet(&args("status"), ws.dir.path());
    assert!(status.status.success(), "{}", stderr(&status));
    let stdout = String::from_utf8_lossy(&status.stdout);
    assert_eq!(stdout.matches("run (never run)").count(), 3, "{stdout}");
    let clean = stet(&args("clean"), ws.dir.path());
    assert!(clean.status.success(), "{}", stderr(&clean));
    assert!(String::from_utf8_lossy(&clean.stdout).starts_with("removed 0 cache entries"));
}
