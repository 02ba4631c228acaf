//! What each step produces: the typed, serialisable results that the cache stores and
//! the report and JSON summary read.

use std::borrow::Borrow;

use ndarray::Array2;
use serde::{Deserialize, Serialize};

use crate::build::importance::InputImportance;
use crate::data::card::DataCard;
use crate::data::{InputColumn, Scale, Task};
use crate::document::spec::MetricName;
use crate::document::spec::sweep::Varied;
use crate::export::ExportResult;
use crate::judge::stats::Interval;
use crate::judge::{Judgement, RowErrors, Scores};
use crate::nn::{Activation, ClassificationMetrics, Loss, RegressionMetrics, TrainOutcome};

/// Wall-clock seconds.
pub(crate) type Seconds = f64;

/// A data step's result as the report shows it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct DataSummary {
    pub file: String,
    pub task: Task,
    pub rows_read: usize,
    pub rows_dropped: usize,
    pub columns: Vec<InputColumn>,
    pub feature_count: usize,
    pub target_names: Vec<String>,
    pub classes: Option<Vec<String>>,
    pub scale: Scale,
    /// How targets were scaled for training (`none` for classification).
    pub scale_target: Scale,
    /// Training and held-out rows of each partition (one for a holdout, k for folds).
    pub partitions: Vec<PartitionSummary>,
    /// Column statistics over every row read, and the warnings.
    pub card: DataCard,
}

impl DataSummary {
    /// Output units a network needs: one for two classes, one per class for more,
    /// one per target column for regression.
    pub(crate) fn output_count(&self) -> usize {
        match (&self.task, &self.classes) {
            (Task::Classify, Some(classes)) if classes.len() == 2 => 1,
            (Task::Classify, Some(classes)) => classes.len(),
            _ => self.target_names.len(),
        }
    }
}

/// Row counts of one partition, with class balance for classification.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct PartitionSummary {
    /// Rows fitted on (the validation rows not among them).
    pub train_rows: usize,
    pub validation_rows: usize,
    pub test_rows: usize,
    pub train_classes: Vec<usize>,
    pub validation_classes: Vec<usize>,
    pub test_classes: Vec<usize>,
}

/// Metrics of a fitted network on one set of rows.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum SetMetrics {
    Classification {
        loss: f64,
        metrics: ClassificationMetrics,
    },
    Regression {
        loss: f64,
        metrics: RegressionMetrics,
    },
}

impl SetMetrics {
    /// The headline numbers by name, as the JSON summary and tables list them.
    pub(crate) fn named(&self) -> Vec<(&'static str, f64)> {
        match self {
            SetMetrics::Classification { loss, metrics } => vec![
                ("loss", *loss),
                ("accuracy", metrics.accuracy),
                ("log_loss", metrics.log_loss),
            ],
            SetMetrics::Regression { loss, metrics } => vec![
                ("loss", *loss),
                ("mse", metrics.mse),
                ("mae", metrics.mae),
                ("r2", metrics.r2),
            ],
        }
    }
}

/// One network fitted on one partition.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct RunResult {
    pub fit: TrainOutcome,
    pub seconds: Seconds,
    pub train: SetMetrics,
    /// On the training rows set aside by `validation`; `None` without them.
    pub validation: Option<SetMetrics>,
    pub test: Option<SetMetrics>,
    /// The network's outputs on the held-out rows, in their order, for the paired
    /// tests (`judge`); `None` without held-out rows.
    pub held_out_outputs: Option<Array2<f64>>,
    /// How each validation row went, in their order, for the paired tests of a
    /// sweep ranked on them; `None` without validation rows.
    pub validation_errors: Option<RowErrors>,
    /// Each input column's permutation importance on the held-out rows; `None`
    /// without held-out rows or when the step turned it off.
    pub importance: Option<Vec<InputImportance>>,
}

impl RunResult {
    /// The metrics on `rows`; `None` when this run has no such rows.
    pub(crate) fn metrics_on(&self, rows: RowSet) -> Option<&SetMetrics> {
        match rows {
            RowSet::Train => Some(&self.train),
            RowSet::Validation => self.validation.as_ref(),
            RowSet::Test => self.test.as_ref(),
        }
    }
}

/// How a train step's networks were built, shared by all its runs.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ModelShape {
    /// Layer widths from inputs to outputs.
    pub sizes: Vec<usize>,
    pub hidden: Activation,
    pub output: Activation,
    pub loss: Loss,
    /// Rule-of-thumb remarks on hidden-layer widths.
    pub hints: Vec<String>,
}

/// One fit's result: a network per seed and partition, all with the same settings.
/// A train step has one fit; a sweep has one per combination.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct FitResult {
    /// A sweep's varied settings and their values (empty for a train step).
    pub settings: Vec<Varied>,
    pub shape: ModelShape,
    pub runs: Vec<RunResult>,
    /// The fit against the baseline and the model without a hidden layer on its
    /// held-out rows; `None` without held-out rows.
    pub judgement: Option<Box<Judgement>>,
}

