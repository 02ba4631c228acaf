//! Views of the steps that use a trained model: predictions and the export.

use serde::Serialize;

use super::format::number;
use crate::build::outcome::{ExportResult, PredictResult};

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
    /// Whether the file lists class labels (a classifier's export).
    pub classes: bool,
}

pub(crate) fn export_view(result: &ExportResult) -> ExportView {
    let document = serde_json::from_str::<serde_json::Value>(&result.json).ok();
    let layers = document
        .as_ref()
        .and_then(|doc| doc["layers"].as_array().map(Vec::len))
        .unwrap_or(0);
    ExportView {
        bytes: result.json.len(),
        layers,
        classes: document.is_some_and(|doc| doc["classes"].is_array()),
    }
}
