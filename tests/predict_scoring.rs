//! A predict step on a labelled batch (issue 15): rows named by their identifying
//! columns, the rows whose target the file gives scored like held-out rows (checked
//! against the train card on the same rows, and against scikit-learn), and a stated
//! reason for every row or score left out.
//!
//! The scikit-learn checks need `STET_PYTHON` (see tests/common); without it they skip.

mod common;

use serde_json::{Value, json};

use common::{Workspace, reference_python, reference_script, step};

/// Fisher's Iris data (tests/data/README.md) on a 30 % holdout, a small network and
/// nothing else; `predict` blocks are appended by each test.
const IRIS: &str = "# Iris

```yaml data iris
file: iris.csv
target: species
holdout: 0.3
seed: 1
```

```yaml net small
hidden: [5]
```

```yaml train fit
data: iris
net: small
epochs: 150
learning_rate: 0.05
seed: 7
```
";

fn predict_block(file: &str, write: Option<&str>) -> String {
    let write = write.map_or(String::new(), |path| format!("write: {path}\n"));
    format!("\n```yaml predict batch\nmodel: fit\nfile: {file}\n{write}```\n")
}

/// The rows of iris.csv at file `lines` (the header is line 1), each cell as written.
fn iris_rows(ws: &Workspace, lines: &[u64]) -> Vec<Vec<String>> {
    let text = std::fs::read_to_string(ws.path("iris.csv")).unwrap();
    let all: Vec<&str> = text.lines().collect();
    lines
        .iter()
        .map(|&line| {
            all[line as usize - 1]
                .split(',')
                .map(String::from)
                .collect()
        })
        .collect()
}

/// iris.csv's rows 2, 7, 12, … (every fifth) as `(measurements, species)`.
fn every_fifth_iris_row(ws: &Workspace) -> Vec<(Vec<String>, String)> {
    let lines: Vec<u64> = (2..=151).step_by(5).collect();
    iris_rows(ws, &lines)
        .into_iter()
        .map(|mut row| {
            let species = row.pop().unwrap();
            (row, species)
        })
        .collect()
}

const MEASUREMENTS: &str = "sepal_length_cm,sepal_width_cm,petal_length_cm,petal_width_cm";

/// The HTML of the card of step `id`.
fn card<'a>(html: &'a str, id: &str) -> &'a str {
    let start = html
        .find(&format!("id=\"step-{id}\""))
        .unwrap_or_else(|| panic!("no card for {id}"));
    let end = start + html[start..].find("</section>").unwrap();
    &html[start..end]
}

/// The first table of `class` in `html`.
fn table<'a>(html: &'a str, class: &str) -> &'a str {
    let start = html
        .find(&format!("<table class=\"grid numeric {class}"))
        .unwrap_or_else(|| panic!("no {class} table in {html}"));
    let end = start + html[start..].find("</table>").unwrap();
    &html[start..end]
}

/// The text of each `<th>` or `<td>` cell of `tag` in `html`, in order.
fn cells(html: &str, tag: &str) -> Vec<String> {
    let close = format!("</{tag}>");
    // `<th>` or `<th class=…>`, never `<thead>`.
    let opening = |at: usize, rest: &str| rest[at + tag.len() + 1..].starts_with(['>', ' ']);
    let mut found = Vec::new();
    let mut rest = html;
    while let Some(at) = rest
        .match_indices(&format!("<{tag}"))
        .map(|(at, _)| at)
        .find(|&at| opening(at, rest))
    {
        let after = &rest[at..];
        let content = &after[after.find('>').unwrap() + 1..];
        let end = content.find(&close).unwrap();
        found.push(content[..end].to_string());
        rest = &content[end..];
    }
    found
}

/// The counts of a confusion table (its whole-number cells; precision and recall have
/// decimals).
fn confusion_counts(html: &str) -> Vec<usize> {
    cells(table(html, "confusion"), "td")
        .iter()
        .filter_map(|cell| cell.parse().ok())
        .collect()
}

fn report(ws: &Workspace, doc: &str) -> String {
    std::fs::read_to_string(ws.path(&format!("{doc}.html"))).unwrap()
}