/// A sweep's result: its fits in grid order and their ranking.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct SweepResult {
    pub fits: Vec<FitResult>,
    pub rank_by: MetricName,
    /// Which rows the ranking metric is measured on.
    pub rank_rows: RowSet,
    /// Indices into `fits`, best first.
    pub ranking: Vec<usize>,
    /// Per fit: whether its paired test against the best is not significant at 0.05
    /// on the ranking rows; `None` for the best and when no test could be made.
    pub within_noise_of_best: Vec<Option<bool>>,
}

impl SweepResult {
    /// The best-ranked fit.
    pub(crate) fn best(&self) -> &FitResult {
        &self.fits[self.ranking[0]]
    }

    /// The best fit as a model to use: its first seed's runs only (one network per
    /// partition), since repeats are the same settings trained again.
    pub(crate) fn best_model(&self, partitions: usize) -> FitResult {
        let best = self.best();
        FitResult {
            runs: best.runs.iter().take(partitions).cloned().collect(),
            ..best.clone()
        }
    }
}

/// A predict step's result: one row of outputs per input row.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct PredictResult {
    /// Whether `predicted` holds class labels (classification) rather than values.
    pub labelled: bool,
    /// File line of each predicted row.
    pub lines: Vec<u64>,
    /// The predicted class label, or the predicted values as text.
    pub predicted: Vec<String>,
    /// Names of the output columns (class probabilities or target values).
    pub output_names: Vec<String>,
    pub outputs: Vec<Vec<f64>>,
    /// The new rows with the predictions appended, as CSV.
    pub csv: String,
    /// The columns that name the rows for a reader (neither inputs nor targets, at
    /// most two, in file order); empty when the file has none, and lines name them.
    pub identifier_names: Vec<String>,
    /// Each row's cells of those columns.
    pub identifiers: Vec<Vec<String>>,
    /// How the rows scored against the file's own targets; `None` when the file
    /// lacks a target column.
    pub scored: Option<PredictScore>,
}

/// A labelled batch scored like held-out rows: the rows whose target is known.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct PredictScore {
    /// Rows scored.
    pub rows: usize,
    /// Rows predicted but not scored: their target cell is empty.
    pub empty_rows: usize,
    /// Labels the model never saw, each with its row count (not scored).
    pub unseen_labels: Vec<(String, usize)>,
    /// `None` when no row could be scored.
    pub scores: Option<BatchScores>,
}

/// The scores of a labelled batch, as the train card gives its held-out rows'.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct BatchScores {
    /// The loss in the units training saw; every other score in the targets' units.
    pub metrics: SetMetrics,
    /// 95 % intervals by name (`judge`); `None` when the rows are too few.
    pub intervals: Option<Vec<(String, Interval)>>,
    /// Regression: each target's scores, in target order; empty for classification.
    pub targets: Vec<Scores>,
}

/// A step's result.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Outcome {
    Data(DataSummary),
    Net,
    Train(FitResult),
    Sweep(SweepResult),
    /// A comparison is drawn from its runs' results when the report is rendered.
    Compare,
    Predict(PredictResult),
    /// Boxed: the network and its provenance outweigh every other result.
    Export(Box<ExportResult>),
}

/// A metric over a train step's runs: the mean and, with several runs, the sample
/// standard deviation (n − 1).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub(crate) struct MetricStat {
    pub name: &'static str,
    pub mean: f64,
    pub sd: Option<f64>,
}

/// Which rows metrics are measured on.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub(crate) enum RowSet {
    Train,
    /// Training rows set aside by the data step's `validation`, not fitted on.
    Validation,
    Test,
}

impl FitResult {
    /// Each headline metric on `rows`, over all runs; `None` when there are no such rows.
    pub(crate) fn metric_stats(&self, rows: RowSet) -> Option<Vec<MetricStat>> {
        metric_stats(self.runs.iter(), rows)
    }

    /// One metric's statistics by name; `None` when the rows or the metric are absent.
    pub(crate) fn metric(&self, name: MetricName, rows: RowSet) -> Option<MetricStat> {
        self.metric_stats(rows)?
            .into_iter()
            .find(|stat| stat.name == name.key())
    }

    /// Held-out rows when every run has them, else training rows.
    pub(crate) fn report_rows(&self) -> RowSet {
        if self.runs.iter().all(|run| run.test.is_some()) {
            RowSet::Test
        } else {
            RowSet::Train
        }
    }

    /// The rows a choice between fits is made on: validation rows when every run
    /// has them, so held-out rows are scored once and steer nothing; else as reported.
    pub(crate) fn choice_rows(&self) -> RowSet {
        if self.runs.iter().all(|run| run.validation.is_some()) {
            RowSet::Validation
        } else {
            self.report_rows()
        }
    }
}

