//! Loss functions, each beside its gradient.
//!
//! For a batch of `n` rows with outputs `o` (probabilities `p` for
//! cross-entropy) and targets `t`:
//!
//! * mean squared error: `L = (1/n) Σ_rows ½ Σ_outputs (o − t)²`;
//! * cross-entropy with a softmax output: `L = −(1/n) Σ_rows Σ_outputs t ln p`
//!   (targets are one-hot rows or probability rows summing to 1);
//! * cross-entropy with sigmoid outputs (binary or multi-label):
//!   `L = −(1/n) Σ_rows Σ_outputs [t ln p + (1 − t) ln(1 − p)]`.
//!
//! In the loss *value* `p` is clipped to `[1e-15, 1 − 1e-15]` so a saturated
//! output gives a large finite loss instead of infinity; the gradient uses
//! the unclipped outputs. (scikit-learn 1.9 clips to machine epsilon
//! instead, about 2.2e-16, so its values differ only for outputs within
//! 1e-15 of 0 or 1.)
//!
//! The output layer's delta `∂L/∂z` is `(o − t)/n` for softmax with
//! cross-entropy, sigmoid with cross-entropy and linear with squared error:
//! the activation's derivative cancels the loss's, and using the fused form
//! saves work and avoids dividing by a saturated `p (1 − p)`. Every other
//! combination (squared error after sigmoid, tanh, relu, softmax, …) takes
//! `∂L/∂o = (o − t)/n` and chains it through [`Activation::backprop`].
//! Averaging over the batch matches scikit-learn's MLP gradient.

use ndarray::{ArrayView2, ArrayViewMut2, Zip};
use serde::{Deserialize, Serialize};

use super::activation::Activation;
use super::float::Float;
use super::vector;

/// Smallest probability used when evaluating a cross-entropy value.
const PROBABILITY_CLIP: f64 = 1e-15;

/// The training objective.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Loss {
    /// Half the squared error summed over outputs, averaged over rows.
    Mse,
    /// Negative log-likelihood: categorical after softmax, binary per output
    /// after sigmoid.
    CrossEntropy,
}

impl Loss {
    /// Whether this loss can follow the given output activation: squared
    /// error follows any, cross-entropy needs probabilities (sigmoid or
    /// softmax).
    pub fn supports(self, output: Activation) -> bool {
        match self {
            Loss::Mse => true,
            Loss::CrossEntropy => matches!(output, Activation::Sigmoid | Activation::Softmax),
        }
    }

    /// The loss summed over the rows of a batch (divide by the row count for
    /// the mean). Rows are added in order, so the result is reproducible. It is
    /// evaluated in `f64` whatever the float type of the outputs, so that the
    /// probability clip (1e-15 is below `f32`'s resolution near 1) and the sums
    /// keep their precision.
    ///
    /// # Panics
    /// If the shapes differ, or the combination is not [`supported`](Self::supports).
    pub(crate) fn total<F: Float>(
        self,
        output: Activation,
        outputs: ArrayView2<F>,
        targets: ArrayView2<F>,
    ) -> f64 {
        self.check(output, outputs, targets);
        self.summed(output, outputs, targets, None)
    }

    /// [`Self::total`] of a training batch, and `∂L/∂z` of the output layer
    /// written into `delta`, where `L` is the mean loss of this batch (so every
    /// entry carries a factor `1/n`). One pass over the outputs gives both: a
    /// batch of a few classes costs more in passes than in arithmetic.
    ///
    /// # Panics
    /// If the shapes differ, or the combination is not [`supported`](Self::supports).
    pub(crate) fn total_and_output_delta<F: Float>(
        self,
        output: Activation,
        outputs: ArrayView2<F>,
        targets: ArrayView2<F>,
        mut delta: ArrayViewMut2<F>,
    ) -> f64 {
        self.check(output, outputs, targets);
        assert_eq!(delta.dim(), outputs.dim(), "delta buffer shape");
        let n = F::round_from(outputs.nrows() as f64);
        // Both losses start from (o − t)/n: it is ∂L/∂o for squared error and
        // the fused ∂L/∂z for cross-entropy after sigmoid or softmax.
        let residuals = Residuals {
            delta: delta.view_mut(),
            n,
        };
        let total = self.summed(output, outputs, targets, Some(residuals));
        let fused = match self {
            Loss::Mse => output == Activation::Linear,
            Loss::CrossEntropy => true,
        };
        if !fused {
            output.backprop(outputs, delta);
        }
        total
    }

