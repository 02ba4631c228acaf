//! Issue 15, "Which inputs matter": permutation importance on the held-out rows, on a
//! generated data set whose target leans strongly on x1, weakly on x2 and not at all
//! on x3, checked for its order and against scikit-learn's `permutation_importance`.

mod common;

use std::path::Path;

use common::{Workspace, reference_python, step};
use serde_json::Value;
use stet::data::{
    DEFAULT_MAX_CATEGORIES, DataSettings, Missing, Scale, Split, prepare, read_table,
};

/// 400 rows of x1, x2, x3 uniform on [-1, 1] and y = 3·x1 + 0.6·x2 + noise (uniform on
/// [-0.5, 0.5]); values from a fixed linear congruential generator (Knuth's MMIX
/// constants), so the file is the same on every machine.
fn generated_rows() -> String {
    let mut state: u64 = 20_261_204;
    let mut uniform = move || {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (state >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    };
    let mut csv = String::from("x1,x2,x3,y\n");
    for _ in 0..400 {
        let (x1, x2, x3) = (uniform(), uniform(), uniform());
        let y = 3.0 * x1 + 0.6 * x2 + 0.5 * uniform();
        csv.push_str(&format!("{x1},{x2},{x3},{y}\n"));
    }
    csv
}

/// Fits the generated rows and exports the model; `train_extra` adds train settings.
fn document(train_extra: &str) -> String {
    format!(
        "```yaml data rows\nfile: rows.csv\ntarget: y\nholdout: 0.25\nseed: 7\n```\n\n\
         ```yaml net small\nhidden: [8]\n```\n\n\
         ```yaml train fit\ndata: rows\nnet: small\noptimizer: adam\nlearning_rate: 0.01\n\
         batch: 32\nepochs: 300\nseed: 4\n{train_extra}```\n\n\
         ```yaml export model\nmodel: fit\nwrite: model.json\n```\n"
    )
}

/// The importance list of the train step `fit`: per input, its mean and sd.
fn importance(summary: &Value) -> Vec<(String, f64, f64)> {
    step(summary, "fit")["importance"]
        .as_array()
        .expect("the train step measures importance")
        .iter()
        .map(|entry| {
            (
                entry["input"].as_str().unwrap().to_string(),
                entry["mean"].as_f64().unwrap(),
                entry["sd"].as_f64().unwrap(),
            )
        })
        .collect()
}

fn find<'a>(list: &'a [(String, f64, f64)], input: &str) -> &'a (String, f64, f64) {
    list.iter().find(|(name, ..)| name == input).unwrap()
}

#[test]
fn a_strong_input_outranks_a_weak_one_and_an_unused_input_scores_near_zero() {
    let ws = Workspace::new();
    ws.write("rows.csv", &generated_rows());
    let summary = ws.build_ok(&ws.write("fit.md", &document("")), &[]);
    let list = importance(&summary);
    let names: Vec<&str> = list.iter().map(|(name, ..)| name.as_str()).collect();
    assert_eq!(names, ["x1", "x2", "x3"], "most important first: {list:?}");
    let (_, x1, x1_sd) = find(&list, "x1");
    let (_, x2, x2_sd) = find(&list, "x2");
    assert!(x1 - 2.0 * x1_sd > x2 + 2.0 * x2_sd, "{list:?}");
    assert!(*x2 > 0.0, "{list:?}");
    let (_, x3, x3_sd) = find(&list, "x3");
    assert!(x3.abs() <= 2.0 * x3_sd, "{list:?}");
    let entry = &step(&summary, "fit")["importance"][0];
    assert!(entry["loss_mean"].as_f64().unwrap() > 0.0, "{entry}");
}

#[test]
fn the_train_card_draws_importance_as_bars_with_the_strongest_input_first() {
    let ws = Workspace::new();
    ws.write("rows.csv", &generated_rows());
    let doc = ws.write("fit.md", &document(""));
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    let figure = html
        .split(r#"<figure class="chart importance">"#)
        .nth(1)
        .expect("the train card has an importance chart");
    let figure = figure.split("</figure>").next().unwrap();
    assert!(figure.contains("fall in held-out R²"), "{figure}");
    assert!(figure.contains("over 5 shuffles"), "{figure}");
    let at = |input: &str| figure.find(&format!(">{input}</text>")).unwrap();
    assert!(at("x1") < at("x2") && at("x2") < at("x3"), "{figure}");
}

#[test]
fn importance_false_measures_nothing_and_a_rebuild_recomputes_nothing() {
    let ws = Workspace::new();
    ws.write("rows.csv", &generated_rows());
    let off = ws.build_ok(&ws.write("off.md", &document("importance: false\n")), &[]);
    assert!(step(&off, "fit").get("importance").is_none(), "{off}");
    let doc = ws.write("on.md", &document("importance_repeats: 3\n"));
    let first = ws.build_ok(&doc, &[]);
    let again = ws.build_ok(&doc, &[]);
    assert_eq!(step(&again, "fit")["runs_trained"], 0);
    assert_eq!(step(&again, "fit")["status"], "reused");
    assert_eq!(
        step(&first, "fit")["importance"],
        step(&again, "fit")["importance"]
    );
}

/// The rows the data step above holds out, as CSV, found by preparing the table as
/// stet does.
fn held_out_csv(csv: &Path) -> String {
    let table = read_table(std::fs::File::open(csv).unwrap()).unwrap();
    let settings = DataSettings {
        inputs: None,
        target: vec!["y".into()],
        task: None,
        scale: Scale::Standard,
        missing: Missing::Error,
        split: Split::Holdout(0.25),
        validation: None,
        scale_target: None,
        seed: 7,
    };
    let prepared = prepare(&table, &settings, DEFAULT_MAX_CATEGORIES).unwrap();
    let text = std::fs::read_to_string(csv).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    let mut held_out = format!("{}\n", lines[0]);
    for &row in &prepared.partitions[0].test_rows {
        let line = prepared.lines[row] as usize;
        held_out.push_str(lines[line - 1]);
        held_out.push('\n');
    }
    held_out
}

#[test]
fn scikit_learns_permutation_importance_on_the_export_agrees_within_two_sds() {
    let ws = Workspace::new();
    let csv = ws.write("rows.csv", &generated_rows());
    let summary = ws.build_ok(&ws.write("fit.md", &document("")), &[]);
    let Some(python) = reference_python("permutation importance against scikit-learn") else {
        return;
    };
    let held_out = ws.write("held-out.csv", &held_out_csv(&csv));
    let script = common::project().join("tests/reference/permutation_importance.py");
    let run = std::process::Command::new(&python)
        .arg(&script)
        .arg(ws.path("model.json"))
        .arg(&held_out)
        .args(["y", "50"])
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    // sklearn.inspection.permutation_importance, R² scoring, 50 shuffles.
    let sklearn: Value = serde_json::from_slice(&run.stdout).unwrap();
    for (input, mean, sd) in importance(&summary) {
        let outside = sklearn[&input].as_f64().unwrap();
        assert!(
            (outside - mean).abs() <= 2.0 * sd,
            "{input}: scikit-learn {outside}, stet {mean} ± {sd}"
        );
    }
}
