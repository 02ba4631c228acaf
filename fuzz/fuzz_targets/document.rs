//! Fuzz target `document`: any bytes as an experiment document.
//!
//! UTF-8 input is parsed and planned against an empty folder, so every data file is
//! missing and must come back as a `Problem`. Other bytes go through `stet::load`,
//! which reports invalid UTF-8 as a problem of its own. Every problem is then turned
//! into what a person sees: its line and column, the one-line form, and the miette
//! diagnostic drawn by the graphical handler. Nothing may panic, and every span must
//! lie inside the source and its marker must be drawn, or the diagnostic would mark
//! the wrong text (or none).
//!
//! Spans of the parser and planner must also fall on character boundaries. The
//! invalid-UTF-8 problem is exempt: `stet::load` marks one byte of the U+FFFD that
//! replaces the bad bytes, which miette draws correctly all the same.

#![no_main]

use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use stet::document::problem::line_and_column;
use stet::document::{DocumentErrors, Problem};

/// An empty folder for plans to look for data files in, made once per process.
fn empty_dir() -> &'static Path {
    static DIR: OnceLock<tempfile::TempDir> = OnceLock::new();
    DIR.get_or_init(|| tempfile::tempdir().expect("a temporary folder"))
        .path()
}

/// Where non-UTF-8 input is written for `stet::load`, in a folder of its own.
fn load_path() -> &'static PathBuf {
    static PATH: OnceLock<(tempfile::TempDir, PathBuf)> = OnceLock::new();
    &PATH
        .get_or_init(|| {
            let dir = tempfile::tempdir().expect("a temporary folder");
            let path = dir.path().join("doc.md");
            (dir, path)
        })
        .1
}

fuzz_target!(|bytes: &[u8]| {
    match std::str::from_utf8(bytes) {
        Ok(source) => {
            let problems = match stet::document::parse(source) {
                Ok(document) => match stet::plan::plan(&document, empty_dir()) {
                    Ok(plan) => {
                        // Only a document without data steps can plan here.
                        assert!(
                            document
                                .steps()
                                .all(|s| s.kind != stet::document::StepKind::Data),
                            "a data step planned with its file missing"
                        );
                        assert_eq!(plan.steps.len(), document.steps().count());
                        return;
                    }
                    Err(problems) => problems,
                },
                Err(problems) => problems,
            };
            show(source.to_string(), problems, true);
        }
        Err(_) => {
            std::fs::write(load_path(), bytes).expect("writing the document");
            match stet::load(load_path()) {
                Err(stet::Error::Document(errors)) => show(errors.source, errors.problems, false),
                Err(other) => panic!("non-UTF-8 input gave {other}"),
                Ok(_) => panic!("non-UTF-8 input loaded"),
            }
        }
    }
});

/// Renders every problem as the command line would, checking its span first.
fn show(source: String, problems: Vec<Problem>, on_char_boundaries: bool) {
    assert!(!problems.is_empty(), "an error with no problems");
    for problem in &problems {
        let span = &problem.span;
        assert!(
            span.start <= span.end && span.end <= source.len(),
            "span {span:?} outside a source of {} bytes: {problem:?}",
            source.len()
        );
        assert!(
            !on_char_boundaries
                || (source.is_char_boundary(span.start) && source.is_char_boundary(span.end)),
            "span {span:?} splits a character: {problem:?}"
        );
        let (line, column) = line_and_column(&source, span.start);
        assert!(line >= 1 && column >= 1);
    }
    let errors = DocumentErrors {
        path: "fuzz.md".into(),
        source,
        problems,
    };
    let _ = errors.to_string();
    let handler = miette::GraphicalReportHandler::new();
    for diagnostic in errors.diagnostics() {
        let mut out = String::new();
        handler
            .render_report(&mut out, &diagnostic)
            .expect("a diagnostic renders");
        // miette silently leaves out a label it cannot place; every problem must be marked.
        assert!(
            errors.source.is_empty() || out.contains("here"),
            "no marker drawn for {diagnostic:?}:\n{out}"
        );
    }
}
