//! Every document error points at its place: file, line and column, with what was
//! expected; CSV problems fail their step with the file line and column named.

mod common;

use common::{Workspace, one_problem, problems_in, step};
use stet::plan::PlanOptions;

const DATA: &str = "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n```yaml net n\nhidden: [4]\n```\n\n";

#[test]
fn a_yaml_syntax_error_points_at_its_line() {
    let (at, message, _) = one_problem(&format!(
        "{DATA}```yaml train t\ndata: iris\nnet: [n\nepochs: 3\n```\n"
    ));
    assert!(
        at.starts_with("12:") || at.starts_with("13:"),
        "{at} {message}"
    );
}

#[test]
fn an_unknown_step_kind_suggests_the_nearest() {
    let (at, message, help) = one_problem(&format!("{DATA}```yaml sweeep s\nfrom: t\n```\n"));
    assert_eq!(at, "10:4");
    assert!(message.contains("'sweeep' is not a step kind"));
    assert_eq!(help.as_deref(), Some("did you mean 'sweep'?"));
}

#[test]
fn an_unknown_setting_suggests_the_nearest() {
    let (at, message, help) = one_problem(&format!(
        "{DATA}```yaml train t\ndata: iris\nnet: n\nlearnig_rate: 0.1\n```\n"
    ));
    assert_eq!(at, "13:1");
    assert!(
        message.contains("unknown setting `learnig_rate`"),
        "{message}"
    );
    assert_eq!(help.as_deref(), Some("did you mean 'learning_rate'?"));
}

#[test]
fn a_wrong_type_points_at_its_line() {
    let (at, message, _) = one_problem(&format!(
        "{DATA}```yaml train t\ndata: iris\nnet: n\nepochs: many\n```\n"
    ));
    assert!(at.starts_with("13:"), "{at}");
    assert!(
        message.contains("epochs") || message.contains("invalid type"),
        "{message}"
    );
}

#[test]
fn an_unknown_precision_points_at_its_line_and_names_both() {
    let (at, message, _) = one_problem(&format!(
        "{DATA}```yaml train t\ndata: iris\nnet: n\nprecision: f16\n```\n"
    ));
    assert!(at.starts_with("13:"), "{at}");
    assert!(
        message.contains("f16") && message.contains("`f64` or `f32`"),
        "{message}"
    );
}

#[test]
fn out_of_range_values_each_point_at_their_line() {
    let ws = Workspace::new();
    let text = "```yaml data iris\nfile: iris.csv\ntarget: species\nholdout: 1.0\n```\n\n```yaml net n\nhidden: [4, 0]\n```\n\n```yaml train t\ndata: iris\nnet: n\nlearning_rate: -0.1\nbatch: 0\n```\n";
    let found = problems_in(&ws, text);
    let lines: Vec<&str> = found
        .iter()
        .map(|(at, _, _)| at.split(':').next().unwrap())
        .collect();
    assert_eq!(lines, ["4", "8", "14", "15"], "{found:?}");
    assert!(found[0].1.contains("holdout"));
    assert!(found[1].1.contains("at least one unit"));
    assert!(
        found[2]
            .1
            .contains("learning_rate must be a positive number, not -0.1")
    );
    assert!(found[3].1.contains("batch must be at least 1"));
}

#[test]
fn a_duplicate_id_names_the_first_definition() {
    let (at, message, _) = one_problem(&format!("{DATA}```yaml net n\nhidden: [2]\n```\n"));
    assert_eq!(at, "10:4");
    assert!(message.contains("already defined on line 6"), "{message}");
}

#[test]
fn references_to_missing_or_wrong_steps_point_at_the_setting() {
    let ws = Workspace::new();
    let found = problems_in(
        &ws,
        &format!("{DATA}```yaml train t\ndata: irsi\nnet: iris\n```\n"),
    );
    assert_eq!(found.len(), 2, "{found:?}");
    assert_eq!(found[0].0, "11:1");
    assert!(found[0].1.contains("no step is named 'irsi'"));
    assert_eq!(found[0].2.as_deref(), Some("did you mean 'iris'?"));
    assert_eq!(found[1].0, "12:1");
    assert!(
        found[1]
            .1
            .contains("'iris' is a data step, but net must name a net step")
    );
}

