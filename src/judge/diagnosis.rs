//! Where a fit goes wrong on its held-out rows (issue 15): for two classes the ROC curve
//! with its AUC and Youden's J threshold, and a reliability chart with the Brier score;
//! for several classes the one-vs-rest AUC of each class; for regression each target's
//! metrics and its (actual, predicted) pairs for the fit plots. Whatever the rows cannot
//! give (one class, one row, a diverged run) is a stated reason, never a panic.

use ndarray::{ArrayView1, ArrayView2};
use serde::{Deserialize, Serialize};

use super::Scores;
use crate::data::Task;

/// Why a curve or score cannot be drawn from the held-out rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, thiserror::Error)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Unavailable {
    #[error("there is only one held-out row")]
    OneRow,
    #[error("the network's outputs or their errors are not all finite (the run diverged)")]
    NotFinite,
    #[error("the held-out rows hold only one class, so nothing is ranked against it")]
    OneClass,
}

/// One point of a ROC curve: the rates when rows scoring at least `threshold` are
/// called positive. `None` is the threshold above every score (the curve's start).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct RocPoint {
    pub false_positive_rate: f64,
    pub true_positive_rate: f64,
    pub threshold: Option<f64>,
}

/// The ROC curve of the positive class's probability, with its area.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct Roc {
    pub points: Vec<RocPoint>,
    pub auc: f64,
    /// Index into `points` of the point that maximises Youden's J = TPR − FPR
    /// (Youden, 1950), the first such point when several tie.
    pub youden: usize,
}

/// One bin of a reliability chart: rows whose predicted probability fell in it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ReliabilityBin {
    pub mean_predicted: f64,
    /// The fraction of the bin's rows in the positive class.
    pub observed: f64,
    pub rows: usize,
}

/// How well the predicted probabilities match the observed frequencies.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct Reliability {
    /// The non-empty bins among `RELIABILITY_BINS` equal-width bins of [0, 1].
    pub bins: Vec<ReliabilityBin>,
    /// Mean squared difference of probability and outcome (Brier, 1950).
    pub brier: f64,
}

/// Equal-width probability bins of the reliability chart (issue 15).
pub(crate) const RELIABILITY_BINS: usize = 10;

/// One regression target on the held-out rows.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct TargetFit {
    pub scores: Scores,
    /// (actual, predicted) per held-out row, in row order.
    pub pairs: Vec<(f64, f64)>,
}

/// What the held-out rows say about where a fit goes wrong.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Diagnosis {
    TwoClasses {
        roc: Result<Roc, Unavailable>,
        reliability: Result<Reliability, Unavailable>,
    },
    SeveralClasses {
        /// Each class's AUC against all others, in class order.
        auc_per_class: Vec<Result<f64, Unavailable>>,
    },
    Regression {
        targets: Result<Vec<TargetFit>, Unavailable>,
    },
}

/// Why R² is undefined on the held-out rows: their targets do not vary, so there is no
/// variance for it to explain. The metrics follow scikit-learn's `r2_score`, which then
/// gives 0 (1 for exact predictions): a convention, not a score.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum NoVariance {
    OneRow,
    /// Target `target` (an index into the target columns) holds only `value`.
    Constant {
        target: usize,
        value: f64,
    },
}

impl Diagnosis {
    /// Why the held-out R² is undefined, if it is; `None` for classification and for a
    /// diverged run, whose R² is not finite anyway.
    pub(crate) fn r2_undefined(&self) -> Option<NoVariance> {
        match self {
            Diagnosis::Regression {
                targets: Err(Unavailable::OneRow),
            } => Some(NoVariance::OneRow),
            Diagnosis::Regression { targets: Ok(fits) } => {
                fits.iter().enumerate().find_map(|(target, fit)| {
                    let (first, _) = *fit.pairs.first()?;
                    let constant = fit.pairs.iter().all(|&(actual, _)| actual == first);
                    constant.then_some(NoVariance::Constant {
                        target,
                        value: first,
                    })
                })
            }
            _ => None,
        }
    }

    /// The AUC: the ROC curve's area for two classes, the macro mean of the classes'
    /// one-vs-rest AUCs for several (unavailable when any class's is).
    pub(crate) fn auc(&self) -> Option<Result<f64, Unavailable>> {
        match self {
            Diagnosis::TwoClasses { roc, .. } => {
                Some(roc.as_ref().map(|roc| roc.auc).map_err(|e| *e))
            }
            Diagnosis::SeveralClasses { auc_per_class } => {
                let all: Result<Vec<f64>, Unavailable> = auc_per_class.iter().cloned().collect();
                Some(all.map(|all| all.iter().sum::<f64>() / all.len() as f64))
            }
            Diagnosis::Regression { .. } => None,
        }
    }
}

