//! Issue 14: every train card and sweep combination is held against the majority class
//! or training mean and against the same inputs without a hidden layer, with intervals
//! and a paired test, and says in one line whether the network is worth using.

mod common;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::Value;

use common::{Workspace, step};

/// The verdict lines of a built report, as text.
fn verdict_lines(html: &str) -> Vec<String> {
    html.split("<p class=\"verdict")
        .skip(1)
        .map(|rest| {
            let text = &rest[rest.find('>').unwrap() + 1..rest.find("</p>").unwrap()];
            text.replace("&#x2f;", "/").replace("&amp;", "&")
        })
        .collect()
}

fn report(ws: &Workspace, name: &str) -> String {
    std::fs::read_to_string(ws.path(name)).expect("the report was written")
}

// Fisher's Iris data (tests/data/README.md): three species, two of them only a
// straight boundary apart, so a logistic regression already classifies the held-out
// rows about as well as any network can.
const IRIS: &str = "# Iris

```yaml data iris
file: iris.csv
target: species
holdout: 0.3
```

```yaml net small
hidden: [8]
```

```yaml train fit
data: iris
net: small
epochs: 300
```
";

#[test]
fn on_iris_the_network_does_not_beat_the_model_without_a_hidden_layer() {
    let ws = Workspace::new();
    let doc = ws.write("iris.md", IRIS);
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    assert_eq!(fit["verdict"], "does_not_beat", "{fit}");
    assert_eq!(fit["baseline"]["rule"], "majority_class");
    assert_eq!(fit["versus_linear"]["test"], "mcnemar_exact");
    assert_eq!(fit["versus_linear"]["significant"], false);
    // 45 held-out rows (30 % of 150, 15 per species): the majority class gets a third.
    assert_eq!(fit["held_out_rows"], 45);
    let majority = fit["baseline"]["test"]["accuracy"].as_f64().unwrap();
    assert!((majority - 1.0 / 3.0).abs() < 1e-12, "{majority}");
    let [low, high] = interval(fit, "accuracy");
    let accuracy = fit["metrics"]["test"]["accuracy"].as_f64().unwrap();
    assert!(
        low < accuracy && accuracy <= high,
        "{low} {accuracy} {high}"
    );
    let lines = verdict_lines(&report(&ws, "iris.html"));
    assert_eq!(lines.len(), 1, "{lines:?}");
    assert!(lines[0].contains("within noise"), "{lines:?}");
    assert!(lines[0].contains("does not beat"), "{lines:?}");
}

fn interval(fit: &Value, name: &str) -> [f64; 2] {
    let pair = &fit["interval"][name];
    [pair[0].as_f64().unwrap(), pair[1].as_f64().unwrap()]
}

