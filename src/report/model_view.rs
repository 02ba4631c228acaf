//! Views of the steps that use a trained model: predictions and the export.

use serde::Serialize;

use super::format::number;
use crate::build::outcome::PredictResult;
use crate::document::spec::ExportFormat;
use crate::export::ExportResult;

/// Rows a predict card shows; the written CSV has them all.
const SHOWN_ROWS: usize = 50;

#[derive(Serialize)]
pub(crate) struct PredictView {
    /// Whether rows have a predicted class label (classification) besides the values.
    pub labelled: bool,
    pub output_names: Vec<String>,
    pub rows: Vec<PredictRow>,
    pub total: usize,
    pub shown: usize,
}

#[derive(Serialize)]
pub(crate) struct PredictRow {
    pub line: u64,
    pub predicted: String,
    pub values: Vec<String>,
}

pub(crate) fn predict_view(result: &PredictResult) -> PredictView {
    let rows: Vec<PredictRow> = result
        .lines
        .iter()
        .zip(&result.predicted)
        .zip(&result.outputs)
        .take(SHOWN_ROWS)
        .map(|((line, predicted), values)| PredictRow {
            line: *line,
            predicted: predicted.clone(),
            values: values.iter().map(|v| number(*v)).collect(),
        })
        .collect();
    PredictView {
        labelled: result.labelled,
        output_names: result.output_names.clone(),
        shown: rows.len(),
        rows,
        total: result.lines.len(),
    }
}

#[derive(Serialize)]
pub(crate) struct ExportView {
    pub bytes: usize,
    pub layers: usize,
    /// The file format's name as people write it.
    pub format: &'static str,
    /// Whether the file lists class labels (a classifier's export).
    pub classes: bool,
}

/// The written file's size is that of the bytes the build wrote, stamped with the
/// same document hash.
pub(crate) fn export_view(result: &ExportResult, document_hash: &str) -> ExportView {
    ExportView {
        bytes: result.file(document_hash).len(),
        layers: result.model.network.layers.len(),
        format: match result.format {
            ExportFormat::Json => "JSON",
            ExportFormat::Onnx => "ONNX",
        },
        classes: result.model.classes.is_some(),
    }
}
