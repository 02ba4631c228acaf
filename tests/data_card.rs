//! The data card catches problems before training: per column statistics over every
//! row read, and one warning (column and code) for each problem, in the `--json`
//! summary and on the report.
//!
//! Every table here is invented by the test from fixed formulas (`rows` below), so each
//! warning's trigger is written out beside it; the statistics are checked against numpy
//! in `tests/data_card_numpy.rs`.

mod common;

use common::{Workspace, step};
use serde_json::Value;

/// Row `i` (0-based) of a table with no problem in it, as (`x1`, `x2`, `site`, `label`):
/// `x1` and `x2` walk through their ranges in steps of 7 and 13 of `n` (both prime to
/// `n`), so no two rows are equal and neither is a whole number throughout; `label`
/// alternates, and so does it along `x1` and `x2` (7i and 13i mod an even `n` keep the
/// parity of i), so no input separates the classes; `site` cycles through three values.
fn clean_row(i: usize, n: usize) -> [String; 4] {
    [
        format!("{}", (7 * i % n) as f64 / 4.0 + 0.3),
        format!("{}", (13 * i % n) as f64 / 10.0 + 2.0),
        ["north", "south", "east"][i % 3].to_string(),
        ["a", "b"][i % 2].to_string(),
    ]
}

/// A CSV of `n` rows: the clean columns, then `extra` columns given by name and by a
/// function of the row, with `label` last; `label` itself may be replaced by `label_of`.
fn rows(
    n: usize,
    extra: &[(&str, &dyn Fn(usize) -> String)],
    label_of: &dyn Fn(usize) -> String,
) -> String {
    let mut header: Vec<&str> = vec!["x1", "x2", "site"];
    header.extend(extra.iter().map(|(name, _)| *name));
    header.push("label");
    let mut csv = header.join(",") + "\n";
    for i in 0..n {
        let clean = clean_row(i, n);
        let mut cells: Vec<String> = clean[..3].to_vec();
        cells.extend(extra.iter().map(|(_, cell)| cell(i)));
        cells.push(label_of(i));
        csv.push_str(&cells.join(","));
        csv.push('\n');
    }
    csv
}

/// The clean table's own label.
fn alternating(i: usize) -> String {
    clean_row(i, 2)[3].clone()
}

/// A data step reading `rows.csv` with `settings` added.
fn data_doc(target: &str, settings: &str) -> String {
    format!("```yaml data d\nfile: rows.csv\ntarget: {target}\n{settings}```\n")
}

/// Builds `doc` over `csv` and returns the data step's summary object.
fn data_step(ws: &Workspace, csv: &str, doc: &str) -> Value {
    ws.write("rows.csv", csv);
    let summary = ws.build_ok(&ws.write("doc.md", doc), &[]);
    step(&summary, "d").clone()
}

/// Each warning as (column, code); a row warning's column is "".
fn warnings(data: &Value) -> Vec<(String, String)> {
    data["warnings"]
        .as_array()
        .expect("a data step lists its warnings")
        .iter()
        .map(|w| {
            (
                w["column"].as_str().unwrap_or("").to_string(),
                w["code"].as_str().unwrap().to_string(),
            )
        })
        .collect()
}

fn pairs(expected: &[(&str, &str)]) -> Vec<(String, String)> {
    expected
        .iter()
        .map(|(c, w)| (c.to_string(), w.to_string()))
        .collect()
}

/// The message of the first warning with `code`.
fn message(data: &Value, code: &str) -> String {
    data["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .find(|w| w["code"] == code)
        .unwrap_or_else(|| panic!("no {code} warning in {data}"))["message"]
        .as_str()
        .unwrap()
        .to_string()
}

fn column<'a>(data: &'a Value, name: &str) -> &'a Value {
    data["columns"]
        .as_array()
        .unwrap()
        .iter()
        .find(|c| c["name"] == name)
        .unwrap_or_else(|| panic!("no column {name} in {data}"))
}

