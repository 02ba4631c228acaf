//! Is the network any good? Each fit is held against what needs no network on the same
//! held-out rows: a baseline (the majority class, or the training mean) and the same
//! inputs without a hidden layer (`linear`); its held-out metrics get 95 % intervals and
//! a paired test against the linear model (`stats`); the report words the verdict
//! (`report/verdict.rs`). No I/O: the build caches what is computed here.

pub mod diagnosis;
pub mod linear;
pub mod stats;

use ndarray::{Array1, Array2, ArrayView2, Axis, concatenate};
use serde::{Deserialize, Serialize};

use crate::data::{Prepared, Task};
use crate::nn;
use stats::Interval;

/// Bumped when the baseline, the linear solver or the statistics change what they
/// compute, so cached references and judgements miss.
///
/// 2: a judgement keeps each fold's own intervals.
/// 3: a judgement keeps the held-out rows' lines and their diagnosis (ROC,
///    reliability, per-target fits).
/// 4: the logistic reference stops once its Newton decrement is below rounding, and
///    takes conjugate-gradient steps on wide inputs with many classes.
pub(crate) const JUDGE_VERSION: u32 = 4;

/// Held-out scores of one set of outputs.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Scores {
    Classification { accuracy: f64, log_loss: f64 },
    Regression { mse: f64, mae: f64, r2: f64 },
}

impl Scores {
    /// Scores of `outputs` against `targets`, with the engine's metric definitions.
    pub(crate) fn of(task: Task, targets: ArrayView2<f64>, outputs: ArrayView2<f64>) -> Scores {
        match task {
            Task::Classify => {
                let metrics = nn::classification_metrics(targets, outputs);
                Scores::Classification {
                    accuracy: metrics.accuracy,
                    log_loss: metrics.log_loss,
                }
            }
            Task::Regress => {
                let metrics = nn::regression_metrics(targets, outputs);
                Scores::Regression {
                    mse: metrics.mse,
                    mae: metrics.mae,
                    r2: metrics.r2,
                }
            }
        }
    }

    /// The scores by name, in the order the summary lists them.
    pub(crate) fn named(&self) -> Vec<(&'static str, f64)> {
        match *self {
            Scores::Classification { accuracy, log_loss } => {
                vec![("accuracy", accuracy), ("log_loss", log_loss)]
            }
            Scores::Regression { mse, mae, r2 } => vec![("mse", mse), ("mae", mae), ("r2", r2)],
        }
    }

    /// The headline: accuracy for classification, R² for regression.
    pub(crate) fn headline(&self) -> (&'static str, f64) {
        match *self {
            Scores::Classification { accuracy, .. } => ("accuracy", accuracy),
            Scores::Regression { r2, .. } => ("r2", r2),
        }
    }

    /// Each score averaged over partitions.
    fn mean(all: &[Scores]) -> Scores {
        let n = all.len() as f64;
        let average = |pick: &dyn Fn(&Scores) -> f64| all.iter().map(pick).sum::<f64>() / n;
        match all[0] {
            Scores::Classification { .. } => Scores::Classification {
                accuracy: average(&|s| s.named()[0].1),
                log_loss: average(&|s| s.named()[1].1),
            },
            Scores::Regression { .. } => Scores::Regression {
                mse: average(&|s| s.named()[0].1),
                mae: average(&|s| s.named()[1].1),
                r2: average(&|s| s.named()[2].1),
            },
        }
    }
}

/// What one partition's rows give without a network, cached per data step and
/// partition (its key does not depend on any network, so every train step and sweep
/// combination on those rows shares it).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct Reference {
    /// The held-out targets, in the partition's held-out row order.
    pub targets: Array2<f64>,
    /// The file line of each held-out row, in that order.
    pub lines: Vec<u64>,
    /// The baseline's output for every row: training class frequencies, or the
    /// training mean.
    pub baseline: Array1<f64>,
    pub linear_train: Scores,
    /// The linear model's outputs on the held-out rows.
    pub linear_outputs: Array2<f64>,
}

