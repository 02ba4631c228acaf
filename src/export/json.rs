//! stet's own JSON model format (described field by field in the README), enough to
//! apply the model from any language with a few lines of array code.

use serde_json::{Value, json};

use super::{ExportedModel, Provenance, held_out_json, inputs_json, settings_json};
use crate::document::spec::word;
use crate::nn::Activation;
use crate::nn::activation::LEAKY_SLOPE;

/// Version of the JSON format; bumped when its meaning changes. 2 added `provenance`,
/// 3 `target_scaling`.
const FORMAT_VERSION: u32 = 3;

/// The model as pretty-printed JSON.
pub(super) fn encode(
    model: &ExportedModel,
    provenance: &Provenance,
    document_hash: &str,
) -> String {
    let scaler = &model.scaler;
    let target_scaler = &model.target_scaler;
    let mut document = json!({
        "format": "stet-model",
        "version": FORMAT_VERSION,
        "task": word(&model.task),
        "inputs": inputs_json(model),
        "features": model.features,
        "scaling": {"kind": word(&scaler.kind), "offset": scaler.offset, "divisor": scaler.divisor},
        "layers": layers(model),
        "target_scaling": {
            "kind": word(&target_scaler.kind),
            "offset": target_scaler.offset,
            "divisor": target_scaler.divisor,
        },
        "targets": model.targets,
        "classes": model.classes,
        "output": model.output_meaning(),
        "provenance": provenance_json(provenance, document_hash),
    });
    let uses_leaky = model
        .network
        .layers
        .iter()
        .any(|layer| layer.activation == Activation::LeakyRelu);
    if uses_leaky {
        document["leaky_relu_slope"] = json!(LEAKY_SLOPE);
    }
    serde_json::to_string_pretty(&document).expect("a JSON value serialises")
}

fn layers(model: &ExportedModel) -> Vec<Value> {
    model
        .network
        .layers
        .iter()
        .map(|layer| {
            let weights: Vec<Vec<f64>> = layer
                .weights
                .rows()
                .into_iter()
                .map(|row| row.to_vec())
                .collect();
            json!({
                "inputs": layer.weights.nrows(),
                "outputs": layer.weights.ncols(),
                "activation": word(&layer.activation),
                "weights": weights,
                "biases": layer.biases.to_vec(),
            })
        })
        .collect()
}

fn provenance_json(provenance: &Provenance, document_hash: &str) -> Value {
    json!({
        "stet_version": provenance.stet_version,
        "document_hash": document_hash,
        "model_step": provenance.model_step,
        "run_key": provenance.run_key,
        "net": settings_json(&provenance.net_settings),
        "train": settings_json(&provenance.train_settings),
        "held_out": held_out_json(provenance),
        "data_file": {"path": provenance.data_file, "hash": provenance.data_hash},
    })
}
