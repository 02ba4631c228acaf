//! Using a trained model: predictions for new rows, and the export that lets other
//! programs apply the model without stet (its file formats are `crate::export`'s). Both
//! return data; the command layer writes any files.

use ndarray::{Array2, Axis};
use serde_json::{Value, json};

use super::training::Scored;
use crate::build::outcome::{BatchScores, FitResult, PredictResult, PredictScore};
use crate::data::{self, KnownTargets, Prepared, Task};
use crate::document::spec::{ExportFormat, TrainSpec, word};
use crate::export::{self, ExportResult, ExportedModel, Provenance};
use crate::judge::{self, diagnosis::target_scores};
use crate::nn::{self, BatchSize, Network, Optimizer};
use crate::plan::Plan;
use crate::plan::input_file::{InputFile, ReadError};

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
    /// ONNX names each graph input after its feature, so names must be unique and
    /// clear of the names stet gives the graph's inner values and output.
    #[error(
        "the feature '{name}' cannot name an ONNX input: another feature, the output or a name stet uses inside the graph (starting with 'stet:') has it; rename the column"
    )]
    OnnxInputName { name: String },
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
/// `seed` draws the bootstrap intervals of a labelled batch's scores.
pub(super) fn predict(
    model: &FitResult,
    prepared: &Prepared,
    file: &InputFile,
    seed: u64,
) -> Result<PredictResult, ModelUseError> {
    let network = single_network(model)?;
    let table = file.read(|reader| data::read_table(reader))?;
    let in_file = |error| ModelUseError::Encode {
        file: file.written.clone(),
        error,
    };
    let x = prepared.encoding.encode_inputs(&table).map_err(in_file)?;
    let known = prepared.encoding.encode_targets(&table).map_err(in_file)?;
    let scored = known.map(|known| score_batch(model, network, prepared, &x, known, seed));
    let scaled = prepared.partitions[0].scaler.apply(x.view());
    let mut raw = network.predict(scaled.view());
    // Regression outputs back in the targets' units; class probabilities are never scaled.
    prepared.partitions[0]
        .target_scaler
        .unapply_in_place(raw.view_mut());
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

    let identifying = encoding.identifying_columns(&table, IDENTIFYING_COLUMNS);
    Ok(PredictResult {
        labelled: encoding.classes.is_some(),
        lines: table.lines().to_vec(),
        predicted,
        output_names,
        outputs,
        csv,
        identifier_names: identifying
            .iter()
            .map(|&col| table.headers[col].clone())
            .collect(),
        identifiers: (0..table.row_count())
            .map(|row| {
                identifying
                    .iter()
                    .map(|&col| table.cell(row, col).to_string())
                    .collect()
            })
            .collect(),
        scored,
    })
}

/// Columns that name a predicted row beside its predictions (issue 15).
const IDENTIFYING_COLUMNS: usize = 2;

/// Scores the rows of a labelled batch whose target is known, as the train step
/// scores its held-out rows: the same metrics (`training::Scored`), the same
/// intervals from the same seed (`judge`).
fn score_batch(
    model: &FitResult,
    network: &Network,
    prepared: &Prepared,
    x: &Array2<f64>,
    known: KnownTargets,
    seed: u64,
) -> PredictScore {
    let scores = (!known.rows.is_empty()).then(|| {
        let part = &prepared.partitions[0];
        let task = prepared.encoding.task;
        let inputs = x.select(Axis(0), &known.rows);
        // Training saw scaled targets, so the loss is measured on them too.
        let scaled_targets = part.target_scaler.apply(known.y.view());
        let rows = nn::Rows::all(inputs.view(), scaled_targets.view())
            .scaled(&part.scaler.offset, &part.scaler.divisor);
        let scored = Scored {
            task,
            loss: model.shape.loss,
            target_scaler: &part.target_scaler,
            own_targets: &known.y,
        };
        let every_row: Vec<usize> = (0..known.rows.len()).collect();
        let (metrics, targets, outputs) = scored.metrics(network, &rows, &every_row);
        BatchScores {
            metrics,
            // A batch of one class still has an accuracy interval (Wilson's needs only
            // a count); the train card's stricter rule is for its paired tests.
            intervals: (targets.nrows() >= 2)
                .then(|| judge::intervals(task, targets.view(), outputs.view(), seed)),
            targets: match task {
                Task::Regress => target_scores(targets.view(), outputs.view()),
                Task::Classify => Vec::new(),
            },
        }
    });
    PredictScore {
        rows: known.rows.len(),
        empty_rows: known.empty_rows,
        unseen_labels: known.unseen_labels,
        scores,
    }
}

