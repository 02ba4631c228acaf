//! A setting that would have no effect, or cannot work with the steps it reads, is an
//! error at its line when the document is read, and so is a column name the CSV
//! header lacks; repeated values in a sweep's lists or a compare's runs too (issue 11,
//! item 12). The data is Fisher's Iris (tests/data/iris.csv, see its README).

mod common;

use common::{Workspace, one_problem, problems, problems_in, stet};

/// An Iris document: data settings after `target`, the net's settings after `hidden`,
/// the train's after `net`, then `rest` (further steps). The data block's extra lines
/// start at line 4; with one data line and one net line the train's start at line 15.
fn document(data: &str, net: &str, train: &str, rest: &str) -> String {
    format!(
        "```yaml data iris\nfile: iris.csv\ntarget: species\n{data}\n```\n\n```yaml net n\nhidden: [4]\n{net}\n```\n\n```yaml train t\ndata: iris\nnet: n\n{train}\n```\n\n{rest}"
    )
}

#[test]
fn momentum_under_adam_is_an_error_at_its_line() {
    let (at, message, _) = one_problem(&document(
        "seed: 1",
        "init: xavier",
        "optimizer: adam\nmomentum: 0.5",
        "",
    ));
    assert_eq!(at, "16:1");
    assert!(
        message.contains("momentum applies to sgd only"),
        "{message}"
    );
}

#[test]
fn patience_without_held_out_rows_is_an_error_at_its_line() {
    let (at, message, _) = one_problem(&document("holdout: 0", "init: xavier", "patience: 10", ""));
    assert_eq!(at, "15:1");
    assert!(
        message.contains("data step 'iris' holds out no rows"),
        "{message}"
    );
}

#[test]
fn cross_entropy_with_a_linear_output_is_an_error_at_the_loss_line() {
    let (at, message, _) = one_problem(&document(
        "seed: 1",
        "output: linear",
        "loss: cross_entropy",
        "",
    ));
    assert_eq!(at, "15:1");
    assert!(message.contains("net 'n' has output: linear"), "{message}");
}

#[test]
fn rank_by_of_the_other_task_is_an_error_at_its_line() {
    let (at, message, help) = one_problem(&document(
        "task: classify",
        "init: xavier",
        "epochs: 5",
        "```yaml sweep s\nfrom: t\nrank_by: r2\nvary:\n  learning_rate: [0.1, 0.2]\n```\n",
    ));
    assert_eq!(at, "20:1");
    assert!(message.contains("rank_by: r2 is not a metric"), "{message}");
    assert_eq!(
        help.as_deref(),
        Some("metrics of this task: loss, accuracy, log_loss")
    );
}

#[test]
fn compare_metrics_of_the_other_task_are_an_error_at_their_line() {
    let (at, message, _) = one_problem(&document(
        "task: classify",
        "init: xavier",
        "epochs: 5",
        "```yaml compare c\nruns: [t]\nmetrics: [loss, r2]\n```\n",
    ));
    assert_eq!(at, "20:1");
    assert!(
        message.contains("metrics: r2 is not a metric of 't'"),
        "{message}"
    );
}

#[test]
fn a_misspelt_target_column_is_a_located_error_with_exit_2_and_a_suggestion() {
    let ws = Workspace::new();
    let text = "```yaml data iris\nfile: iris.csv\ntarget: specis\n```\n\n```yaml net n\nhidden: [4]\n```\n\n```yaml train t\ndata: iris\nnet: n\nepochs: 5\n```\n";
    let doc = ws.write("doc.md", text);
    let output = stet(&["build".into(), doc.display().to_string()], ws.dir.path());
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert_eq!(output.status.code(), Some(2), "{stderr}");
    assert!(
        stderr.contains("doc.md:3:1: target: 'iris.csv' has no column 'specis'"),
        "{stderr}"
    );
    assert!(stderr.contains("did you mean 'species'?"), "{stderr}");
    assert!(!ws.path("doc.html").exists());
}

#[test]
fn a_misspelt_input_column_points_at_the_inputs_line() {
    let (at, message, help) = one_problem(&document(
        "inputs: [sepal_length_cm, petal_widht_cm]",
        "init: xavier",
        "epochs: 5",
        "",
    ));
    assert_eq!(at, "4:1");
    assert_eq!(message, "inputs: 'iris.csv' has no column 'petal_widht_cm'");
    assert_eq!(help.as_deref(), Some("did you mean 'petal_width_cm'?"));
}

#[test]
fn a_predict_file_without_the_model_inputs_is_an_error_at_its_file_line() {
    let ws = Workspace::new();
    ws.write(
        "new.csv",
        "sepal_length_cm,sepal_width_cm,petal_length_cm\n5.1,3.5,1.4\n",
    );
    let found = problems_in(
        &ws,
        &document(
            "seed: 1",
            "init: xavier",
            "epochs: 5",
            "```yaml predict p\nmodel: t\nfile: new.csv\n```\n",
        ),
    );
    assert_eq!(found.len(), 1, "{found:?}");
    assert_eq!(found[0].0, "20:1");
    assert_eq!(
        found[0].1,
        "file: 'new.csv' lacks the input column(s) 'petal_width_cm' that model 't' reads"
    );
}

#[test]
fn a_repeated_value_in_a_vary_list_is_an_error() {
    let (at, message, _) = one_problem(&document(
        "seed: 1",
        "init: xavier",
        "epochs: 5",
        "```yaml sweep s\nfrom: t\nvary:\n  learning_rate: [0.1, 0.2, 0.1]\n```\n",
    ));
    assert_eq!(at, "20:1");
    assert_eq!(
        message,
        "vary: learning_rate lists 0.1 twice; each value is run once"
    );
}

#[test]
fn a_repeated_compare_run_is_an_error() {
    let (at, message, _) = one_problem(&document(
        "seed: 1",
        "init: xavier",
        "epochs: 5",
        "```yaml compare c\nruns: [t, t]\n```\n",
    ));
    assert_eq!(at, "19:1");
    assert!(message.contains("runs lists 't' twice"), "{message}");
}

// The rule for sweeps: a setting written in the base train is judged there, so a
// sweep may try adam from a base that sets momentum for sgd.
#[test]
fn a_sweep_may_try_adam_from_a_base_that_sets_momentum_for_sgd() {
    let found = problems(&document(
        "seed: 1",
        "init: xavier",
        "momentum: 0.9\nepochs: 5",
        "```yaml sweep s\nfrom: t\nvary:\n  optimizer: [sgd, adam]\n```\n",
    ));
    assert!(found.is_empty(), "{found:?}");
}

// The sweep answers for what it varies: momentum varied over adam-only combinations
// would have no effect in any of them.
#[test]
fn a_varied_momentum_that_meets_no_sgd_combination_is_an_error() {
    let (at, message, _) = one_problem(&document(
        "seed: 1",
        "init: xavier",
        "optimizer: adam\nepochs: 5",
        "```yaml sweep s\nfrom: t\nvary:\n  momentum: [0.5, 0.9]\n```\n",
    ));
    assert_eq!(at, "21:1");
    assert!(
        message.contains("vary: momentum has no effect here"),
        "{message}"
    );
}

#[test]
fn scale_target_on_a_classifying_data_step_is_an_error_at_its_line() {
    let (at, message, help) = one_problem(&document(
        "task: classify\nscale_target: standard",
        "init: xavier",
        "seed: 1",
        "",
    ));
    assert_eq!(at, "5:1");
    assert!(
        message.contains("scale_target scales regression targets"),
        "{message}"
    );
    assert!(help.unwrap().contains("remove scale_target"));
}