/// Fits the baseline and the linear model on partition `partition`'s training rows.
pub(crate) fn reference(prepared: &Prepared, partition: usize) -> Reference {
    let task = prepared.encoding.task;
    let split = prepared.split(partition);
    // The training frequencies (classification) and the training mean (regression)
    // are both the column means of the training targets.
    let baseline = split
        .y_train
        .mean_axis(Axis(0))
        .expect("a partition has training rows");
    let model = match task {
        Task::Classify => linear::fit_logistic(split.x_train.view(), split.y_train.view()),
        Task::Regress => linear::fit_least_squares(split.x_train.view(), split.y_train.view()),
    };
    let train_outputs = model.predict(split.x_train.view());
    Reference {
        linear_train: Scores::of(task, split.y_train.view(), train_outputs.view()),
        linear_outputs: model.predict(split.x_test.view()),
        targets: split.y_test,
        lines: prepared.partitions[partition]
            .test_rows
            .iter()
            .map(|&row| prepared.lines[row])
            .collect(),
        baseline,
    }
}

/// How each held-out row went, for paired tests between two models on the same rows.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum RowErrors {
    /// Whether the predicted class was the true one.
    Correct(Vec<bool>),
    /// The squared error, averaged over target columns.
    Squared(Vec<f64>),
}

impl RowErrors {
    /// The rows of `parts` one after another; `None` when there are no parts or
    /// they mix classification and regression.
    pub(crate) fn joined(parts: &[&RowErrors]) -> Option<RowErrors> {
        match parts.first()? {
            RowErrors::Correct(_) => parts
                .iter()
                .map(|part| match part {
                    RowErrors::Correct(rows) => Some(rows.iter().copied()),
                    RowErrors::Squared(_) => None,
                })
                .collect::<Option<Vec<_>>>()
                .map(|rows| RowErrors::Correct(rows.into_iter().flatten().collect())),
            RowErrors::Squared(_) => parts
                .iter()
                .map(|part| match part {
                    RowErrors::Squared(rows) => Some(rows.iter().copied()),
                    RowErrors::Correct(_) => None,
                })
                .collect::<Option<Vec<_>>>()
                .map(|rows| RowErrors::Squared(rows.into_iter().flatten().collect())),
        }
    }
}

/// A paired test of two models on the same held-out rows.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Paired {
    /// McNemar's exact test on the rows exactly one of them classified correctly.
    Mcnemar {
        p_value: f64,
        only_first: usize,
        only_second: usize,
    },
    /// The mean of first − second squared error, with its paired bootstrap interval.
    SquaredErrorDifference { mean: f64, interval: Interval },
}

/// Significance level of every paired test stet reports.
pub(crate) const ALPHA: f64 = 0.05;

impl Paired {
    /// Whether the two differ at `ALPHA`.
    pub(crate) fn significant(&self) -> bool {
        match self {
            Paired::Mcnemar { p_value, .. } => *p_value < ALPHA,
            Paired::SquaredErrorDifference { interval, .. } => !interval.contains(0.0),
        }
    }

    /// Whether the first model did better on these rows (fewer errors).
    pub(crate) fn first_better(&self) -> bool {
        match self {
            Paired::Mcnemar {
                only_first,
                only_second,
                ..
            } => only_first > only_second,
            Paired::SquaredErrorDifference { mean, .. } => *mean < 0.0,
        }
    }
}

/// The paired test of `first` against `second`, or `None` when the rows are too few
/// for one (see `enough_rows`) or are not the same rows.
pub(crate) fn paired(first: &RowErrors, second: &RowErrors, seed: u64) -> Option<Paired> {
    match (first, second) {
        (RowErrors::Correct(a), RowErrors::Correct(b)) if a.len() == b.len() && a.len() >= 2 => {
            let only_first = a.iter().zip(b).filter(|(x, y)| **x && !**y).count();
            let only_second = a.iter().zip(b).filter(|(x, y)| !**x && **y).count();
            Some(Paired::Mcnemar {
                p_value: stats::mcnemar_exact(only_first, only_second),
                only_first,
                only_second,
            })
        }
        (RowErrors::Squared(a), RowErrors::Squared(b)) if a.len() == b.len() && a.len() >= 2 => {
            let n = a.len() as f64;
            let mean = a.iter().zip(b).map(|(x, y)| x - y).sum::<f64>() / n;
            Some(Paired::SquaredErrorDifference {
                mean,
                interval: stats::paired_mean_difference(a, b, seed),
            })
        }
        _ => None,
    }
}

/// The baseline's rule: what it predicts for every row.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum BaselineRule {
    MajorityClass,
    TrainingMean,
}