/// The diagnosis of `outputs` against `targets` (held-out rows, as the engine
/// encodes them: one 0/1 column for two classes, one-hot for several).
pub(crate) fn diagnose(
    task: Task,
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
) -> Diagnosis {
    let usable = usable(targets, outputs);
    match task {
        Task::Regress => Diagnosis::Regression {
            targets: usable.and_then(|()| target_fits(targets, outputs)),
        },
        Task::Classify if targets.ncols() == 1 => {
            let (labels, scores) = (targets.column(0), outputs.column(0));
            Diagnosis::TwoClasses {
                roc: usable.and_then(|()| roc(labels, scores)),
                reliability: usable.map(|()| reliability(labels, scores)),
            }
        }
        Task::Classify => Diagnosis::SeveralClasses {
            auc_per_class: (0..targets.ncols())
                .map(|class| {
                    usable
                        .and_then(|()| roc(targets.column(class), outputs.column(class)))
                        .map(|roc| roc.auc)
                })
                .collect(),
        },
    }
}

/// Whether the rows can give any curve at all.
fn usable(targets: ArrayView2<f64>, outputs: ArrayView2<f64>) -> Result<(), Unavailable> {
    if targets.nrows() < 2 {
        return Err(Unavailable::OneRow);
    }
    if outputs.iter().any(|value| !value.is_finite()) {
        return Err(Unavailable::NotFinite);
    }
    Ok(())
}

/// The ROC curve of `scores` for the rows whose `labels` are 1, computed as
/// scikit-learn's `roc_curve` with its default `drop_intermediate` (collinear points
/// left out), so its points and `roc_auc_score`'s trapezoid area can be checked
/// against it to 1e-12.
fn roc(labels: ArrayView1<f64>, scores: ArrayView1<f64>) -> Result<Roc, Unavailable> {
    let mut order: Vec<usize> = (0..scores.len()).collect();
    order.sort_by(|&a, &b| scores[b].total_cmp(&scores[a]));
    // One point per distinct score, after every row scoring at least it.
    let (mut true_positives, mut false_positives, mut thresholds) = (vec![], vec![], vec![]);
    let mut positives = 0.0;
    for (rank, &row) in order.iter().enumerate() {
        positives += labels[row];
        let last_of_its_score = order
            .get(rank + 1)
            .is_none_or(|&next| scores[next] != scores[row]);
        if last_of_its_score {
            true_positives.push(positives);
            false_positives.push((rank + 1) as f64 - positives);
            thresholds.push(scores[row]);
        }
    }
    let (all_positive, all_negative) = (
        *true_positives.last().expect("at least two rows"),
        *false_positives.last().expect("at least two rows"),
    );
    if all_positive == 0.0 || all_negative == 0.0 {
        return Err(Unavailable::OneClass);
    }
    let kept = corners(&true_positives, &false_positives);
    let mut points = vec![RocPoint {
        false_positive_rate: 0.0,
        true_positive_rate: 0.0,
        threshold: None,
    }];
    points.extend(kept.into_iter().map(|i| RocPoint {
        false_positive_rate: false_positives[i] / all_negative,
        true_positive_rate: true_positives[i] / all_positive,
        threshold: Some(thresholds[i]),
    }));
    Ok(Roc {
        auc: trapezoid_area(&points),
        youden: youden(&points),
        points,
    })
}

/// Indices of the points where the curve turns: the first, the last, and each whose
/// neighbours are not in line with it (scikit-learn's second-difference rule).
fn corners(true_positives: &[f64], false_positives: &[f64]) -> Vec<usize> {
    let n = true_positives.len();
    let bends = |v: &[f64], i: usize| v[i + 1] - 2.0 * v[i] + v[i - 1] != 0.0;
    (0..n)
        .filter(|&i| i == 0 || i == n - 1 || bends(true_positives, i) || bends(false_positives, i))
        .collect()
}

fn trapezoid_area(points: &[RocPoint]) -> f64 {
    points
        .windows(2)
        .map(|pair| {
            let (a, b) = (&pair[0], &pair[1]);
            (b.false_positive_rate - a.false_positive_rate)
                * (a.true_positive_rate + b.true_positive_rate)
                / 2.0
        })
        .sum()
}

fn youden(points: &[RocPoint]) -> usize {
    let j = |p: &RocPoint| p.true_positive_rate - p.false_positive_rate;
    (1..points.len()).fold(0, |best, i| {
        if j(&points[i]) > j(&points[best]) {
            i
        } else {
            best
        }
    })
}

