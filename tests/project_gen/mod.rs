//! Whole generated projects, for the `generated_projects` test and the `project` fuzz
//! target (which compiles this folder in through `#[path]`): a document made from a
//! grammar of step blocks, the small CSV files it reads, and an oracle that builds the
//! project and checks that stet neither panics nor hangs, locates every problem, and
//! leaves what it reads untouched.
//!
//! The generator draws every choice from `arbitrary::Unstructured`, so libFuzzer's
//! bytes and a fixed list of seeded byte strings drive the same grammar.

#![allow(dead_code)] // the fuzz target and the test each use their own subset

pub mod csv_files;
pub mod document;
pub mod oracle;

use arbitrary::Unstructured;

/// The document's name inside the project folder.
pub const DOCUMENT: &str = "doc.md";
/// Written in a document where an absolute path outside the project belongs; the oracle
/// puts the real folder in its place before writing the document.
pub const OUTSIDE: &str = "@OUTSIDE@";

/// A project to build: a document and the files beside it.
#[derive(Clone, Debug)]
pub struct Project {
    pub document: Vec<u8>,
    /// Files by their path relative to the project folder.
    pub files: Vec<(String, Vec<u8>)>,
}

/// A project drawn from `u`: one to three CSV files, then a document that reads them.
pub fn project(u: &mut Unstructured<'_>) -> arbitrary::Result<Project> {
    let count = u.int_in_range(1..=3)?;
    let mut tables = Vec::new();
    let mut files = Vec::new();
    for name in csv_files::NAMES.iter().take(count) {
        let (table, bytes) = csv_files::csv_file(u, name)?;
        tables.push(table);
        files.push((name.to_string(), bytes));
    }
    let document = document::document(u, &tables)?;
    Ok(Project { document, files })
}
