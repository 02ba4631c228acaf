//! Issue 18, "Two builds side by side": `stet diff OLD NEW` on reports and `--json`
//! summaries: settings old → new, status, each metric's move, steps added and removed,
//! sweep combinations matched by their settings; exit 2 only when an input is not a
//! build.

mod common;

use common::{Workspace, stet};
use serde_json::Value;

/// A small classification experiment on Fisher's Iris data (`tests/data/iris.csv`),
/// with a sweep; `{rate}`, `{rates}` and `{extra}` are filled in by each test.
const TEMPLATE: &str = "# Iris\n\
\n\
```yaml data flowers\n\
file: iris.csv\n\
target: species\n\
holdout: 0.3\n\
```\n\
\n\
```yaml net small\n\
hidden: [4]\n\
```\n\
\n\
```yaml train base\n\
data: flowers\n\
net: small\n\
epochs: 60\n\
learning_rate: {rate}\n\
```\n\
\n\
```yaml sweep rates\n\
from: base\n\
vary:\n  momentum: [{rates}]\n\
```\n\
{extra}";

fn document(rate: &str, rates: &str, extra: &str) -> String {
    TEMPLATE
        .replace("{rate}", rate)
        .replace("{rates}", rates)
        .replace("{extra}", extra)
}

/// A second train step, present in only one of the builds.
const EXTRA_STEP: &str = "\n```yaml train wide\ndata: flowers\nnet: small\nepochs: 30\n```\n";

/// Builds `text` as `name.md`; returns its summary (also kept as `name.json`).
fn build(ws: &Workspace, name: &str, text: &str) -> Value {
    let path = ws.write(&format!("{name}.md"), text);
    let summary = ws.build_ok(&path, &[]);
    std::fs::copy(ws.path("summary.json"), ws.path(&format!("{name}.json"))).unwrap();
    summary
}

fn diff(ws: &Workspace, args: &[&str]) -> std::process::Output {
    let mut all = vec!["diff".to_string()];
    all.extend(args.iter().map(|arg| arg.to_string()));
    stet(&all, ws.dir.path())
}

/// `stet diff … --json OUT` parsed.
fn diff_json(ws: &Workspace, old: &str, new: &str) -> Value {
    let output = diff(ws, &[old, new, "--json", "comparison.json"]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    serde_json::from_slice(&std::fs::read(ws.path("comparison.json")).unwrap()).unwrap()
}

fn step<'a>(comparison: &'a Value, id: &str) -> &'a Value {
    comparison["steps"]
        .as_array()
        .unwrap()
        .iter()
        .find(|step| step["id"] == id)
        .unwrap_or_else(|| panic!("no step {id} in {comparison:#}"))
}

#[test]
fn a_changed_learning_rate_shows_the_setting_old_to_new_and_how_each_metric_moved() {
    let ws = Workspace::new();
    let old = build(&ws, "old", &document("0.05", "0.9", ""));
    let new = build(&ws, "new", &document("0.02", "0.9", ""));
    // A report on one side and a summary on the other.
    let comparison = diff_json(&ws, "old.html", "new.json");
    let base = step(&comparison, "base");
    let settings = base["settings"].as_array().unwrap();
    assert_eq!(settings.len(), 1, "{settings:?}");
    assert!(
        settings[0]["name"]
            .as_str()
            .unwrap()
            .ends_with("learning_rate")
    );
    assert_eq!(
        (&settings[0]["old"], &settings[0]["new"]),
        (&0.05.into(), &0.02.into())
    );
    assert_eq!(base["status"]["new"], "ran");
    let old_base = &old["steps"][2];
    let new_base = &new["steps"][2];
    let accuracy = base["metrics"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["rows"] == "test" && m["name"] == "accuracy")
        .unwrap();
    let (was, is) = (
        old_base["metrics"]["test"]["accuracy"].as_f64().unwrap(),
        new_base["metrics"]["test"]["accuracy"].as_f64().unwrap(),
    );
    assert_eq!(accuracy["old"].as_f64(), Some(was));
    assert_eq!(accuracy["new"].as_f64(), Some(is));
    assert_eq!(accuracy["difference"].as_f64(), Some(is - was));
    // The new build's held-out interval decides whether the move is within noise.
    let (low, high) = (
        new_base["interval"]["accuracy"][0].as_f64().unwrap(),
        new_base["interval"]["accuracy"][1].as_f64().unwrap(),
    );
    assert_eq!(
        accuracy["within_new_interval"].as_bool(),
        Some(low <= was && was <= high)
    );
    assert!(
        step(&comparison, "flowers")["settings"]
            .as_array()
            .unwrap()
            .is_empty()
    );

    let text = diff(&ws, &["old.json", "new.html"]);
    assert!(text.status.success());
    let out = String::from_utf8_lossy(&text.stdout);
    assert!(out.contains("train base"), "{out}");
    assert!(out.contains("learning_rate  0.05  →  0.02"), "{out}");
    assert!(
        out.lines()
            .any(|line| line.trim_start().starts_with("test   accuracy")),
        "{out}"
    );
    assert!(!out.contains('\u{1b}'), "no colour when piped");
}

