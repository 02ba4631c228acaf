//! Regression targets are scaled for training (`scale_target`, issue 15): the loss is
//! in scaled units, every other score and every prediction in the target's own. The
//! outside check uses scikit-learn's diabetes data (Efron, Hastie, Johnstone &
//! Tibshirani, 2004, "Least angle regression"; 442 rows, 10 inputs, targets 25–346),
//! written to CSV by the reference Python.

mod common;

use std::path::Path;

use common::{Workspace, reference_python, step};
use serde_json::Value;

/// Writes scikit-learn's diabetes data to `diabetes.csv` in the workspace; `None`
/// (skipped) without the reference Python.
fn diabetes_csv(ws: &Workspace, check: &str) -> Option<()> {
    let python = reference_python(check)?;
    let script = "import sys\nfrom sklearn.datasets import load_diabetes\n\
                  frame = load_diabetes(as_frame=True).frame\n\
                  frame.to_csv(sys.argv[1], index=False, float_format='%.17g')\n";
    let run = std::process::Command::new(python)
        .args(["-c", script])
        .arg(ws.path("diabetes.csv"))
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "{}",
        String::from_utf8_lossy(&run.stderr)
    );
    Some(())
}

/// A document fitting the diabetes data on every row (no holdout) and predicting the
/// same file, with `train` settings added to the train step.
fn diabetes_document(train: &str) -> String {
    format!(
        "```yaml data sugar\nfile: diabetes.csv\ntarget: target\nholdout: 0\nseed: 1\n```\n\n\
         ```yaml net small\nhidden: [8]\n```\n\n\
         ```yaml train fit\ndata: sugar\nnet: small\noptimizer: adam\nlearning_rate: 0.01\n\
         batch: 32\nepochs: 300\nseed: 2\n{train}```\n\n\
         ```yaml predict guesses\nmodel: fit\nfile: diabetes.csv\nwrite: predictions.csv\n```\n"
    )
}

/// A column of a CSV file as numbers.
fn column(path: &Path, name: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|line| line.split(',').nth(at).unwrap().parse().unwrap())
        .collect()
}

#[test]
fn diabetes_trains_in_scaled_units_and_reports_mae_in_the_targets_units() {
    let ws = Workspace::new();
    if diabetes_csv(&ws, "target scaling on the diabetes data").is_none() {
        return;
    }
    let doc = ws.write("doc.md", &diabetes_document(""));
    let summary = ws.build_ok(&doc, &[]);
    let train = &step(&summary, "fit")["metrics"]["train"];
    let loss = train["loss"].as_f64().unwrap();
    let mae = train["mae"].as_f64().unwrap();
    // The targets' variance is about 5,900 (sd 77); a network that learns anything
    // has a scaled loss well under 1 and an error in the tens of target units.
    assert!(loss < 0.5, "loss {loss} is not in scaled units");
    assert!(mae > 10.0 && mae < 77.0, "mae {mae} is not in target units");

    // The MAE numpy would compute from predict's CSV, over the same (all) rows.
    let actual = column(&ws.path("diabetes.csv"), "target");
    let predicted = column(&ws.path("predictions.csv"), "predicted_target");
    let outside = predicted
        .iter()
        .zip(&actual)
        .map(|(p, y)| (p - y).abs())
        .sum::<f64>()
        / actual.len() as f64;
    assert!(
        (outside - mae).abs() <= 1e-9 * mae,
        "card {mae} against the CSV's {outside}"
    );
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    assert!(
        html.contains("loss (scaled targets)"),
        "the chart's axis says so"
    );
}

#[test]
fn a_target_loss_of_0_4_stops_a_diabetes_run() {
    let ws = Workspace::new();
    if diabetes_csv(&ws, "target_loss on the diabetes data").is_none() {
        return;
    }
    let doc = ws.write("doc.md", &diabetes_document("target_loss: 0.4\n"));
    let summary = ws.build_ok(&doc, &[]);
    let fit = step(&summary, "fit");
    assert_eq!(fit["stop"]["reason"], "target_loss", "{fit}");
}

#[test]
fn scale_target_none_trains_on_the_targets_as_they_are() {
    // The greenhouse demo's water use (litres); with `none` the loss is half the MSE
    // in litres², as before targets were scaled, and with the default it is not.
    let ws = Workspace::new();
    let doc = |scale: &str| {
        format!(
            "```yaml data benches\nfile: demo-data/greenhouse.csv\ntarget: water_l\n{scale}seed: 5\n```\n\n\
             ```yaml net small\nhidden: [6]\n```\n\n\
             ```yaml train fit\ndata: benches\nnet: small\nepochs: 50\nseed: 3\n```\n"
        )
    };
    let train_of = |text: String| {
        let summary = ws.build_ok(&ws.write("doc.md", &text), &["--no-cache"]);
        step(&summary, "fit")["metrics"]["train"].clone()
    };
    let half_mse = |m: &Value| m["mse"].as_f64().unwrap() / 2.0;
    let raw = train_of(doc("scale_target: none\n"));
    assert_eq!(raw["loss"].as_f64().unwrap(), half_mse(&raw));
    let scaled = train_of(doc(""));
    assert_ne!(scaled["loss"].as_f64().unwrap(), half_mse(&scaled));
}

