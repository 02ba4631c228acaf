//! What each setting accepts, in the document's words, for the message about a value
//! that does not fit: the setting's name, what it takes, and what was written instead,
//! never the parser's own vocabulary (untagged enums, YAML tags, struct names).

use std::sync::LazyLock;

use serde_yaml::Value;

use super::compare::ChartChoice;
use super::model_use::ExportFormat;
use super::sweep::{MetricName, value_text};
use super::{LossChoice, OptimizerKind, OutputChoice};
use crate::data::{Missing, Scale, Task};
use crate::document::names::{word, words};
use crate::document::problem::nearest;
use crate::nn::{Activation, Init, Precision};

/// The activations a hidden layer may use: softmax is an output activation only.
static HIDDEN_ACTIVATIONS: LazyLock<Vec<&str>> = LazyLock::new(|| {
    let softmax = word(&Activation::Softmax);
    words::<Activation>()
        .iter()
        .copied()
        .filter(|activation| *activation != softmax)
        .collect()
});

/// The shape of value a setting takes.
enum Accepts {
    /// One word of a fixed list.
    Word(&'static [&'static str]),
    /// A list of words from a fixed list.
    Words(&'static [&'static str]),
    /// Anything else, described for the message.
    Described(&'static str),
}

/// What `setting` takes. Settings of the same name in different step kinds (`seed`,
/// `file`, `write`) take the same shape of value, so the name is enough.
fn accepts(setting: &str) -> Option<Accepts> {
    use Accepts::{Described, Word, Words};
    Some(match setting {
        "activation" => Word(HIDDEN_ACTIVATIONS.as_slice()),
        "output" => Word(words::<OutputChoice>()),
        "init" => Word(words::<Init>()),
        "loss" => Word(words::<LossChoice>()),
        "optimizer" => Word(words::<OptimizerKind>()),
        "precision" => Word(words::<Precision>()),
        "format" => Word(words::<ExportFormat>()),
        "task" => Word(words::<Task>()),
        "scale" | "scale_target" => Word(words::<Scale>()),
        "missing" => Word(words::<Missing>()),
        "rank_by" => Word(words::<MetricName>()),
        "chart" => Word(words::<ChartChoice>()),
        "metrics" => Words(words::<MetricName>()),
        "file" => Described("a file path, relative to the document's folder"),
        "write" => Described("a file path to write, relative to the document's folder"),
        "target" => Described("a column name, or a list of column names"),
        "inputs" => Described("a list of column names"),
        "holdout" => Described("the fraction of rows held out, from 0 up to (not including) 1"),
        "folds" => Described("a whole number of folds, 2 or more"),
        "validation" => Described(
            "the fraction of training rows set aside for patience and sweep ranking, above 0 and below 1",
        ),
        "seed" => Described("a whole number, 0 or more"),
        "hidden" => Described(
            "a list of layer widths, each a whole number of 1 or more, such as [8] or [16, 8]",
        ),
        "data" => Described("the id of a data step"),
        "net" => Described("the id of a net step"),
        "from" => Described("the id of a train step"),
        "model" => Described("the id of a train step, or of a sweep (its best combination)"),
        "runs" => Described("a list of train and sweep ids"),
        "learning_rate" => Described("a positive number"),
        "momentum" => Described("a number from 0 up to (not including) 1"),
        "batch" => Described("a whole number of rows, 1 or more, or the word full"),
        "epochs" => Described("a whole number of epochs, 1 or more"),
        "target_loss" => Described("a loss value, 0 or more"),
        "patience" => Described("a whole number of epochs, 1 or more"),
        "l2" => Described("a number, 0 or more"),
        "shuffle" | "log_scale" | "importance" => Described("true or false"),
        "importance_repeats" => Described("a whole number of shuffles per input, 1 or more"),
        "vary" => Described("a map from train and net settings to lists of values"),
        "repeat" => Described("a whole number of seeds, 1 or more"),
        _ => return None,
    })
}

/// What `setting` takes, in the words messages use, unless it is one word (or a list
/// of words) from a fixed list; the schema gives it to editors as the setting's help.
pub(crate) fn described(setting: &str) -> Option<&'static str> {
    match accepts(setting)? {
        Accepts::Described(what) => Some(what),
        Accepts::Word(_) | Accepts::Words(_) => None,
    }
}

/// Settings whose values are names (of columns, files or steps).
const NAMES: &[&str] = &[
    "file", "write", "target", "inputs", "data", "net", "from", "model", "runs",
];

/// The message and optional help for `value` written for `setting`, which did not fit;
/// `None` when the setting is not one stet knows.
pub(crate) fn misfit(setting: &str, value: &Value) -> Option<(String, Option<String>)> {
    let accepted = accepts(setting)?;
    Some(match accepted {
        Accepts::Word(words) => misfit_word(setting, words, value),
        Accepts::Words(words) => misfit_words(setting, words, value),
        Accepts::Described(what) => (
            format!("{setting} takes {what}, not {}", given(value)),
            quoting_help(setting, value),
        ),
    })
}

