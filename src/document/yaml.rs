//! Deserialising a YAML block that sits inside the Markdown source, so that every
//! error is reported at its place in the document rather than in the block.

use serde::de::DeserializeOwned;
use serde_yaml::Value;

use super::problem::{Problem, nearest};

/// A YAML text and the byte offset where it starts in the document.
#[derive(Clone, Copy, Debug)]
pub struct Block<'a> {
    pub text: &'a str,
    pub offset: usize,
}

/// Deserialises `block` into `T` (whose serde derive rejects unknown keys); on failure
/// records one problem at the error's position, suggesting the nearest of `known` keys
/// for a misspelt one.
pub fn deserialize<T: DeserializeOwned>(
    block: Block<'_>,
    known: &[&str],
    problems: &mut Vec<Problem>,
) -> Option<T> {
    match serde_yaml::from_str::<T>(block.text) {
        Ok(value) => Some(value),
        Err(error) => {
            problems.push(problem_from(&error, block, known));
            None
        }
    }
}

/// Parses `block` as one YAML value; on a syntax error records a problem at its place.
pub fn parse_value(block: Block<'_>, problems: &mut Vec<Problem>) -> Option<Value> {
    match serde_yaml::from_str::<Value>(block.text) {
        Ok(value) => Some(value),
        Err(error) => {
            problems.push(problem_from(&error, block, &[]));
            None
        }
    }
}

/// The first YAML tag (`!name`) anywhere in `value`, with the value it marks. Settings
/// are plain values: serde would read `activation: !tanh` as the word `tanh`, and a
/// tag the document's reader cannot see should not change what a step computes.
pub fn first_tag(value: &Value) -> Option<(String, &Value)> {
    match value {
        Value::Tagged(tagged) => Some((tagged.tag.to_string(), &tagged.value)),
        Value::Sequence(items) => items.iter().find_map(first_tag),
        Value::Mapping(map) => map
            .iter()
            .find_map(|(key, value)| first_tag(key).or_else(|| first_tag(value))),
        _ => None,
    }
}

fn problem_from(error: &serde_yaml::Error, block: Block<'_>, known: &[&str]) -> Problem {
    let block_end = block.offset + block.text.len();
    let start = block.offset + error.location().map_or(0, |location| location.index());
    let line_end = block.text[start - block.offset..]
        .find('\n')
        .map_or(block_end, |i| start + i);
    // An error at the block's very end (an unclosed fence at the end of the file) gets
    // an empty span there: one byte more would point past the end of the document.
    let end = line_end.max(start + 1).min(block_end);
    let message = plain_message(error);
    let problem = Problem::new(start..end, message.clone());
    match unknown_key(&message) {
        Some(key) => match nearest(key, known.iter().copied()) {
            Some(suggestion) => problem.with_help(format!("did you mean '{suggestion}'?")),
            None => problem.with_help(format!("known settings here: {}", known.join(", "))),
        },
        None => problem,
    }
}

/// serde_yaml writes " at line L column C" into its messages, at the end and, for
/// scanner errors, also mid-sentence ("… at line 3 column 1, while scanning a simple
/// key at line 2 column 1"). The diagnostic already says where, in document
/// coordinates, so every block-relative position is dropped.
fn plain_message(error: &serde_yaml::Error) -> String {
    plain_text(&error.to_string())
}

/// A serde_yaml message without positions, in the document's words for settings.
pub(crate) fn plain_text(message: &str) -> String {
    let text = drop_positions(message);
    let text = text.replace("unknown field", "unknown setting");
    text.replacen("missing field", "missing setting", 1)
}

/// `text` without its " at line L column C" fragments.
fn drop_positions(text: &str) -> String {
    let digits = |s: &str| s.len() - s.trim_start_matches(|c: char| c.is_ascii_digit()).len();
    let mut kept = String::with_capacity(text.len());
    let mut rest = text;
    while let Some(i) = rest.find(" at line ") {
        kept.push_str(&rest[..i]);
        let after = &rest[i + " at line ".len()..];
        let line = digits(after);
        match after[line..].strip_prefix(" column ") {
            Some(tail) if line > 0 && digits(tail) > 0 => rest = &tail[digits(tail)..],
            _ => {
                kept.push_str(" at line ");
                rest = after;
            }
        }
    }
    kept.push_str(rest);
    kept
}

pub(crate) fn unknown_key(message: &str) -> Option<&str> {
    let rest = message.strip_prefix("unknown setting `")?;
    rest.split('`').next()
}

#[cfg(test)]
mod tests {
    use serde::Deserialize;

    use super::*;

    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)] // only whether it deserialises matters
    struct Settings {
        data: Option<String>,
    }

    fn problem_of(text: &str, offset: usize) -> Problem {
        let mut problems = Vec::new();
        let parsed: Option<Settings> =
            deserialize(Block { text, offset }, &["data"], &mut problems);
        assert!(parsed.is_none());
        assert_eq!(problems.len(), 1);
        problems.remove(0)
    }

    // Found by the `document` fuzz target: an unclosed fence at the end of the file
    // whose YAML breaks on its last byte gave a span one byte past the document.
    #[test]
    fn an_error_on_the_last_byte_stays_inside_the_block() {
        let text = "data:\nn`";
        let end = 20 + text.len();
        assert_eq!(problem_of(text, 20).span, end..end);
    }

    #[test]
    fn messages_carry_no_block_relative_positions() {
        let problem = problem_of("data:\nn`", 40);
        assert_eq!(
            problem.message,
            "could not find expected ':', while scanning a simple key"
        );
        assert_eq!(
            drop_positions("bad at line 2 column 7 at line x, at line 3 column 1"),
            "bad at line x,"
        );
    }

    #[test]
    fn an_error_marks_the_rest_of_its_line() {
        let problem = problem_of("dta: x\n", 3);
        assert_eq!(problem.span, 3..9);
        assert_eq!(problem.help.as_deref(), Some("did you mean 'data'?"));
    }
}
