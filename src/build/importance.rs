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

use crate::data::{ColumnKind, InputColumn, Task};
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

/// The feature columns of each input column, in feature order.
fn feature_ranges(columns: &[InputColumn]) -> Vec<Range<usize>> {
    let mut start = 0;
    columns
        .iter()
        .map(|column| {
            let width = match &column.kind {
                ColumnKind::Numeric => 1,
                ColumnKind::Categorical { categories } => categories.len(),
            };
            start += width;
            start - width..start
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