/// The report's section of step `id`.
fn section<'a>(html: &'a str, id: &str) -> &'a str {
    let start = html
        .find(&format!(r#"id="step-{id}""#))
        .unwrap_or_else(|| panic!("no step {id}"));
    let rest = &html[start..];
    &rest[..rest.find("</section>").unwrap()]
}

#[test]
fn sweep_and_compare_loss_charts_say_when_their_runs_trained_on_scaled_targets() {
    // Two data steps on the greenhouse demo's water use: `plants` scales it (the
    // default for regression), `raw` does not.
    let ws = Workspace::new();
    let data = |id: &str, scale: &str| {
        format!(
            "```yaml data {id}\nfile: demo-data/greenhouse.csv\ntarget: water_l\n{scale}seed: 5\n```\n\n"
        )
    };
    let train = |id: &str, data: &str| {
        format!("```yaml train {id}\ndata: {data}\nnet: small\nepochs: 20\nseed: 3\n```\n\n")
    };
    let sweep = |id: &str, from: &str| {
        format!("```yaml sweep {id}\nfrom: {from}\nvary:\n  learning_rate: [0.01, 0.03]\n```\n\n")
    };
    let text = [
        data("plants", ""),
        data("raw", "scale_target: none\n"),
        "```yaml net small\nhidden: [6]\n```\n\n".to_string(),
        train("scaled", "plants"),
        train("unscaled", "raw"),
        sweep("scaled_grid", "scaled"),
        sweep("raw_grid", "unscaled"),
        "```yaml compare both_scaled\nruns: [scaled, scaled_grid]\n```\n\n".to_string(),
        "```yaml compare mixed\nruns: [scaled, unscaled]\n```\n\n".to_string(),
        "```yaml compare mixed_bars\nruns: [scaled, unscaled]\nchart: metric\nmetrics: [loss]\n```\n".to_string(),
    ]
    .concat();
    let doc = ws.write("doc.md", &text);
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    let scaled_axis = ">loss (scaled targets)</text>";
    // The grid ranks by held-out loss (the default to regress), so its marginal plot
    // draws that loss too.
    let grid = section(&html, "scaled_grid");
    assert_eq!(grid.matches(scaled_axis).count(), 2, "{grid}");
    assert!(section(&html, "both_scaled").contains(scaled_axis));
    let raw_grid = section(&html, "raw_grid");
    assert!(raw_grid.contains(">loss</text>") && !raw_grid.contains("scaled targets"));
    for mixed in ["mixed", "mixed_bars"] {
        let card = section(&html, mixed);
        assert!(
            !card.contains(scaled_axis),
            "{mixed}: one run is not scaled"
        );
        assert!(card.contains(">scaled (scaled)</text>"), "{mixed}: {card}");
        assert!(card.contains(">unscaled</text>"), "{mixed}");
        assert!(card.contains("Runs marked (scaled) trained on scaled targets"));
    }
}

// Losses in different units do not rank: a compare of a run trained on scaled targets
// and one trained on the targets as they are stars the lower held-out MSE (in the
// targets' units for both), not the lower loss.
#[test]
fn a_compare_of_scaled_and_unscaled_runs_ranks_them_by_mse_not_loss() {
    let ws = Workspace::new();
    let data = |id: &str, scale: &str| {
        format!(
            "```yaml data {id}\nfile: demo-data/greenhouse.csv\ntarget: water_l\n{scale}seed: 5\n```\n\n"
        )
    };
    let text = [
        data("plants", ""),
        data("raw", "scale_target: none\n"),
        "```yaml net small\nhidden: [6]\n```\n\n".to_string(),
        "```yaml train scaled\ndata: plants\nnet: small\nepochs: 20\nseed: 3\n```\n\n".into(),
        "```yaml train unscaled\ndata: raw\nnet: small\nepochs: 20\nseed: 3\n```\n\n".into(),
        "```yaml compare mixed\nruns: [scaled, unscaled]\n```\n".into(),
    ]
    .concat();
    let doc = ws.write("doc.md", &text);
    let summary = ws.build_ok(&doc, &[]);
    let mse = |id: &str| {
        step(&summary, id)["metrics"]["test"]["mse"]
            .as_f64()
            .unwrap()
    };
    let loss = |id: &str| {
        step(&summary, id)["metrics"]["test"]["loss"]
            .as_f64()
            .unwrap()
    };
    let lower = |value: &dyn Fn(&str) -> f64| {
        if value("scaled") <= value("unscaled") {
            "scaled"
        } else {
            "unscaled"
        }
    };
    let by_mse = lower(&mse);
    // The scaled run's loss is in the target's standard deviations, far below the other
    // run's in squared litres: the test means something only because the two disagree.
    assert_ne!(lower(&loss), by_mse);
    let html = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    let card = section(&html, "mixed");
    assert!(card.contains("★ best by mse"), "{card}");
    assert!(card.contains(&format!("<td>{by_mse} ★</td>")), "{card}");
}
