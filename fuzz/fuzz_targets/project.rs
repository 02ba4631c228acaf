//! Fuzz target `project`: libFuzzer's bytes drive the whole-project grammar of
//! `tests/project_gen/` (a document of step blocks and the small CSV files it reads),
//! and the project is built through `stet::build` and judged by the same oracle as the
//! `generated_projects` test: no panic, done within 10 s, every exit-2 problem inside
//! the document, the report written on exit 0 or 1, the document and CSV files keep
//! their bytes, nothing written outside the project.
//!
//! A panic inside stet aborts at its origin (libFuzzer's panic hook), so the crash
//! names the line; every other broken promise is raised here as a panic naming it.

#![no_main]

#[path = "../../tests/project_gen/mod.rs"]
mod project_gen;

use arbitrary::Unstructured;
use libfuzzer_sys::fuzz_target;

fuzz_target!(|bytes: &[u8]| {
    let Ok(project) = project_gen::project(&mut Unstructured::new(bytes)) else {
        return;
    };
    let verdict = project_gen::oracle::check(&project);
    if let Some(failure) = verdict.failures.first() {
        panic!("{failure}");
    }
});
