//! Permutation importance (Breiman, 2001; Fisher, Rudin & Dominici, 2019): how far a
//! fitted network's held-out score falls when one input column's values are shuffled
//! across the held-out rows, which breaks that column's link with the target while
//! keeping its distribution. No I/O.

use std::ops::Range;

use ndarray::Array2;
use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use crate::build::outcome::RunResult;
use crate::data::{InputColumn, Task, feature_ranges};
use crate::nn::{self, Loss, Network};

/// A train step whose data has at most this many input columns measures importance
/// unless `importance: false`; past it the shuffles would cost more than most runs.
pub(crate) const IMPORTANCE_MAX_DEFAULT_INPUTS: usize = 100;

/// One input column's importance in one run, shuffle by shuffle.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct InputImportance {
    /// The column's name in the data file.
    pub input: String,
    /// Per shuffle: the ranking metric (accuracy, or R²) on the held-out rows as they
    /// are, minus the metric with this column shuffled.
    pub metric_drops: Vec<f64>,
    /// Per shuffle: the held-out mean loss with this column shuffled, minus the loss
    /// on the rows as they are.
    pub loss_rises: Vec<f64>,
}

/// What the shuffles need besides the network and its rows.
pub(crate) struct Shuffles<'a> {
    pub columns: &'a [InputColumn],
    pub task: Task,
    pub loss: Loss,
    pub repeats: usize,
    pub seed: u64,
}

/// Each input column's importance on `rows` (already scaled as the network reads
/// them). A categorical column's one-hot features move together, as one column.
pub(crate) fn permutation_importance(
    network: &Network,
    rows: &nn::Rows,
    shuffles: &Shuffles<'_>,
) -> Vec<InputImportance> {
    let (x, y) = rows.scaled_copy();
    let (base_metric, base_loss) = score(network, &x, &y, shuffles);
    let mut rng = ChaCha8Rng::seed_from_u64(shuffles.seed);
    let mut order: Vec<usize> = (0..x.nrows()).collect();
    feature_ranges(shuffles.columns)
        .into_iter()
        .zip(shuffles.columns)
        .map(|(features, column)| {
            let (mut metric_drops, mut loss_rises) = (Vec::new(), Vec::new());
            for _ in 0..shuffles.repeats {
                order.shuffle(&mut rng);
                let shuffled = with_features_reordered(&x, features.clone(), &order);
                let (metric, loss) = score(network, &shuffled, &y, shuffles);
                metric_drops.push(base_metric - metric);
                loss_rises.push(loss - base_loss);
            }
            InputImportance {
                input: column.name.clone(),
                metric_drops,
                loss_rises,
            }
        })
        .collect()
}

/// A copy of `x` whose `features` take row `order[i]`'s values in row `i`.
fn with_features_reordered(
    x: &Array2<f64>,
    features: Range<usize>,
    order: &[usize],
) -> Array2<f64> {
    let mut shuffled = x.clone();
    for (row, &from) in order.iter().enumerate() {
        for feature in features.clone() {
            shuffled[[row, feature]] = x[[from, feature]];
        }
    }
    shuffled
}

/// The ranking metric (accuracy to classify, R² to regress) and the mean loss.
fn score(
    network: &Network,
    x: &Array2<f64>,
    y: &Array2<f64>,
    shuffles: &Shuffles<'_>,
) -> (f64, f64) {
    let seen = nn::evaluate(network, &nn::Rows::all(x.view(), y.view()), shuffles.loss);
    let (targets, outputs) = (seen.targets.view(), seen.outputs.view());
    let metric = match shuffles.task {
        Task::Classify => nn::classification_metrics(targets, outputs).accuracy,
        Task::Regress => nn::regression_metrics(targets, outputs).r2,
    };
    (metric, seen.mean_loss)
}

/// One input column's importance over every shuffle of every run of a fit.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct ImportanceStat {
    pub input: String,
    /// Mean and sample standard deviation (n − 1; 0 for one shuffle) of the fall in
    /// the ranking metric.
    pub mean: f64,
    pub sd: f64,
    /// The same for the rise in held-out loss.
    pub loss_mean: f64,
    pub loss_sd: f64,
}

/// Each input's importance pooled over the runs' shuffles, most important first;
/// `None` when no run measured it.
pub(crate) fn pooled_importance(runs: &[RunResult]) -> Option<Vec<ImportanceStat>> {
    let measured: Vec<&[InputImportance]> = runs
        .iter()
        .filter_map(|run| run.importance.as_deref())
        .collect();
    let first = measured.first()?;
    let mut stats: Vec<ImportanceStat> = (0..first.len())
        .map(|column| {
            let drops: Vec<f64> = measured
                .iter()
                .flat_map(|run| run[column].metric_drops.iter().copied())
                .collect();
            let rises: Vec<f64> = measured
                .iter()
                .flat_map(|run| run[column].loss_rises.iter().copied())
                .collect();
            let (mean, sd) = mean_and_sd(&drops);
            let (loss_mean, loss_sd) = mean_and_sd(&rises);
            ImportanceStat {
                input: first[column].input.clone(),
                mean,
                sd,
                loss_mean,
                loss_sd,
            }
        })
        .collect();
    stats.sort_by(|a, b| b.mean.total_cmp(&a.mean));
    Some(stats)
}

/// Mean and sample standard deviation (n − 1), the standard deviation 0 for one value.
fn mean_and_sd(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    if values.len() < 2 {
        return (mean, 0.0);
    }
    let squares: f64 = values.iter().map(|v| (v - mean).powi(2)).sum();
    (mean, (squares / (n - 1.0)).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    // Hand-computed: [1, 2, 3, 6] has mean 3 and squared deviations 4 + 1 + 0 + 9 = 14,
    // so the sample sd is sqrt(14 / 3).
    #[test]
    fn the_spread_of_shuffles_is_the_sample_standard_deviation() {
        let (mean, sd) = mean_and_sd(&[1.0, 2.0, 3.0, 6.0]);
        assert_eq!(mean, 3.0);
        assert!((sd - (14.0f64 / 3.0).sqrt()).abs() < 1e-15);
        assert_eq!(mean_and_sd(&[0.5]), (0.5, 0.0));
    }
}
