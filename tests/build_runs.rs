//! How a build executes a plan, through the real binary: a run shared by two steps is
//! trained once, a step that fails at run time fails what reads it while independent
//! steps still run, and `--shard K/N` (without Slurm) trains every run exactly once
//! over N shares.

mod common;

use std::path::Path;

use common::{Workspace, step, stet};
use serde_json::Value;

/// Fisher's Iris data (tests/data/README.md) with one net.
const IRIS_AND_NET: &str = "\
```yaml data iris
file: iris.csv
target: species
holdout: 0.2
```

```yaml net small
hidden: [4]
```

";

/// How many trained networks the cache holds (`entries/xx/<key>.run`).
fn run_entries(cache: &Path) -> usize {
    let Ok(folders) = std::fs::read_dir(cache.join("entries")) else {
        return 0;
    };
    folders
        .flat_map(|folder| std::fs::read_dir(folder.unwrap().path()).unwrap())
        .filter(|entry| entry.as_ref().unwrap().path().extension() == Some("run".as_ref()))
        .count()
}

fn runs_trained(summary: &Value, id: &str) -> u64 {
    step(summary, id)["runs_trained"]
        .as_u64()
        .unwrap_or_else(|| panic!("no runs_trained for '{id}': {summary}"))
}

#[test]
fn two_train_steps_with_equal_settings_share_one_run_trained_once() {
    let ws = Workspace::new();
    let train = |id: &str| {
        format!(
            "```yaml train {id}\ndata: iris\nnet: small\nlearning_rate: 0.05\nepochs: 20\n```\n\n"
        )
    };
    let doc = ws.write(
        "twins.md",
        &format!("{IRIS_AND_NET}{}{}", train("first"), train("second")),
    );
    let summary = ws.build_ok(&doc, &[]);
    assert_eq!(
        runs_trained(&summary, "first") + runs_trained(&summary, "second"),
        1
    );
    assert_eq!(run_entries(&ws.path(".stet")), 1);
    assert_eq!(
        step(&summary, "first")["metrics"],
        step(&summary, "second")["metrics"]
    );
}

#[test]
fn a_data_step_failing_at_run_time_fails_every_dependant_and_spares_the_rest() {
    let ws = Workspace::new();
    // The third line is short of a cell, which only reading the rows finds (the header
    // is checked with the document).
    ws.write("broken.csv", "size,colour\n1,red\n2\n3,blue\n4,red\n");
    ws.write("new.csv", "size\n5\n");
    let dependants = "\
```yaml data broken
file: broken.csv
target: colour
```

```yaml train on_broken
data: broken
net: small
epochs: 5
```

```yaml sweep broken_rates
from: on_broken
vary:
  learning_rate: [0.1, 0.2]
```

```yaml compare with_broken
runs: [fit, on_broken, broken_rates]
```

```yaml predict broken_guesses
model: on_broken
file: new.csv
write: guesses.csv
```

```yaml export broken_model
model: on_broken
write: model.json
```

";
    let independent = "\
```yaml train fit
data: iris
net: small
epochs: 20
```

```yaml compare fit_alone
runs: [fit]
```
";
    let doc = ws.write(
        "mixed.md",
        &format!("{IRIS_AND_NET}{dependants}{independent}"),
    );
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(
        output.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let summary = summary.expect("a summary");
    assert_eq!(step(&summary, "broken")["status"], "failed");
    for id in [
        "on_broken",
        "broken_rates",
        "with_broken",
        "broken_guesses",
        "broken_model",
    ] {
        let dependant = step(&summary, id);
        assert_eq!(dependant["status"], "failed", "{id}: {dependant}");
        let error = dependant["error"].as_str().unwrap();
        assert!(error.starts_with("not run: "), "{id}: {error}");
    }
    for id in ["iris", "small", "fit", "fit_alone"] {
        assert_eq!(step(&summary, id)["status"], "ran", "{id}");
    }
    assert!(ws.path("mixed.html").exists(), "the report was written");
    assert!(!ws.path("guesses.csv").exists());
    assert!(!ws.path("model.json").exists());
}

/// A document with runs of several kinds: a holdout train, three folds, and a sweep
/// whose first combination equals the train (so shares must not train it twice).
const MANY_RUNS: &str = "\
```yaml data iris_folds
file: iris.csv
target: species
folds: 3
```

```yaml train base
data: iris
net: small
learning_rate: 0.05
epochs: 15
```

```yaml train base_folds
data: iris_folds
net: small
epochs: 15
```

```yaml sweep rates
from: base
vary:
  learning_rate: [0.05, 0.1, 0.2]
repeat: 2
```
";

/// The binary's `share K/N: trained T runs; …` line, as T.
fn trained_by_share(ws: &Workspace, doc: &Path, cache: &Path, share: &str) -> usize {
    let args: Vec<String> = [
        "build",
        &doc.display().to_string(),
        "--cache",
        &cache.display().to_string(),
        "--shard",
        share,
    ]
    .map(String::from)
    .to_vec();
    let output = stet(&args, ws.dir.path());
    let stdout = String::from_utf8_lossy(&output.stdout);
    assert!(
        output.status.success(),
        "share {share}: {}",
        String::from_utf8_lossy(&output.stderr)
    );
    let trained = stdout
        .split_once("trained ")
        .and_then(|(_, rest)| rest.split_once(' '))
        .map(|(count, _)| count.parse().unwrap());
    trained.unwrap_or_else(|| panic!("no count in: {stdout}"))
}

/// `stet status`'s `training runs: C cached, U to train` line, as U.
fn runs_to_train(ws: &Workspace, doc: &Path, cache: &Path) -> usize {
    let args = [
        "status".to_string(),
        doc.display().to_string(),
        "--cache".into(),
        cache.display().to_string(),
    ];
    let stdout = String::from_utf8(stet(&args, ws.dir.path()).stdout).unwrap();
    let line = stdout
        .lines()
        .find(|line| line.starts_with("training runs:"))
        .unwrap_or_else(|| panic!("no totals in: {stdout}"));
    line.rsplit_once(", ")
        .and_then(|(_, rest)| rest.split_once(' '))
        .map(|(count, _)| count.parse().unwrap())
        .unwrap()
}

#[test]
fn over_one_two_or_three_shares_every_run_is_trained_exactly_once() {
    for count in 1..=3 {
        let ws = Workspace::new();
        let doc = ws.write("shares.md", &format!("{IRIS_AND_NET}{MANY_RUNS}"));
        let cache = ws.path("shared-cache");
        let all = runs_to_train(&ws, &doc, &cache);
        // 1 holdout run, 3 folds, 3 rates × 2 seeds of which one equals `base`.
        assert_eq!(all, 9);
        let trained: Vec<usize> = (1..=count)
            .map(|index| trained_by_share(&ws, &doc, &cache, &format!("{index}/{count}")))
            .collect();
        assert_eq!(
            trained.iter().sum::<usize>(),
            all,
            "{count} shares: {trained:?}"
        );
        let (fewest, most) = (trained.iter().min().unwrap(), trained.iter().max().unwrap());
        assert!(most - fewest <= 1, "{count} shares: {trained:?}");
        assert_eq!(run_entries(&cache), all, "{count} shares");
        assert_eq!(runs_to_train(&ws, &doc, &cache), 0);

        let cache_flag = cache.display().to_string();
        let summary = ws.build_ok(&doc, &["--cache", &cache_flag]);
        for id in ["base", "base_folds", "rates"] {
            assert_eq!(runs_trained(&summary, id), 0, "{count} shares: {id}");
        }
    }
}