/// A fit held against the baseline and the linear model on its held-out rows (with
/// folds, every row once, each scored by the fold that held it out).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct Judgement {
    /// The data step's key: fits with the same key were held out on the same rows.
    pub rows_key: String,
    pub held_out_rows: usize,
    pub network: Scores,
    pub baseline_rule: BaselineRule,
    pub baseline: Scores,
    pub linear_train: Scores,
    pub linear: Scores,
    /// 95 % intervals of the network's held-out scores, by name; `None` when the
    /// held-out rows are too few.
    pub intervals: Option<Vec<(String, Interval)>>,
    /// The network against the linear model (network first); `None` when too few rows.
    pub versus_linear: Option<Paired>,
    pub network_errors: RowErrors,
    /// Per partition (fold), in order, the 95 % intervals of the network's scores on
    /// that partition's held-out rows alone; `None` where they are too few.
    pub part_intervals: Vec<Option<Vec<(String, Interval)>>>,
    /// File lines of the held-out rows, in the order of `network_errors`.
    pub held_out_lines: Vec<u64>,
    /// ROC, reliability or per-target fits of the network's held-out outputs.
    pub diagnosis: diagnosis::Diagnosis,
}

/// One partition's part of a judgement: its reference and the network's held-out
/// outputs there.
pub(crate) struct Held<'a> {
    pub reference: &'a Reference,
    pub outputs: &'a Array2<f64>,
}