// Issue 15: the predictions table names each row by the file's columns that are
// neither inputs nor the target, the first two in file order; a file without such a
// column keeps the line number.
#[test]
fn the_predictions_table_names_rows_by_their_first_two_identifying_columns() {
    let ws = Workspace::new();
    let mut named = format!("sample,{MEASUREMENTS},collector,species,note\n");
    let mut plain = format!("{MEASUREMENTS}\n");
    for (i, (measurements, species)) in every_fifth_iris_row(&ws).iter().enumerate() {
        let cells = measurements.join(",");
        named.push_str(&format!("S{i:03},{cells},ana,{species},kept cold\n"));
        plain.push_str(&format!("{cells}\n"));
    }
    ws.write("named.csv", &named);
    ws.write("plain.csv", &plain);
    let doc = format!(
        "{IRIS}{}{}",
        predict_block("named.csv", None),
        predict_block("plain.csv", None).replace("predict batch", "predict unnamed")
    );
    ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let html = report(&ws, "doc");

    let headings = cells(table(card(&html, "batch"), "predict"), "th");
    assert_eq!(
        headings[..4],
        ["sample", "collector", "prediction", "p_setosa"]
    );
    let first_row = cells(table(card(&html, "batch"), "predict"), "td");
    assert_eq!(first_row[..2], ["S000", "ana"]);

    let headings = cells(table(card(&html, "unnamed"), "predict"), "th");
    assert_eq!(headings[..2], ["line", "prediction"]);
    // The first data row is on line 2, after the header.
    assert_eq!(
        cells(table(card(&html, "unnamed"), "predict"), "td")[0],
        "2"
    );
}

