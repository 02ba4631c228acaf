//! Where a fit goes wrong, through the real binary: the ROC curve, AUC and Brier score
//! against scikit-learn on the held-out rows, one-vs-rest AUC and per-target metrics in
//! the summary, and a stated reason wherever the held-out rows cannot give a value.
//!
//! The scikit-learn check needs `STET_PYTHON` (see tests/common); without it it skips.

mod common;

use std::process::Command;

use serde_json::{Value, json};

use common::{Workspace, reference_python, reference_script, step};

fn numbers(value: &Value) -> Vec<f64> {
    value
        .as_array()
        .expect("an array")
        .iter()
        .map(|v| v.as_f64().expect("a number"))
        .collect()
}

fn assert_close(stet: &[f64], reference: &[f64], what: &str) {
    assert_eq!(stet.len(), reference.len(), "{what}: lengths differ");
    for (s, r) in stet.iter().zip(reference) {
        assert!((s - r).abs() < 1e-12, "{what}: stet {s}, scikit-learn {r}");
    }
}

/// Writes scikit-learn's bundled breast-cancer data (Wolberg, Street & Mangasarian,
/// 1995; shipped with scikit-learn under its BSD licence) as `cancer.csv`: 30
/// measurements `f0`..`f29` and the `diagnosis`, `malignant` or `benign`.
fn write_breast_cancer(python: &std::path::Path, ws: &Workspace) {
    let script = "import csv, sys\n\
        from sklearn.datasets import load_breast_cancer\n\
        d = load_breast_cancer()\n\
        w = csv.writer(open(sys.argv[1], 'w', newline=''))\n\
        w.writerow([f'f{i}' for i in range(d.data.shape[1])] + ['diagnosis'])\n\
        for row, t in zip(d.data, d.target):\n    \
            w.writerow([repr(float(v)) for v in row] + [d.target_names[t]])\n";
    let status = Command::new(python)
        .args(["-c", script])
        .arg(ws.path("cancer.csv"))
        .status()
        .expect("the reference Python starts");
    assert!(status.success(), "writing the breast-cancer data failed");
}

/// tests/reference/roc_reference.py on the exported model's held-out rows.
fn scikit_learn_on(python: &std::path::Path, request: &Value) -> Value {
    reference_script(python, "roc_reference.py", request)
}

const CANCER: &str = "# Breast cancer

```yaml data cancer
file: cancer.csv
target: diagnosis
holdout: 0.3
seed: 4
```

```yaml net small
hidden: [6]
```

```yaml train model
data: cancer
net: small
learning_rate: 0.01
epochs: 40
seed: 2
```

```yaml export json
model: model
write: out/model.json
```
";

#[test]
fn auc_roc_points_and_brier_match_scikit_learn_on_the_breast_cancer_held_out_rows() {
    let Some(python) = reference_python("ROC, AUC and Brier against scikit-learn") else {
        return;
    };
    let ws = Workspace::new();
    write_breast_cancer(&python, &ws);
    let doc = ws.write("cancer.md", CANCER);
    let summary = ws.build_ok(&doc, &[]);
    let model = step(&summary, "model");
    let reference = scikit_learn_on(
        &python,
        &json!({
            "model": ws.path("out/model.json"),
            "rows": ws.path("cancer.csv"),
            "target": "diagnosis",
            "lines": model["held_out_lines"],
        }),
    );
    // Reference values: sklearn.metrics.roc_auc_score, brier_score_loss and roc_curve.
    assert_close(
        &[model["auc"].as_f64().unwrap()],
        &numbers(&reference["auc"]),
        "AUC",
    );
    assert_close(
        &[model["brier"].as_f64().unwrap()],
        &numbers(&reference["brier"]),
        "Brier",
    );
    let points = model["roc"]["points"].as_array().unwrap();
    let pick =
        |name: &str| -> Vec<f64> { points.iter().map(|p| p[name].as_f64().unwrap()).collect() };
    assert_close(
        &pick("false_positive_rate"),
        &numbers(&reference["false_positive_rate"]),
        "FPR",
    );
    assert_close(
        &pick("true_positive_rate"),
        &numbers(&reference["true_positive_rate"]),
        "TPR",
    );
    let thresholds: Vec<f64> = points[1..]
        .iter()
        .map(|p| p["threshold"].as_f64().unwrap())
        .collect();
    assert_close(
        &thresholds,
        &numbers(&reference["thresholds"]),
        "thresholds",
    );
}

