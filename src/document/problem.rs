//! Problems found in a document, each tied to a byte span of its source, and their
//! layout for the terminal: `file:line:column: message` (which editors and terminals
//! can jump to), the source line with a marker under the problem, then `help:`.

use std::fmt;
use std::ops::Range;
use std::path::Path;

/// One thing wrong with a document: where it is and what was expected there.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Problem {
    /// Byte range in the Markdown source.
    pub span: Range<usize>,
    pub message: String,
    /// A suggestion, such as the nearest valid name.
    pub help: Option<String>,
}

impl Problem {
    pub(crate) fn new(span: Range<usize>, message: impl Into<String>) -> Problem {
        Problem {
            span,
            message: shortened(message.into()),
            help: None,
        }
    }

    pub(crate) fn with_help(mut self, help: impl Into<String>) -> Problem {
        self.help = Some(shortened(help.into()));
        self
    }
}

/// Longest message or help kept whole: they quote what the document says, which may
/// be a 70,000-character key.
const MESSAGE_CHARS: usize = 300;

/// `text` with its middle replaced by an ellipsis when it is longer than [`MESSAGE_CHARS`].
fn shortened(text: String) -> String {
    let count = text.chars().count();
    if count <= MESSAGE_CHARS {
        return text;
    }
    let keep = MESSAGE_CHARS / 2;
    let head: String = text.chars().take(keep).collect();
    let tail: String = text.chars().skip(count - keep).collect();
    format!("{head}…{tail}")
}

/// 1-based line and column of a byte offset, counting columns in characters.
pub fn line_and_column(source: &str, offset: usize) -> (usize, usize) {
    let offset = offset.min(source.len());
    let before = &source[..offset];
    let line = before.matches('\n').count() + 1;
    let line_start = before.rfind('\n').map_or(0, |i| i + 1);
    let column = source[line_start..offset].chars().count() + 1;
    (line, column)
}

/// Every problem found in one document; the command layer prints it and exits 2.
#[derive(Debug)]
pub struct DocumentErrors {
    pub path: String,
    pub source: String,
    pub problems: Vec<Problem>,
}

impl DocumentErrors {
    /// Each problem in stet's layout, one text of several lines per problem.
    pub fn rendered(&self, decoration: Decoration) -> Vec<String> {
        self.problems
            .iter()
            .map(|problem| self.render(problem, decoration))
            .collect()
    }

    fn render(&self, problem: &Problem, decoration: Decoration) -> String {
        let excerpt = Excerpt::new(&self.source, problem, decoration);
        let marker = "^".repeat(excerpt.marker.len().max(1));
        let indent = " ".repeat(SOURCE_INDENT + excerpt.marker.start);
        let source_indent = " ".repeat(SOURCE_INDENT);
        let mut out = format!(
            "{}\n{source_indent}{}\n{indent}{}",
            decoration.strong(&format!("{}: {}", self.location(problem), problem.message)),
            excerpt.text,
            decoration.marker(&marker)
        );
        if let Some(help) = &problem.help {
            out.push_str(&format!("\n{} {help}", decoration.help("help:")));
        }
        out
    }

    /// `path:line:column` of a problem.
    pub fn location(&self, problem: &Problem) -> String {
        let (line, column) = line_and_column(&self.source, problem.span.start);
        format!("{}:{line}:{column}", self.path)
    }

    pub(crate) fn for_file(path: &Path, source: String, problems: Vec<Problem>) -> DocumentErrors {
        DocumentErrors {
            path: path.display().to_string(),
            source,
            problems,
        }
    }
}

impl fmt::Display for DocumentErrors {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for problem in &self.problems {
            writeln!(f, "{}: {}", self.location(problem), problem.message)?;
        }
        Ok(())
    }
}

impl std::error::Error for DocumentErrors {}

/// How a problem is drawn: plain ASCII decoration for files and pipes; bold and
/// colour on a terminal. The source line is shown as written either way, its control
/// characters replaced so it cannot move the cursor or change colours.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Decoration {
    Plain,
    Terminal,
}

impl Decoration {
    fn styled(self, code: &str, text: &str) -> String {
        match self {
            Decoration::Plain => text.to_string(),
            Decoration::Terminal => format!("\x1b[{code}m{text}\x1b[0m"),
        }
    }

    fn strong(self, text: &str) -> String {
        self.styled("1", text)
    }

    fn marker(self, text: &str) -> String {
        self.styled("1;31", text)
    }

    fn help(self, text: &str) -> String {
        self.styled("1;36", text)
    }

    /// What stands for the part of a line left out.
    fn ellipsis(self) -> &'static str {
        match self {
            Decoration::Plain => "...",
            Decoration::Terminal => "…",
        }
    }
}

/// Spaces before the source line and its marker.
const SOURCE_INDENT: usize = 4;
/// Longest line shown whole under a problem. A longer one is cut to a window around
/// the problem's column: a screen of one line helps nobody.
const SHOWN_LINE_CHARS: usize = 160;
/// Characters shown before the problem's column when its line is cut.
const CHARS_BEFORE_PROBLEM: usize = 60;

/// The problem's line as shown: cut to a window around the problem when long, and
/// where the marker goes in it, in characters.
#[derive(Debug)]
struct Excerpt {
    text: String,
    marker: Range<usize>,
}

