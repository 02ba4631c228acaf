//! The content-addressed cache, driven through the real binary: a rebuild runs exactly
//! the steps whose inputs changed.

mod common;

use common::{Workspace, ids_with_status, step, stet};

const DOC: &str = r#"---
title: Cache check
seed: 4
---
# Cache check

```yaml data iris
file: iris.csv
target: species
holdout: 0.2
```

```yaml data benches
file: demo-data/greenhouse.csv
target: water_l
inputs: [crop, air_temp_c, light_klux]
```

```yaml net small
hidden: [6]
```

```yaml train slow
data: iris
net: small
learning_rate: 0.01
epochs: 40
```

```yaml train fast
data: iris
net: small
learning_rate: 0.05
epochs: 40
```

```yaml train steady
data: iris
net: small
learning_rate: 0.02
momentum: 0.5
epochs: 40
```

```yaml train water
data: benches
net: small
learning_rate: 0.01
epochs: 40
```
"#;

fn metrics_of(summary: &serde_json::Value, id: &str) -> serde_json::Value {
    step(summary, id)["metrics"].clone()
}

#[test]
fn changing_one_learning_rate_reruns_only_that_step() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    let first = ws.build_ok(&doc, &[]);
    assert_eq!(ids_with_status(&first, "ran").len(), 7);

    ws.write(
        "cache.md",
        &DOC.replace("learning_rate: 0.05", "learning_rate: 0.06"),
    );
    let second = ws.build_ok(&doc, &[]);
    assert_eq!(ids_with_status(&second, "ran"), ["fast"]);
    for id in ["slow", "steady", "water"] {
        assert_eq!(metrics_of(&first, id), metrics_of(&second, id), "{id}");
    }
    assert_ne!(metrics_of(&first, "fast"), metrics_of(&second, "fast"));
}

#[test]
fn comments_key_order_whitespace_and_prose_run_nothing() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    ws.build_ok(&doc, &[]);
    let edited = DOC
        .replace(
            "# Cache check\n",
            "# Cache check\n\nA new paragraph of reasoning.\n",
        )
        .replace(
            "learning_rate: 0.01\nepochs: 40",
            "epochs: 40   # fewer for the test\nlearning_rate:    0.01",
        )
        .replace("hidden: [6]", "hidden:\n  - 6");
    ws.write("cache.md", &edited);
    let rebuilt = ws.build_ok(&doc, &[]);
    assert!(ids_with_status(&rebuilt, "ran").is_empty(), "{rebuilt}");
    assert_eq!(ids_with_status(&rebuilt, "reused").len(), 7);
    let html = std::fs::read_to_string(ws.path("cache.html")).unwrap();
    assert!(html.contains("A new paragraph of reasoning."));
}

#[test]
fn editing_one_byte_of_a_data_file_reruns_its_readers_only() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    ws.build_ok(&doc, &[]);
    let csv_path = ws.path("demo-data/greenhouse.csv");
    let csv = std::fs::read_to_string(&csv_path).unwrap();
    // Change one digit of the last row's water use.
    let mut bytes = csv.into_bytes();
    let at = bytes.len() - 2;
    bytes[at] = if bytes[at] == b'1' { b'2' } else { b'1' };
    std::fs::write(&csv_path, bytes).unwrap();
    let rebuilt = ws.build_ok(&doc, &[]);
    assert_eq!(ids_with_status(&rebuilt, "ran"), ["benches", "water"]);
}

#[test]
fn a_corrupted_entry_is_recomputed_to_the_same_numbers() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    let clean = ws.build_ok(&doc, &[]);
    let entries = entry_files(&ws.path(".stet"));
    let runs: Vec<_> = entries
        .iter()
        .filter(|p| p.extension().unwrap() == "run")
        .collect();
    // Truncate one run entry and flip a byte in another.
    let bytes = std::fs::read(runs[0]).unwrap();
    std::fs::write(runs[0], &bytes[..bytes.len() / 2]).unwrap();
    let mut bytes = std::fs::read(runs[1]).unwrap();
    let middle = bytes.len() / 2;
    bytes[middle] ^= 0x40;
    std::fs::write(runs[1], bytes).unwrap();

    let (output, summary) = ws.build(&doc, &[]);
    assert!(output.status.success());
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(
        stderr.matches("failed its integrity check").count(),
        2,
        "{stderr}"
    );
    let summary = summary.unwrap();
    assert_eq!(ids_with_status(&summary, "ran").len(), 2);
    for id in ["slow", "fast", "steady", "water"] {
        assert_eq!(metrics_of(&clean, id), metrics_of(&summary, id), "{id}");
    }
}

#[test]
fn two_run_entries_with_swapped_bytes_are_recomputed_not_trusted() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    let clean = ws.build_ok(&doc, &[]);
    let runs: Vec<_> = entry_files(&ws.path(".stet"))
        .into_iter()
        .filter(|p| p.extension().unwrap() == "run")
        .collect();
    let (first, second) = (
        std::fs::read(&runs[0]).unwrap(),
        std::fs::read(&runs[1]).unwrap(),
    );
    assert_ne!(first, second, "two different runs");
    std::fs::write(&runs[0], &second).unwrap();
    std::fs::write(&runs[1], &first).unwrap();

    let (output, summary) = ws.build(&doc, &[]);
    assert!(output.status.success());
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(
        stderr.matches("failed its integrity check").count(),
        2,
        "{stderr}"
    );
    let summary = summary.unwrap();
    assert_eq!(ids_with_status(&summary, "ran").len(), 2, "both recomputed");
    for id in ["slow", "fast", "steady", "water"] {
        assert_eq!(metrics_of(&clean, id), metrics_of(&summary, id), "{id}");
    }
    assert_ne!(
        std::fs::read(&runs[0]).unwrap(),
        second,
        "rewritten in place"
    );
}

