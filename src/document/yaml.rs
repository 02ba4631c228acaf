//! Deserialising a YAML block that sits inside the Markdown source, so that every
//! error is reported at its place in the document rather than in the block.

use serde::de::DeserializeOwned;
use serde_yaml::Value;

use super::names::fields;
use super::problem::{Problem, nearest};

/// A YAML text and the byte offset where it starts in the document.
#[derive(Clone, Copy, Debug)]
pub struct Block<'a> {
    pub text: &'a str,
    pub offset: usize,
}

/// Deserialises `block` into `T` (whose serde derive rejects unknown keys); on failure
/// records one problem at the error's position, suggesting the nearest of the keys
/// `T` reads for a misspelt one.
pub(crate) fn deserialize<T: DeserializeOwned>(
    block: Block<'_>,
    problems: &mut Vec<Problem>,
) -> Option<T> {
    if !shallow_enough(block, problems) {
        return None;
    }
    match serde_yaml::from_str::<T>(block.text) {
        Ok(value) => Some(value),
        Err(error) => {
            problems.push(problem_from(&error, block, fields::<T>()));
            None
        }
    }
}

/// Parses `block` as one YAML value; on a syntax error records a problem at its place.
pub(crate) fn parse_value(block: Block<'_>, problems: &mut Vec<Problem>) -> Option<Value> {
    if !shallow_enough(block, problems) {
        return None;
    }
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
pub(crate) fn first_tag(value: &Value) -> Option<(String, &Value)> {
    match value {
        Value::Tagged(tagged) => Some((tagged.tag.to_string(), &tagged.value)),
        Value::Sequence(items) => items.iter().find_map(first_tag),
        Value::Mapping(map) => map
            .iter()
            .find_map(|(key, value)| first_tag(key).or_else(|| first_tag(value))),
        _ => None,
    }
}

/// Whether `block` nests within [`MAX_NESTING`]; records a problem where it does not.
fn shallow_enough(block: Block<'_>, problems: &mut Vec<Problem>) -> bool {
    let Some(at) = first_too_deep(block.text) else {
        return true;
    };
    let start = block.offset + at;
    problems.push(
        Problem::new(
            start..start + 1,
            format!("the settings nest more than {MAX_NESTING} levels deep here"),
        )
        .with_help("settings nest a few levels at most: a list, or a map of lists"),
    );
    false
}

/// Deepest nesting of lists and maps a block may have. Settings nest two or three
/// levels; the YAML parser's time grows with the square of the depth (100,000 nested
/// brackets took a minute), so deeper text is refused before it is parsed.
pub(crate) const MAX_NESTING: usize = 32;

/// The byte offset in `text` where nesting first goes deeper than [`MAX_NESTING`],
/// found in one pass over the raw text: block levels by indentation (and `- ` entries
/// opened on one line), plus open flow brackets outside quotes and comments. It may
/// count a level too many in odd places (a multi-line quoted text), never too few for
/// the brackets and indentation that make the parser slow.
fn first_too_deep(text: &str) -> Option<usize> {
    let mut blocks: Vec<usize> = Vec::new();
    let mut flow = 0usize;
    // Inside a `|` or `>` text: lines indented more than this are its content.
    let mut literal_parent: Option<usize> = None;
    let mut line_start = 0;
    for line in text.split_inclusive('\n') {
        let start = line_start;
        line_start += line.len();
        let indent = line.len() - line.trim_start_matches(' ').len();
        let content = line[indent..].trim_end();
        if let Some(parent) = literal_parent {
            if content.is_empty() || indent > parent {
                continue;
            }
            literal_parent = None;
        }
        if content.is_empty() || content.starts_with('#') {
            continue;
        }
        let mut column = indent;
        if flow == 0 {
            blocks.retain(|&open| open < indent);
            blocks.push(indent);
            // `- - x` opens a level per dash.
            while let Some(after) = line[column..].strip_prefix("- ") {
                let next = column + 2 + (after.len() - after.trim_start_matches(' ').len());
                blocks.push(next);
                column = next;
            }
            if blocks.len() > MAX_NESTING {
                return Some(start + column);
            }
        }
        if let Some(at) = scan_flow(&line[column..], &mut flow, blocks.len()) {
            return Some(start + column + at);
        }
        if flow == 0 && opens_literal(content) {
            literal_parent = Some(indent);
        }
    }
    None
}

/// Follows flow brackets through `text` (one line), skipping quoted texts and a
/// comment; returns where the depth first passes [`MAX_NESTING`].
fn scan_flow(text: &str, flow: &mut usize, blocks: usize) -> Option<usize> {
    let mut quote: Option<char> = None;
    let mut previous = ' ';
    for (i, c) in text.char_indices() {
        match quote {
            Some(q) if c == q && !(q == '"' && previous == '\\') => quote = None,
            Some(_) => {}
            None => match c {
                '#' if previous.is_whitespace() => break,
                '"' | '\'' if " \t[{,:".contains(previous) => quote = Some(c),
                '[' | '{' => {
                    *flow += 1;
                    if blocks + *flow > MAX_NESTING {
                        return Some(i);
                    }
                }
                ']' | '}' => *flow = flow.saturating_sub(1),
                _ => {}
            },
        }
        previous = c;
    }
    None
}

/// Whether a line ends in a literal or folded text's indicator (`|`, `>-`, `|+2`, …).
fn opens_literal(content: &str) -> bool {
    content.split_whitespace().next_back().is_some_and(|last| {
        last.starts_with(['|', '>'])
            && last[1..]
                .chars()
                .all(|c| c == '+' || c == '-' || c.is_ascii_digit())
    })
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
        let parsed: Option<Settings> = deserialize(Block { text, offset }, &mut problems);
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
    fn nesting_past_the_limit_is_found_in_brackets_and_indentation() {
        let brackets = format!("data: {}{}", "[".repeat(40), "]".repeat(40));
        // The block's one level and 31 brackets are allowed; the 32nd bracket is not.
        assert_eq!(first_too_deep(&brackets), Some("data: ".len() + 31));
        let mut indented = String::new();
        for level in 0..40 {
            indented.push_str(&format!("{}k{level}:\n", " ".repeat(level)));
        }
        let line_33 = indented
            .lines()
            .take(32)
            .map(|l| l.len() + 1)
            .sum::<usize>();
        assert_eq!(first_too_deep(&indented), Some(line_33 + 32));
        let dashes = format!("data:\n{}x\n", "- ".repeat(40));
        assert!(first_too_deep(&dashes).is_some());
    }

    #[test]
    fn brackets_in_quotes_comments_and_literal_texts_do_not_nest() {
        let deep = "[".repeat(40);
        for text in [
            format!("data: '{deep}'\n"),
            format!("data: \"{deep}\"\n"),
            format!("data: x # {deep}\n"),
            format!("notes: |\n  {deep}\n  more\ntitle: t\n"),
            "a:\n  b:\n    c: [[1, 2], {k: [3]}]\nd: 1\n".repeat(50),
        ] {
            assert_eq!(first_too_deep(&text), None, "{text}");
        }
    }

    #[test]
    fn a_block_nested_too_deep_is_one_problem_at_its_place() {
        let text = format!("data: {}", "[".repeat(100_000));
        let problem = problem_of(&text, 7);
        assert!(
            problem.message.contains("more than 32 levels"),
            "{problem:?}"
        );
        assert_eq!(problem.span.start, 7 + "data: ".len() + 31);
    }

    #[test]
    fn an_error_marks_the_rest_of_its_line() {
        let problem = problem_of("dta: x\n", 3);
        assert_eq!(problem.span, 3..9);
        assert_eq!(problem.help.as_deref(), Some("did you mean 'data'?"));
    }
}