/// Judges a fit from its partitions' held-out rows; `seed` draws the bootstrap.
///
/// # Panics
/// If `parts` is empty or an output's shape differs from its targets'.
pub(crate) fn judge(task: Task, rows_key: &str, parts: &[Held<'_>], seed: u64) -> Judgement {
    let stack = |pick: &dyn Fn(&Held<'_>) -> Array2<f64>| {
        let blocks: Vec<Array2<f64>> = parts.iter().map(pick).collect();
        let views: Vec<_> = blocks.iter().map(|block| block.view()).collect();
        concatenate(Axis(0), &views).expect("held-out blocks of one width")
    };
    let targets = stack(&|held| held.reference.targets.clone());
    let network = stack(&|held| held.outputs.clone());
    let linear_outputs = stack(&|held| held.reference.linear_outputs.clone());
    let baseline_outputs = stack(&|held| {
        let rows = held.reference.targets.nrows();
        held.reference
            .baseline
            .broadcast((rows, held.reference.baseline.len()))
            .expect("one baseline value per column")
            .to_owned()
    });
    let linear_train: Vec<Scores> = parts
        .iter()
        .map(|held| held.reference.linear_train.clone())
        .collect();
    let network_errors = row_errors(task, targets.view(), network.view());
    let linear_errors = row_errors(task, targets.view(), linear_outputs.view());
    let enough = enough_rows(task, targets.view());
    let part_intervals = parts
        .iter()
        .map(|held| {
            let targets = held.reference.targets.view();
            enough_rows(task, targets).then(|| intervals(task, targets, held.outputs.view(), seed))
        })
        .collect();
    Judgement {
        rows_key: rows_key.to_string(),
        held_out_rows: targets.nrows(),
        network: Scores::of(task, targets.view(), network.view()),
        baseline_rule: match task {
            Task::Classify => BaselineRule::MajorityClass,
            Task::Regress => BaselineRule::TrainingMean,
        },
        baseline: Scores::of(task, targets.view(), baseline_outputs.view()),
        linear_train: Scores::mean(&linear_train),
        linear: Scores::of(task, targets.view(), linear_outputs.view()),
        intervals: enough.then(|| intervals(task, targets.view(), network.view(), seed)),
        versus_linear: enough
            .then(|| paired(&network_errors, &linear_errors, seed))
            .flatten(),
        network_errors,
        part_intervals,
        held_out_lines: parts
            .iter()
            .flat_map(|held| held.reference.lines.iter().copied())
            .collect(),
        diagnosis: diagnosis::diagnose(task, targets.view(), network.view()),
    }
}

/// Whether held-out rows can carry an interval or a test: at least two, and for
/// classification more than one class among them.
pub(crate) fn enough_rows(task: Task, targets: ArrayView2<f64>) -> bool {
    if targets.nrows() < 2 {
        return false;
    }
    match task {
        Task::Regress => true,
        Task::Classify => {
            let first = class_of(targets.row(0));
            targets.rows().into_iter().any(|row| class_of(row) != first)
        }
    }
}

/// A row's class as the metrics read it: one column is 0/1 at 0.5, several the first
/// largest.
fn class_of(row: ndarray::ArrayView1<f64>) -> usize {
    if row.len() == 1 {
        usize::from(row[0] >= 0.5)
    } else {
        (1..row.len()).fold(0, |best, j| if row[j] > row[best] { j } else { best })
    }
}

/// How each row went: whether its class was right, or its squared error.
pub(crate) fn row_errors(
    task: Task,
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
) -> RowErrors {
    let rows = targets.rows().into_iter().zip(outputs.rows());
    match task {
        Task::Classify => {
            RowErrors::Correct(rows.map(|(t, o)| class_of(t) == class_of(o)).collect())
        }
        Task::Regress => RowErrors::Squared(
            rows.map(|(t, o)| (&o - &t).mapv(|e| e * e).mean().unwrap_or(0.0))
                .collect(),
        ),
    }
}

/// 95 % intervals of the held-out scores: Wilson for accuracy, the percentile
/// bootstrap over rows for the rest.
pub(crate) fn intervals(
    task: Task,
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
    seed: u64,
) -> Vec<(String, Interval)> {
    let n = targets.nrows();
    match task {
        Task::Classify => {
            let correct = match row_errors(task, targets, outputs) {
                RowErrors::Correct(flags) => flags.iter().filter(|&&c| c).count(),
                RowErrors::Squared(_) => unreachable!("classification rows"),
            };
            let losses = row_log_losses(targets, outputs);
            vec![
                ("accuracy".into(), stats::wilson(correct, n)),
                (
                    "log_loss".into(),
                    stats::bootstrap(n, seed, |s| mean_of(&losses, s)),
                ),
            ]
        }
        Task::Regress => {
            let squared: Vec<f64> = per_row(targets, outputs, |e| e * e);
            let absolute: Vec<f64> = per_row(targets, outputs, f64::abs);
            vec![
                (
                    "mse".into(),
                    stats::bootstrap(n, seed, |s| mean_of(&squared, s)),
                ),
                (
                    "mae".into(),
                    stats::bootstrap(n, seed, |s| mean_of(&absolute, s)),
                ),
                (
                    "r2".into(),
                    stats::bootstrap(n, seed, |s| r2_of(targets, outputs, s)),
                ),
            ]
        }
    }
}

fn mean_of(values: &[f64], sample: &[usize]) -> f64 {
    sample.iter().map(|&i| values[i]).sum::<f64>() / sample.len() as f64
}

/// Per row, `error` of each element averaged over the row's columns.
fn per_row(targets: ArrayView2<f64>, outputs: ArrayView2<f64>, error: fn(f64) -> f64) -> Vec<f64> {
    targets
        .rows()
        .into_iter()
        .zip(outputs.rows())
        .map(|(t, o)| {
            let total: f64 = t.iter().zip(o).map(|(t, o)| error(o - t)).sum();
            total / t.len() as f64
        })
        .collect()
}

/// Each row's cross-entropy as the metrics define it (probabilities clipped to
/// `[1e-15, 1 − 1e-15]`), so their mean is the log loss.
fn row_log_losses(targets: ArrayView2<f64>, outputs: ArrayView2<f64>) -> Vec<f64> {
    let clip = |p: f64| p.clamp(1e-15, 1.0 - 1e-15);
    targets
        .rows()
        .into_iter()
        .zip(outputs.rows())
        .map(|(t, o)| {
            if t.len() == 1 {
                let p = clip(o[0]);
                -(t[0] * p.ln() + (1.0 - t[0]) * (1.0 - p).ln())
            } else {
                -t.iter().zip(o).map(|(t, p)| t * clip(*p).ln()).sum::<f64>()
            }
        })
        .collect()
}

/// R² on the sampled rows, averaged over columns, as `nn::regression_metrics` defines
/// it (a constant column scores 1 when fitted exactly, else 0). Summed in place: it
/// runs once per resample, so it allocates nothing.
fn r2_of(targets: ArrayView2<f64>, outputs: ArrayView2<f64>, sample: &[usize]) -> f64 {
    let n = sample.len() as f64;
    let columns = targets.ncols();
    let mut total = 0.0;
    for column in 0..columns {
        let mean = sample.iter().map(|&i| targets[[i, column]]).sum::<f64>() / n;
        let (mut ss_tot, mut ss_res) = (0.0, 0.0);
        for &i in sample {
            let (t, o) = (targets[[i, column]], outputs[[i, column]]);
            ss_tot += (t - mean) * (t - mean);
            ss_res += (o - t) * (o - t);
        }
        total += if ss_tot > 0.0 {
            1.0 - ss_res / ss_tot
        } else if ss_res == 0.0 {
            1.0
        } else {
            0.0
        };
    }
    total / columns as f64
}

/// The seed of the paired bootstraps between the runs of a compare step, which has no
/// seed of its own.
const COMPARE_SEED: u64 = 0;

/// Two runs of a compare step and their paired test.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Pair {
    pub a: usize,
    pub b: usize,
    pub outcome: PairOutcome,
}

