//! Problems found in a document, each tied to a byte span of its source, and the
//! miette diagnostic that prints them with the offending line marked.

use std::fmt;
use std::ops::Range;
use std::path::Path;

use miette::{Diagnostic, LabeledSpan, NamedSource, SourceSpan};

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
    pub fn new(span: Range<usize>, message: impl Into<String>) -> Problem {
        Problem {
            span,
            message: message.into(),
            help: None,
        }
    }

    pub fn with_help(mut self, help: impl Into<String>) -> Problem {
        self.help = Some(help.into());
        self
    }
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
                source: NamedSource::new(self.path.clone(), self.source.clone()),
            })
            .collect()
    }

    /// `path:line:column` of a problem.
    pub fn location(&self, problem: &Problem) -> String {
        let (line, column) = line_and_column(&self.source, problem.span.start);
        format!("{}:{line}:{column}", self.path)
    }

    pub fn for_file(path: &Path, source: String, problems: Vec<Problem>) -> DocumentErrors {
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
    source: NamedSource<String>,
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
        let span = &self.problem.span;
        // miette draws no marker at the very end of the source, where an unclosed
        // block or a missing step is found, so such a problem marks the last character.
        let source = self.source.inner();
        let start = if span.start < source.len() {
            span.start
        } else {
            source.char_indices().next_back().map_or(0, |(i, _)| i)
        };
        let length = span.end.saturating_sub(start).max(1);
        let label =
            LabeledSpan::new_with_span(Some("here".into()), SourceSpan::new(start.into(), length));
        Some(Box::new(std::iter::once(label)))
    }

    fn help(&self) -> Option<Box<dyn fmt::Display + '_>> {
        self.problem
            .help
            .as_ref()
            .map(|help| Box::new(help) as Box<dyn fmt::Display>)
    }
}

/// The closest of `candidates` to `word`, if it is close enough to be a likely typo.
pub fn nearest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
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
