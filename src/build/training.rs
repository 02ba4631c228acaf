//! Fitting one network on one partition of a prepared data set: the bridge between a
//! train step's settings and the `nn` engine. No I/O.

use std::time::Instant;

use ndarray::{Array2, Axis};

use crate::build::importance::{IMPORTANCE_MAX_DEFAULT_INPUTS, Shuffles, permutation_importance};
use crate::build::outcome::{DataSummary, ModelShape, RunResult, SetMetrics};
use crate::data::{Prepared, Scaler, Task};
use crate::document::spec::{LossChoice, NetSpec, OutputChoice, TrainSpec, word};
use crate::judge;
use crate::nn::{self, Activation, Loss, Network, TrainConfig};

/// Why a net and train step cannot fit the data they read (what only the data
/// decides: its task and its number of output columns).
#[derive(Debug, thiserror::Error)]
pub(crate) enum ShapeError {
    #[error(
        "a softmax output needs at least two output columns; with two classes use sigmoid or auto"
    )]
    SoftmaxOnOneOutput,
    #[error(
        "cross_entropy needs outputs that are probabilities (sigmoid or softmax), not {}",
        word(.0)
    )]
    CrossEntropyOn(Activation),
    #[error("cross_entropy is a classification loss; this data step regresses (use mse)")]
    CrossEntropyToRegress,
}

/// The network shape, output activation and loss a train step uses on this data.
pub(super) fn model_shape(
    data: &DataSummary,
    net: &NetSpec,
    train: &TrainSpec,
) -> Result<ModelShape, ShapeError> {
    let inputs = data.feature_count;
    let outputs = data.output_count();
    let task = data.task;
    // `init` is read when the network is initialised (`fit`), not part of its shape.
    let NetSpec {
        hidden,
        activation,
        output,
        init: _,
    } = net;
    let output = match output {
        OutputChoice::Auto => match task {
            Task::Classify if outputs == 1 => Activation::Sigmoid,
            Task::Classify => Activation::Softmax,
            Task::Regress => Activation::Linear,
        },
        OutputChoice::Sigmoid => Activation::Sigmoid,
        OutputChoice::Softmax => Activation::Softmax,
        OutputChoice::Linear => Activation::Linear,
        OutputChoice::Tanh => Activation::Tanh,
    };
    if output == Activation::Softmax && outputs == 1 {
        return Err(ShapeError::SoftmaxOnOneOutput);
    }
    let loss = match train.loss {
        LossChoice::Auto => match task {
            Task::Classify => Loss::CrossEntropy,
            Task::Regress => Loss::Mse,
        },
        LossChoice::Mse => Loss::Mse,
        LossChoice::CrossEntropy => Loss::CrossEntropy,
    };
    if loss == Loss::CrossEntropy && !matches!(output, Activation::Sigmoid | Activation::Softmax) {
        return Err(ShapeError::CrossEntropyOn(output));
    }
    if loss == Loss::CrossEntropy && task == Task::Regress {
        return Err(ShapeError::CrossEntropyToRegress);
    }
    let mut sizes = vec![inputs];
    sizes.extend(hidden);
    sizes.push(outputs);
    Ok(ModelShape {
        hints: hidden_width_hints(inputs, outputs, hidden),
        sizes,
        hidden: *activation,
        output,
        loss,
    })
}

/// Remarks on hidden widths outside the usual rules of thumb (common practice; the
/// usual published source is Heaton, Introduction to Neural Networks for Java, 2008):
/// a width between the output and input sizes, near two thirds of the input size plus
/// the output size, and under twice the input size.
pub(super) fn hidden_width_hints(inputs: usize, outputs: usize, hidden: &[usize]) -> Vec<String> {
    let low = inputs.min(outputs);
    let high = inputs.max(outputs);
    let suggested = suggested_width(inputs, outputs);
    hidden
        .iter()
        .enumerate()
        .filter_map(|(layer, &width)| {
            let mut broken = Vec::new();
            if width < low || width > high {
                broken.push(format!("between the output and input sizes ({low}–{high})"));
            }
            if width >= 2 * inputs {
                broken.push(format!("under twice the input size (< {})", 2 * inputs));
            }
            (!broken.is_empty()).then(|| {
                format!(
                    "hidden layer {} has {width} units; rules of thumb suggest {}; about {suggested} (two thirds of the inputs plus the outputs) is a common start",
                    layer + 1,
                    broken.join(" and ")
                )
            })
        })
        .collect()
}