#[test]
fn a_clean_file_gets_statistics_for_every_column_and_no_warning() {
    let ws = Workspace::new();
    let data = data_step(&ws, &rows(40, &[], &alternating), &data_doc("label", ""));
    assert_eq!(warnings(&data), Vec::new(), "{data}");
    let names: Vec<&str> = data["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c["name"].as_str().unwrap())
        .collect();
    assert_eq!(names, ["x1", "x2", "site", "label"]);
    // x1 is k/4 + 0.3 for k = 0..39 once each (7 is prime to 40): min 0.3, max 10.05,
    // mean 19.5/4 + 0.3 = 5.175, median (k = 19.5) also 5.175.
    let x1 = column(&data, "x1");
    assert_eq!(
        (x1["count"].as_u64(), x1["missing"].as_u64()),
        (Some(40), Some(0))
    );
    assert_eq!(x1["distinct"], 40);
    assert_eq!(
        (x1["min"].as_f64(), x1["max"].as_f64()),
        (Some(0.3), Some(10.05))
    );
    for stat in ["mean", "median"] {
        assert!((x1[stat].as_f64().unwrap() - 5.175).abs() < 1e-12, "{x1}");
    }
    // site cycles north, south, east: 14, 13, 13 rows.
    let site = column(&data, "site");
    assert_eq!(site["kind"], "text");
    assert_eq!(site["distinct"], 3);
    assert_eq!(site["most_common"][0]["value"], "north");
    assert_eq!(site["most_common"][0]["count"], 14);
    assert_eq!(column(&data, "label")["role"], "target");
}

#[test]
fn a_constant_column_is_a_warning_naming_it() {
    let ws = Workspace::new();
    let csv = rows(
        40,
        &[("unit", &|_| "cm".into()), ("gain", &|_| "2.5".into())],
        &alternating,
    );
    let data = data_step(&ws, &csv, &data_doc("label", ""));
    assert_eq!(
        warnings(&data),
        pairs(&[("unit", "constant"), ("gain", "constant")])
    );
    assert!(message(&data, "constant").contains("`cm`"));
}

#[test]
fn a_constant_regression_target_is_a_warning_and_training_on_it_still_reports() {
    let ws = Workspace::new();
    ws.write(
        "rows.csv",
        &rows(40, &[("y", &|_| "3".into())], &alternating),
    );
    let doc = "```yaml data d\nfile: rows.csv\ninputs: [x1, x2]\ntarget: y\n```\n\n\
               ```yaml net n\nhidden: [3]\n```\n\n\
               ```yaml train t\ndata: d\nnet: n\nepochs: 20\n```\n";
    let summary = ws.build_ok(&ws.write("doc.md", doc), &[]);
    let data = step(&summary, "d");
    assert_eq!(warnings(data), pairs(&[("y", "constant")]));
    assert!(message(data, "constant").contains("nothing to learn"));
    assert_eq!(step(&summary, "t")["status"], "ran");
}

#[test]
fn a_column_of_row_numbers_and_a_column_of_names_look_like_identifiers() {
    let ws = Workspace::new();
    let csv = rows(
        40,
        &[
            ("row_id", &|i| (i + 1).to_string()),
            ("name", &|i| format!("hive-{i:03}")),
        ],
        &alternating,
    );
    let data = data_step(&ws, &csv, &data_doc("label", ""));
    // Each name belongs to one row, so one class: it is an identifier, not a leak.
    assert_eq!(
        warnings(&data),
        pairs(&[("row_id", "identifier_like"), ("name", "identifier_like")])
    );
    assert!(message(&data, "identifier_like").starts_with("40 distinct values in 40 rows"));
}

#[test]
fn rows_repeated_in_the_file_are_a_warning_with_their_lines() {
    let ws = Workspace::new();
    let mut csv = rows(40, &[], &alternating);
    // Rows 3 and 10 (lines 5 and 12) again, as lines 42 and 43.
    let clean: Vec<String> = csv.lines().map(str::to_string).collect();
    csv.push_str(&format!("{}\n{}\n", clean[4], clean[11]));
    let data = data_step(&ws, &csv, &data_doc("label", "holdout: 0\n"));
    assert_eq!(warnings(&data), pairs(&[("", "duplicate_rows")]));
    assert!(
        message(&data, "duplicate_rows").starts_with(
            "2 rows repeat an earlier row in every column used (line 42 repeats line 5)"
        ),
        "{data}"
    );
}

#[test]
fn a_held_out_row_equal_to_a_training_row_is_possible_leakage() {
    let ws = Workspace::new();
    // Every one of 20 rows written twice in a row: with half held out, the seed's split
    // separates some pairs, which the duplicate warning alone would not say.
    let once = rows(20, &[], &alternating);
    let mut lines = once.lines();
    let mut csv = format!("{}\n", lines.next().unwrap());
    for line in lines {
        csv.push_str(&format!("{line}\n{line}\n"));
    }
    let data = data_step(&ws, &csv, &data_doc("label", "holdout: 0.5\n"));
    assert_eq!(
        warnings(&data),
        pairs(&[("", "duplicate_rows"), ("", "held_out_in_training")])
    );
    assert!(message(&data, "held_out_in_training").contains("possible leakage"));
    // Without held-out rows there is nothing to leak into.
    let data = data_step(&ws, &csv, &data_doc("label", "holdout: 0\n"));
    assert_eq!(warnings(&data), pairs(&[("", "duplicate_rows")]));
}

#[test]
fn an_input_that_alone_separates_the_classes_is_possible_leakage() {
    let ws = Workspace::new();
    // `score` is below 2 for class a and above 4 for class b; `code` names the class.
    let csv = rows(
        40,
        &[
            ("score", &|i| {
                format!("{}", if i % 2 == 0 { 1.0 } else { 4.5 } + i as f64 / 100.0)
            }),
            ("code", &|i| ["A", "B"][i % 2].to_string()),
        ],
        &alternating,
    );
    let data = data_step(&ws, &csv, &data_doc("label", ""));
    assert_eq!(
        warnings(&data),
        pairs(&[
            ("score", "separates_classes"),
            ("code", "separates_classes")
        ])
    );
    assert!(message(&data, "separates_classes").contains("classes of `label`"));
}

#[test]
fn an_input_that_follows_a_numeric_target_is_possible_leakage() {
    let ws = Workspace::new();
    // y = 3·x1 + 1 exactly, so `copy` = y − 1 correlates 1 with it; x2 does not.
    let y = |i: usize| 3.0 * ((7 * i % 40) as f64 / 4.0 + 0.3) + 1.0;
    let csv = rows(
        40,
        &[
            ("copy", &move |i| format!("{}", y(i) - 1.0)),
            ("y", &move |i| format!("{}", y(i))),
        ],
        &alternating,
    );
    let doc = data_doc("y", "inputs: [x2, copy]\n");
    let data = data_step(&ws, &csv, &doc);
    assert_eq!(
        warnings(&data),
        pairs(&[("copy", "correlates_with_target")])
    );
    assert!(message(&data, "correlates_with_target").starts_with("correlation 1.000 with"));
}

#[test]
fn a_class_under_a_tenth_of_the_rows_says_what_accuracy_hides() {
    let ws = Workspace::new();
    // Rows 5, 17 and 29 are class c: 3 of 40 (7.5 %), at x1 = 9.05, 10.05 and 1.05.
    let label = |i: usize| {
        if [5, 17, 29].contains(&i) {
            "c".to_string()
        } else {
            alternating(i)
        }
    };
    let data = data_step(&ws, &rows(40, &[], &label), &data_doc("label", ""));
    assert_eq!(warnings(&data), pairs(&[("label", "rare_class")]));
    assert_eq!(
        message(&data, "rare_class"),
        "class `c` has 3 of 40 rows (7.5 %, under 10.0 %): a model that never predicts it \
         still scores 92.5 % accuracy, so judge it by this class's recall in the confusion matrix"
    );
}

#[test]
fn a_value_far_from_the_training_mean_names_its_line() {
    let ws = Workspace::new();
    // x2 runs from 2 to 7.9 on 60 rows; row 4 (line 6) holds 900 instead. Held out, it
    // lies hundreds of training deviations away; in training it lifts the deviation
    // itself, yet one value among 48 still lies (48 − 1)/√48 ≈ 6.8 deviations out.
    let mut csv = rows(60, &[], &alternating);
    let mut lines: Vec<String> = csv.lines().map(str::to_string).collect();
    let cells: Vec<&str> = lines[5].split(',').collect();
    lines[5] = format!("{},900,{},{}", cells[0], cells[2], cells[3]);
    csv = lines.join("\n") + "\n";
    let data = data_step(&ws, &csv, &data_doc("label", ""));
    assert_eq!(warnings(&data), pairs(&[("x2", "far_from_mean")]));
    let text = message(&data, "far_from_mean");
    assert!(
        text.starts_with("1 value lies more than 6 standard deviations from the training mean")
            && text.contains("900.0 on line 6"),
        "{text}"
    );
}

#[test]
fn warnings_show_on_the_data_card_with_their_column_and_survive_a_rebuild() {
    let ws = Workspace::new();
    let csv = rows(40, &[("unit", &|_| "cm".into())], &alternating);
    let first = data_step(&ws, &csv, &data_doc("label", ""));
    let html = std::fs::read_to_string(ws.path("doc.html")).unwrap();
    assert!(
        html.contains("<p class=\"data-warning\"><code>unit</code>: every row read holds `cm`"),
        "the warning is on the card"
    );
    assert_eq!(
        html.matches("<svg class=\"histogram\"").count(),
        2,
        "x1 and x2"
    );
    let summary = ws.build_ok(&ws.path("doc.md"), &[]);
    let again = step(&summary, "d");
    assert_eq!(again["status"], "reused");
    assert_eq!(
        (&again["columns"], &again["warnings"]),
        (&first["columns"], &first["warnings"])
    );
}