#[test]
fn the_metric_table_lines_up_its_columns() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", ""));
    build(&ws, "new", &document("0.02", "0.9", ""));
    let text = diff(&ws, &["old.json", "new.json"]);
    let out = String::from_utf8_lossy(&text.stdout);
    let table: Vec<&str> = out
        .lines()
        .skip_while(|line| *line != "train base")
        .skip_while(|line| !line.trim_start().starts_with("rows"))
        .take_while(|line| !line.is_empty())
        .collect();
    assert!(table.len() > 2, "{out}");
    // Right-aligned numbers: the "new" column ends at the same place on every line.
    let end_of_new = |line: &str| line.find("new").map(|at| at + 3);
    let header_end = end_of_new(table[0]).unwrap();
    for line in &table[1..] {
        let cells: Vec<&str> = line.split_whitespace().collect();
        let new_cell = cells[3];
        let at = line
            .match_indices(new_cell)
            .nth(if cells[2] == new_cell { 1 } else { 0 });
        assert_eq!(
            at.map(|(at, _)| at + new_cell.len()),
            Some(header_end),
            "{line}"
        );
    }
}

#[test]
fn steps_added_and_removed_are_listed() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", EXTRA_STEP));
    build(&ws, "new", &document("0.05", "0.9", ""));
    let comparison = diff_json(&ws, "old.json", "new.json");
    assert_eq!(comparison["removed"], serde_json::json!(["wide"]));
    assert_eq!(comparison["added"], serde_json::json!([]));
    let reversed = diff(&ws, &["new.json", "old.json"]);
    let out = String::from_utf8_lossy(&reversed.stdout);
    assert!(out.contains("steps added: wide"), "{out}");
}

#[test]
fn sweep_combinations_are_matched_by_their_settings() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9, 0.5", ""));
    // One value kept, one dropped, one new, in another order.
    build(&ws, "new", &document("0.05", "0.0, 0.9", ""));
    let comparison = diff_json(&ws, "old.json", "new.json");
    let combinations = &step(&comparison, "rates")["combinations"];
    let matched = combinations["matched"].as_array().unwrap();
    assert_eq!(matched.len(), 1);
    assert_eq!(matched[0]["settings"]["momentum"], "0.9");
    assert_eq!(
        matched[0]["status"]["new"], "reused",
        "an equal run is cached"
    );
    let unchanged = matched[0]["metrics"].as_array().unwrap();
    assert!(
        unchanged.iter().all(|m| m["difference"] == 0.0),
        "{unchanged:?}"
    );
    assert_eq!(combinations["added"][0]["momentum"], "0.0");
    assert_eq!(combinations["removed"][0]["momentum"], "0.5");
}

#[test]
fn two_unrelated_documents_say_that_no_step_matched() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", ""));
    let other = "```yaml net lonely\nhidden: [2]\n```\n";
    build(&ws, "other", other);
    let output = diff(&ws, &["old.html", "other.html"]);
    assert_eq!(output.status.code(), Some(0));
    let out = String::from_utf8_lossy(&output.stdout);
    assert!(out.contains("no step matched"), "{out}");
}

