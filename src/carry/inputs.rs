//! The files a report could not carry, recorded by `stet unpack` beside the document
//! with the hashes the report holds, so that `stet build` refuses a supplied file whose
//! bytes are not the ones the report was built from (its numbers would differ).

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{CarriedFile, lexical};
use crate::Loaded;
use crate::document::{self, Problem};

/// The record's name beside the document: `DOC.stet-inputs.json` for `DOC.md`.
pub(crate) fn record_path(document: &Path) -> PathBuf {
    document.with_extension("stet-inputs.json")
}

#[derive(Serialize, Deserialize)]
struct Record {
    /// Said to whoever opens the file.
    about: String,
    files: Vec<Expected>,
}

#[derive(Serialize, Deserialize)]
struct Expected {
    /// The path as the document names it.
    path: String,
    blake3: String,
}

/// The record's bytes for the files `left_out`.
pub(super) fn record(left_out: &[&CarriedFile]) -> Vec<u8> {
    let record = Record {
        about: "the files the report did not carry, with the BLAKE3 hash of the bytes it was \
                built from; stet build refuses a file that differs (delete this file to \
                build with other data)"
            .into(),
        files: left_out
            .iter()
            .map(|file| Expected {
                path: file.written.clone(),
                blake3: file.blake3.clone(),
            })
            .collect(),
    };
    serde_json::to_vec_pretty(&record).expect("a record serialises")
}

/// Why a document's record of expected files could not be used.
#[derive(Debug, thiserror::Error)]
#[error("{}: {message}; delete it to build without checking the files it lists", path.display())]
pub struct RecordError {
    path: PathBuf,
    message: String,
}

/// A problem at the `file:` setting of each step that reads a file whose hash differs
/// from the one recorded beside `document_path`; none when there is no record.
pub(crate) fn check(document_path: &Path, loaded: &Loaded) -> Result<Vec<Problem>, RecordError> {
    let path = record_path(document_path);
    let text = match std::fs::read(&path) {
        Ok(text) => text,
        Err(error) if error.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(error) => {
            return Err(RecordError {
                path,
                message: error.to_string(),
            });
        }
    };
    let record: Record = serde_json::from_slice(&text).map_err(|error| RecordError {
        path: path.clone(),
        message: format!("not a record stet unpack wrote ({error})"),
    })?;
    let folder = document_path.parent().unwrap_or(Path::new(""));
    let mut problems = Vec::new();
    for step in &loaded.plan.steps {
        for file in &step.files {
            let place = lexical(&folder.join(&file.written));
            let found = file.hash.to_hex();
            let mismatch = record.files.iter().find(|expected| {
                lexical(&folder.join(&expected.path)) == place && expected.blake3 != found.as_str()
            });
            if let Some(expected) = mismatch {
                let span = file_span(loaded, step.piece);
                problems.push(
                    Problem::new(
                        span,
                        format!(
                            "'{}' is not the file the report was built from: its BLAKE3 is {}…, the report recorded {}…",
                            file.written,
                            &found[..16],
                            expected.blake3.get(..16).unwrap_or(&expected.blake3)
                        ),
                    )
                    .with_help(format!(
                        "put the original file there, or delete {} to build with this one",
                        path.display()
                    )),
                );
            }
        }
    }
    Ok(problems)
}

/// Where a step's `file:` setting sits in the document.
fn file_span(loaded: &Loaded, piece: usize) -> std::ops::Range<usize> {
    let document::Piece::Step(block) = &loaded.document.pieces[piece] else {
        unreachable!("a planned step comes from a step block")
    };
    document::spec::key_span(block.yaml_block(), "file").unwrap_or(block.info_span.clone())
}
