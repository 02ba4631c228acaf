//! Using a trained model: predictions for new rows, and the JSON export that lets other
//! programs apply the model without stet. Both return data; the command layer writes
//! any files.

use serde_json::json;

use crate::build::outcome::{ExportResult, FitResult, PredictResult};
use crate::data::{self, ColumnKind, Prepared, Task};
use crate::document::spec::word;
use crate::nn::activation::LEAKY_SLOPE;
use crate::nn::{Activation, Network};
use crate::plan::input_file::{InputFile, ReadError};

/// Version of the export format; bumped when its meaning changes.
pub(super) const EXPORT_FORMAT_VERSION: u32 = 1;

/// Why a model could not be used.
#[derive(Debug, thiserror::Error)]
pub(crate) enum ModelUseError {
    #[error(
        "the model was trained on {folds} folds, so it is {folds} networks; predict and export need one: train it on a holdout split (holdout: 0 uses every row)"
    )]
    SeveralNetworks { folds: usize },
    #[error(transparent)]
    Read(#[from] ReadError),
    /// The new rows do not fit the model's encoding; `file` as the document wrote it.
    #[error("{file}: {error}")]
    Encode {
        file: String,
        error: data::DataError,
    },
    /// Writing the predictions' CSV into memory; no file is involved.
    #[error("writing predictions: {0}")]
    WritePredictions(#[from] csv::Error),
}

/// The single network of a model; with folds there are several, which is refused.
fn single_network(model: &FitResult) -> Result<&Network, ModelUseError> {
    match model.runs.as_slice() {
        [run] => Ok(&run.fit.network),
        runs => Err(ModelUseError::SeveralNetworks { folds: runs.len() }),
    }
}

/// Applies the model, with its data step's encoding and scaling, to the rows of `file`.
pub(super) fn predict(
    model: &FitResult,
    prepared: &Prepared,
    file: &InputFile,
) -> Result<PredictResult, ModelUseError> {
    let network = single_network(model)?;
    let table = file.read(|reader| data::read_table(reader))?;
    let x = prepared
        .encoding
        .encode_inputs(&table)
        .map_err(|error| ModelUseError::Encode {
            file: file.written.clone(),
            error,
        })?;
    let scaled = prepared.partitions[0].scaler.apply(x.view());
    let raw = network.predict(scaled.view());
    let encoding = &prepared.encoding;

    let (output_names, outputs, predicted): (Vec<String>, Vec<Vec<f64>>, Vec<String>) =
        match &encoding.classes {
            Some(classes) => {
                let probabilities: Vec<Vec<f64>> = raw
                    .rows()
                    .into_iter()
                    .map(|row| {
                        if row.len() == 1 {
                            vec![1.0 - row[0], row[0]]
                        } else {
                            row.to_vec()
                        }
                    })
                    .collect();
                let predicted = probabilities
                    .iter()
                    .map(|p| {
                        let best =
                            (0..p.len()).fold(0, |best, i| if p[i] > p[best] { i } else { best });
                        classes[best].clone()
                    })
                    .collect();
                let names = classes.iter().map(|c| format!("p_{c}")).collect();
                (names, probabilities, predicted)
            }
            None => {
                let values: Vec<Vec<f64>> =
                    raw.rows().into_iter().map(|row| row.to_vec()).collect();
                let predicted = values
                    .iter()
                    .map(|v| {
                        v.iter()
                            .map(|x| format!("{x:.4}"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    })
                    .collect();
                let names = encoding
                    .target_names
                    .iter()
                    .map(|t| format!("predicted_{t}"))
                    .collect();
                (names, values, predicted)
            }
        };

    let mut writer = csv::Writer::from_writer(Vec::new());
    let mut header = table.headers.clone();
    if encoding.task == Task::Classify {
        header.push(format!("predicted_{}", encoding.target_names[0]));
    }
    header.extend(output_names.iter().cloned());
    writer.write_record(&header)?;
    for i in 0..table.row_count() {
        let mut record: Vec<String> = table.row(i).map(str::to_string).collect();
        if encoding.task == Task::Classify {
            record.push(predicted[i].clone());
        }
        // Shortest round-trip form: the written numbers read back bit for bit.
        record.extend(outputs[i].iter().map(|v| v.to_string()));
        writer.write_record(&record)?;
    }
    let bytes = writer
        .into_inner()
        .map_err(|error| csv::Error::from(error.into_error()))?;
    let csv = String::from_utf8(bytes).expect("CSV of UTF-8 cells");

    Ok(PredictResult {
        labelled: encoding.classes.is_some(),
        lines: table.lines().to_vec(),
        predicted,
        output_names,
        outputs,
        csv,
    })
}

/// The model as JSON: input columns and their encoding, scaling, layers with weights,
/// biases and activations, and class labels (the format is described in the README).
pub(super) fn export(
    model: &FitResult,
    prepared: &Prepared,
) -> Result<crate::build::outcome::ExportResult, ModelUseError> {
    let network = single_network(model)?;
    let encoding = &prepared.encoding;
    let scaler = &prepared.partitions[0].scaler;
    let inputs: Vec<serde_json::Value> = encoding
        .columns
        .iter()
        .map(|column| match &column.kind {
            ColumnKind::Numeric => json!({"name": column.name, "kind": "numeric"}),
            ColumnKind::Categorical { categories } => {
                json!({"name": column.name, "kind": "categorical", "categories": categories})
            }
        })
        .collect();
    let layers: Vec<serde_json::Value> = network
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
        .collect();
    let output = match (&encoding.classes, network.output_size()) {
        (Some(_), 1) => "the probability of classes[1]; classes[0] has one minus it",
        (Some(_), _) => "one probability per class, in the order of classes",
        (None, _) => "the predicted value of each target, in the order of targets",
    };
    let uses_leaky = network
        .layers
        .iter()
        .any(|l| l.activation == Activation::LeakyRelu);
    let mut document = json!({
        "format": "stet-model",
        "version": EXPORT_FORMAT_VERSION,
        "task": word(&encoding.task),
        "inputs": inputs,
        "features": encoding.feature_names,
        "scaling": {"kind": word(&scaler.kind), "offset": scaler.offset, "divisor": scaler.divisor},
        "layers": layers,
        "targets": encoding.target_names,
        "classes": encoding.classes,
        "output": output,
    });
    if uses_leaky {
        document["leaky_relu_slope"] = json!(LEAKY_SLOPE);
    }
    let json = serde_json::to_string_pretty(&document).expect("a JSON value serialises");
    Ok(ExportResult { json })
}