/// Ranks fits by a metric's mean, best first; fits without a finite value go last.
/// Ties are broken by the loss on the same rows, then by document (grid) order.
pub(crate) fn rank<F: Borrow<FitResult>>(
    fits: &[F],
    metric: MetricName,
    rows: RowSet,
) -> Vec<usize> {
    let value = |fit: &F, metric: MetricName| {
        fit.borrow()
            .metric(metric, rows)
            .map(|stat| stat.mean)
            .filter(|mean| mean.is_finite())
    };
    let mut order: Vec<usize> = (0..fits.len()).collect();
    // A stable sort, so fits equal on both keys keep their grid order.
    order.sort_by(|&a, &b| {
        compare_metric(value(&fits[a], metric), value(&fits[b], metric), metric).then_with(|| {
            compare_metric(
                value(&fits[a], MetricName::Loss),
                value(&fits[b], MetricName::Loss),
                MetricName::Loss,
            )
        })
    });
    order
}

/// Better first; a missing (or non-finite) value after any value.
fn compare_metric(a: Option<f64>, b: Option<f64>, metric: MetricName) -> std::cmp::Ordering {
    match (a, b) {
        (Some(x), Some(y)) if metric.higher_is_better() => y.total_cmp(&x),
        (Some(x), Some(y)) => x.total_cmp(&y),
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => std::cmp::Ordering::Equal,
    }
}

/// Each headline metric over some runs; `None` when a run lacks the rows.
fn metric_stats<'a>(
    runs: impl Iterator<Item = &'a RunResult>,
    rows: RowSet,
) -> Option<Vec<MetricStat>> {
    let named: Vec<Vec<(&'static str, f64)>> = runs
        .map(|run| run.metrics_on(rows).map(SetMetrics::named))
        .collect::<Option<_>>()?;
    let first = named.first()?;
    Some(
        first
            .iter()
            .enumerate()
            .map(|(i, (name, _))| {
                let values: Vec<f64> = named.iter().map(|set| set[i].1).collect();
                let (mean, sd) = mean_and_sd(&values);
                MetricStat { name, mean, sd }
            })
            .collect(),
    )
}

/// Mean and sample standard deviation; no deviation for a single value.
pub(crate) fn mean_and_sd(values: &[f64]) -> (f64, Option<f64>) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    if values.len() < 2 {
        return (mean, None);
    }
    let variance = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, Some(variance.sqrt()))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A one-run fit whose held-out rows score `accuracy` and `loss`.
    fn scored(accuracy: f64, loss: f64) -> FitResult {
        let network = crate::nn::Network::initialise(
            &[1, 1],
            crate::nn::Activation::Tanh,
            crate::nn::Activation::Sigmoid,
            crate::nn::Init::Xavier,
            0,
        );
        let metrics = SetMetrics::Classification {
            loss,
            metrics: ClassificationMetrics {
                accuracy,
                log_loss: loss,
                confusion: Vec::new(),
                precision: Vec::new(),
                recall: Vec::new(),
            },
        };
        FitResult {
            settings: Vec::new(),
            shape: ModelShape {
                sizes: vec![1, 1],
                hidden: Activation::Tanh,
                output: Activation::Sigmoid,
                loss: Loss::CrossEntropy,
                hints: Vec::new(),
            },
            runs: vec![RunResult {
                fit: TrainOutcome {
                    network,
                    history: Vec::new(),
                    stop: crate::nn::StopReason::EpochLimit,
                    epochs_run: 1,
                    best_epoch: None,
                },
                seconds: 0.0,
                train: metrics.clone(),
                validation: None,
                test: Some(metrics),
                held_out_outputs: None,
                validation_errors: None,
                importance: None,
            }],
            judgement: None,
        }
    }

    // Issue 14: a tie in the ranking metric goes to the lower loss on the same rows,
    // and a tie in both to the combination written first.
    #[test]
    fn ties_in_the_ranking_metric_go_to_the_lower_loss_then_to_grid_order() {
        let fits = [
            scored(0.9, 0.40),
            scored(0.9, 0.30),
            scored(0.8, 0.10),
            scored(0.9, 0.30),
            scored(f64::NAN, 0.01),
        ];
        assert_eq!(
            rank(&fits, MetricName::Accuracy, RowSet::Test),
            [1, 3, 0, 2, 4]
        );
    }

    // Computed by hand: mean 7/3; squared deviations 16/9 + 1/9 + 25/9 = 42/9, over n − 1 = 2
    // gives 7/3, whose square root is 1.5275252316519468 (numpy: np.std([1, 2, 4], ddof=1)).
    #[test]
    fn mean_and_sample_sd_match_numpy() {
        let (mean, sd) = mean_and_sd(&[1.0, 2.0, 4.0]);
        assert!((mean - 7.0 / 3.0).abs() < 1e-15);
        assert!((sd.unwrap() - 1.5275252316519468).abs() < 1e-12);
        assert_eq!(mean_and_sd(&[3.0]), (3.0, None));
    }
}