#[test]
fn a_missing_data_file_points_at_the_file_setting() {
    let (at, message, _) = one_problem("```yaml data d\ntarget: y\nfile: nowhere.csv\n```\n");
    assert_eq!(at, "3:1");
    assert!(message.contains("cannot read") && message.contains("nowhere.csv"));
}

#[test]
fn every_problem_is_reported_not_just_the_first() {
    let ws = Workspace::new();
    let found = problems_in(
        &ws,
        "```yaml data d\nfile: a.csv\ntarget: y\n```\n\n```yaml nett n\n```\n\n```yaml train t\ndata: d\nnet: n\nmomentum: 2\n```\n",
    );
    // The unknown kind, the missing file and the momentum; the reference to the
    // unreadable block is not reported again.
    assert_eq!(found.len(), 3, "{found:?}");
    let lines: Vec<&str> = found
        .iter()
        .map(|(at, _, _)| at.split(':').next().unwrap())
        .collect();
    assert_eq!(lines, ["2", "6", "12"]);
}

#[test]
fn a_misspelt_kind_with_the_data_file_present_is_a_located_error() {
    // The data file is present, so planning reaches the train step, whose net is
    // the unreadable block.
    let ws = Workspace::new();
    let found = problems_in(
        &ws,
        "```yaml data d\nfile: iris.csv\ntarget: species\n```\n\n```yaml nett n\n```\n\n```yaml train t\ndata: d\nnet: n\n```\n",
    );
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].0, "6:4");
    assert!(found[0].1.contains("'nett' is not a step kind"));
}

#[test]
fn empty_documents_and_documents_without_steps_are_errors() {
    let (at, message, _) = one_problem("\n\n");
    assert_eq!(at, "1:1");
    assert!(message.contains("empty"));
    let (_, message, _) = one_problem("# Notes\n\nJust prose.\n\n```yaml\na: 1\n```\n");
    assert!(message.contains("no steps"));
}

#[test]
fn invalid_utf8_points_at_the_first_bad_byte() {
    let ws = Workspace::new();
    let path = ws.path("doc.md");
    std::fs::write(&path, b"# Title\n\nbad \xff byte\n").unwrap();
    let Err(stet::Error::Document(errors)) = stet::load(&path, &PlanOptions::default()) else {
        panic!("invalid UTF-8 must be a document error")
    };
    assert!(errors.location(&errors.problems[0]).ends_with("doc.md:3:5"));
}

#[test]
fn a_data_path_outside_the_project_is_refused_unless_allowed() {
    let ws = Workspace::new();
    let outside = tempfile::tempdir().unwrap();
    std::fs::copy(ws.path("iris.csv"), outside.path().join("secret.csv")).unwrap();
    let text = format!(
        "```yaml data d\nfile: {}\ntarget: species\n```\n",
        outside.path().join("secret.csv").display()
    );
    let (at, message, _) = one_problem(&text);
    assert_eq!(at, "2:1");
    assert!(
        message.contains("outside this document's project"),
        "{message}"
    );
    // A symbolic link inside the project that leads outside is refused the same way.
    std::os::unix::fs::symlink(outside.path().join("secret.csv"), ws.path("link.csv")).unwrap();
    let linked = problems_in(
        &ws,
        "```yaml data d\nfile: link.csv\ntarget: species\n```\n",
    );
    assert!(linked[0].1.contains("outside"), "{linked:?}");
    let path = ws.write("doc.md", &text);
    let allowed = PlanOptions {
        allow_outside: true,
        ..PlanOptions::default()
    };
    assert!(stet::load(&path, &allowed).is_ok());
}