/// A data step `id` on `file` with `target` and `holdout`, a net and a train step `fit`
/// with `learning_rate`.
fn document(file: &str, target: &str, holdout: f64, learning_rate: f64) -> String {
    format!(
        "# Diagnosis\n\n```yaml data rows\nfile: {file}\ntarget: {target}\nholdout: {holdout}\nseed: 3\n```\n\n\
         ```yaml net small\nhidden: [4]\n```\n\n\
         ```yaml train fit\ndata: rows\nnet: small\nlearning_rate: {learning_rate}\nepochs: 30\nseed: 1\n```\n"
    )
}

#[test]
fn several_classes_give_each_classs_auc_and_their_macro_mean() {
    let ws = Workspace::new();
    let doc = ws.write("iris.md", &document("iris.csv", "species", 0.3, 0.05));
    let fit = step(&ws.build_ok(&doc, &[]), "fit").clone();
    let each = numbers(&fit["auc_per_class"]);
    assert_eq!(each.len(), 3, "one AUC per Iris species");
    let mean = each.iter().sum::<f64>() / 3.0;
    assert!((fit["auc"].as_f64().unwrap() - mean).abs() < 1e-15);
}

#[test]
fn several_targets_are_each_scored_and_the_test_metrics_are_their_mean() {
    let ws = Workspace::new();
    let doc = ws.write(
        "water.md",
        &document(
            "demo-data/greenhouse.csv",
            "[water_l, humidity_pct]",
            0.25,
            0.02,
        ),
    );
    let fit = step(&ws.build_ok(&doc, &[]), "fit").clone();
    let targets = fit["targets"].as_array().expect("per-target metrics");
    assert_eq!(targets.len(), 2);
    for metric in ["mse", "mae", "r2"] {
        let mean = targets
            .iter()
            .map(|t| t[metric].as_f64().unwrap())
            .sum::<f64>()
            / 2.0;
        let reported = fit["metrics"]["test"][metric].as_f64().unwrap();
        assert!(
            (reported - mean).abs() < 1e-9 * mean.abs().max(1.0),
            "{metric}"
        );
    }
}

#[test]
fn a_diverged_regression_states_why_it_has_no_per_target_metrics() {
    let ws = Workspace::new();
    // A learning rate of 1e6 makes a linear-output network overflow within an epoch.
    let doc = ws.write(
        "diverged.md",
        &document("demo-data/greenhouse.csv", "water_l", 0.25, 1e6),
    );
    let (output, summary) = ws.build(&doc, &[]);
    assert!(!String::from_utf8_lossy(&output.stderr).contains("panicked"));
    let fit = step(summary.as_ref().expect("a summary"), "fit").clone();
    assert_eq!(fit["targets"], Value::Null);
    let why = fit["unavailable"]["targets"].as_str().unwrap();
    assert!(why.contains("not all finite"), "{why}");
}

#[test]
fn a_single_held_out_row_states_why_there_are_no_per_target_metrics() {
    let ws = Workspace::new();
    let rows: String = (0..8).map(|i| format!("{i},{}\n", 2 * i + 1)).collect();
    ws.write("eight.csv", &format!("x,y\n{rows}"));
    let doc = ws.write("one.md", &document("eight.csv", "y", 0.125, 0.05));
    let (output, summary) = ws.build(&doc, &[]);
    assert!(!String::from_utf8_lossy(&output.stderr).contains("panicked"));
    let fit = step(summary.as_ref().expect("a summary"), "fit").clone();
    assert_eq!(fit["held_out_rows"], 1);
    assert_eq!(fit["targets"], Value::Null);
    let why = fit["unavailable"]["targets"].as_str().unwrap();
    assert!(why.contains("only one held-out row"), "{why}");
}

/// Forty rows of two classes that overlap on `x` (class `b` above 0.5 mostly).
fn write_two_overlapping_classes(ws: &Workspace) {
    let rows: String = (0..40)
        .map(|i| {
            let x = f64::from(i) / 40.0;
            let class = if (x > 0.5) != (i % 7 == 0) { "b" } else { "a" };
            format!("{x},{class}\n")
        })
        .collect();
    ws.write("two.csv", &format!("x,class\n{rows}"));
}

