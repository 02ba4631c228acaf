//! What each step produces: the typed, serialisable results that the cache stores and
//! the report and JSON summary read.

use ndarray::Array2;
use serde::{Deserialize, Serialize};

use crate::data::{InputColumn, Scale, Task};
use crate::document::spec::MetricName;
use crate::document::spec::sweep::Varied;
use crate::judge::Judgement;
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
    /// Training and held-out rows of each partition (one for a holdout, k for folds).
    pub partitions: Vec<PartitionSummary>,
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
    pub train_rows: usize,
    pub test_rows: usize,
    pub train_classes: Vec<usize>,
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
    pub test: Option<SetMetrics>,
    /// The network's outputs on the held-out rows, in their order, for the paired
    /// tests (`judge`); `None` without held-out rows.
    pub held_out_outputs: Option<Array2<f64>>,
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
}

/// An export step's result: the model as JSON text.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ExportResult {
    pub json: String,
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
    Export(ExportResult),
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
}

/// Ranks fits by a metric's mean, best first; fits without a finite value go last.
pub(crate) fn rank(fits: &[FitResult], metric: MetricName, rows: RowSet) -> Vec<usize> {
    let value = |fit: &FitResult| {
        fit.metric(metric, rows)
            .map(|stat| stat.mean)
            .filter(|mean| mean.is_finite())
    };
    let mut order: Vec<usize> = (0..fits.len()).collect();
    order.sort_by(|&a, &b| match (value(&fits[a]), value(&fits[b])) {
        (Some(x), Some(y)) if metric.higher_is_better() => y.total_cmp(&x),
        (Some(x), Some(y)) => x.total_cmp(&y),
        (Some(_), None) => std::cmp::Ordering::Less,
        (None, Some(_)) => std::cmp::Ordering::Greater,
        (None, None) => std::cmp::Ordering::Equal,
    });
    order
}

/// Each headline metric over some runs; `None` when a run lacks the rows.
fn metric_stats<'a>(
    runs: impl Iterator<Item = &'a RunResult>,
    rows: RowSet,
) -> Option<Vec<MetricStat>> {
    let named: Vec<Vec<(&'static str, f64)>> = runs
        .map(|run| match rows {
            RowSet::Train => Some(run.train.named()),
            RowSet::Test => run.test.as_ref().map(SetMetrics::named),
        })
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