/// About two thirds of the inputs plus the outputs, kept inside the other two rules so
/// that the hint never calls a width it flags a common start: with one input the
/// formula gives 2, which is twice the input size.
fn suggested_width(inputs: usize, outputs: usize) -> usize {
    let formula = (2.0 * inputs as f64 / 3.0 + outputs as f64).round() as usize;
    let low = inputs.min(outputs).max(1);
    let high = inputs.max(outputs).min(2 * inputs.max(1) - 1).max(low);
    formula.clamp(low, high)
}

/// Trains one network on partition `partition` and measures it on both sets of rows.
pub(super) fn fit(
    prepared: &Prepared,
    partition: usize,
    shape: &ModelShape,
    net: &NetSpec,
    train: &TrainSpec,
) -> RunResult {
    let part = &prepared.partitions[partition];
    // Targets are scaled once for the run (a column or a few, unlike the inputs);
    // with the identity scaling the data step's own matrix is read, unchanged.
    let scaled_targets =
        (!part.target_scaler.is_identity()).then(|| part.target_scaler.apply(prepared.y.view()));
    let targets = scaled_targets.as_ref().unwrap_or(&prepared.y);
    // Rows are read from the shared matrix and scaled batch by batch, so no run
    // holds a copy of the data set.
    let subset = |rows| {
        nn::Rows::all(prepared.x.view(), targets.view())
            .pick(rows)
            .scaled(&part.scaler.offset, &part.scaler.divisor)
    };
    let (train_rows, test_rows) = (subset(&part.train_rows), subset(&part.test_rows));
    let validation_rows = subset(&part.validation_rows);
    let started = Instant::now();
    let network = Network::initialise(
        &shape.sizes,
        shape.hidden,
        shape.output,
        net.init,
        train.seed,
    );
    let config = training_config(train, shape.loss);
    let has_test = !test_rows.is_empty();
    let has_validation = !validation_rows.is_empty();
    // Patience watches the validation rows when there are any, so the held-out
    // rows never steer the stop; without them it watches the held-out rows, as
    // before validation existed.
    let watched = if has_validation {
        Some(validation_rows)
    } else {
        has_test.then_some(test_rows)
    };
    let fitted = nn::train_at(
        train.precision,
        network,
        train_rows,
        watched,
        &config,
        |_, _| {},
    );
    let seconds = started.elapsed().as_secs_f64();
    let scored = Scored {
        task: prepared.encoding.task,
        loss: shape.loss,
        target_scaler: &part.target_scaler,
        own_targets: &prepared.y,
    };
    let measure = |rows, picked| scored.metrics(&fitted.network, rows, picked);
    let (train_metrics, ..) = measure(&train_rows, &part.train_rows);
    let held_out = has_test.then(|| measure(&test_rows, &part.test_rows));
    let (test_metrics, held_out_outputs) = match held_out {
        Some((metrics, _, outputs)) => (Some(metrics), Some(outputs)),
        None => (None, None),
    };
    let validation = has_validation.then(|| measure(&validation_rows, &part.validation_rows));
    let (validation_metrics, validation_errors) = match validation {
        Some((metrics, targets, outputs)) => {
            let task = prepared.encoding.task;
            let errors = judge::row_errors(task, targets.view(), outputs.view());
            (Some(metrics), Some(errors))
        }
        None => (None, None),
    };
    let columns = &prepared.encoding.columns;
    let wants_importance = train
        .importance
        .unwrap_or(columns.len() <= IMPORTANCE_MAX_DEFAULT_INPUTS);
    let shuffles = Shuffles {
        columns,
        task: prepared.encoding.task,
        loss: shape.loss,
        repeats: train.importance_repeats,
        seed: train.seed,
    };
    let importance = (wants_importance && has_test)
        .then(|| permutation_importance(&fitted.network, &test_rows, &shuffles));
    RunResult {
        fit: fitted,
        seconds,
        train: train_metrics,
        validation: validation_metrics,
        test: test_metrics,
        held_out_outputs,
        validation_errors,
        importance,
    }
}