#[test]
fn a_two_class_card_shows_its_roc_curve_with_youdens_threshold_and_its_reliability_chart() {
    let ws = Workspace::new();
    write_two_overlapping_classes(&ws);
    let doc = ws.write("two.md", &document("two.csv", "class", 0.5, 0.1));
    let summary = ws.build_ok(&doc, &[]);
    let report = std::fs::read_to_string(ws.path("two.html")).unwrap();
    assert!(report.contains("ROC curve on the held-out rows"));
    assert!(report.contains("Youden&#x27;s J") || report.contains("Youden's J"));
    assert!(step(&summary, "fit")["brier"].is_number());
    assert!(report.contains("Reliability on the held-out rows in 10 equal bins"));
    assert!(report.contains("Brier score"));
}

#[test]
fn regression_fit_plots_come_in_pairs_for_at_most_four_targets_and_list_the_rest() {
    let ws = Workspace::new();
    let rows: String = (0..30)
        .map(|i| {
            let x = f64::from(i);
            format!(
                "{x},{},{},{},{},{}\n",
                2.0 * x,
                x + 1.0,
                3.0 - x,
                x * 0.5,
                x % 5.0
            )
        })
        .collect();
    ws.write("five.csv", &format!("x,t1,t2,t3,t4,t5\n{rows}"));
    let doc = ws.write(
        "five.md",
        &document("five.csv", "[t1, t2, t3, t4, t5]", 0.3, 0.05),
    );
    ws.build_ok(&doc, &[]);
    let report = std::fs::read_to_string(ws.path("five.html")).unwrap();
    assert_eq!(
        report
            .matches("predicted against actual on the held-out rows")
            .count(),
        4
    );
    assert_eq!(
        report
            .matches("residual (actual − predicted) against predicted")
            .count(),
        4
    );
    assert!(report.contains("Not charted: t5."));
    assert!(report.contains("Held-out R² per target: t1 R²"));
}

/// The text of every cell of the report's confusion table, row by row (header first),
/// and the paragraphs that follow it up to the next table or figure.
fn confusion_table(report: &str) -> (Vec<Vec<String>>, String) {
    table(report, "confusion")
}

