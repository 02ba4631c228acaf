//! Summary scores of a fitted network's outputs against targets, for reports.
//!
//! Classification: one output column is a two-class problem (class 1 when
//! the value is ≥ 0.5, for targets and outputs alike); `k > 1` columns are
//! `k` one-hot classes, the class of a row being the index of its largest
//! value (the first one on ties). The log-loss is the cross-entropy of
//! [`Loss::CrossEntropy`] (binary after one column, categorical after
//! several, probabilities clipped to `[1e-15, 1 − 1e-15]`), averaged over rows.
//!
//! Regression, following the usual (scikit-learn) definitions: squared and
//! absolute errors averaged over every element (no ½, unlike the training
//! loss), and R² = `1 − SS_res / SS_tot` per output column, averaged
//! uniformly over columns. A constant target column has `SS_tot = 0`; its R²
//! is taken as 1 for a perfect fit and 0 otherwise, as scikit-learn's
//! `r2_score` does by default.

use ndarray::{ArrayView1, ArrayView2, Axis};
use serde::{Deserialize, Serialize};

use super::activation::Activation;
use super::loss::Loss;

/// Scores for a classifier.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ClassificationMetrics {
    /// Fraction of rows whose predicted class is the true class.
    pub(crate) accuracy: f64,
    /// Mean cross-entropy of the outputs.
    pub(crate) log_loss: f64,
    /// `confusion[true][predicted]` row counts.
    pub(crate) confusion: Vec<Vec<usize>>,
    /// Per class: true positives / predicted positives; `None` when the class
    /// was never predicted.
    pub(crate) precision: Vec<Option<f64>>,
    /// Per class: true positives / actual positives; `None` when the class
    /// never occurs.
    pub(crate) recall: Vec<Option<f64>>,
}

/// Scores for a regressor.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct RegressionMetrics {
    /// Mean of `(o − t)²` over all elements.
    pub(crate) mse: f64,
    /// Mean of `|o − t|` over all elements.
    pub(crate) mae: f64,
    /// Coefficient of determination, averaged over output columns.
    pub(crate) r2: f64,
}

/// Classification scores of `outputs` (probabilities) against `targets`
/// (0/1 in one column, or one-hot rows); see the module documentation.
///
/// # Panics
/// If the shapes differ or there are no rows or columns.
pub(crate) fn classification_metrics(
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
) -> ClassificationMetrics {
    check(targets, outputs);
    let columns = targets.ncols();
    let classes = if columns == 1 { 2 } else { columns };
    let class_of = |row: ArrayView1<f64>| -> usize {
        if columns == 1 {
            usize::from(row[0] >= 0.5)
        } else {
            (1..columns).fold(0, |best, j| if row[j] > row[best] { j } else { best })
        }
    };
    let mut confusion = vec![vec![0usize; classes]; classes];
    for (t, o) in targets.rows().into_iter().zip(outputs.rows()) {
        confusion[class_of(t)][class_of(o)] += 1;
    }
    let n = targets.nrows();
    let correct: usize = (0..classes).map(|c| confusion[c][c]).sum();
    let ratio = |hits: usize, total: usize| (total > 0).then(|| hits as f64 / total as f64);
    let precision = (0..classes)
        .map(|c| ratio(confusion[c][c], (0..classes).map(|t| confusion[t][c]).sum()))
        .collect();
    let recall = (0..classes)
        .map(|c| ratio(confusion[c][c], confusion[c].iter().sum()))
        .collect();
    let output = if columns == 1 {
        Activation::Sigmoid
    } else {
        Activation::Softmax
    };
    ClassificationMetrics {
        accuracy: correct as f64 / n as f64,
        log_loss: Loss::CrossEntropy.total(output, outputs, targets) / n as f64,
        confusion,
        precision,
        recall,
    }
}

/// Regression scores of `outputs` against `targets`; see the module
/// documentation.
///
/// # Panics
/// If the shapes differ or there are no rows or columns.
pub(crate) fn regression_metrics(
    targets: ArrayView2<f64>,
    outputs: ArrayView2<f64>,
) -> RegressionMetrics {
    check(targets, outputs);
    let count = targets.len() as f64;
    let errors = &outputs - &targets;
    let r2_sum: f64 = targets
        .axis_iter(Axis(1))
        .zip(errors.axis_iter(Axis(1)))
        .map(|(t, e)| {
            let mean = t.sum() / t.len() as f64;
            let ss_tot: f64 = t.iter().map(|v| (v - mean) * (v - mean)).sum();
            let ss_res: f64 = e.iter().map(|e| e * e).sum();
            if ss_tot > 0.0 {
                1.0 - ss_res / ss_tot
            } else if ss_res == 0.0 {
                1.0
            } else {
                0.0
            }
        })
        .sum();
    RegressionMetrics {
        mse: errors.iter().map(|e| e * e).sum::<f64>() / count,
        mae: errors.iter().map(|e| e.abs()).sum::<f64>() / count,
        r2: r2_sum / targets.ncols() as f64,
    }
}

