//! `stet dispatch` on a real Slurm cluster: a sweep spread over a job array through one
//! shared cache gives the same numbers as one machine, and a second dispatch trains
//! exactly the runs that are missing. Skipped (with a message) where `sbatch` is absent;
//! CI starts a one-node cluster (`.ci/start-slurm.sh`) and sets STET_REQUIRE_SLURM so
//! that it cannot be skipped there.

mod common;

use common::{Workspace, ids_with_status, numbers_only, stet};

const SWEEP: &str = r#"# Dispatch check

```yaml data iris
file: iris.csv
target: species
seed: 3
```

```yaml net small
hidden: [5]
```

```yaml train base
data: iris
net: small
learning_rate: 0.02
epochs: 60
seed: 1
```

```yaml sweep grid
from: base
vary:
  learning_rate: [0.01, 0.03, 0.1]
  activation: [tanh, relu]
repeat: 2
```
"#;

fn slurm_available() -> bool {
    let found = std::process::Command::new("sbatch")
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success());
    if !found {
        assert!(
            std::env::var_os("STET_REQUIRE_SLURM").is_none(),
            "STET_REQUIRE_SLURM is set but sbatch is missing"
        );
        eprintln!("skipping the Slurm dispatch test: sbatch is not installed");
    }
    found
}

/// Runs done by one job's tasks, read from their logs.
fn trained_by_job(cache: &std::path::Path, job: &str) -> usize {
    let mut total = 0;
    for entry in std::fs::read_dir(cache.join("dispatch")).unwrap() {
        let path = entry.unwrap().path();
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        if name.starts_with(&format!("dispatch-{job}_")) && name.ends_with(".out") {
            let log = std::fs::read_to_string(&path).unwrap();
            let count = log
                .split("trained ")
                .nth(1)
                .and_then(|rest| rest.split(' ').next())
                .and_then(|n| n.parse::<usize>().ok())
                .unwrap_or_else(|| panic!("no count in {name}: {log}"));
            total += count;
        }
    }
    total
}

fn dispatch(ws: &Workspace, doc: &std::path::Path) -> String {
    let args: Vec<String> = [
        "dispatch",
        doc.to_str().unwrap(),
        "--tasks",
        "4",
        "--cache",
        "cache",
        "--wait",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect();
    let output = stet(&args, ws.dir.path());
    assert!(
        output.status.success(),
        "dispatch failed: {}",
        String::from_utf8_lossy(&output.stderr)
    );
    String::from_utf8(output.stdout).unwrap().trim().to_string()
}

#[test]
fn a_dispatched_sweep_matches_one_machine_and_redispatch_fills_only_the_gaps() {
    if !slurm_available() {
        return;
    }
    let ws = Workspace::new();
    let doc = ws.write("dispatch.md", SWEEP);
    let job = dispatch(&ws, &doc);
    // 3 × 2 combinations × 2 seeds plus the base run, none equal: 13 runs in 4 shares.
    assert_eq!(trained_by_job(&ws.path("cache"), &job), 13);

    let assembled = ws.build_ok(&doc, &["--cache", "cache"]);
    assert!(
        ids_with_status(&assembled, "ran").is_empty(),
        "the final build trains nothing"
    );
    let single = ws.build_ok(&doc, &["--no-cache", "--jobs", "1"]);
    let a = serde_json::to_string(&numbers_only(&assembled["steps"])).unwrap();
    let b = serde_json::to_string(&numbers_only(&single["steps"])).unwrap();
    assert!(a == b, "dispatched numbers differ from one machine's");

    // Lose three runs' work, as if their task had died, and dispatch again.
    let mut runs: Vec<_> = walk(&ws.path("cache/entries"))
        .into_iter()
        .filter(|p| p.extension().unwrap() == "run")
        .collect();
    runs.sort();
    for path in runs.iter().take(3) {
        std::fs::remove_file(path).unwrap();
    }
    let second = dispatch(&ws, &doc);
    assert_eq!(trained_by_job(&ws.path("cache"), &second), 3);
    let again = ws.build_ok(&doc, &["--cache", "cache"]);
    assert!(ids_with_status(&again, "ran").is_empty());
}

fn walk(dir: &std::path::Path) -> Vec<std::path::PathBuf> {
    let mut files = Vec::new();
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.is_dir() {
            files.extend(walk(&path));
        } else {
            files.push(path);
        }
    }
    files
}