/// The engine's training configuration for a train spec: the one place a spec's
/// settings become `nn` settings. Every field is named (no `..`), so a setting added
/// to `TrainSpec` does not compile until it is carried here or deliberately left out.
pub(super) fn training_config(train: &TrainSpec, loss: Loss) -> TrainConfig {
    let TrainSpec {
        // Step names choose the inputs; they are not training settings.
        data: _,
        net: _,
        // The task chose the loss already (`model_shape`), passed in as `loss`.
        loss: _,
        optimizer,
        batch,
        epochs,
        target_loss,
        patience,
        l2,
        shuffle,
        seed,
        // Chooses the float type `nn::train_at` trains in, so it is its argument.
        precision: _,
        // Measured on the fitted network afterwards (`fit`), not while training.
        importance: _,
        importance_repeats: _,
    } = train;
    TrainConfig {
        loss,
        optimizer: optimizer.clone(),
        batch: *batch,
        epochs: *epochs,
        target_loss: *target_loss,
        patience: *patience,
        l2: *l2,
        shuffle: *shuffle,
        seed: *seed,
        update_biases: true,
    }
}

/// How a run's outputs are scored: its task, its training loss, the scaling that
/// maps its outputs back to the targets' own units, and those targets (all kept rows).
pub(super) struct Scored<'a> {
    pub task: Task,
    pub loss: Loss,
    pub target_scaler: &'a Scaler,
    pub own_targets: &'a Array2<f64>,
}