impl Excerpt {
    fn new(source: &str, problem: &Problem, decoration: Decoration) -> Excerpt {
        let start = char_floor(source, problem.span.start);
        let mut line_start = source[..start].rfind('\n').map_or(0, |i| i + 1);
        // A problem at the very end, after the last line break (an unclosed block, a
        // document of front matter only), is marked just past the last line.
        if line_start == source.len() && line_start > 0 {
            line_start = source[..line_start - 1].rfind('\n').map_or(0, |i| i + 1);
        }
        let line_end = source[line_start..]
            .find('\n')
            .map_or(source.len(), |i| line_start + i);
        let line = &source[line_start..line_end];
        let (column, width) = if start > line_end {
            (line.chars().count(), 1)
        } else {
            let end = char_floor(source, problem.span.end.clamp(start, line_end));
            (
                source[line_start..start].chars().count(),
                source[start..end].chars().count(),
            )
        };
        Excerpt::windowed(line, column, width, decoration)
    }

    /// `line` cut to [`SHOWN_LINE_CHARS`] around `column`, with the marker from
    /// `column` over `width` characters, kept inside what is shown.
    fn windowed(line: &str, column: usize, width: usize, decoration: Decoration) -> Excerpt {
        let chars: Vec<char> = line.chars().map(shown_char).collect();
        let first = if chars.len() <= SHOWN_LINE_CHARS {
            0
        } else {
            column.saturating_sub(CHARS_BEFORE_PROBLEM)
        };
        let last = chars.len().min(first + SHOWN_LINE_CHARS);
        let mut text = String::new();
        let mut offset = 0;
        if first > 0 {
            text.push_str(decoration.ellipsis());
            offset = decoration.ellipsis().chars().count();
        }
        text.extend(&chars[first..last]);
        if last < chars.len() {
            text.push_str(decoration.ellipsis());
        }
        let marker_start = offset + column - first;
        let marker_end = marker_start + width.min(last.saturating_sub(column)).max(1);
        Excerpt {
            text,
            marker: marker_start..marker_end,
        }
    }
}

/// `offset` within `source`, moved back to the start of the character it falls in.
fn char_floor(source: &str, offset: usize) -> usize {
    let mut offset = offset.min(source.len());
    while !source.is_char_boundary(offset) {
        offset -= 1;
    }
    offset
}

/// A character as the source line shows it: a tab as one space (so the marker lines
/// up), any other control character as a replacement mark.
fn shown_char(c: char) -> char {
    match c {
        '\t' => ' ',
        c if c.is_control() => '\u{fffd}',
        c => c,
    }
}

/// The closest of `candidates` to `word`, if it is close enough to be a likely typo.
pub(crate) fn nearest<'a>(
    word: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<&'a str> {
    candidates
        .into_iter()
        .map(|candidate| (strsim::jaro_winkler(word, candidate), candidate))
        .filter(|(score, _)| *score >= 0.75)
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, candidate)| candidate)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_and_column_count_from_one() {
        let source = "ab\ncdé\nf";
        assert_eq!(line_and_column(source, 0), (1, 1));
        assert_eq!(line_and_column(source, 4), (2, 2));
        assert_eq!(line_and_column(source, source.len()), (3, 2));
    }

    fn rendered(source: &str, span: Range<usize>) -> String {
        let errors = DocumentErrors {
            path: "doc.md".into(),
            source: source.into(),
            problems: vec![Problem::new(span, "wrong").with_help("try another")],
        };
        errors.rendered(Decoration::Plain).remove(0)
    }

    #[test]
    fn a_problem_reads_location_message_source_line_marker_then_help() {
        let out = rendered("a: 1\nlearnig_rate: 0.1\n", 5..17);
        assert_eq!(
            out,
            "doc.md:2:1: wrong\n    learnig_rate: 0.1\n    ^^^^^^^^^^^^\nhelp: try another"
        );
        assert!(out.is_ascii());
    }

    // Seen while fuzzing: a problem at the end of the document (an unclosed block
    // whose YAML fails on its last byte, a document of front matter only) was drawn
    // with no marker at all.
    #[test]
    fn a_problem_at_the_end_of_the_source_is_still_marked() {
        assert!(rendered("ab\ncd", 5..5).contains("\n    cd\n      ^\n"));
        assert!(rendered("---\ntitle: x\n---\n", 17..17).contains("\n    ---\n       ^\n"));
        assert!(rendered("ab\ncd", 1..1).contains("\n    ab\n     ^\n"));
    }

    #[test]
    fn a_long_line_is_cut_around_the_problem_and_keeps_its_real_column() {
        let source = format!("{}bad{}", "x".repeat(70_000), "y".repeat(500));
        let out = rendered(&source, 70_000..70_003);
        let lines: Vec<&str> = out.lines().collect();
        assert!(lines[0].starts_with("doc.md:1:70001: "), "{}", lines[0]);
        assert!(lines[1].chars().count() < 200);
        let marker_at = lines[2].find('^').unwrap();
        assert_eq!(&lines[1][marker_at..marker_at + 3], "bad");
        assert_eq!(lines[2].trim(), "^^^");
    }

    #[test]
    fn control_characters_in_the_source_cannot_reach_the_terminal() {
        let out = rendered("a\x1b[31m: 1\n", 0..1);
        assert!(!out.contains('\x1b'), "{out:?}");
    }

    #[test]
    fn nearest_suggests_a_close_spelling_only() {
        let names = ["learning_rate", "momentum", "epochs"];
        assert_eq!(nearest("learnig_rate", names), Some("learning_rate"));
        assert_eq!(nearest("zzz", names), None);
    }
}