#[test]
fn limits_refuse_huge_layers_and_sweeps_with_their_flags_named() {
    let (at, message, help) = one_problem(&format!(
        "{}```yaml net wide\nhidden: [100000]\n```\n",
        DATA
    ));
    assert_eq!(at, "11:1");
    assert!(message.contains("wider than the limit"), "{message}");
    assert!(help.unwrap().contains("--max-layer-width"));
    let sweep = format!(
        "{DATA}```yaml train t\ndata: iris\nnet: n\n```\n\n```yaml sweep s\nfrom: t\nvary:\n  learning_rate: [{}]\n```\n",
        (1..=2100)
            .map(|i| format!("0.{i:04}"))
            .collect::<Vec<_>>()
            .join(", ")
    );
    let (at, message, _) = one_problem(&sweep);
    assert_eq!(at, "17:1");
    assert!(message.contains("2100 training runs"), "{message}");
}

/// CSV problems fail the data step (exit 1) with the file's line and column named.
fn data_step_error(csv: &str, settings: &str) -> String {
    let ws = Workspace::new();
    ws.write("bad.csv", csv);
    let doc = ws.write(
        "doc.md",
        &format!("```yaml data d\nfile: bad.csv\n{settings}```\n"),
    );
    let (output, summary) = ws.build(&doc, &[]);
    assert_eq!(
        output.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
    step(summary.as_ref().unwrap(), "d")["error"]
        .as_str()
        .unwrap()
        .to_string()
}

#[test]
fn csv_problems_name_the_file_line_and_column() {
    let ragged = data_step_error("a,b,y\n1,2,x\n3,4\n", "target: y\n");
    assert!(
        ragged.starts_with("bad.csv:") && ragged.contains("line 3"),
        "{ragged}"
    );
    let empty = data_step_error("", "target: y\n");
    assert!(empty.contains("empty"), "{empty}");
    let header_only = data_step_error("a,b,y\n", "target: y\n");
    assert!(
        header_only.contains("row") || header_only.contains("data"),
        "{header_only}"
    );
    let mut numbers = String::from("a,y\n");
    for i in 0..10 {
        numbers.push_str(&format!("{i},{}\n", if i % 2 == 0 { "p" } else { "q" }));
    }
    numbers.push_str("seven,p\n");
    let stray = data_step_error(&numbers, "target: y\n");
    assert!(
        stray.contains("line 12") && stray.contains("`a`") && stray.contains("seven"),
        "{stray}"
    );
    let missing = data_step_error("a,y\n1,p\n,q\n3,p\n4,q\n", "target: y\n");
    assert!(
        missing.contains("line 3") && missing.contains("`a`"),
        "{missing}"
    );
    let single = data_step_error("a,y\n1,p\n2,p\n3,p\n", "target: y\n");
    assert!(
        single.contains("one class") || single.contains("single"),
        "{single}"
    );
}

#[test]
fn a_document_problem_prints_its_location_source_line_marker_and_help_in_plain_ascii() {
    let ws = Workspace::new();
    let doc = ws.write(
        "doc.md",
        &format!("{DATA}```yaml train t\ndata: iris\nnet: n\nlearnig_rate: 0.1\n```\n"),
    );
    let output = common::stet(&["build".into(), doc.display().to_string()], ws.dir.path());
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8(output.stderr).unwrap();
    let lines: Vec<&str> = stderr.lines().collect();
    // The block starts on line 10, so `learnig_rate` is on line 13, column 1.
    let location = format!("{}:13:1: unknown setting", doc.display());
    assert!(lines[0].starts_with(&location), "{stderr}");
    assert_eq!(lines[1], "    learnig_rate: 0.1");
    assert!(lines[2].starts_with("    ^^^^"), "{stderr}");
    assert!(lines[3].starts_with("help: "), "{stderr}");
    assert!(
        stderr.is_ascii(),
        "not a terminal, so no colour or box drawing: {stderr}"
    );
}