    /// The loss summed over the rows, with the residuals filled on the way
    /// when asked for.
    fn summed<F: Float>(
        self,
        output: Activation,
        outputs: ArrayView2<F>,
        targets: ArrayView2<F>,
        residuals: Option<Residuals<'_, F>>,
    ) -> f64 {
        // A zero target contributes nothing to a categorical cross-entropy,
        // so its logarithm is not taken (one-hot rows: one logarithm per row
        // instead of one per class). Skipping it leaves every sum unchanged: the
        // term would be +0. A NaN output is still seen, since softmax spreads a
        // NaN to its whole row. Binary cross-entropy skips the term whose
        // weight is zero in the same way. Each arm passes its own closure, so
        // the term is inlined into the loop rather than called through a pointer.
        match (self, output) {
            (Loss::Mse, _) => sum_rows(outputs, targets, residuals, |o, t| 0.5 * (o - t) * (o - t)),
            (Loss::CrossEntropy, Activation::Softmax) => {
                sum_rows(outputs, targets, residuals, |p, t| {
                    if t == 0.0 { 0.0 } else { -t * clip(p).ln() }
                })
            }
            (Loss::CrossEntropy, _) => sum_rows(outputs, targets, residuals, |p, t| {
                let p = clip(p);
                if t == 0.0 {
                    -(1.0 - p).ln()
                } else if t == 1.0 {
                    -p.ln()
                } else {
                    -(t * p.ln() + (1.0 - t) * (1.0 - p).ln())
                }
            }),
        }
    }

    fn check<F: Float>(self, output: Activation, outputs: ArrayView2<F>, targets: ArrayView2<F>) {
        assert!(
            self.supports(output),
            "{self:?} loss cannot follow a {output:?} output"
        );
        assert_eq!(
            outputs.dim(),
            targets.dim(),
            "outputs and targets must have the same shape"
        );
    }
}

/// Where [`sum_rows`] writes `(o − t)/n` for each output `o` and target `t`.
struct Residuals<'a, F> {
    delta: ArrayViewMut2<'a, F>,
    n: F,
}

/// `Σ_rows Σ_columns term(output, target)`, each row summed in order and
/// the row sums added in order, every term in `f64`; with `residuals`, the
/// residuals are written first.
#[inline(always)]
fn sum_rows<F: Float>(
    outputs: ArrayView2<F>,
    targets: ArrayView2<F>,
    residuals: Option<Residuals<'_, F>>,
    term: impl Fn(f64, f64) -> f64,
) -> f64 {
    let term = |o: F, t: F| term(o.widen(), t.widen());
    let row_sum = |o: &[F], t: &[F]| o.iter().zip(t).map(|(&o, &t)| term(o, t)).sum::<f64>();
    let width = outputs.ncols();
    // Row-major batches (the usual case) are read as plain slices, which
    // costs far less per element than ndarray's strided row iterators.
    if let (Some(o), Some(t)) = (outputs.as_slice(), targets.as_slice())
        && width > 0
    {
        if let Some(mut r) = residuals {
            let n = r.n;
            match r.delta.as_slice_mut() {
                // One pass over the whole batch: rows of a few classes are too
                // short for their divisions to share vectors.
                Some(d) => vector::zip_map(d, o, t, |o, t| (o - t) / n),
                None => fill_residuals(r, outputs, targets),
            }
        }
        let rows = o.chunks_exact(width).zip(t.chunks_exact(width));
        return rows.map(|(o, t)| row_sum(o, t)).sum::<f64>();
    }
    if let Some(r) = residuals {
        fill_residuals(r, outputs, targets);
    }
    outputs
        .rows()
        .into_iter()
        .zip(targets.rows())
        .map(|(o, t)| {
            o.iter()
                .zip(t.iter())
                .map(|(&o, &t)| term(o, t))
                .sum::<f64>()
        })
        .sum()
}

/// `(o − t)/n` into the residuals' buffer, for layouts that are not plain slices.
fn fill_residuals<F: Float>(r: Residuals<'_, F>, outputs: ArrayView2<F>, targets: ArrayView2<F>) {
    Zip::from(r.delta)
        .and(&outputs)
        .and(&targets)
        .for_each(|d, &o, &t| *d = (o - t) / r.n);
}

