//! Problems found in a document, each tied to a byte span of its source, and the
//! miette diagnostic that prints them with the offending line marked.

use std::fmt;
use std::ops::Range;
use std::path::Path;

use miette::{
    Diagnostic, LabeledSpan, MietteError, MietteSpanContents, NamedSource, SourceCode, SourceSpan,
    SpanContents,
};

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
    /// One diagnostic per problem, ready for a miette report handler.
    pub fn diagnostics(&self) -> Vec<ProblemDiagnostic> {
        self.problems
            .iter()
            .map(|problem| ProblemDiagnostic {
                location: self.location(problem),
                problem: problem.clone(),
                source: NamedSource::new(self.path.clone(), Excerpt::new(&self.source, problem)),
            })
            .collect()
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

/// A single problem as a miette diagnostic with its source attached.
#[derive(Debug)]
pub struct ProblemDiagnostic {
    problem: Problem,
    location: String,
    source: NamedSource<Excerpt>,
}

impl fmt::Display for ProblemDiagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.location, self.problem.message)
    }
}

impl std::error::Error for ProblemDiagnostic {}

impl Diagnostic for ProblemDiagnostic {
    fn source_code(&self) -> Option<&dyn miette::SourceCode> {
        Some(&self.source)
    }

    fn labels(&self) -> Option<Box<dyn Iterator<Item = LabeledSpan> + '_>> {
        let label = &self.source.inner().label;
        let span = SourceSpan::new(label.start.into(), label.len());
        let label = LabeledSpan::new_with_span(Some("here".into()), span);
        Some(Box::new(std::iter::once(label)))
    }

    fn help(&self) -> Option<Box<dyn fmt::Display + '_>> {
        self.problem
            .help
            .as_ref()
            .map(|help| Box::new(help) as Box<dyn fmt::Display>)
    }
}

/// Longest line shown whole under a problem. A longer one is cut, around the
/// problem's column on its own line: miette pads its markers with a width argument,
/// which panics past 65,535 columns, and a screen of one line helps nobody.
const SHOWN_LINE_CHARS: usize = 160;
/// Characters shown before the problem's column when its line is cut.
const CHARS_BEFORE_PROBLEM: usize = 60;

/// The source as a problem's diagnostic shows it: every line that is too long cut
/// short with an ellipsis, the problem's own line cut to a window around the problem.
/// Lines keep their numbers, and the header shows the problem's true column.
#[derive(Debug)]
struct Excerpt {
    text: String,
    /// Where the marker goes in `text`; never wider than the problem's shown line.
    label: Range<usize>,
    /// 0-based column of the problem in the real line, in characters.
    column: usize,
}

impl Excerpt {
    fn new(source: &str, problem: &Problem) -> Excerpt {
        // miette draws no marker at the very end of the source, where an unclosed
        // block or a missing step is found, so such a problem marks the last character.
        let start = if problem.span.start < source.len() {
            problem.span.start
        } else {
            source.char_indices().next_back().map_or(0, |(i, _)| i)
        };
        let end = problem.span.end.max(start + 1);
        let mut excerpt = Excerpt {
            text: String::with_capacity(source.len().min(1 << 16)),
            label: 0..0,
            column: 0,
        };
        let mut line_start = 0;
        for line in source.split_inclusive('\n') {
            let body = line.trim_end_matches('\n');
            let ending = &line[body.len()..];
            if (line_start..line_start + line.len()).contains(&start) {
                excerpt.push_problem_line(body, start - line_start, end - line_start);
            } else {
                excerpt.push_cut(body);
            }
            excerpt.text.push_str(ending);
            line_start += line.len();
        }
        excerpt
    }

    /// Appends `line` cut to [`SHOWN_LINE_CHARS`].
    fn push_cut(&mut self, line: &str) {
        match line.char_indices().nth(SHOWN_LINE_CHARS) {
            Some((cut, _)) => {
                self.text.push_str(&line[..cut]);
                self.text.push('…');
            }
            None => self.text.push_str(line),
        }
    }

    /// Appends the problem's line, cut to a window around the marker from byte
    /// `start` to byte `end` of the line, and records where the marker falls.
    fn push_problem_line(&mut self, line: &str, start: usize, end: usize) {
        self.column = line[..start].chars().count();
        let chars = line.chars().count();
        let first = if chars <= SHOWN_LINE_CHARS {
            0
        } else {
            self.column.saturating_sub(CHARS_BEFORE_PROBLEM)
        };
        let last = chars.min(first + SHOWN_LINE_CHARS);
        let byte_of = |char_index: usize| {
            line.char_indices()
                .nth(char_index)
                .map_or(line.len(), |(i, _)| i)
        };
        let (from, to) = (byte_of(first), byte_of(last));
        if first > 0 {
            self.text.push('…');
        }
        let shown_start = self.text.len();
        self.text.push_str(&line[from..to]);
        // A marker at the line's end (an empty line, a problem at the end of the
        // source) keeps its one column.
        let marker_end = end.clamp(start + 1, to.max(start + 1));
        self.label = shown_start + (start - from)..shown_start + (marker_end - from);
        if to < line.len() {
            self.text.push('…');
        }
    }
}

impl SourceCode for Excerpt {
    fn read_span<'a>(
        &'a self,
        span: &SourceSpan,
        context_lines_before: usize,
        context_lines_after: usize,
    ) -> Result<Box<dyn SpanContents<'a> + 'a>, MietteError> {
        let contents = self
            .text
            .read_span(span, context_lines_before, context_lines_after)?;
        // The header's `file:line:column` reads the marker's span with no context;
        // miette would count bytes of the cut line, where the real column is wanted.
        if context_lines_before == 0 && span.offset() == self.label.start {
            return Ok(Box::new(MietteSpanContents::new(
                contents.data(),
                *contents.span(),
                contents.line(),
                self.column,
                contents.line_count(),
            )));
        }
        Ok(contents)
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
            problems: vec![Problem::new(span, "wrong")],
        };
        let handler =
            miette::GraphicalReportHandler::new_themed(miette::GraphicalTheme::unicode_nocolor());
        let mut out = String::new();
        handler
            .render_report(&mut out, &errors.diagnostics()[0])
            .unwrap();
        out
    }

    // Seen while fuzzing: a problem at the end of the document (an unclosed block
    // whose YAML fails on its last byte, a document of front matter only) was drawn
    // with no marker at all.
    #[test]
    fn a_problem_at_the_end_of_the_source_is_still_marked() {
        for source in ["ab\ncd", "---\ntitle: x\n---\n", "ab\ncé"] {
            let out = rendered(source, source.len()..source.len());
            assert!(out.contains("here"), "{source:?}:\n{out}");
        }
        let out = rendered("ab\ncd", 1..1);
        assert!(out.contains(" 1 │ ab\n   ·  ┬\n"), "{out}");
    }

    #[test]
    fn nearest_suggests_a_close_spelling_only() {
        let names = ["learning_rate", "momentum", "epochs"];
        assert_eq!(nearest("learnig_rate", names), Some("learning_rate"));
        assert_eq!(nearest("zzz", names), None);
    }
}