fn check(targets: ArrayView2<f64>, outputs: ArrayView2<f64>) {
    assert_eq!(
        targets.dim(),
        outputs.dim(),
        "targets and outputs must have the same shape"
    );
    assert!(
        targets.nrows() > 0 && targets.ncols() > 0,
        "metrics need at least one row and one column"
    );
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn three_classes_by_hand() {
        // True classes 0,0,1,1,2,2 ; predicted (argmax) 0,1,1,1,0,2.
        let targets = array![
            [1.0, 0.0, 0.0],
            [1.0, 0.0, 0.0],
            [0.0, 1.0, 0.0],
            [0.0, 1.0, 0.0],
            [0.0, 0.0, 1.0],
            [0.0, 0.0, 1.0],
        ];
        let outputs = array![
            [0.7, 0.2, 0.1],
            [0.3, 0.6, 0.1],
            [0.1, 0.8, 0.1],
            [0.25, 0.5, 0.25],
            [0.5, 0.1, 0.4],
            [0.2, 0.2, 0.6],
        ];
        let m = classification_metrics(targets.view(), outputs.view());
        // Worked by hand (rows true classes, columns predicted); scikit-learn 1.9.1's
        // confusion_matrix, precision_score and recall_score (average=None) agree.
        assert_eq!(
            m.confusion,
            vec![vec![1, 1, 0], vec![0, 2, 0], vec![1, 0, 1]]
        );
        assert_eq!(m.accuracy, 4.0 / 6.0);
        // Precision: column sums 2, 3, 1 → 1/2, 2/3, 1/1. Recall: row sums 2, 2, 2 → 1/2, 1, 1/2.
        assert_eq!(m.precision, vec![Some(0.5), Some(2.0 / 3.0), Some(1.0)]);
        assert_eq!(m.recall, vec![Some(0.5), Some(1.0), Some(0.5)]);
        // Log-loss: −(ln 0.7 + ln 0.3 + ln 0.8 + ln 0.5 + ln 0.4 + ln 0.6)/6, by hand.
        let expected = -[0.7f64, 0.3, 0.8, 0.5, 0.4, 0.6]
            .iter()
            .map(|p| p.ln())
            .sum::<f64>()
            / 6.0;
        assert!((m.log_loss - expected).abs() < 1e-15);
    }

    #[test]
    fn binary_column_with_an_unpredicted_class() {
        // All outputs below 0.5: class 1 is never predicted, so its precision is 0/0.
        let targets = array![[1.0], [0.0], [1.0], [0.0]];
        let outputs = array![[0.4], [0.1], [0.2], [0.3]];
        let m = classification_metrics(targets.view(), outputs.view());
        assert_eq!(m.confusion, vec![vec![2, 0], vec![2, 0]]);
        assert_eq!(m.accuracy, 0.5);
        assert_eq!(m.precision, vec![Some(0.5), None]);
        assert_eq!(m.recall, vec![Some(1.0), Some(0.0)]);
        // Binary log-loss, by hand: −(ln 0.4 + ln 0.9 + ln 0.2 + ln 0.7)/4 (= 0.74694…,
        // as scikit-learn 1.9.1's log_loss gives).
        let expected = -(0.4f64.ln() + 0.9f64.ln() + 0.2f64.ln() + 0.7f64.ln()) / 4.0;
        assert!((m.log_loss - expected).abs() < 1e-15);
    }

    #[test]
    fn absent_class_has_no_recall() {
        let targets = array![[1.0, 0.0], [1.0, 0.0]];
        let outputs = array![[0.9, 0.1], [0.2, 0.8]];
        let m = classification_metrics(targets.view(), outputs.view());
        assert_eq!(m.recall, vec![Some(0.5), None]);
        assert_eq!(m.precision, vec![Some(1.0), Some(0.0)]);
    }

    #[test]
    fn regression_by_hand() {
        // Column 1: t = (1, 2, 3), o = (1.5, 2, 2); errors (0.5, 0, −1).
        // Column 2: t = (0, 4, 8), o = (1, 4, 6); errors (1, 0, −2).
        let targets = array![[1.0, 0.0], [2.0, 4.0], [3.0, 8.0]];
        let outputs = array![[1.5, 1.0], [2.0, 4.0], [2.0, 6.0]];
        let m = regression_metrics(targets.view(), outputs.view());
        // Worked by hand: MSE = (0.25 + 0 + 1 + 1 + 0 + 4)/6 = 6.25/6; MAE = (0.5 + 1 + 1 + 2)/6 = 4.5/6.
        assert!((m.mse - 6.25 / 6.0).abs() < 1e-15);
        assert!((m.mae - 0.75).abs() < 1e-15);
        // R²: column 1 SS_res 1.25, SS_tot 2 → 0.375; column 2 SS_res 5, SS_tot 32 → 0.84375;
        // mean 0.609375, by hand. scikit-learn 1.9.1's mean_squared_error, mean_absolute_error
        // and r2_score (default uniform_average) give the same three numbers.
        assert!((m.r2 - 0.609375).abs() < 1e-15);
    }

    #[test]
    fn constant_targets() {
        // scikit-learn 1.9.1: r2_score([2, 2], [2, 2]) = 1.0 and r2_score([2, 2], [2, 3]) = 0.0.
        let targets = array![[2.0], [2.0]];
        let perfect = regression_metrics(targets.view(), targets.view());
        assert_eq!((perfect.mse, perfect.mae, perfect.r2), (0.0, 0.0, 1.0));
        let off = regression_metrics(targets.view(), array![[2.0], [3.0]].view());
        assert_eq!(off.r2, 0.0);
    }
}