/// Invented rows (seed 14): y = 3·a − 2·b + 1 plus normal noise of sd 0.5, where a
/// straight line is the best any model can do.
fn linear_rows(rows: usize) -> String {
    let mut rng = ChaCha8Rng::seed_from_u64(14);
    let mut uniform = move || (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
    let mut csv = String::from("a,b,y\n");
    for _ in 0..rows {
        let (a, b) = (4.0 * uniform() - 2.0, 4.0 * uniform() - 2.0);
        // Box–Muller.
        let noise =
            (-2.0 * (1.0 - uniform()).ln()).sqrt() * (std::f64::consts::TAU * uniform()).cos();
        csv.push_str(&format!(
            "{a:.6},{b:.6},{:.6}\n",
            3.0 * a - 2.0 * b + 1.0 + 0.5 * noise
        ));
    }
    csv
}

#[test]
fn on_a_linear_target_plus_noise_the_network_does_not_beat_least_squares() {
    let ws = Workspace::new();
    ws.write("line.csv", &linear_rows(300));
    let doc = ws.write(
        "line.md",
        "```yaml data line\nfile: line.csv\ntarget: y\nholdout: 0.3\n```\n\n\
         ```yaml net wide\nhidden: [16]\n```\n\n\
         ```yaml train fit\ndata: line\nnet: wide\noptimizer: adam\nepochs: 300\n```\n",
    );
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    assert_ne!(fit["verdict"], "beats", "{fit}");
    assert_eq!(fit["baseline"]["rule"], "training_mean");
    assert_eq!(fit["versus_linear"]["test"], "paired_bootstrap");
    // The least-squares line explains nearly all of the variance: var(3a − 2b) = 13·4/3
    // against a noise variance of 0.25, so R² ≈ 0.986.
    let linear_r2 = fit["linear"]["test"]["r2"].as_f64().unwrap();
    assert!(linear_r2 > 0.97, "{linear_r2}");
    let lines = verdict_lines(&report(&ws, "line.html"));
    assert!(lines[0].contains("does not beat"), "{lines:?}");
}

// The hives demo's healthy band lies between two temperatures: no straight boundary
// separates it, so the networks beat the model without a hidden layer.
#[test]
fn on_the_hives_demo_the_networks_beat_the_model_without_a_hidden_layer() {
    let ws = Workspace::new();
    let doc = ws.demo("hives.md");
    let summary = ws.build_ok(&doc, &[]);
    for id in ["base", "adam_full"] {
        let fit = step(&summary, id);
        assert_eq!(fit["verdict"], "beats", "{id}: {fit}");
        let p = fit["versus_linear"]["p_value"].as_f64().unwrap();
        assert!(p < 0.05, "{id}: {p}");
    }
    let lines = verdict_lines(&report(&ws, "experiments/hives.html"));
    assert!(
        lines.iter().all(|line| line.contains("the network beats")),
        "{lines:?}"
    );

    let sweep = step(&summary, "rates");
    let runs = sweep["runs"].as_array().unwrap();
    let marks: Vec<&Value> = runs
        .iter()
        .map(|run| &run["within_noise_of_best"])
        .collect();
    assert_eq!(
        marks.iter().filter(|mark| mark.is_null()).count(),
        1,
        "{marks:?}"
    );
    assert!(
        marks.iter().all(|mark| mark.is_null() || mark.is_boolean()),
        "{marks:?}"
    );

    // Five runs on the same held-out rows: ten pairs, each with McNemar's test.
    let pairs = step(&summary, "fits")["pairs"].as_array().unwrap().clone();
    assert_eq!(pairs.len(), 10, "{pairs:?}");
    assert!(
        pairs.iter().all(|pair| pair["test"] == "mcnemar_exact"),
        "{pairs:?}"
    );
    assert_eq!(
        (pairs[0]["a"].as_str(), pairs[0]["b"].as_str()),
        (Some("base"), Some("no_momentum"))
    );
}

#[test]
fn runs_held_out_on_different_rows_are_not_paired() {
    let ws = Workspace::new();
    let doc = ws.write(
        "two.md",
        &format!(
            "{IRIS}\n```yaml data iris_other\nfile: iris.csv\ntarget: species\nholdout: 0.3\nseed: 5\n```\n\n\
             ```yaml train other\ndata: iris_other\nnet: small\nepochs: 300\n```\n\n\
             ```yaml compare both\nruns: [fit, other]\n```\n"
        ),
    );
    let summary = ws.build_ok(&doc, &[]);
    let pairs = step(&summary, "both")["pairs"].as_array().unwrap().clone();
    assert_eq!(pairs.len(), 1);
    assert_eq!(pairs[0]["test"], "not_paired", "{pairs:?}");
    assert!(report(&ws, "two.html").contains("not paired"));
}

// Ten rows, 8 of one class: a fifth held out, stratified, is two rows of the same class,
// and five regression rows leave one held-out row. Neither can carry an interval or a
// paired test.
#[test]
fn too_few_held_out_rows_say_so_instead_of_a_number() {
    let ws = Workspace::new();
    ws.write(
        "tiny.csv",
        "x,label\n1,a\n2,a\n3,a\n4,a\n5,a\n6,a\n7,a\n8,a\n9,b\n10,b\n",
    );
    ws.write("few.csv", "x,y\n1,2.0\n2,3.5\n3,4.0\n4,6.5\n5,7.0\n");
    let doc = ws.write(
        "tiny.md",
        "```yaml data tiny\nfile: tiny.csv\ntarget: label\nholdout: 0.2\n```\n\n\
         ```yaml data few\nfile: few.csv\ntarget: y\nholdout: 0.2\n```\n\n\
         ```yaml net n\nhidden: [2]\n```\n\n\
         ```yaml train one_class\ndata: tiny\nnet: n\nepochs: 5\n```\n\n\
         ```yaml train one_row\ndata: few\nnet: n\nepochs: 5\n```\n",
    );
    let summary = ws.build_ok(&doc, &[]);
    for (id, rows) in [("one_class", 2), ("one_row", 1)] {
        let fit = step(&summary, id);
        assert_eq!(fit["held_out_rows"], rows, "{fit}");
        assert!(fit["interval"].is_null(), "{fit}");
        assert!(fit["versus_linear"].is_null(), "{fit}");
    }
    // Two held-out rows of the majority class: nothing can score above it.
    assert_eq!(step(&summary, "one_class")["verdict"], "below_baseline");
    let lines = verdict_lines(&report(&ws, "tiny.html"));
    assert_eq!(lines.len(), 2, "{lines:?}");
    assert!(
        lines[0].starts_with("THE NETWORK DOES NOT BEAT THE MAJORITY CLASS"),
        "{lines:?}"
    );
    assert!(
        lines
            .iter()
            .all(|line| line.contains("not enough held-out rows")),
        "{lines:?}"
    );
}

// Two train steps and a sweep on one data step and split read one reference entry: the
// model without a hidden layer is fitted once per data step and partition.
#[test]
fn the_model_without_a_hidden_layer_is_fitted_once_per_data_step_and_split() {
    let ws = Workspace::new();
    let doc = ws.write(
        "iris.md",
        &format!(
            "{IRIS}\n```yaml train longer\ndata: iris\nnet: small\nepochs: 400\n```\n\n\
             ```yaml sweep rates\nfrom: fit\nvary:\n  learning_rate: [0.01, 0.1]\n```\n"
        ),
    );
    ws.build_ok(&doc, &[]);
    let references = entries_named(&ws.path(".stet"), "reference");
    assert_eq!(
        references, 1,
        "one reference entry for one data step and split"
    );
    // A rebuild computes nothing: every step, and its judgement, comes from the cache.
    let again = ws.build_ok(&doc, &[]);
    assert!(
        again["steps"]
            .as_array()
            .unwrap()
            .iter()
            .all(|s| s["status"] == "reused"),
        "{again}"
    );
    assert_eq!(
        step(&again, "longer")["versus_linear"]["test"],
        "mcnemar_exact"
    );
}

// With folds every row is held out once, by its own fold: the judgement pools them.
#[test]
fn with_folds_the_verdict_reads_every_row_held_out_once() {
    let ws = Workspace::new();
    let doc = ws.write("folds.md", &IRIS.replace("holdout: 0.3", "folds: 3"));
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    assert_eq!(fit["held_out_rows"], 150, "{fit}");
    assert_eq!(fit["versus_linear"]["test"], "mcnemar_exact", "{fit}");
}

fn entries_named(cache: &std::path::Path, suffix: &str) -> usize {
    let mut count = 0;
    for shard in std::fs::read_dir(cache.join("entries")).unwrap() {
        for entry in std::fs::read_dir(shard.unwrap().path()).unwrap() {
            let name = entry.unwrap().file_name();
            count += usize::from(name.to_string_lossy().ends_with(&format!(".{suffix}")));
        }
    }
    count
}

/// The Wilson score interval at 95 % (Wilson, 1927): the reference formula, with z the
/// normal 0.975 quantile.
fn wilson(correct: f64, rows: f64) -> [f64; 2] {
    let z = 1.959_963_984_540_054_f64;
    let p = correct / rows;
    let centre = (p + z * z / (2.0 * rows)) / (1.0 + z * z / rows);
    let half =
        z / (1.0 + z * z / rows) * (p * (1.0 - p) / rows + z * z / (4.0 * rows * rows)).sqrt();
    [centre - half, centre + half]
}

#[test]
fn each_fold_gets_the_interval_of_its_own_held_out_rows() {
    let ws = Workspace::new();
    let doc = ws.write("folds.md", &IRIS.replace("holdout: 0.3", "folds: 3"));
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    let folds = fit["folds"].as_array().unwrap();
    assert_eq!(folds.len(), 3);
    for fold in folds {
        // Three stratified folds of Iris's 150 rows (50 per species) hold out 50 each.
        let rows = 50.0;
        let accuracy = fold["metrics"]["test"]["accuracy"].as_f64().unwrap();
        let expected = wilson((accuracy * rows).round(), rows);
        let got = interval(fold, "accuracy");
        for (a, b) in got.iter().zip(expected) {
            assert!(
                (a - b).abs() < 1e-12,
                "{fold}: {got:?} against {expected:?}"
            );
        }
        assert!(fold["interval"]["log_loss"].is_array(), "{fold}");
    }
    let html = report(&ws, "folds.html");
    assert!(html.contains("<th>held-out accuracy 95 % interval</th>"));
}