// Issue 15, checked against the train card: the held-out rows, written to a file of
// their own with their labels, score on the predict card exactly as the train card
// scores them: the same accuracy, loss, confusion matrix and 95 % intervals (the same
// rows in the same order, the same bootstrap seed).
#[test]
fn the_held_out_iris_rows_predicted_with_their_labels_score_as_on_the_train_card() {
    let ws = Workspace::new();
    let trained = ws.build_ok(&ws.write("train.md", IRIS), &[]);
    let fit = step(&trained, "fit");
    let lines: Vec<u64> = fit["held_out_lines"]
        .as_array()
        .unwrap()
        .iter()
        .map(|line| line.as_u64().unwrap())
        .collect();
    assert_eq!(lines.len(), 45, "30 % of Iris's 150 rows");
    let mut batch = format!("{MEASUREMENTS},species\n");
    for row in iris_rows(&ws, &lines) {
        batch.push_str(&format!("{}\n", row.join(",")));
    }
    ws.write("held_out.csv", &batch);
    let doc = format!("{IRIS}{}", predict_block("held_out.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);

    let (fit, batch) = (step(&summary, "fit"), step(&summary, "batch"));
    assert_eq!(fit["status"], "reused");
    assert_eq!(batch["scored_rows"], 45);
    assert_eq!(
        batch["metrics"]["accuracy"],
        fit["metrics"]["test"]["accuracy"]
    );
    for name in ["loss", "log_loss"] {
        let (card, train) = (
            batch["metrics"][name].as_f64().unwrap(),
            fit["metrics"]["test"][name].as_f64().unwrap(),
        );
        assert!(
            (card - train).abs() < 1e-12,
            "{name}: {card} against {train}"
        );
    }
    assert_eq!(batch["interval"]["accuracy"], fit["interval"]["accuracy"]);
    for (card, train) in batch["interval"]["log_loss"]
        .as_array()
        .unwrap()
        .iter()
        .zip(fit["interval"]["log_loss"].as_array().unwrap())
    {
        assert!((card.as_f64().unwrap() - train.as_f64().unwrap()).abs() < 1e-12);
    }

    let html = report(&ws, "doc");
    let train_counts = confusion_counts(card(&html, "fit"));
    assert_eq!(train_counts.iter().sum::<usize>(), 45);
    assert_eq!(confusion_counts(card(&html, "batch")), train_counts);
    let json_counts: Vec<usize> = batch["confusion"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter())
        .map(|count| count.as_u64().unwrap() as usize)
        .collect();
    assert_eq!(json_counts, train_counts);
}

/// Writes every fifth Iris row with its species replaced by `label(i, species)`.
fn labelled_batch(ws: &Workspace, label: impl Fn(usize, &str) -> String) -> String {
    let mut batch = format!("sample,{MEASUREMENTS},species\n");
    for (i, (measurements, species)) in every_fifth_iris_row(ws).iter().enumerate() {
        let cells = measurements.join(",");
        batch.push_str(&format!("S{i:03},{cells},{}\n", label(i, species)));
    }
    batch
}

// Issue 15: labels the model never saw are named on the card with their row counts,
// their rows predicted and not scored, and the build succeeds; an empty target cell
// is predicted, not scored, and counted.
#[test]
fn labels_the_model_never_saw_are_named_and_their_rows_are_not_scored() {
    let ws = Workspace::new();
    ws.write(
        "batch.csv",
        &labelled_batch(&ws, |i, species| match i {
            3 | 17 => "Iris-unknown".into(),
            5 => "".into(),
            _ => species.into(),
        }),
    );
    let doc = format!("{IRIS}{}", predict_block("batch.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let batch = step(&summary, "batch");
    assert_eq!(batch["rows"], 30);
    assert_eq!(batch["scored_rows"], 27);
    assert_eq!(batch["empty_target_rows"], 1);
    assert_eq!(
        batch["unseen_labels"],
        json!([{"label": "Iris-unknown", "rows": 2}])
    );
    let counted: u64 = batch["confusion"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|row| row.as_array().unwrap().iter())
        .map(|count| count.as_u64().unwrap())
        .sum();
    assert_eq!(counted, 27);
    let html = report(&ws, "doc");
    let card = card(&html, "batch");
    assert!(
        card.contains("Labels the model never saw: Iris-unknown (2 rows)"),
        "{card}"
    );
    assert!(
        card.contains("1 row with an empty species cell predicted but not scored"),
        "{card}"
    );
    assert_eq!(
        cells(table(card, "predict"), "tr").len(),
        31,
        "every row predicted"
    );
}

// Issue 15: a file without the target column predicts as before: no scores, no
// message.
#[test]
fn a_file_without_the_target_column_is_predicted_without_scores() {
    let ws = Workspace::new();
    let mut batch = format!("{MEASUREMENTS}\n");
    for (measurements, _) in every_fifth_iris_row(&ws) {
        batch.push_str(&format!("{}\n", measurements.join(",")));
    }
    ws.write("batch.csv", &batch);
    let doc = format!("{IRIS}{}", predict_block("batch.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let keys: Vec<&String> = step(&summary, "batch")
        .as_object()
        .unwrap()
        .keys()
        .collect();
    assert_eq!(
        keys,
        ["id", "kind", "status", "seconds", "key", "settings", "rows"]
    );
    let html = report(&ws, "doc");
    let card = card(&html, "batch");
    assert!(
        !card.contains("confusion") && !card.contains("scored"),
        "{card}"
    );
}

// Bad input (issue 15): a target column present but empty in every row scores
// nothing, says so, and still predicts every row.
#[test]
fn a_target_column_empty_in_every_row_scores_nothing_and_says_why() {
    let ws = Workspace::new();
    ws.write("batch.csv", &labelled_batch(&ws, |_, _| String::new()));
    let doc = format!("{IRIS}{}", predict_block("batch.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let batch = step(&summary, "batch");
    assert_eq!(batch["scored_rows"], 0);
    assert_eq!(batch["empty_target_rows"], 30);
    assert!(batch.get("metrics").is_none() && batch.get("interval").is_none());
    let html = report(&ws, "doc");
    let card = card(&html, "batch");
    assert!(card.contains("No row could be scored."), "{card}");
    assert!(
        card.contains("30 rows with an empty species cell predicted but not scored"),
        "{card}"
    );
}

// Bad input (issue 15): one labelled row is scored, but carries no interval, and the
// card says why instead of printing one.
#[test]
fn one_labelled_row_is_scored_without_an_interval_and_says_why() {
    let ws = Workspace::new();
    ws.write(
        "batch.csv",
        &labelled_batch(&ws, |i, species| {
            if i == 0 {
                species.into()
            } else {
                String::new()
            }
        }),
    );
    let doc = format!("{IRIS}{}", predict_block("batch.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let batch = step(&summary, "batch");
    assert_eq!(batch["scored_rows"], 1);
    assert_eq!(batch["interval"], Value::Null);
    assert!(batch["metrics"]["accuracy"].is_number());
    let html = report(&ws, "doc");
    let card = card(&html, "batch");
    assert!(
        card.contains("No 95 % interval: it needs at least two scored rows"),
        "{card}"
    );
    assert!(!card.contains("95 % interval</td>"), "{card}");
}

// A batch of one class (every part good, say) is common: its accuracy still has a
// Wilson interval, which needs only the count right out of the rows scored.
#[test]
fn a_batch_of_one_class_is_scored_with_an_interval() {
    let ws = Workspace::new();
    ws.write(
        "batch.csv",
        &labelled_batch(&ws, |_, species| {
            if species == "setosa" {
                species.into()
            } else {
                String::new()
            }
        }),
    );
    let doc = format!("{IRIS}{}", predict_block("batch.csv", None));
    let summary = ws.build_ok(&ws.write("doc.md", &doc), &[]);
    let batch = step(&summary, "batch");
    assert!(batch["scored_rows"].as_u64().unwrap() >= 2, "{batch}");
    let accuracy = batch["interval"]["accuracy"]
        .as_array()
        .expect("an interval");
    assert!(accuracy[0].as_f64().unwrap() <= accuracy[1].as_f64().unwrap());
    let html = report(&ws, "doc");
    let card = card(&html, "batch");
    assert!(!card.contains("No 95 % interval"), "{card}");
}

/// Invented regression rows: `y1 = 200 + 40·x1 − 25·x2` and `y2 = 3·x1·x2`, for `x1`,
/// `x2` on a grid, so the targets are in the hundreds and a network fits them well.
fn regression_rows(from: usize, to: usize) -> Vec<(String, f64, f64, f64, f64)> {
    (from..to)
        .map(|i| {
            let x1 = (i % 13) as f64 / 4.0;
            let x2 = (i % 7) as f64 / 2.0 + (i / 91) as f64 * 0.1;
            (
                format!("P{i:03}"),
                x1,
                x2,
                200.0 + 40.0 * x1 - 25.0 * x2,
                3.0 * x1 * x2,
            )
        })
        .collect()
}

fn regression_csv(
    rows: &[(String, f64, f64, f64, f64)],
    y2: impl Fn(usize, f64) -> String,
) -> String {
    let mut csv = String::from("part,x1,x2,y1,y2\n");
    for (i, (part, x1, x2, y1, y)) in rows.iter().enumerate() {
        csv.push_str(&format!("{part},{x1},{x2},{y1},{}\n", y2(i, *y)));
    }
    csv
}

const REGRESSION: &str = "# Two targets

```yaml data parts
file: parts.csv
inputs: [x1, x2]
target: [y1, y2]
task: regress
holdout: 0.25
seed: 2
```

```yaml net small
hidden: [8]
```

```yaml train fit
data: parts
net: small
optimizer: adam
learning_rate: 0.01
epochs: 300
seed: 5
```

```yaml predict batch
model: fit
file: batch.csv
write: predictions.csv
```
";

// Bad input (issue 15): a regression target cell that is not a number fails the
// predict step with the data step's own message for the same cell (line, column,
// what was expected), and nothing the build read is changed.
#[test]
fn a_regression_target_that_is_not_a_number_fails_the_predict_step_as_the_data_step_would() {
    let ws = Workspace::new();
    ws.write(
        "parts.csv",
        &regression_csv(&regression_rows(0, 120), |_, y| y.to_string()),
    );
    let bad = regression_csv(&regression_rows(120, 140), |i, y| {
        if i == 4 {
            "about 3".into()
        } else {
            y.to_string()
        }
    });
    let batch = ws.write("batch.csv", &bad);
    let doc = ws.write("doc.md", REGRESSION);
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(output.status.code(), Some(1));
    let summary = summary.expect("a summary");
    let error = step(&summary, "batch")["error"]
        .as_str()
        .unwrap()
        .to_string();
    let expected =
        "line 6, column `y2`: expected a number because the task is `regress`, found `about 3`";
    assert!(error.starts_with("batch.csv: "), "{error}");
    assert!(error.ends_with(expected), "{error}");
    assert_eq!(std::fs::read_to_string(&batch).unwrap(), bad);
    assert!(!ws.path("predictions.csv").exists());

    // The data step says the same of the same cell.
    ws.write("parts.csv", &bad);
    let (_, summary) = ws.build(&doc, &[]);
    let data_error = step(&summary.unwrap(), "parts")["error"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(data_error.ends_with(expected), "{data_error}");
}

// Checked against scikit-learn (tests/reference/predict_scores.py): the predict step's
// metrics on its labelled rows equal `accuracy_score` and `confusion_matrix` (Iris), and
// `mean_squared_error`, `mean_absolute_error` and `r2_score` per target and averaged
// (two invented targets in the hundreds, trained on scaled targets), computed from the
// predictions CSV the step wrote and the file's own target cells, to 1e-12.
#[test]
fn a_labelled_batchs_metrics_match_scikit_learn_on_the_written_predictions() {
    let Some(python) = reference_python("predict scores against scikit-learn") else {
        return;
    };
    let ws = Workspace::new();
    ws.write(
        "batch.csv",
        &labelled_batch(&ws, |i, species| match i {
            2 => "Iris-unknown".into(),
            9 => "".into(),
            _ => species.into(),
        }),
    );
    let doc = format!(
        "{IRIS}{}",
        predict_block("batch.csv", Some("iris-predictions.csv"))
    );
    let summary = ws.build_ok(&ws.write("iris.md", &doc), &[]);
    let batch = step(&summary, "batch");
    let sklearn = reference_script(
        &python,
        "predict_scores.py",
        &json!({
            "predictions": ws.path("iris-predictions.csv"),
            "targets": ["species"],
            "classes": ["setosa", "versicolor", "virginica"],
        }),
    );
    assert_eq!(batch["scored_rows"], sklearn["rows"]);
    let accuracy = batch["metrics"]["accuracy"].as_f64().unwrap();
    // scikit-learn: accuracy_score
    assert!((accuracy - sklearn["accuracy"].as_f64().unwrap()).abs() < 1e-12);
    // scikit-learn: confusion_matrix, labels in the data step's class order
    assert_eq!(batch["confusion"], sklearn["confusion"]);

    ws.write(
        "parts.csv",
        &regression_csv(&regression_rows(0, 120), |_, y| y.to_string()),
    );
    ws.write(
        "batch.csv",
        &regression_csv(&regression_rows(120, 160), |i, y| {
            if i == 7 { String::new() } else { y.to_string() }
        }),
    );
    let summary = ws.build_ok(&ws.write("doc.md", REGRESSION), &[]);
    let batch = step(&summary, "batch");
    let sklearn = reference_script(
        &python,
        "predict_scores.py",
        &json!({
            "predictions": ws.path("predictions.csv"),
            "targets": ["y1", "y2"],
            "classes": null,
        }),
    );
    assert_eq!(batch["scored_rows"], 39);
    assert_eq!(sklearn["rows"], 39);
    let close = |stet: &Value, reference: &Value, what: &str| {
        let (s, r) = (stet.as_f64().unwrap(), reference.as_f64().unwrap());
        assert!(
            (s - r).abs() < 1e-12 * r.abs().max(1.0),
            "{what}: stet {s}, scikit-learn {r}"
        );
    };
    // scikit-learn: mean_squared_error, mean_absolute_error, r2_score (uniform average)
    for name in ["mse", "mae", "r2"] {
        close(&batch["metrics"][name], &sklearn[name], name);
        for target in 0..2 {
            close(
                &batch["targets"][target][name],
                &sklearn["targets"][target][name],
                &format!("{name} of target {target}"),
            );
        }
    }
    // The loss is in the scaled units training saw, the rest in the targets' own.
    assert!(batch["metrics"]["loss"].as_f64().unwrap() < 1.0);
}