fn misfit_word(setting: &str, words: &[&str], value: &Value) -> (String, Option<String>) {
    let list = word_list(words);
    match value {
        Value::String(word) => (
            format!("{setting} takes one of {list}, not '{word}'"),
            suggestion(word, words),
        ),
        Value::Sequence(items) if items.len() == 1 => (
            format!("{setting} takes one word ({list}), not a list"),
            Some(format!(
                "write the word without brackets: {setting}: {}",
                value_text(&items[0])
            )),
        ),
        other => (
            format!("{setting} takes one of {list}, not {}", given(other)),
            None,
        ),
    }
}

fn misfit_words(setting: &str, words: &[&str], value: &Value) -> (String, Option<String>) {
    let list = word_list(words);
    let Value::Sequence(items) = value else {
        return (
            format!(
                "{setting} takes a list of words from {list}, not {}",
                given(value)
            ),
            Some(format!("write a list, such as {setting}: [{}]", words[0])),
        );
    };
    let stray = items
        .iter()
        .find(|item| item.as_str().is_none_or(|word| !words.contains(&word)));
    match stray {
        Some(Value::String(word)) => (
            format!("{setting} lists words from {list}; '{word}' is not one of them"),
            suggestion(word, words),
        ),
        Some(other) => (
            format!("{setting} lists words from {list}, not {}", given(other)),
            None,
        ),
        None => (format!("{setting} lists words from {list}"), None),
    }
}

/// `a`, `b` or `c`.
fn word_list(words: &[&str]) -> String {
    let quoted: Vec<String> = words.iter().map(|word| format!("`{word}`")).collect();
    match quoted.split_last() {
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{} or {last}", rest.join(", ")),
        None => String::new(),
    }
}

fn suggestion(word: &str, words: &[&str]) -> Option<String> {
    nearest(word, words.iter().copied()).map(|near| format!("did you mean '{near}'?"))
}

/// YAML reads `target: 5` as a number and `target: yes` as a boolean; a name that
/// looks like one needs quotes.
fn quoting_help(setting: &str, value: &Value) -> Option<String> {
    let looks_like_a_name = matches!(value, Value::Number(_) | Value::Bool(_));
    (NAMES.contains(&setting) && looks_like_a_name).then(|| {
        let text = value_text(value);
        format!(
            "a name that YAML reads as a number or true/false needs quotes: {setting}: \"{text}\""
        )
    })
}

/// A written value as a message quotes it.
fn given(value: &Value) -> String {
    match value {
        Value::String(text) => format!("'{text}'"),
        Value::Null => "an empty value".into(),
        Value::Sequence(_) => format!("the list {}", value_text(value)),
        Value::Mapping(_) => format!("the map {}", value_text(value)),
        other => value_text(other),
    }
}

#[cfg(test)]
mod tests {
    use serde::de::DeserializeOwned;

    use super::*;

    /// The words serde's own message lists for an enum ("expected `a` or `b`",
    /// "expected one of `a`, `b`, `c`"), read from parsing a non-word.
    fn serde_words<T: DeserializeOwned>() -> Vec<String> {
        let error = serde_yaml::from_str::<T>("not_a_word").err().unwrap();
        let message = error.to_string();
        let list = message.split("expected ").nth(1).unwrap();
        list.split('`')
            .skip(1)
            .step_by(2)
            .map(str::to_string)
            .collect()
    }

    fn words_of<T: DeserializeOwned>() -> Vec<String> {
        words::<T>().iter().map(|w| w.to_string()).collect()
    }

    // The words messages offer are read from the derives; serde's own message, the
    // independent witness, must list the same.
    #[test]
    fn the_offered_words_are_the_words_the_settings_read() {
        assert_eq!(serde_words::<Activation>(), words_of::<Activation>());
        assert_eq!(serde_words::<OutputChoice>(), words_of::<OutputChoice>());
        assert_eq!(serde_words::<Init>(), words_of::<Init>());
        assert_eq!(serde_words::<LossChoice>(), words_of::<LossChoice>());
        assert_eq!(serde_words::<OptimizerKind>(), words_of::<OptimizerKind>());
        assert_eq!(serde_words::<Precision>(), words_of::<Precision>());
        assert_eq!(serde_words::<Task>(), words_of::<Task>());
        assert_eq!(serde_words::<Scale>(), words_of::<Scale>());
        assert_eq!(serde_words::<Missing>(), words_of::<Missing>());
        assert_eq!(serde_words::<MetricName>(), words_of::<MetricName>());
        assert_eq!(serde_words::<ChartChoice>(), words_of::<ChartChoice>());
        assert_eq!(serde_words::<ExportFormat>(), words_of::<ExportFormat>());
        let mut hidden = HIDDEN_ACTIVATIONS.clone();
        hidden.push("softmax");
        hidden.sort();
        let mut all = words::<Activation>().to_vec();
        all.sort();
        assert_eq!(hidden, all);
    }

    #[test]
    fn a_misspelt_activation_offers_only_hidden_activations() {
        let (message, help) = misfit("activation", &Value::from("softmx")).unwrap();
        assert!(!message.contains("softmax"), "{message}");
        assert_eq!(help, None);
        let (_, help) = misfit("activation", &Value::from("tahn")).unwrap();
        assert_eq!(help.as_deref(), Some("did you mean 'tanh'?"));
    }
}