#[test]
fn two_builds_at_once_both_finish_and_agree() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    let spawn = |json: &str| {
        std::process::Command::new(env!("CARGO_BIN_EXE_stet"))
            .args([
                "build",
                doc.to_str().unwrap(),
                "--json",
                json,
                "-o",
                &format!("{json}.html"),
            ])
            .current_dir(ws.dir.path())
            .env_remove("STET_CACHE")
            .spawn()
            .unwrap()
    };
    let mut a = spawn("a.json");
    let mut b = spawn("b.json");
    assert!(a.wait().unwrap().success());
    assert!(b.wait().unwrap().success());
    let read = |name: &str| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(ws.path(name)).unwrap()).unwrap()
    };
    let (a, b) = (read("a.json"), read("b.json"));
    for id in ["slow", "fast", "steady", "water"] {
        assert_eq!(metrics_of(&a, id), metrics_of(&b, id), "{id}");
    }
    // The cache verifies: a third build reuses every step and recomputes nothing.
    let (output, third) = ws.build(&doc, &[]);
    assert!(!String::from_utf8_lossy(&output.stderr).contains("integrity"));
    assert!(ids_with_status(&third.unwrap(), "ran").is_empty());
    let leftovers: Vec<_> = entry_files(&ws.path(".stet"))
        .into_iter()
        .filter(|p| {
            p.file_name()
                .unwrap()
                .to_string_lossy()
                .starts_with(".stet-tmp")
        })
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

#[test]
fn clean_removes_exactly_the_unreferenced_entries() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    ws.build_ok(&doc, &[]);
    let before = entry_files(&ws.path(".stet"));
    ws.write(
        "cache.md",
        &DOC.replace("learning_rate: 0.05", "learning_rate: 0.07"),
    );
    ws.build_ok(&doc, &[]);
    let after_edit = entry_files(&ws.path(".stet"));
    // The edited step's run and its judgement (issue 14); its reference is shared.
    assert_eq!(
        after_edit.len(),
        before.len() + 2,
        "one new run entry and its judgement"
    );

    let output = stet(&["clean".into(), doc.display().to_string()], ws.dir.path());
    assert!(output.status.success());
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(stdout.starts_with("removed 2 cache entries"), "{stdout}");
    let remaining = entry_files(&ws.path(".stet"));
    assert_eq!(remaining.len(), before.len());
    let rebuilt = ws.build_ok(&doc, &[]);
    assert!(
        ids_with_status(&rebuilt, "ran").is_empty(),
        "nothing in use was removed"
    );

    let output = stet(
        &["clean".into(), "--cache".into(), ".stet".into()],
        ws.dir.path(),
    );
    assert!(output.status.success());
    assert!(entry_files(&ws.path(".stet")).is_empty());
}

#[test]
fn no_cache_runs_everything_and_writes_nothing() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    ws.build_ok(&doc, &[]);
    let count = entry_files(&ws.path(".stet")).len();
    ws.write("cache.md", &DOC.replace("epochs: 40", "epochs: 41"));
    let summary = ws.build_ok(&doc, &["--no-cache"]);
    assert_eq!(ids_with_status(&summary, "ran").len(), 7);
    assert_eq!(entry_files(&ws.path(".stet")).len(), count);
}

#[test]
fn status_says_why_each_step_would_run() {
    let ws = Workspace::new();
    let doc = ws.write("cache.md", DOC);
    let status = |ws: &Workspace| {
        let output = stet(&["status".into(), doc.display().to_string()], ws.dir.path());
        assert!(output.status.success());
        String::from_utf8(output.stdout).unwrap()
    };
    let fresh = status(&ws);
    assert_eq!(fresh.matches("run (never run)").count(), 7, "{fresh}");
    ws.build_ok(&doc, &[]);
    assert_eq!(status(&ws).matches("reuse").count(), 7);

    ws.write(
        "cache.md",
        &DOC.replace("learning_rate: 0.05", "learning_rate: 0.08"),
    );
    let csv_path = ws.path("demo-data/greenhouse.csv");
    let mut csv = std::fs::read_to_string(&csv_path).unwrap();
    csv.push_str("B01,tomato,25.0,30.0,60.0,30,9.5\n");
    std::fs::write(&csv_path, csv).unwrap();
    let lines = status(&ws);
    let line = |id: &str| {
        lines
            .lines()
            .find(|l| l.starts_with(id))
            .unwrap()
            .to_string()
    };
    assert!(line("fast").contains("run (settings changed)"), "{lines}");
    assert!(line("benches").contains("run (file changed)"), "{lines}");
    assert!(line("water").contains("run (upstream changed)"), "{lines}");
    assert!(line("slow").contains("reuse"), "{lines}");
    assert!(line("water").contains("0/1 runs cached"), "{lines}");
}

fn entry_files(cache: &std::path::Path) -> Vec<std::path::PathBuf> {
    let mut files = Vec::new();
    let Ok(shards) = std::fs::read_dir(cache.join("entries")) else {
        return files;
    };
    for shard in shards {
        for entry in std::fs::read_dir(shard.unwrap().path()).unwrap() {
            files.push(entry.unwrap().path());
        }
    }
    files.sort();
    files
}
