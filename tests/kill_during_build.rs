//! Killing `stet build` with SIGKILL at any moment leaves nothing torn: the next build
//! succeeds, reuses only entries that verify, and gives the same results as a clean
//! build elsewhere, and the report on disk is always a complete HTML file.
//!
//! Each round starts from an empty cache (the report and summary of earlier rounds stay)
//! and kills a cold build after a delay drawn, from a fixed seed, across the length of a
//! cold build measured first; so kills land while data are prepared, while networks
//! train and cache entries are written, and while the report is written.

#![cfg(unix)]

mod common;

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Instant;

use common::Workspace;
use serde_json::Value;

const DOC: &str = r#"---
title: Kill check
seed: 3
---
# Kill check

```yaml data iris
file: iris.csv
target: species
holdout: 0.2
```

```yaml data iris_folds
file: iris.csv
target: species
folds: 3
```

```yaml net small
hidden: [8]
```

```yaml net wide
hidden: [16, 8]
activation: relu
init: he
```

```yaml train a
data: iris
net: small
learning_rate: 0.05
epochs: 600
batch: 8
```

```yaml train b
data: iris
net: wide
optimizer: adam
learning_rate: 0.01
epochs: 600
batch: 8
```

```yaml train c
data: iris_folds
net: small
learning_rate: 0.02
epochs: 600
batch: 8
```

```yaml train d
data: iris_folds
net: wide
learning_rate: 0.01
momentum: 0.5
epochs: 600
batch: 8
```
"#;

const ROUNDS: usize = 24;

#[test]
fn a_build_killed_at_any_moment_leaves_nothing_torn() {
    // The reference: a clean, uninterrupted build in a folder of its own.
    let clean = Workspace::new();
    let clean_doc = clean.write("kill.md", DOC);
    let started = Instant::now();
    let reference = clean.build_ok(&clean_doc, &[]);
    let cold = started.elapsed();
    let expected = results(&reference);
    assert_eq!(expected.len(), 8);

    let ws = Workspace::new();
    let doc = ws.write("kill.md", DOC);
    let report = ws.path("kill.html");
    let summary = ws.path("kill.json");
    let mut random = XorShift(0x5eed_1234_abcd_0042);
    let mut interrupted = 0;
    for round in 0..ROUNDS {
        let _ = std::fs::remove_dir_all(ws.path(".stet"));
        // Up to 1.2 cold builds, so that some kills come as the report is written and
        // some builds finish first.
        let delay = cold.mul_f64(1.2 * random.fraction());
        let mut child = Command::new(env!("CARGO_BIN_EXE_stet"))
            .args(["build", "kill.md", "--json", "kill.json"])
            .current_dir(ws.dir.path())
            .env_remove("STET_CACHE")
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("the stet binary starts");
        std::thread::sleep(delay);
        child.kill().expect("SIGKILL is sent");
        let status = child.wait().expect("the killed build is reaped");
        if killed(&status) {
            interrupted += 1;
        } else {
            assert!(
                status.success(),
                "round {round}: the build failed: {status}"
            );
        }

        let context = format!("round {round}, killed after {delay:?}");
        if report.exists() {
            assert_complete_html(&report, &context);
        }
        if summary.exists() {
            let bytes = std::fs::read(&summary).unwrap();
            serde_json::from_slice::<Value>(&bytes)
                .unwrap_or_else(|error| panic!("{context}: torn summary: {error}"));
        }

        let (output, rebuilt) = ws.build(&doc, &[]);
        let stderr = String::from_utf8_lossy(&output.stderr);
        assert!(
            output.status.success(),
            "{context}: rebuild failed: {stderr}"
        );
        assert!(
            !stderr.contains("integrity check"),
            "{context}: the kill left a torn cache entry: {stderr}"
        );
        let rebuilt = rebuilt.expect("a JSON summary");
        assert_eq!(results(&rebuilt), expected, "{context}");
        assert_complete_html(&report, &context);
    }
    // The delays must mostly land inside a build, or this test checks little.
    assert!(
        interrupted >= ROUNDS / 2,
        "only {interrupted} of {ROUNDS} kills interrupted a build (cold build {cold:?})"
    );
}

/// Whether the build died of the SIGKILL rather than finishing first.
fn killed(status: &std::process::ExitStatus) -> bool {
    use std::os::unix::process::ExitStatusExt;
    status.signal() == Some(9)
}

fn assert_complete_html(path: &Path, context: &str) {
    let html = std::fs::read_to_string(path).unwrap();
    assert!(
        html.starts_with("<!DOCTYPE html>") && html.trim_end().ends_with("</html>"),
        "{context}: torn report of {} bytes",
        html.len()
    );
}

/// Each step's summary without its status and timings, which differ between a build
/// that ran a step and one that reused it; the keys, metrics and stops must not.
fn results(summary: &Value) -> Vec<Value> {
    summary["steps"]
        .as_array()
        .expect("a list of steps")
        .iter()
        .map(common::numbers_only)
        .collect()
}

/// A small deterministic generator (xorshift64), so every run kills at the same fractions.
struct XorShift(u64);

impl XorShift {
    /// A number in [0, 1).
    fn fraction(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
}