#[test]
fn an_old_value_inside_the_new_summarys_interval_is_said_to_be_within_it() {
    let ws = Workspace::new();
    let old = build(&ws, "old", &document("0.05", "0.9", ""));
    let mut new = build(&ws, "new", &document("0.02", "0.9", ""));
    let was = old["steps"][2]["metrics"]["test"]["accuracy"]
        .as_f64()
        .unwrap();
    // The build's own summary gives held-out intervals, so the diff judges against them.
    let moves = diff_json(&ws, "old.json", "new.json");
    let judged = |rows: &str| {
        step(&moves, "base")["metrics"]
            .as_array()
            .unwrap()
            .iter()
            .find(|m| m["rows"] == rows && m["name"] == "accuracy")
            .unwrap()["within_new_interval"]
            .clone()
    };
    assert!(judged("test").is_boolean(), "{moves}");
    assert!(
        judged("train").is_null(),
        "training scores carry no interval"
    );
    // An interval around the old value.
    new["steps"][2]["interval"] =
        serde_json::json!({"level": 0.95, "accuracy": [was - 0.1, was + 0.1]});
    ws.write("new.json", &new.to_string());
    let comparison = diff_json(&ws, "old.json", "new.json");
    let accuracy = step(&comparison, "base")["metrics"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["rows"] == "test" && m["name"] == "accuracy")
        .unwrap()
        .clone();
    assert_eq!(accuracy["within_new_interval"], true);
    let text = diff(&ws, &["old.json", "new.json"]);
    assert!(String::from_utf8_lossy(&text.stdout).contains("within the new interval"));
}

#[test]
fn an_input_that_is_not_a_build_exits_2_and_names_it() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", ""));
    ws.write(
        "page.html",
        &"<html><body><p>junk</p></body></html>".repeat(100_000),
    );
    ws.write("other.json", r#"{"rows": [1, 2, 3]}"#);
    let html = std::fs::read_to_string(ws.path("old.html")).unwrap();
    let cut = html.rfind("</script>").unwrap() - 100;
    ws.write("cut.html", &html[..cut]);
    for (input, why) in [
        ("page.html", "carries no stet experiment"),
        ("other.json", "no steps"),
        ("cut.html", "damaged"),
    ] {
        let output = diff(&ws, &["old.json", input, "--json", "out.json"]);
        assert_eq!(output.status.code(), Some(2), "{input}");
        let message = String::from_utf8_lossy(&output.stderr);
        assert!(
            message.contains(&format!(
                "{input} is neither a stet report nor a --json summary"
            )),
            "{message}"
        );
        assert!(message.contains(why), "{message}");
        assert!(!ws.path("out.json").exists(), "nothing written");
    }
}

#[test]
fn the_html_comparison_is_valid_html_in_the_reports_look() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", EXTRA_STEP));
    build(&ws, "new", &document("0.02", "0.9, 0.5", ""));
    let output = diff(&ws, &["old.html", "new.html", "--html", "changes.html"]);
    assert!(
        output.status.success(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    let html = std::fs::read_to_string(ws.path("changes.html")).unwrap();
    for token in html5gum::Tokenizer::new(html.as_str()) {
        if let html5gum::Token::Error(error) = token.unwrap() {
            panic!("invalid HTML: {error:?}");
        }
    }
    // The report's stylesheet and card layout, the changed setting and the removed step.
    assert!(html.contains(".masthead"));
    assert!(html.contains("class=\"step\" id=\"step-base\""));
    assert!(html.contains("0.05 → 0.02"), "{html}");
    assert!(html.contains("Steps removed: wide"));
    assert!(html.contains("combination added: momentum=0.5"));
}

#[test]
fn an_output_over_one_of_the_inputs_is_refused() {
    let ws = Workspace::new();
    build(&ws, "old", &document("0.05", "0.9", ""));
    build(&ws, "new", &document("0.02", "0.9", ""));
    let before = std::fs::read(ws.path("new.json")).unwrap();
    let output = diff(&ws, &["old.json", "new.json", "--json", "new.json"]);
    assert_eq!(output.status.code(), Some(2));
    assert_eq!(std::fs::read(ws.path("new.json")).unwrap(), before);
}
