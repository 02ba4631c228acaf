//! A trained model as a file other programs load: stet's own JSON (`json.rs`) or ONNX
//! (`onnx.rs`), both written from one description of the model and where it came from.
//!
//! The description is what an export step computes and the cache keeps. The document's
//! hash is stamped only when the file is written: prose never enters a step's key, so a
//! cached export would otherwise name the document as it was when it first ran.

mod json;
mod onnx;
mod onnx_proto;

pub(crate) use onnx::clashing_input_name;

use serde::{Deserialize, Serialize};
use serde_json::json;

use crate::data::{ColumnKind, InputColumn, Scaler, Task};
use crate::document::spec::ExportFormat;
use crate::nn::Network;

/// Everything needed to apply a model: its inputs and their encoding, the scaling, the
/// network and what its outputs mean.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ExportedModel {
    pub task: Task,
    /// The input columns in feature order.
    pub inputs: Vec<InputColumn>,
    /// One name per encoded feature (`site=meadow` for a category).
    pub features: Vec<String>,
    /// Fitted on the training rows; maps each feature before the first layer.
    pub scaler: Scaler,
    pub network: Network,
    /// Fitted on the training rows' targets; maps the network's outputs back to the
    /// targets' units (`output · divisor + offset`). The identity for classification.
    pub target_scaler: Scaler,
    pub targets: Vec<String>,
    /// Class labels in output order (classification only).
    pub classes: Option<Vec<String>>,
}

impl ExportedModel {
    /// Whether the network has one sigmoid output for two classes, whose probability
    /// is that of `classes[1]`.
    fn single_probability(&self) -> bool {
        self.classes.is_some() && self.network.output_size() == 1
    }

    /// What the model's outputs mean, in words.
    fn output_meaning(&self) -> &'static str {
        match (&self.classes, self.single_probability()) {
            (Some(_), true) => "the probability of classes[1]; classes[0] has one minus it",
            (Some(_), false) => "one probability per class, in the order of classes",
            (None, _) => "the predicted value of each target, in the order of targets",
        }
    }
}

/// Where a model came from, as far as the export step's key covers it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct Provenance {
    pub stet_version: String,
    /// The train step whose model this is.
    pub model_step: String,
    /// The key of the run that trained the network (and of its cache entry).
    pub run_key: String,
    /// The net and train settings as applied (defaults filled in), as JSON text: the
    /// cache's format cannot hold free-form JSON values.
    pub net_settings: String,
    pub train_settings: String,
    /// The headline metrics on the held-out rows, by name; `None` without any.
    pub held_out: Option<Vec<(String, f64)>>,
    /// The data step's file as the document names it, and the BLAKE3 hash of its bytes.
    pub data_file: String,
    pub data_hash: String,
}

/// What an export step computes and the cache keeps: the model, where it came from,
/// and the file format its `write:` asks for.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ExportResult {
    pub format: ExportFormat,
    pub model: ExportedModel,
    pub provenance: Provenance,
}

impl ExportResult {
    /// The file's bytes, stamped with the hash of the document being built.
    pub(crate) fn file(&self, document_hash: &str) -> Vec<u8> {
        match self.format {
            ExportFormat::Json => {
                json::encode(&self.model, &self.provenance, document_hash).into_bytes()
            }
            ExportFormat::Onnx => onnx::encode(&self.model, &self.provenance, document_hash),
        }
    }
}

/// The held-out metrics as a JSON object (or `null`), shared by both formats.
fn held_out_json(provenance: &Provenance) -> serde_json::Value {
    match &provenance.held_out {
        Some(metrics) => metrics
            .iter()
            .map(|(name, value)| (name.clone(), json!(value)))
            .collect::<serde_json::Map<_, _>>()
            .into(),
        None => serde_json::Value::Null,
    }
}

/// The input columns in order, each numeric or categorical with its categories: how
/// a row's cells become the features (shared by both formats).
fn inputs_json(model: &ExportedModel) -> serde_json::Value {
    model
        .inputs
        .iter()
        .map(|column| match &column.kind {
            ColumnKind::Numeric => json!({"name": column.name, "kind": "numeric"}),
            ColumnKind::Categorical { categories } => {
                json!({"name": column.name, "kind": "categorical", "categories": categories})
            }
        })
        .collect()
}

/// Settings kept as JSON text, read back as a value to nest in a document.
fn settings_json(text: &str) -> serde_json::Value {
    serde_json::from_str(text).expect("settings were written as JSON by stet")
}
