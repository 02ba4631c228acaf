//! A value that does not fit its setting gets a message in the document's words: the
//! setting's name, what it accepts and what was written, at the setting's line (issue
//! 11, item 13), never the parser's vocabulary (untagged enums, YAML tags).

mod common;

use common::one_problem;

/// Iris (tests/data/iris.csv) with a net and a train step whose settings are appended;
/// line 11 is the train step's first setting after `net: n`.
fn with_train_setting(setting: &str) -> String {
    format!(
        "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n```yaml net n\nhidden: [4]\n```\n\n```yaml train t\ndata: iris\nnet: n\n{setting}\n```\n"
    )
}

/// The same document with the net step's second line replaced (line 7).
fn with_net_setting(setting: &str) -> String {
    format!(
        "```yaml data iris\nfile: iris.csv\ntarget: species\n```\n\n```yaml net n\n{setting}\n```\n\n```yaml train t\ndata: iris\nnet: n\n```\n"
    )
}

#[test]
fn a_negative_batch_names_the_setting_and_what_it_takes_at_its_line() {
    let (at, message, _) = one_problem(&with_train_setting("batch: -1"));
    assert_eq!(at, "13:1");
    assert_eq!(
        message,
        "batch takes a whole number of rows, 1 or more, or the word full, not -1"
    );
}

#[test]
fn a_number_as_target_names_the_setting_and_suggests_quotes() {
    let (at, message, help) = one_problem(
        "```yaml data iris\nfile: iris.csv\ntarget: 5\n```\n\n```yaml net n\nhidden: [4]\n```\n",
    );
    assert_eq!(at, "3:1");
    assert_eq!(
        message,
        "target takes a column name, or a list of column names, not 5"
    );
    assert!(help.unwrap().contains("target: \"5\""));
}

#[test]
fn an_activation_in_brackets_says_it_takes_one_word() {
    let (at, message, help) = one_problem(&with_net_setting("activation: [tanh]"));
    assert_eq!(at, "7:1");
    assert_eq!(
        message,
        "activation takes one word (`sigmoid`, `tanh`, `relu`, `leaky_relu` or `linear`), not a list"
    );
    assert_eq!(
        help.as_deref(),
        Some("write the word without brackets: activation: tanh")
    );
}

#[test]
fn a_yaml_tag_on_an_activation_is_refused_at_its_line() {
    let (at, message, help) = one_problem(&with_net_setting("activation: !tanh"));
    assert_eq!(at, "7:1");
    assert!(message.contains("YAML tags such as `!tanh`"), "{message}");
    assert_eq!(
        help.as_deref(),
        Some("write the value itself: activation: tanh")
    );
}

#[test]
fn a_misspelt_activation_offers_hidden_activations_and_the_nearest() {
    let (at, message, help) = one_problem(&with_net_setting("activation: tahn"));
    assert_eq!(at, "7:1");
    assert_eq!(
        message,
        "activation takes one of `sigmoid`, `tanh`, `relu`, `leaky_relu` or `linear`, not 'tahn'"
    );
    assert_eq!(help.as_deref(), Some("did you mean 'tanh'?"));
}

#[test]
fn a_word_that_is_not_a_number_names_the_setting() {
    let (at, message, _) = one_problem(&with_train_setting("epochs: many"));
    assert_eq!(at, "13:1");
    assert_eq!(
        message,
        "epochs takes a whole number of epochs, 1 or more, not 'many'"
    );
}

#[test]
fn a_bad_value_in_a_sweep_names_the_setting_and_the_combination() {
    let text = format!(
        "{}\n```yaml sweep s\nfrom: t\nvary:\n  activation: [tanh, tahn]\n```\n",
        with_train_setting("epochs: 5")
    );
    let (at, message, _) = one_problem(&text);
    assert_eq!(at, "18:1");
    assert_eq!(
        message,
        "with activation = tahn: activation takes one of `sigmoid`, `tanh`, `relu`, `leaky_relu` or `linear`, not 'tahn'"
    );
}

#[test]
fn a_block_that_is_a_list_says_settings_are_name_value_lines() {
    let (at, message, _) = one_problem(&with_net_setting("hidden: [4]\n```\n\n```yaml net m\n- 4"));
    assert_eq!(at, "11:1");
    assert_eq!(
        message,
        "settings are written as `name: value` lines, not as a list"
    );
}