impl Scored<'_> {
    /// The network's metrics on `rows` (whose targets are scaled as in training), and
    /// the targets and its outputs there in the targets' units. The loss stays in the
    /// units training saw, so it reads like the loss chart and `target_loss`; every other score
    /// compares the outputs, mapped back, with the unscaled targets of rows `picked`
    /// (the kept rows `rows` reads).
    pub(super) fn metrics(
        &self,
        network: &Network,
        rows: &nn::Rows,
        picked: &[usize],
    ) -> (SetMetrics, Array2<f64>, Array2<f64>) {
        let seen = nn::evaluate(network, rows, self.loss);
        let (targets, outputs) = if self.target_scaler.is_identity() {
            // The bits as they were before targets were scaled.
            (seen.targets, seen.outputs)
        } else {
            let mut outputs = seen.outputs;
            self.target_scaler.unapply_in_place(outputs.view_mut());
            (self.own_targets.select(Axis(0), picked), outputs)
        };
        let metrics = match self.task {
            Task::Classify => SetMetrics::Classification {
                loss: seen.mean_loss,
                metrics: nn::classification_metrics(targets.view(), outputs.view()),
            },
            Task::Regress => SetMetrics::Regression {
                loss: seen.mean_loss,
                metrics: nn::regression_metrics(targets.view(), outputs.view()),
            },
        };
        (metrics, targets, outputs)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{BatchSize, Optimizer, Precision};

    /// A data summary of `task` with `classes` (regression: one target column).
    fn summary(task: Task, classes: Option<Vec<String>>) -> DataSummary {
        DataSummary {
            file: "rows.csv".into(),
            task,
            rows_read: 10,
            rows_dropped: 0,
            columns: Vec::new(),
            feature_count: 3,
            target_names: vec!["y".into()],
            classes,
            scale: crate::data::Scale::Standard,
            scale_target: crate::data::Scale::None,
            partitions: Vec::new(),
            card: crate::data::card::DataCard::default(),
        }
    }

    fn net(output: OutputChoice) -> NetSpec {
        NetSpec {
            hidden: vec![4],
            activation: Activation::Tanh,
            output,
            init: crate::nn::Init::Xavier,
        }
    }

    fn train(loss: LossChoice) -> TrainSpec {
        TrainSpec {
            data: "d".into(),
            net: "n".into(),
            loss,
            optimizer: Optimizer::Adam {
                learning_rate: 0.001,
                beta1: 0.9,
                beta2: 0.999,
                epsilon: 1e-8,
            },
            batch: BatchSize::Full,
            epochs: 1,
            target_loss: None,
            patience: None,
            l2: 0.0,
            shuffle: true,
            seed: 0,
            precision: Precision::F64,
            importance: None,
            importance_repeats: 5,
        }
    }

    // What only the data decides is a typed error the run names, not a bare string.
    #[test]
    fn a_shape_the_data_cannot_take_is_a_typed_error_naming_the_setting() {
        let two_classes = summary(Task::Classify, Some(vec!["a".into(), "b".into()]));
        let softmax = model_shape(
            &two_classes,
            &net(OutputChoice::Softmax),
            &train(LossChoice::Auto),
        );
        assert!(matches!(softmax, Err(ShapeError::SoftmaxOnOneOutput)));
        let linear = model_shape(
            &two_classes,
            &net(OutputChoice::Linear),
            &train(LossChoice::CrossEntropy),
        );
        let error = linear.unwrap_err();
        assert!(
            matches!(error, ShapeError::CrossEntropyOn(Activation::Linear)),
            "{error}"
        );
        assert!(error.to_string().ends_with("not linear"), "{error}");
        let regress = summary(Task::Regress, None);
        let cross_entropy = model_shape(
            &regress,
            &net(OutputChoice::Sigmoid),
            &train(LossChoice::CrossEntropy),
        );
        assert!(matches!(
            cross_entropy,
            Err(ShapeError::CrossEntropyToRegress)
        ));
    }

    // Values chosen to differ from every default, so a setting dropped or swapped on
    // the way to the engine shows.
    #[test]
    fn every_train_setting_reaches_the_engine_configuration() {
        let train = TrainSpec {
            data: "d".into(),
            net: "n".into(),
            loss: LossChoice::Mse,
            optimizer: Optimizer::Sgd {
                learning_rate: 0.25,
                momentum: 0.5,
            },
            batch: BatchSize::Rows(7),
            epochs: 11,
            target_loss: Some(0.125),
            patience: Some(3),
            l2: 0.0625,
            shuffle: false,
            seed: 99,
            precision: Precision::F32,
            importance: Some(false),
            importance_repeats: 3,
        };
        let config = training_config(&train, Loss::CrossEntropy);
        assert_eq!(
            config,
            TrainConfig {
                loss: Loss::CrossEntropy,
                optimizer: Optimizer::Sgd {
                    learning_rate: 0.25,
                    momentum: 0.5,
                },
                batch: BatchSize::Rows(7),
                epochs: 11,
                target_loss: Some(0.125),
                patience: Some(3),
                l2: 0.0625,
                shuffle: false,
                seed: 99,
                update_biases: true,
            }
        );
    }

    // Seven inputs and two outputs: 3–4 hidden units sit inside the rules of thumb,
    // 16 breaks them (common practice; Heaton 2008).
    #[test]
    fn the_hidden_width_hint_flags_sixteen_units_on_seven_inputs() {
        assert!(hidden_width_hints(7, 2, &[3]).is_empty());
        assert!(hidden_width_hints(7, 2, &[4]).is_empty());
        let hints = hidden_width_hints(7, 2, &[16]);
        assert_eq!(hints.len(), 1);
        assert!(hints[0].contains("16 units"), "{hints:?}");
        assert!(hints[0].contains("under twice the input size"), "{hints:?}");
    }

    /// The width a hint calls a common start, read back from its text.
    fn common_start(hint: &str) -> usize {
        let after = hint.split("about ").nth(1).expect("the hint names a start");
        after.split(' ').next().unwrap().parse().unwrap()
    }

    // Issue 11 item 13: with one input the hint flagged 2 units and called 2 the
    // common start in the same sentence.
    #[test]
    fn the_hidden_width_hint_never_calls_a_width_it_flags_a_common_start() {
        for inputs in 1..=12 {
            for outputs in 1..=5 {
                for width in 1..=30 {
                    for hint in hidden_width_hints(inputs, outputs, &[width]) {
                        let start = common_start(&hint);
                        assert!(
                            hidden_width_hints(inputs, outputs, &[start]).is_empty(),
                            "{inputs} inputs, {outputs} outputs: {hint}"
                        );
                    }
                }
            }
        }
    }
}
