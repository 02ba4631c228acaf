//! `predict` and `export` settings: using a trained model on new rows or elsewhere.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::schema::{Word, no_default};
use super::{Checker, word};

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "predict")]
pub(super) struct RawPredict {
    model: String,
    file: String,
    // `Some(None)` when `write:` is present but empty (`~`, `null`): YAML's empty
    // value, which must not quietly mean "write nothing". The schema therefore tells
    // editors it is a file name.
    #[serde(default, deserialize_with = "present")]
    #[schemars(with = "String", transform = no_default)]
    write: Option<Option<String>>,
}

/// `predict`: a trained model applied to the rows of a CSV file.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PredictSpec {
    pub(crate) model: String,
    /// The CSV of new rows, relative to the document's folder.
    pub(crate) file: String,
    /// Where to save the predictions as CSV, relative to the document's folder.
    pub(crate) write: Option<String>,
}

pub(super) fn validate_predict(raw: RawPredict, check: &mut Checker<'_>) -> PredictSpec {
    check.require(!raw.file.trim().is_empty(), "file", || {
        "file must name a CSV file".into()
    });
    if let Some(write) = &raw.write {
        let named = write.as_deref().is_some_and(|name| !name.trim().is_empty());
        check.require(named, "write", || {
            "write must name a file (`~` and `null` are YAML's empty value: quote a file \
             of that name, or leave write out to keep the predictions in the report only)"
                .into()
        });
    }
    PredictSpec {
        model: raw.model,
        file: raw.file,
        write: raw.write.flatten(),
    }
}

/// Deserialises a setting that is present, whatever its value, as `Some`.
fn present<'de, D: serde::Deserializer<'de>>(
    deserializer: D,
) -> Result<Option<Option<String>>, D::Error> {
    Option::<String>::deserialize(deserializer).map(Some)
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "export")]
pub(super) struct RawExport {
    model: String,
    write: String,
    #[schemars(with = "Option<Word<ExportFormat>>")]
    format: Option<ExportFormat>,
}

/// The file format an export writes.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum ExportFormat {
    /// stet's own JSON, described in the README.
    #[default]
    Json,
    /// The open model-exchange standard, for runtimes and other frameworks.
    Onnx,
}

/// `export`: a trained model written as a file for use from other programs.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ExportSpec {
    pub(crate) model: String,
    /// The file to write, relative to the document's folder.
    pub(crate) write: String,
    /// Always serialised, so that export keys from before the setting (and before the
    /// JSON format's provenance) are not reused.
    pub(crate) format: ExportFormat,
}

pub(super) fn validate_export(raw: RawExport, check: &mut Checker<'_>) -> ExportSpec {
    check.require(!raw.write.trim().is_empty(), "write", || {
        "write must name a file".into()
    });
    let format = raw.format.unwrap_or_default();
    if let Some(other) = format_of_extension(&raw.write).filter(|other| *other != format) {
        check.require(false, "write", || {
            format!(
                "write names a .{} file, but the export's format is {}: set format: {} or change the file's extension",
                word(&other),
                word(&format),
                word(&other)
            )
        });
    }
    ExportSpec {
        model: raw.model,
        write: raw.write,
        format,
    }
}

/// The export format a file's extension names, if any: a `.json` file that holds
/// ONNX bytes (or the reverse) is a slip that the loading program would only report
/// as a corrupt file.
fn format_of_extension(file: &str) -> Option<ExportFormat> {
    let extension = std::path::Path::new(file).extension()?.to_str()?;
    [ExportFormat::Json, ExportFormat::Onnx]
        .into_iter()
        .find(|format| extension.eq_ignore_ascii_case(word(format)))
}