/// The text of every cell of the report's first table of class `class`, row by row
/// (header first), and the paragraphs that follow it up to the next table or figure.
fn table(report: &str, class: &str) -> (Vec<Vec<String>>, String) {
    let start = report
        .find(&format!(r#"<table class="grid numeric {class}">"#))
        .unwrap_or_else(|| panic!("a {class} table"));
    let (table, after) = report[start..].split_once("</table>").unwrap();
    let rows = table
        .split("<tr")
        .skip(1)
        .map(|row| {
            row.split("<t")
                .skip(1)
                .filter(|cell| cell.starts_with('h') || cell.starts_with('d'))
                .map(|cell| plain_text(cell.split_once('>').unwrap().1))
                .collect()
        })
        .collect();
    let end = after
        .find("<table")
        .into_iter()
        .chain(after.find("<figure"))
        .chain(after.find("</section>"))
        .min()
        .unwrap();
    (rows, plain_text(&after[..end]))
}

/// `html` without its tags, entities of the report's escaping undone.
fn plain_text(html: &str) -> String {
    let mut text = String::new();
    let mut in_tag = false;
    for c in html.chars() {
        match c {
            '<' => in_tag = true,
            '>' => in_tag = false,
            c if !in_tag => text.push(c),
            _ => {}
        }
    }
    text.replace("&#x27;", "'")
        .replace("&amp;", "&")
        .trim()
        .to_string()
}

#[test]
fn each_classs_auc_is_a_column_of_the_confusion_table_with_their_macro_mean_below() {
    let ws = Workspace::new();
    let doc = ws.write("iris.md", &document("iris.csv", "species", 0.3, 0.05));
    let fit = step(&ws.build_ok(&doc, &[]), "fit").clone();
    let report = std::fs::read_to_string(ws.path("iris.html")).unwrap();
    let (rows, _) = confusion_table(&report);
    let auc_column = rows[0]
        .iter()
        .position(|heading| heading.starts_with("AUC"))
        .expect("an AUC column");
    // The summary's values (the same numbers, unrounded) are the reference.
    let expected: Vec<f64> = numbers(&fit["auc_per_class"])
        .into_iter()
        .chain([fit["auc"].as_f64().unwrap()])
        .collect();
    let shown: Vec<f64> = rows[1..]
        .iter()
        .map(|row| row[auc_column].parse().expect("a number"))
        .collect();
    assert_eq!(shown.len(), 4, "three species and the macro mean: {rows:?}");
    for (shown, expected) in shown.iter().zip(&expected) {
        assert!(
            (shown - expected).abs() < 5e-4,
            "{shown} against {expected}"
        );
    }
    assert_eq!(rows[4][0], "macro mean");
    assert!(!report.contains("Held-out AUC of each class against the rest"));
}

/// Twenty rows each of classes `a` and `b` and three of `c`: a holdout of 0.15 keeps
/// round(0.15 · 3) = 0 rows of `c`.
fn write_a_rare_class(ws: &Workspace) {
    let mut rows = String::from("x1,x2,kind\n");
    for i in 0..20 {
        let step = f64::from(i) / 20.0;
        rows.push_str(&format!("{step},{},a\n", f64::from(i * 7 % 20) / 20.0));
        rows.push_str(&format!(
            "{},{},b\n",
            1.0 + step,
            f64::from(i * 3 % 20) / 20.0
        ));
    }
    for i in 0..3 {
        rows.push_str(&format!(
            "{},{},c\n",
            2.0 + f64::from(i) / 20.0,
            f64::from(i) / 20.0
        ));
    }
    ws.write("rare.csv", &rows);
}

#[test]
fn a_class_absent_from_the_held_out_rows_shows_why_it_has_no_auc() {
    let ws = Workspace::new();
    write_a_rare_class(&ws);
    let doc = ws.write("rare.md", &document("rare.csv", "kind", 0.15, 0.1));
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(0));
    assert!(!String::from_utf8_lossy(&output.stderr).contains("panicked"));
    let fit = step(summary.as_ref().expect("a summary"), "fit").clone();
    assert_eq!(fit["auc_per_class"][2], Value::Null, "no held-out row of c");
    let report = std::fs::read_to_string(ws.path("rare.html")).unwrap();
    let (rows, notes) = confusion_table(&report);
    let auc_column = rows[0]
        .iter()
        .position(|heading| heading.starts_with("AUC"))
        .expect("an AUC column");
    let cell = |label: &str| {
        let row = rows.iter().find(|row| row[0] == label).expect(label);
        row[auc_column].clone()
    };
    assert!(cell("a").parse::<f64>().is_ok(), "{rows:?}");
    assert!(cell("c").starts_with('—'), "{rows:?}");
    assert!(cell("macro mean").starts_with('—'), "{rows:?}");
    assert!(notes.contains("no held-out row is c"), "{notes}");
    assert!(notes.contains("macro mean needs every class"), "{notes}");
    assert!(!shown_text(&report).contains("NaN"));
}

/// The train card's verdict line.
fn verdict_line(report: &str) -> String {
    let start = report.find(r#"<p class="verdict"#).expect("a verdict");
    let line = &report[start..];
    plain_text(&line[line.find('>').unwrap() + 1..line.find("</p>").unwrap()])
}

/// The cell of `column` in the row whose first cell is `row`.
fn cell(rows: &[Vec<String>], row: &str, column: &str) -> String {
    let at = rows[0].iter().position(|c| c == column).expect(column);
    rows.iter().find(|r| r[0] == row).expect(row)[at].clone()
}

/// Builds `doc`, which must not panic, and returns its report.
fn report_of(ws: &Workspace, doc: &std::path::Path) -> String {
    let (output, summary) = ws.build(doc, &[]);
    assert_eq!(output.status.code(), Some(0));
    assert!(!String::from_utf8_lossy(&output.stderr).contains("panicked"));
    assert!(summary.is_some());
    let report = std::fs::read_to_string(doc.with_extension("html")).unwrap();
    let shown = shown_text(&report);
    assert!(!shown.contains("NaN") && !shown.contains("inf<"));
    report
}

/// The report without the experiment it carries, whose base64 may spell "NaN".
fn shown_text(report: &str) -> String {
    let opening = r#"<script type="application/octet-stream" id="stet-experiment""#;
    match report.find(opening) {
        Some(start) => {
            let end = start + report[start..].find("</script>").expect("a closed block");
            format!("{}{}", &report[..start], &report[end..])
        }
        None => report.to_string(),
    }
}

#[test]
fn a_constant_target_shows_why_r2_is_undefined_instead_of_a_number() {
    let ws = Workspace::new();
    let rows: String = (0..40).map(|i| format!("{i},{},3\n", i * 7 % 11)).collect();
    ws.write("flat.csv", &format!("x1,x2,y\n{rows}"));
    let report = report_of(
        &ws,
        &ws.write("flat.md", &document("flat.csv", "y", 0.25, 0.05)),
    );
    let (metrics, note) = table(&report, "metrics");
    // scikit-learn's convention would print 0 here (1 for exact predictions).
    assert_eq!(cell(&metrics, "training", "r2"), "—");
    assert_eq!(cell(&metrics, "held out", "r2"), "—");
    assert!(
        note.contains("y holds one value in every row read"),
        "{note}"
    );
    let (judged, _) = table(&report, "judged");
    assert_eq!(cell(&judged, "network", "held-out r2"), "—");
    assert_eq!(cell(&judged, "training mean", "held-out r2"), "—");
    let verdict = verdict_line(&report);
    assert!(
        verdict.contains("held-out R² undefined (every held-out row has the target 3"),
        "{verdict}"
    );
    assert!(verdict.contains("held-out mse"), "{verdict}");
    assert!(report.contains(
        "No permutation importance: it measures the fall in held-out R², which is undefined"
    ));
}

#[test]
fn a_single_held_out_row_shows_why_instead_of_r2_and_fit_plots() {
    let ws = Workspace::new();
    let rows: String = (0..8).map(|i| format!("{i},{}\n", 2 * i + 1)).collect();
    ws.write("eight.csv", &format!("x,y\n{rows}"));
    let report = report_of(
        &ws,
        &ws.write("one.md", &document("eight.csv", "y", 0.125, 0.05)),
    );
    let (metrics, note) = table(&report, "metrics");
    assert_ne!(
        cell(&metrics, "training", "r2"),
        "—",
        "the training rows vary"
    );
    assert_eq!(cell(&metrics, "held out", "r2"), "—");
    assert!(note.contains("there is only one held-out row"), "{note}");
    let verdict = verdict_line(&report);
    assert!(
        verdict.contains("held-out R² undefined (there is only one held-out row)"),
        "{verdict}"
    );
    assert!(report.contains("No fit plots: there is only one held-out row."));
}

#[test]
fn a_single_held_out_row_of_two_classes_states_why_there_is_no_roc_curve() {
    let ws = Workspace::new();
    let rows: String = (0..8)
        .map(|i| format!("{i},{}\n", if i < 3 { "low" } else { "high" }))
        .collect();
    ws.write("eight.csv", &format!("x,c\n{rows}"));
    // Stratified: round(0.15 · 3) = 0 rows of low and round(0.15 · 5) = 1 of high.
    let report = report_of(
        &ws,
        &ws.write("one.md", &document("eight.csv", "c", 0.15, 0.05)),
    );
    assert!(
        report.contains("No ROC curve: there is only one held-out row."),
        "{report}"
    );
    assert!(report.contains("No reliability chart: there is only one held-out row."));
    assert!(verdict_line(&report).contains("not enough held-out rows"));
    assert!(report.contains("No permutation importance: there is only one held-out row"));
}

#[test]
fn a_diverged_classifier_states_why_it_has_no_aucs_or_importance() {
    let ws = Workspace::new();
    // A learning rate of 1e8 on relu units overflows the softmax within a few epochs.
    let text = document("iris.csv", "species", 0.3, 1e8)
        .replace("hidden: [4]", "hidden: [4]\nactivation: relu");
    let report = report_of(&ws, &ws.write("boom.md", &text));
    assert!(report.contains("stopped: diverged"));
    let (rows, notes) = confusion_table(&report);
    assert_eq!(cell(&rows, "setosa", "AUC against the rest"), "—¹");
    assert_eq!(cell(&rows, "macro mean", "AUC against the rest"), "—²");
    assert!(
        notes.contains(
            "¹ the network's outputs or their errors are not all finite (the run diverged)."
        ),
        "{notes}"
    );
    assert!(report.contains("No permutation importance: the run diverged"));
}

#[test]
fn a_diverged_regression_card_states_why_instead_of_its_scores() {
    let ws = Workspace::new();
    // A learning rate of 1e6 makes a linear-output network overflow within an epoch.
    let report = report_of(
        &ws,
        &ws.write(
            "boom.md",
            &document("demo-data/greenhouse.csv", "water_l", 0.25, 1e6),
        ),
    );
    let verdict = verdict_line(&report);
    assert!(verdict.contains("held-out R² — (the network's outputs or their errors are not all finite (the run diverged))"), "{verdict}");
    assert!(report.contains("No permutation importance: the run diverged"));
    assert!(
        report.contains("No fit plots: the network&#x27;s outputs")
            || report.contains("No fit plots: the network's outputs")
    );
}