/// Reliability bins and the Brier score. A probability on a bin's upper edge belongs
/// to that bin, as in scikit-learn's `calibration_curve` with uniform bins.
fn reliability(labels: ArrayView1<f64>, scores: ArrayView1<f64>) -> Reliability {
    let mut sums = [(0.0, 0.0, 0usize); RELIABILITY_BINS];
    for (&label, &score) in labels.iter().zip(scores) {
        let inner_edges_below = (1..RELIABILITY_BINS)
            .filter(|&edge| (edge as f64 / RELIABILITY_BINS as f64) < score)
            .count();
        let bin = &mut sums[inner_edges_below];
        bin.0 += score;
        bin.1 += label;
        bin.2 += 1;
    }
    let n = labels.len() as f64;
    Reliability {
        bins: sums
            .iter()
            .filter(|(_, _, rows)| *rows > 0)
            .map(|&(predicted, observed, rows)| ReliabilityBin {
                mean_predicted: predicted / rows as f64,
                observed: observed / rows as f64,
                rows,
            })
            .collect(),
        brier: labels
            .iter()
            .zip(scores)
            .map(|(label, score)| (score - label).powi(2))
            .sum::<f64>()
            / n,
    }
}

/// Each regression target's scores on its own, in target order.
pub(crate) fn target_scores(targets: ArrayView2<f64>, outputs: ArrayView2<f64>) -> Vec<Scores> {
    (0..targets.ncols())
        .map(|column| {
            let pick = |m: ArrayView2<f64>| m.slice(ndarray::s![.., column..=column]).to_owned();
            Scores::of(Task::Regress, pick(targets).view(), pick(outputs).view())
        })
        .collect()
}