#[derive(Clone, Debug, PartialEq)]
pub(crate) enum PairOutcome {
    Tested(Paired),
    /// Held out on different rows (another data step or split).
    NotPaired,
    /// On the same rows, but too few for a test, or without held-out rows.
    NotEnoughRows,
}

/// Every pair of `judgements` (in order, `a < b`) with its paired test on their common
/// held-out rows.
pub(crate) fn pairs(judgements: &[Option<&Judgement>]) -> Vec<Pair> {
    let mut pairs = Vec::new();
    for a in 0..judgements.len() {
        for b in a + 1..judgements.len() {
            let outcome = match (judgements[a], judgements[b]) {
                (Some(first), Some(second)) if first.rows_key == second.rows_key => {
                    paired(&first.network_errors, &second.network_errors, COMPARE_SEED)
                        .map_or(PairOutcome::NotEnoughRows, PairOutcome::Tested)
                }
                (Some(_), Some(_)) => PairOutcome::NotPaired,
                _ => PairOutcome::NotEnoughRows,
            };
            pairs.push(Pair { a, b, outcome });
        }
    }
    pairs
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    // The in-place R² against the engine's metric on a resample with repeated rows.
    #[test]
    fn the_resampled_r2_is_the_engines_r2_of_the_sampled_rows() {
        let targets = array![[1.0, 5.0], [2.0, 5.0], [4.0, 5.0], [3.0, 5.0]];
        let outputs = array![[1.5, 5.0], [1.0, 4.0], [4.5, 5.0], [2.0, 6.0]];
        let sample = [0, 2, 2, 3, 1];
        let picked = |m: &Array2<f64>| m.select(Axis(0), &sample);
        let expected = nn::regression_metrics(picked(&targets).view(), picked(&outputs).view()).r2;
        assert!((r2_of(targets.view(), outputs.view(), &sample) - expected).abs() < 1e-15);
    }

    fn judged(rows_key: &str, correct: Vec<bool>) -> Judgement {
        let scores = Scores::Classification {
            accuracy: 0.5,
            log_loss: 0.7,
        };
        Judgement {
            rows_key: rows_key.into(),
            held_out_rows: correct.len(),
            network: scores.clone(),
            baseline_rule: BaselineRule::MajorityClass,
            baseline: scores.clone(),
            linear_train: scores.clone(),
            linear: scores,
            intervals: None,
            versus_linear: None,
            network_errors: RowErrors::Correct(correct),
            part_intervals: Vec::new(),
            held_out_lines: Vec::new(),
            diagnosis: diagnosis::Diagnosis::SeveralClasses {
                auc_per_class: Vec::new(),
            },
        }
    }

    // Discordant rows: the first right and the second wrong on rows 0 and 1, the
    // reverse on none: McNemar's p is 2 · ½² = 0.5.
    #[test]
    fn pairs_are_tested_on_the_same_rows_and_marked_on_different_ones() {
        let a = judged("rows", vec![true, true, false, true]);
        let b = judged("rows", vec![false, false, false, true]);
        let c = judged("other", vec![true, false, true, true]);
        let pairs = pairs(&[Some(&a), Some(&b), Some(&c), None]);
        assert_eq!(pairs.len(), 6);
        assert_eq!(
            pairs[0].outcome,
            PairOutcome::Tested(Paired::Mcnemar {
                p_value: 0.5,
                only_first: 2,
                only_second: 0
            })
        );
        assert_eq!(pairs[1].outcome, PairOutcome::NotPaired);
        assert_eq!(pairs[2].outcome, PairOutcome::NotEnoughRows);
    }

    #[test]
    fn one_row_or_one_class_is_not_enough_for_an_interval() {
        assert!(!enough_rows(Task::Regress, array![[1.0]].view()));
        assert!(enough_rows(Task::Regress, array![[1.0], [1.0]].view()));
        assert!(!enough_rows(Task::Classify, array![[1.0], [1.0]].view()));
        assert!(enough_rows(Task::Classify, array![[0.0], [1.0]].view()));
        assert!(!enough_rows(
            Task::Classify,
            array![[0.0, 1.0, 0.0], [0.0, 1.0, 0.0]].view()
        ));
    }
}
