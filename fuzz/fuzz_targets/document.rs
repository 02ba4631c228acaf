//! Fuzz target `document`: any bytes as an experiment document.
//!
//! The bytes are written to a file in an empty folder and loaded (`stet::load`: UTF-8
//! check, parse, plan), so every data file is missing and must come back as a
//! `Problem`, as must invalid UTF-8. Every problem is then turned
//! into what a person sees: its line and column, the one-line form, and the layout
//! the command line prints. Nothing may panic, and every span must
//! lie inside the source and its marker must be drawn, or the diagnostic would mark
//! the wrong text (or none).
//! Spans must also fall on character boundaries.

#![no_main]

use std::path::PathBuf;
use std::sync::OnceLock;

use libfuzzer_sys::fuzz_target;
use stet::document::problem::line_and_column;
use stet::document::{Decoration, DocumentErrors, Problem};
use stet::plan::PlanOptions;

/// Where the input is written for `stet::load`, in a folder of its own.
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
    std::fs::write(load_path(), bytes).expect("writing the document");
    match stet::load(load_path(), &PlanOptions::default()) {
        Ok(loaded) => {
            // Only a document without data steps can plan here: no data file exists.
            assert!(
                loaded.document.steps().all(|s| s.kind != stet::document::StepKind::Data),
                "a data step planned with its file missing"
            );
            assert_eq!(loaded.plan.steps.len(), loaded.document.steps().count());
        }
        Err(stet::Error::Document(errors)) => show(errors.source, errors.problems),
        Err(other) => panic!("a document gave a non-document error: {other}"),
    }
});

/// Renders every problem as the command line would, checking its span first.
fn show(source: String, problems: Vec<Problem>) {
    assert!(!problems.is_empty(), "an error with no problems");
    for problem in &problems {
        let span = &problem.span;
        assert!(
            span.start <= span.end && span.end <= source.len(),
            "span {span:?} outside a source of {} bytes: {problem:?}",
            source.len()
        );
        assert!(
            source.is_char_boundary(span.start) && source.is_char_boundary(span.end),
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
    for out in errors.rendered(Decoration::Plain) {
        // Every problem is marked under its source line.
        assert!(out.contains('^'), "no marker drawn:\n{out}");
    }
}