fn clip(p: f64) -> f64 {
    p.clamp(PROBABILITY_CLIP, 1.0 - PROBABILITY_CLIP)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{Array2, array};

    #[test]
    fn mse_value_by_hand() {
        // Rows: ½((0.5−1)² + (2−0)²) = ½(0.25 + 4) = 2.125 and ½(0 + 1) = 0.5, worked by hand.
        let o = array![[0.5, 2.0], [1.0, -1.0]];
        let t = array![[1.0, 0.0], [1.0, 0.0]];
        assert_eq!(
            Loss::Mse.total(Activation::Linear, o.view(), t.view()),
            2.625
        );
    }

    #[test]
    fn cross_entropy_values_by_hand() {
        // Softmax: −ln 0.7 − ln 0.5, worked by hand from the definition.
        let p = array![[0.2, 0.7, 0.1], [0.5, 0.25, 0.25]];
        let t = array![[0.0, 1.0, 0.0], [1.0, 0.0, 0.0]];
        let expected = -(0.7f64.ln() + 0.5f64.ln());
        let got = Loss::CrossEntropy.total(Activation::Softmax, p.view(), t.view());
        assert!((got - expected).abs() < 1e-15);
        // Sigmoid: −[ln 0.8 + ln(1 − 0.3)] for one row with two labels, by hand.
        let p = array![[0.8, 0.3]];
        let t = array![[1.0, 0.0]];
        let expected = -(0.8f64.ln() + 0.7f64.ln());
        let got = Loss::CrossEntropy.total(Activation::Sigmoid, p.view(), t.view());
        assert!((got - expected).abs() < 1e-15);
    }

    #[test]
    fn saturated_probabilities_give_finite_loss() {
        let p = array![[0.0, 1.0]];
        let t = array![[1.0, 0.0]];
        let got = Loss::CrossEntropy.total(Activation::Sigmoid, p.view(), t.view());
        // Two terms of −ln(1e-15) ≈ 34.54 each.
        assert!((got - 2.0 * -(1e-15f64).ln()).abs() < 1e-3, "{got}");
    }

    fn delta(loss: Loss, f: Activation, o: &Array2<f64>, t: &Array2<f64>) -> Array2<f64> {
        let mut d = Array2::zeros(o.dim());
        loss.total_and_output_delta(f, o.view(), t.view(), d.view_mut());
        d
    }

    #[test]
    fn fused_deltas_are_mean_residuals() {
        let o = array![[0.2, 0.8], [0.6, 0.4]];
        let t = array![[0.0, 1.0], [1.0, 0.0]];
        let expected = array![[0.1, -0.1], [-0.2, 0.2]];
        for (loss, f) in [
            (Loss::CrossEntropy, Activation::Softmax),
            (Loss::CrossEntropy, Activation::Sigmoid),
            (Loss::Mse, Activation::Linear),
        ] {
            let d = delta(loss, f, &o, &t);
            assert!(
                (&d - &expected).iter().all(|e| e.abs() < 1e-16),
                "{loss:?}/{f:?}"
            );
        }
    }

    #[test]
    fn mse_after_sigmoid_chains_the_derivative() {
        // (o − t) · o (1 − o) / n with n = 1: (0.75 − 1) · 0.75 · 0.25 = −0.046875, by hand.
        let o = array![[0.75]];
        let t = array![[1.0]];
        assert_eq!(
            delta(Loss::Mse, Activation::Sigmoid, &o, &t),
            array![[-0.046875]]
        );
    }

    #[test]
    fn supported_combinations() {
        assert!(Loss::Mse.supports(Activation::Tanh));
        assert!(Loss::CrossEntropy.supports(Activation::Sigmoid));
        assert!(!Loss::CrossEntropy.supports(Activation::Linear));
        assert!(!Loss::CrossEntropy.supports(Activation::Relu));
    }

    /// The total found in the pass that writes the deltas is `total`'s, bit
    /// for bit, and the deltas are `(o − t)/n` (chained through the output's
    /// derivative where it is not fused), for row-major outputs and for
    /// column-major ones, which take the other path.
    #[test]
    fn the_loss_found_with_the_output_delta_is_the_total_bit_for_bit() {
        // Probabilities away from 0 and 1 with a ragged spread, so that every
        // term and every sum rounds.
        let o = Array2::from_shape_fn((7, 3), |(i, j)| 0.05 + ((i * 7 + j * 3) % 11) as f64 / 12.3);
        let t = Array2::from_shape_fn((7, 3), |(i, j)| if (i + j) % 3 == 0 { 1.0 } else { 0.0 });
        let column_major = |a: &Array2<f64>| a.t().to_owned().reversed_axes();
        for (loss, f) in [
            (Loss::CrossEntropy, Activation::Softmax),
            (Loss::CrossEntropy, Activation::Sigmoid),
            (Loss::Mse, Activation::Linear),
            (Loss::Mse, Activation::Sigmoid),
        ] {
            let mut expected = (&o - &t) / 7.0;
            if (loss, f) == (Loss::Mse, Activation::Sigmoid) {
                f.backprop(o.view(), expected.view_mut());
            }
            for (o, t) in [(o.clone(), t.clone()), (column_major(&o), column_major(&t))] {
                let mut d = Array2::from_elem(o.dim(), f64::NAN);
                let total = loss.total_and_output_delta(f, o.view(), t.view(), d.view_mut());
                let alone = loss.total(f, o.view(), t.view());
                assert_eq!(total.to_bits(), alone.to_bits(), "{loss:?} after {f:?}");
                assert_eq!(d, expected, "{loss:?} after {f:?}");
            }
        }
    }

    #[test]
    #[should_panic(expected = "cannot follow")]
    fn cross_entropy_after_linear_is_refused() {
        let o = array![[0.5]];
        Loss::CrossEntropy.total(Activation::Linear, o.view(), o.view());
    }
}