/// Each target's fit; unavailable when a score overflows (huge but finite outputs of a
/// run on its way to diverging).
fn target_fits(
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
) -> Result<Vec<TargetFit>, Unavailable> {
    let fits: Vec<TargetFit> = target_scores(targets, outputs)
        .into_iter()
        .enumerate()
        .map(|(column, scores)| TargetFit {
            scores,
            pairs: targets
                .column(column)
                .iter()
                .copied()
                .zip(outputs.column(column).iter().copied())
                .collect(),
        })
        .collect();
    let overflowed = fits.iter().any(|fit| {
        fit.scores
            .named()
            .iter()
            .any(|(_, value)| !value.is_finite())
    });
    if overflowed {
        return Err(Unavailable::NotFinite);
    }
    Ok(fits)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{Array2, array};

    fn column(values: &[f64]) -> Array2<f64> {
        Array2::from_shape_vec((values.len(), 1), values.to_vec()).unwrap()
    }

    fn two_classes(labels: &[f64], scores: &[f64]) -> Diagnosis {
        diagnose(Task::Classify, column(labels).view(), column(scores).view())
    }

    // Worked example from scikit-learn's `roc_curve` docstring: y = [1, 1, 2, 2],
    // scores [0.1, 0.4, 0.35, 0.8] give fpr [0, 0, 0.5, 0.5, 1], tpr [0, 0.5, 0.5, 1, 1],
    // thresholds [inf, 0.8, 0.4, 0.35, 0.1]; `roc_auc_score` gives 0.75.
    #[test]
    fn the_roc_curve_of_scikit_learns_worked_example_has_its_points_and_area() {
        let Diagnosis::TwoClasses { roc: Ok(roc), .. } =
            two_classes(&[0.0, 0.0, 1.0, 1.0], &[0.1, 0.4, 0.35, 0.8])
        else {
            panic!("two classes give a curve");
        };
        let rates: Vec<(f64, f64)> = roc
            .points
            .iter()
            .map(|p| (p.false_positive_rate, p.true_positive_rate))
            .collect();
        assert_eq!(
            rates,
            [(0.0, 0.0), (0.0, 0.5), (0.5, 0.5), (0.5, 1.0), (1.0, 1.0)]
        );
        let thresholds: Vec<Option<f64>> = roc.points.iter().map(|p| p.threshold).collect();
        assert_eq!(
            thresholds,
            [None, Some(0.8), Some(0.4), Some(0.35), Some(0.1)]
        );
        assert_eq!(roc.auc, 0.75);
        // J is 0.5 at (0, 0.5) and at (0.5, 1); the first is marked.
        assert_eq!(roc.youden, 1);
    }

    #[test]
    fn collinear_roc_points_are_left_out_as_scikit_learn_does() {
        // Four positives ranked above four negatives: the curve is two straight edges.
        let labels = [1.0, 1.0, 1.0, 1.0, 0.0, 0.0, 0.0, 0.0];
        let scores = [0.9, 0.8, 0.7, 0.6, 0.4, 0.3, 0.2, 0.1];
        let Diagnosis::TwoClasses { roc: Ok(roc), .. } = two_classes(&labels, &scores) else {
            panic!("two classes give a curve");
        };
        let rates: Vec<(f64, f64)> = roc
            .points
            .iter()
            .map(|p| (p.false_positive_rate, p.true_positive_rate))
            .collect();
        assert_eq!(rates, [(0.0, 0.0), (0.0, 0.25), (0.0, 1.0), (1.0, 1.0)]);
        assert_eq!(roc.auc, 1.0);
    }

    // Values by hand: bins [0, 0.1] holds 0.05 and 0.1, (0.1, 0.2] nothing,
    // (0.8, 0.9] holds 0.85, (0.9, 1] holds 0.95 and 1.0; Brier = mean of the squared
    // errors 0.0025, 0.81, 0.0225, 0.0025, 0 = 0.1675.
    #[test]
    fn reliability_bins_take_their_upper_edge_and_the_brier_score_is_the_mean_squared_error() {
        let labels = [0.0, 1.0, 1.0, 1.0, 1.0];
        let scores = [0.05, 0.1, 0.85, 0.95, 1.0];
        let Diagnosis::TwoClasses {
            reliability: Ok(reliability),
            ..
        } = two_classes(&labels, &scores)
        else {
            panic!("probabilities give a reliability chart");
        };
        let bins: Vec<(usize, f64)> = reliability
            .bins
            .iter()
            .map(|b| (b.rows, b.observed))
            .collect();
        assert_eq!(bins, [(2, 0.5), (1, 1.0), (2, 1.0)]);
        assert!((reliability.brier - 0.1675).abs() < 1e-15);
    }

    #[test]
    fn a_class_absent_from_the_held_out_rows_leaves_its_auc_unavailable() {
        let targets = array![[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.0, 0.0, 0.0]];
        let outputs = array![[0.7, 0.2, 0.1], [0.3, 0.6, 0.1], [0.5, 0.4, 0.1]];
        let diagnosis = diagnose(Task::Classify, targets.view(), outputs.view());
        let Diagnosis::SeveralClasses { auc_per_class } = &diagnosis else {
            panic!("three classes");
        };
        assert_eq!(auc_per_class[0], Ok(1.0));
        assert_eq!(auc_per_class[2], Err(Unavailable::OneClass));
        assert_eq!(diagnosis.auc(), Some(Err(Unavailable::OneClass)));
    }

    #[test]
    fn diverged_outputs_and_a_single_row_give_reasons_not_curves() {
        let diverged = two_classes(&[0.0, 1.0], &[f64::NAN, 0.5]);
        assert_eq!(diverged.auc(), Some(Err(Unavailable::NotFinite)));
        let single = diagnose(Task::Regress, array![[3.0]].view(), array![[2.5]].view());
        assert_eq!(
            single,
            Diagnosis::Regression {
                targets: Err(Unavailable::OneRow)
            }
        );
    }

    #[test]
    fn each_regression_target_is_scored_on_its_own_column() {
        let targets = array![[1.0, 10.0], [2.0, 20.0], [3.0, 30.0]];
        let outputs = array![[1.0, 12.0], [2.0, 18.0], [3.0, 30.0]];
        let Diagnosis::Regression {
            targets: Ok(fits), ..
        } = diagnose(Task::Regress, targets.view(), outputs.view())
        else {
            panic!("three rows give fits");
        };
        assert_eq!(fits[0].scores.headline(), ("r2", 1.0));
        // Squared errors 4, 4, 0 over three rows.
        assert_eq!(fits[1].scores.named()[0], ("mse", 8.0 / 3.0));
        assert_eq!(fits[1].pairs[1], (20.0, 18.0));
    }

    #[test]
    fn r2_is_undefined_on_one_held_out_row_or_a_constant_target() {
        let single = diagnose(Task::Regress, array![[3.0]].view(), array![[2.5]].view());
        assert_eq!(single.r2_undefined(), Some(NoVariance::OneRow));
        // 0.1 three times: a mean that rounds off 0.1 would give a tiny, non-zero
        // variance and an R² of about −1e31, so constancy is checked on the values.
        let targets = array![[1.0, 0.1], [2.0, 0.1], [3.0, 0.1]];
        let outputs = array![[1.0, 0.2], [2.0, 0.1], [3.0, 0.0]];
        let constant = diagnose(Task::Regress, targets.view(), outputs.view());
        assert_eq!(
            constant.r2_undefined(),
            Some(NoVariance::Constant {
                target: 1,
                value: 0.1
            })
        );
        let targets = array![[1.0, 0.1], [2.0, 0.2], [3.0, 0.3]];
        let varied = diagnose(Task::Regress, targets.view(), outputs.view());
        assert_eq!(varied.r2_undefined(), None);
    }
}
