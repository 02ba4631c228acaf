//! Documents and data files that once crashed, hung, exhausted memory or silently
//! changed results (issue 11): each must now end quickly with a located error.

mod common;

use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

use common::Workspace;

/// `stet build DOC` in the workspace, without a JSON summary.
fn build(ws: &Workspace, document: &str, extra: &[&str]) -> Output {
    let mut args = vec!["build".to_string(), document.to_string()];
    args.extend(extra.iter().map(|s| s.to_string()));
    common::stet(&args, ws.dir.path())
}

/// Runs stet in the workspace and fails the test, killing stet, if it has not
/// finished within `limit`: a regression then fails instead of hanging the suite.
fn stet_within(ws: &Workspace, args: &[&str], limit: Duration) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_stet"))
        .args(args)
        .current_dir(ws.dir.path())
        .env_remove("STET_CACHE")
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the stet binary runs");
    let started = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if started.elapsed() > limit {
            child.kill().unwrap();
            child.wait().unwrap();
            panic!("stet {args:?} was still running after {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    child.wait_with_output().unwrap()
}

/// Long enough for a loaded machine, far shorter than the minute the slow inputs took.
const PROMPTLY: Duration = Duration::from_secs(10);

fn stderr(output: &Output) -> String {
    String::from_utf8_lossy(&output.stderr).into_owned()
}

/// The build was refused as unusable input, with no panic and no report.
fn assert_refused(ws: &Workspace, output: &Output, report: &str) {
    let text = stderr(output);
    assert_eq!(output.status.code(), Some(2), "{text}");
    assert!(!text.contains("panicked"), "{text}");
    assert!(!ws.path(report).exists(), "no report is written");
}

#[test]
fn an_error_past_column_65535_is_shown_with_its_line_cut_short() {
    let ws = Workspace::new();
    // 35,000 widths and a stray bracket put the YAML error at column
    // 9 + 3 · 35,000 + 3 = 105,012.
    let widths = "2, ".repeat(35_000);
    ws.write(
        "doc.md",
        &format!("```yaml net n\nhidden: [{widths}2]]\n```\n"),
    );
    let output = build(&ws, "doc.md", &[]);
    assert_refused(&ws, &output, "doc.html");
    let text = stderr(&output);
    assert!(text.contains("doc.md:2:105012"), "{text}");
    assert!(
        text.contains("\n    ... 2, 2") && text.contains("2, 2]]"),
        "{text}"
    );
    assert!(
        text.lines().all(|line| line.chars().count() < 400),
        "{text}"
    );
}

#[test]
fn a_bad_value_in_a_list_of_35000_is_named_in_short_lines() {
    let ws = Workspace::new();
    let widths = "2, ".repeat(35_000);
    ws.write(
        "doc.md",
        &format!("```yaml net n\nhidden: [{widths}x]\n```\n"),
    );
    let output = build(&ws, "doc.md", &[]);
    assert_refused(&ws, &output, "doc.html");
    let text = stderr(&output);
    assert!(
        text.contains("doc.md:2:1") && text.contains("hidden takes a list of layer widths"),
        "{text}"
    );
    assert!(
        text.lines().all(|line| line.chars().count() < 400),
        "{text}"
    );
}

#[test]
fn a_70000_character_unknown_key_is_shown_cut_short() {
    let ws = Workspace::new();
    let key = "k".repeat(70_000);
    ws.write(
        "doc.md",
        &format!("```yaml net n\nhidden: [4]\n{key}: 1\n```\n"),
    );
    let output = build(&ws, "doc.md", &[]);
    assert_refused(&ws, &output, "doc.html");
    let text = stderr(&output);
    assert!(text.contains("doc.md:3:70001"), "{text}");
    assert!(text.contains("\n    ...kkk"), "{text}");
    assert!(
        text.lines().all(|line| line.chars().count() < 400),
        "{text}"
    );
}

const SEEDED: &str = "---\ntitle: Seeded\nseed: 3\n---\n\nProse.\n\n```yaml data d\nfile: iris.csv\ntarget: species\n```\n\n```yaml net n\nhidden: [3]\n```\n\n```yaml train t\ndata: d\nnet: n\nepochs: 5\n```\n";

/// Each step's id and key: equal keys mean equal settings, seed included.
fn step_keys(summary: &serde_json::Value) -> Vec<(String, String)> {
    summary["steps"]
        .as_array()
        .unwrap()
        .iter()
        .map(|step| (step["id"].to_string(), step["key"].to_string()))
        .collect()
}

#[test]
fn a_byte_order_mark_before_the_front_matter_keeps_its_title_and_seed() {
    let ws = Workspace::new();
    let plain = ws.build_ok(&ws.write("plain.md", SEEDED), &[]);
    let marked = ws.build_ok(&ws.write("marked.md", &format!("\u{FEFF}{SEEDED}")), &[]);
    assert_eq!(step_keys(&marked), step_keys(&plain));
    let html = std::fs::read_to_string(ws.path("marked.html")).unwrap();
    assert!(
        html.contains("<title>Seeded</title>"),
        "the front matter is read"
    );
}

#[test]
fn a_document_with_carriage_return_line_ends_builds_like_one_with_line_feeds() {
    let ws = Workspace::new();
    let plain = ws.build_ok(&ws.write("plain.md", SEEDED), &[]);
    let old_mac = ws.build_ok(&ws.write("old-mac.md", &SEEDED.replace('\n', "\r")), &[]);
    assert_eq!(step_keys(&old_mac), step_keys(&plain));
}

#[test]
fn a_problem_in_a_marked_document_is_placed_as_an_editor_shows_it() {
    let ws = Workspace::new();
    // The misspelt kind's column is 4 in the plain document too: the mark takes none.
    ws.write("doc.md", "\u{FEFF}```yaml nett n\rhidden: [3]\r```\r");
    let output = build(&ws, "doc.md", &[]);
    assert_refused(&ws, &output, "doc.html");
    assert!(
        stderr(&output).contains("doc.md:1:4"),
        "{}",
        stderr(&output)
    );
}

#[test]
fn settings_nested_100000_deep_are_refused_at_once() {
    let ws = Workspace::new();
    let deep = format!("{}{}", "[".repeat(100_000), "]".repeat(100_000));
    ws.write("doc.md", &format!("```yaml net n\nhidden: {deep}\n```\n"));
    let output = stet_within(&ws, &["build", "doc.md"], PROMPTLY);
    assert_refused(&ws, &output, "doc.html");
    // The block's one level and 31 brackets pass; the 32nd bracket, column 9 + 31, does not.
    assert!(stderr(&output).contains("doc.md:2:40: the settings nest more than 32 levels"));

    ws.write(
        "front.md",
        &format!("---\nnotes: {deep}\n---\n\n```yaml net n\nhidden: [2]\n```\n"),
    );
    let output = stet_within(&ws, &["build", "front.md"], PROMPTLY);
    assert_refused(&ws, &output, "front.html");
    assert!(stderr(&output).contains("front.md:2:39: the settings nest more than 32 levels"));
}

/// Makes a named pipe at `relative` in the workspace; nothing ever writes to it.
fn named_pipe(ws: &Workspace, relative: &str) {
    let status = Command::new("mkfifo")
        .arg(ws.path(relative))
        .status()
        .expect("mkfifo runs");
    assert!(status.success());
}

#[test]
fn a_named_pipe_as_a_data_file_is_refused_by_build_status_and_clean() {
    let ws = Workspace::new();
    named_pipe(&ws, "fifo.csv");
    ws.write(
        "doc.md",
        "```yaml data d\nfile: fifo.csv\ntarget: species\n```\n",
    );
    for command in ["build", "status", "clean"] {
        let output = stet_within(&ws, &[command, "doc.md"], PROMPTLY);
        assert_refused(&ws, &output, "doc.html");
        let text = stderr(&output);
        assert!(text.contains("doc.md:2:1"), "{command}: {text}");
        assert!(text.contains("is not a regular file"), "{command}: {text}");
    }
}

#[test]
fn a_named_pipe_as_a_file_to_predict_is_refused() {
    let ws = Workspace::new();
    named_pipe(&ws, "new-rows.csv");
    ws.write(
        "doc.md",
        "```yaml data d\nfile: iris.csv\ntarget: species\n```\n\n```yaml net n\nhidden: [3]\n```\n\n```yaml train t\ndata: d\nnet: n\nepochs: 2\n```\n\n```yaml predict p\nmodel: t\nfile: new-rows.csv\n```\n",
    );
    let output = stet_within(&ws, &["build", "doc.md"], PROMPTLY);
    assert_refused(&ws, &output, "doc.html");
    assert!(
        stderr(&output).contains("doc.md:18:1"),
        "{}",
        stderr(&output)
    );
}

#[test]
fn a_named_pipe_as_the_document_is_refused_by_build_status_and_clean() {
    let ws = Workspace::new();
    named_pipe(&ws, "doc.md");
    for command in ["build", "status", "clean"] {
        let output = stet_within(&ws, &[command, "doc.md"], PROMPTLY);
        assert_eq!(output.status.code(), Some(2), "{command}");
        let text = stderr(&output);
        assert!(
            text.contains("doc.md: it is not a regular file"),
            "{command}: {text}"
        );
    }
    assert!(!ws.path("doc.html").exists());
}

#[test]
fn a_device_as_a_data_file_is_refused_even_outside_the_limits() {
    let ws = Workspace::new();
    ws.write(
        "doc.md",
        "```yaml data d\nfile: /dev/zero\ntarget: y\n```\n",
    );
    let args = ["build", "doc.md", "--allow-outside", "--max-file-mb", "1"];
    let output = stet_within(&ws, &args, PROMPTLY);
    assert_refused(&ws, &output, "doc.html");
    assert!(stderr(&output).contains("'/dev/zero': it is not a regular file"));
}

#[test]
fn a_symbolic_link_to_a_data_file_is_read() {
    let ws = Workspace::new();
    std::os::unix::fs::symlink(ws.path("iris.csv"), ws.path("linked.csv")).unwrap();
    let doc = ws.write(
        "doc.md",
        "```yaml data d\nfile: linked.csv\ntarget: species\n```\n",
    );
    ws.build_ok(&doc, &[]);
}

/// A CSV of `rows` rows: a text `id` unique to each row, a number `x` and a class `y`.
fn csv_with_ids(rows: usize) -> String {
    let mut csv = String::from("id,x,y\n");
    for i in 0..rows {
        let class = if i % 2 == 0 { "even" } else { "odd" };
        csv.push_str(&format!("row-{i:06},{}.5,{class}\n", i % 17));
    }
    csv
}

const DATA_ONLY: &str = "```yaml data d\nfile: rows.csv\ntarget: y\n```\n";

#[test]
fn a_text_column_of_100000_unique_ids_is_refused_by_name_and_count() {
    let ws = Workspace::new();
    ws.write("rows.csv", &csv_with_ids(100_000));
    ws.write("doc.md", DATA_ONLY);
    let output = stet_within(&ws, &["build", "doc.md"], PROMPTLY);
    let text = stderr(&output);
    assert_eq!(output.status.code(), Some(1), "{text}");
    assert!(
        text.contains("column `id` holds 100000 distinct texts, over the limit of 1000"),
        "{text}"
    );
    assert!(text.contains("`inputs:` without it"), "{text}");
}

#[test]
fn max_categories_sets_the_limit_on_distinct_texts() {
    let ws = Workspace::new();
    ws.write("rows.csv", &csv_with_ids(60));
    ws.write("doc.md", DATA_ONLY);
    let output = build(&ws, "doc.md", &["--max-categories", "59"]);
    assert_eq!(output.status.code(), Some(1));
    assert!(stderr(&output).contains("column `id` holds 60 distinct texts, over the limit of 59"));
    let output = build(&ws, "doc.md", &["--max-categories", "60"]);
    assert!(output.status.success(), "{}", stderr(&output));
}

#[test]
fn an_identifier_like_text_column_under_the_limit_is_flagged_on_the_data_card() {
    let ws = Workspace::new();
    ws.write("rows.csv", &csv_with_ids(60));
    ws.build_ok(&ws.write("doc.md", DATA_ONLY), &[]);
    let html = std::fs::read_to_string(ws.path("doc.html")).unwrap();
    assert_eq!(
        html.matches("like an identifier").count(),
        1,
        "only `id` is flagged"
    );
}

/// A regression table whose line 5 (row 4) holds `cell` in column `x`.
fn table_with(cell: &str) -> String {
    let mut csv = String::from("x,y\n");
    for i in 0..20 {
        let x = if i == 3 {
            cell.to_string()
        } else {
            format!("{i}.25")
        };
        csv.push_str(&format!("{x},{}\n", i % 5));
    }
    csv
}

const REGRESSION: &str = "```yaml data d\nfile: rows.csv\ntarget: y\nMISSING```\n\n```yaml net n\nhidden: [2]\n```\n\n```yaml train t\ndata: d\nnet: n\nepochs: 3\n```\n";

#[test]
fn an_infinite_cell_is_an_error_at_its_line_and_column() {
    let ws = Workspace::new();
    for cell in ["inf", "-Infinity", "1e999"] {
        ws.write("rows.csv", &table_with(cell));
        ws.write("doc.md", &REGRESSION.replace("MISSING", ""));
        let output = build(&ws, "doc.md", &[]);
        let text = stderr(&output);
        assert_eq!(output.status.code(), Some(1), "{text}");
        let expected = format!("rows.csv: line 5, column `x`: `{cell}` is not a finite number");
        assert!(text.contains(&expected), "{text}");
    }
}

#[test]
fn an_infinite_cell_is_dropped_with_missing_values_under_missing_drop() {
    let ws = Workspace::new();
    ws.write("rows.csv", &table_with("inf"));
    let doc = ws.write("doc.md", &REGRESSION.replace("MISSING", "missing: drop\n"));
    ws.build_ok(&doc, &[]);
    let html = std::fs::read_to_string(ws.path("doc.html")).unwrap();
    assert!(
        html.contains("20 rows read, 1 dropped"),
        "x stays numeric, its row left out"
    );
}

#[test]
fn values_that_overflow_scaling_are_an_error_naming_the_column() {
    let ws = Workspace::new();
    // Finite doubles whose sum (standard) or range (minmax) is past f64::MAX, 1.8e308.
    let mut csv = String::from("x,y\n");
    for i in 0..20 {
        let sign = if i % 2 == 0 { "" } else { "-" };
        csv.push_str(&format!("{sign}1.5e308,{}\n", i % 5));
    }
    ws.write("rows.csv", &csv);
    for scale in ["standard", "minmax"] {
        let settings = format!("scale: {scale}\n");
        ws.write("doc.md", &REGRESSION.replace("MISSING", &settings));
        let output = build(&ws, "doc.md", &[]);
        let text = stderr(&output);
        assert_eq!(output.status.code(), Some(1), "{text}");
        assert!(
            text.contains("column `x`: its values are too large to scale"),
            "{scale}: {text}"
        );
    }
}