/// The model and where it came from, ready to be written in the step's format.
pub(super) fn export(
    model: &FitResult,
    prepared: &Prepared,
    format: ExportFormat,
    provenance: Provenance,
) -> Result<ExportResult, ModelUseError> {
    let network = single_network(model)?;
    let encoding = &prepared.encoding;
    let exported = ExportedModel {
        task: encoding.task,
        inputs: encoding.columns.clone(),
        features: encoding.feature_names.clone(),
        scaler: prepared.partitions[0].scaler.clone(),
        network: network.clone(),
        target_scaler: prepared.partitions[0].target_scaler.clone(),
        targets: encoding.target_names.clone(),
        classes: encoding.classes.clone(),
    };
    if format == ExportFormat::Onnx
        && let Some(name) = export::clashing_input_name(&exported)
    {
        return Err(ModelUseError::OnnxInputName {
            name: name.to_string(),
        });
    }
    Ok(ExportResult {
        format,
        model: exported,
        provenance,
    })
}

/// Where the model of the step `model_step` came from: its settings as applied, its
/// run's key, its held-out metrics and its data file. `fit_index` picks the fit among
/// the step's fits: 0 for a train step, the best combination for a sweep.
pub(super) fn provenance(
    plan: &Plan,
    model_step: usize,
    fit_index: usize,
    model: &FitResult,
) -> Provenance {
    let step = &plan.steps[model_step];
    let fit = &step.fits[fit_index];
    let data = &plan.steps[fit.data];
    let file = &data.files[0];
    Provenance {
        stet_version: env!("CARGO_PKG_VERSION").to_string(),
        model_step: step.id.clone(),
        run_key: fit.runs[0].key.to_string(),
        net_settings: serde_json::to_string(&fit.net).expect("settings serialise"),
        train_settings: applied_train_settings(&fit.train).to_string(),
        held_out: model.runs[0].test.as_ref().map(|metrics| {
            metrics
                .named()
                .into_iter()
                .map(|(name, value)| (name.to_string(), value))
                .collect()
        }),
        data_file: file.written.clone(),
        data_hash: file.hash.to_hex().to_string(),
    }
}

/// The train settings as applied, named and shaped as a document writes them: the
/// key's serialisation nests the optimizer's settings under its name, tags the batch
/// size and leaves out the default precision.
fn applied_train_settings(train: &TrainSpec) -> Value {
    let mut settings = serde_json::to_value(train).expect("settings serialise");
    match train.optimizer {
        Optimizer::Sgd {
            learning_rate,
            momentum,
        } => {
            settings["optimizer"] = json!("sgd");
            settings["learning_rate"] = json!(learning_rate);
            settings["momentum"] = json!(momentum);
        }
        Optimizer::Adam {
            learning_rate,
            beta1,
            beta2,
            epsilon,
        } => {
            settings["optimizer"] = json!("adam");
            settings["learning_rate"] = json!(learning_rate);
            settings["beta1"] = json!(beta1);
            settings["beta2"] = json!(beta2);
            settings["epsilon"] = json!(epsilon);
        }
    }
    settings["batch"] = match train.batch {
        BatchSize::Rows(rows) => json!(rows),
        BatchSize::Full => json!(word(&BatchSize::Full)),
    };
    settings["precision"] = json!(word(&train.precision));
    settings
}
