//! Activation functions, each beside its derivative.
//!
//! A layer computes `a = f(z)` element by element on a batch whose rows are
//! samples (softmax works on each row as a whole). Both directions work in
//! place on preallocated buffers, so training allocates nothing per batch.
//!
//! Derivatives are written in terms of the layer's *output* `a`, not `z`, so
//! the forward pass only has to keep activations:
//!
//! | activation | `f(z)`                          | `f'` in terms of `a`      |
//! |------------|---------------------------------|---------------------------|
//! | sigmoid    | `1 / (1 + e^-z)`                | `a (1 − a)`               |
//! | tanh       | `tanh z`                        | `1 − a²`                  |
//! | relu       | `max(z, 0)`                     | `1` if `a > 0`, else `0`  |
//! | leaky relu | `z` if `z ≥ 0`, else `0.01 z`   | `1` if `a > 0`, else 0.01 |
//! | linear     | `z`                             | `1`                       |
//!
//! For relu and leaky relu `a > 0` exactly when `z > 0`; at the kink `z = 0`
//! the left derivative is used, as scikit-learn does for relu.
//!
//! Softmax couples the outputs of a row, so instead of an element-wise
//! derivative it applies its Jacobian–vector product: for an upstream
//! gradient `g` on one row, `∂L/∂z = a ⊙ (g − ⟨g, a⟩)`. It is only valid as an
//! output activation.

use ndarray::{ArrayView1, ArrayView2, ArrayViewMut2, Zip};
use serde::{Deserialize, Serialize};

use super::float::Float;
use super::vector;

/// Slope of [`Activation::LeakyRelu`] for negative inputs.
pub(crate) const LEAKY_SLOPE: f64 = 0.01;

/// The non-linearity applied by a layer after its affine map.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Activation {
    /// Logistic function `1 / (1 + e^-z)`.
    Sigmoid,
    /// Hyperbolic tangent.
    Tanh,
    /// Rectified linear unit `max(z, 0)`.
    Relu,
    /// `z` for `z ≥ 0`, [`LEAKY_SLOPE`]` · z` otherwise.
    LeakyRelu,
    /// The identity.
    Linear,
    /// Row-wise `e^z_i / Σ_j e^z_j`; only valid for the output layer.
    Softmax,
}

impl Activation {
    /// Whether this activation may be used by a hidden layer (all but softmax).
    pub(crate) fn valid_for_hidden(self) -> bool {
        self != Activation::Softmax
    }

    /// Replaces each pre-activation `z` in `z` (rows are samples) by `f(z)`.
    ///
    /// NaN inputs stay NaN so that a diverging run is noticed by its loss.
    pub fn apply<F: Float>(self, mut z: ArrayViewMut2<F>) {
        if let (Activation::Sigmoid, Some(values)) = (self, z.as_slice_memory_order_mut()) {
            vector::map(values, sigmoid);
            return;
        }
        let width = z.ncols();
        let (zero, slope) = (F::zero(), F::round_from(LEAKY_SLOPE));
        if self == Activation::Softmax
            && let Some(values) = z.as_slice_mut()
        {
            softmax_rows(values, width);
            return;
        }
        match self {
            Activation::Sigmoid => z.map_inplace(|v| *v = sigmoid(*v)),
            Activation::Tanh => z.map_inplace(|v| *v = v.tanh()),
            // Written with `<` rather than `max` so that NaN propagates.
            Activation::Relu => z.map_inplace(|v| *v = if *v < zero { zero } else { *v }),
            Activation::LeakyRelu => {
                z.map_inplace(|v| *v = if *v < zero { slope * *v } else { *v })
            }
            Activation::Linear => {}
            Activation::Softmax => {
                z.rows_mut()
                    .into_iter()
                    .for_each(|mut row| match row.as_slice_mut() {
                        Some(row) => softmax_row(row),
                        None => {
                            let mut owned = row.to_vec();
                            softmax_row(&mut owned);
                            row.assign(&ArrayView1::from(&owned));
                        }
                    })
            }
        }
    }

    /// Turns `grad`, holding `∂L/∂a` for this layer's outputs `a`, into
    /// `∂L/∂z` in place (the chain rule through the activation).
    pub(crate) fn backprop<F: Float>(self, a: ArrayView2<F>, mut grad: ArrayViewMut2<F>) {
        assert_eq!(a.dim(), grad.dim(), "activations and gradient shapes");
        let (zero, one, slope) = (F::zero(), F::one(), F::round_from(LEAKY_SLOPE));
        if let (Some(a), Some(g)) = (a.as_slice(), grad.as_slice_mut())
            && self.valid_for_hidden()
        {
            // Contiguous buffers (as in training): one flat loop, vectorised
            // at the widest the processor has.
            match self {
                Activation::Sigmoid => vector::map_with(g, a, |g, a| g * (a * (one - a))),
                Activation::Tanh => vector::map_with(g, a, |g, a| g * (one - a * a)),
                Activation::Relu => vector::map_with(g, a, |g, a| if a <= zero { zero } else { g }),
                Activation::LeakyRelu => {
                    vector::map_with(g, a, |g, a| g * if a <= zero { slope } else { one })
                }
                Activation::Linear | Activation::Softmax => {}
            }
            return;
        }
        let zip = Zip::from(&mut grad).and(&a);
        match self {
            Activation::Sigmoid => zip.for_each(|g, &a| *g *= a * (one - a)),
            Activation::Tanh => zip.for_each(|g, &a| *g *= one - a * a),
            Activation::Relu => zip.for_each(|g, &a| {
                if a <= zero {
                    *g = zero;
                }
            }),
            Activation::LeakyRelu => zip.for_each(|g, &a| {
                if a <= zero {
                    *g *= slope;
                }
            }),
            Activation::Linear => {}
            Activation::Softmax => Zip::from(grad.rows_mut())
                .and(a.rows())
                .for_each(|mut g, a| {
                    let inner = g.dot(&a);
                    Zip::from(&mut g)
                        .and(&a)
                        .for_each(|g, &a| *g = a * (*g - inner));
                }),
        }
    }
}

/// Logistic function, evaluated so that `e^x` is only taken of `x ≤ 0` and
/// cannot overflow.
///
/// That is `1 / (1 + e^-z)` for `z ≥ 0` and `e^z / (1 + e^z)` below, both
/// from the one `e^-|z|`, chosen by a select rather than a branch: the sign of
/// `z` in a batch is close to random, and a mispredicted branch per unit cost
/// more than the arithmetic.
#[inline]
pub(crate) fn sigmoid<F: Float>(z: F) -> F {
    let e = (-z.abs()).vector_exp();
    let numerator = if z >= F::zero() { F::one() } else { e };
    numerator / (F::one() + e)
}

/// Softmax of one row in place. Subtracting the row maximum first leaves the
/// result unchanged mathematically and keeps `exp` from overflowing. The sum
/// is ndarray's (eight-way unrolled for long rows).
fn softmax_row<F: Float>(row: &mut [F]) {
    let max = row.iter().fold(F::neg_infinity(), |m, &v| m.max(v));
    row.iter_mut().for_each(|v| *v = (*v - max).vector_exp());
    let sum = ndarray_sum(row);
    row.iter_mut().for_each(|v| *v /= sum);
}

/// [`softmax_row`] on each row of a row-major buffer, with the exponentials
/// taken over the whole buffer in one vectorised pass: rows of a few classes
/// are too short to vectorise on their own.
fn softmax_rows<F: Float>(values: &mut [F], width: usize) {
    // Rows of a few classes, the usual case, with their width known to the
    // compiler: each row's loops unroll into straight-line code, where a
    // loop of three would cost more in its own control than in arithmetic.
    match width {
        0 => {}
        2 => softmax_rows_of::<F, 2>(values),
        3 => softmax_rows_of::<F, 3>(values),
        4 => softmax_rows_of::<F, 4>(values),
        5 => softmax_rows_of::<F, 5>(values),
        6 => softmax_rows_of::<F, 6>(values),
        7 => softmax_rows_of::<F, 7>(values),
        8 => softmax_rows_of::<F, 8>(values),
        _ => softmax_rows_of_width(values, width),
    }
}

/// [`softmax_rows`] for rows of `W` values.
fn softmax_rows_of<F: Float, const W: usize>(values: &mut [F]) {
    softmax_rows_of_width(values, W);
}

/// [`softmax_rows`] for rows of `width` values, inlined into each caller so
/// that a constant width unrolls.
#[inline(always)]
fn softmax_rows_of_width<F: Float>(values: &mut [F], width: usize) {
    for row in values.chunks_exact_mut(width) {
        let max = row.iter().fold(F::neg_infinity(), |m, &v| m.max(v));
        row.iter_mut().for_each(|v| *v -= max);
    }
    vector::map(values, F::vector_exp);
    for row in values.chunks_exact_mut(width) {
        let sum = ndarray_sum(row);
        row.iter_mut().for_each(|v| *v /= sum);
    }
}

/// The sum ndarray's `sum()` gives for a contiguous row, bit for bit (an
/// eight-way unrolled fold, then the remainder in order), inlined because for
/// rows of a few classes the call costs more than the additions.
#[inline(always)]
fn ndarray_sum<F: Float>(row: &[F]) -> F {
    let mut lanes = [F::zero(); 8];
    let mut chunks = row.chunks_exact(8);
    for chunk in &mut chunks {
        lanes.iter_mut().zip(chunk).for_each(|(l, &v)| *l += v);
    }
    let mut sum = F::zero();
    for i in 0..4 {
        sum += lanes[i] + lanes[i + 4];
    }
    chunks.remainder().iter().fold(sum, |s, &v| s + v)
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::{Array2, array};

    const ALL: [Activation; 6] = [
        Activation::Sigmoid,
        Activation::Tanh,
        Activation::Relu,
        Activation::LeakyRelu,
        Activation::Linear,
        Activation::Softmax,
    ];

    fn applied(f: Activation, z: &Array2<f64>) -> Array2<f64> {
        let mut a = z.clone();
        f.apply(a.view_mut());
        a
    }

    #[test]
    fn known_values() {
        let z = array![[-2.0, 0.0, 3.0]];
        // sigmoid(-2) = 1/(1+e^2), sigmoid(3) = 1/(1+e^-3): from the definition.
        let s = applied(Activation::Sigmoid, &z);
        assert!((s[[0, 0]] - 0.11920292202211755).abs() < 1e-15);
        assert_eq!(s[[0, 1]], 0.5);
        assert!((s[[0, 2]] - 0.9525741268224334).abs() < 1e-15);
        assert_eq!(
            applied(Activation::Relu, &z),
            array![[0.0, 0.0, 3.0]],
            "relu clips negatives"
        );
        assert_eq!(
            applied(Activation::LeakyRelu, &z),
            array![[-0.02, 0.0, 3.0]]
        );
        assert_eq!(applied(Activation::Linear, &z), z);
        let t = applied(Activation::Tanh, &z);
        assert!((t[[0, 2]] - 3.0f64.tanh()).abs() < 1e-16);
        // softmax of (-2, 0, 3) = e^z / (e^-2 + 1 + e^3), computed by hand from the definition.
        let p = applied(Activation::Softmax, &z);
        let denom = (-2.0f64).exp() + 1.0 + 3.0f64.exp();
        assert!((p[[0, 0]] - (-2.0f64).exp() / denom).abs() < 1e-16);
        assert!((p[[0, 1]] - 1.0 / denom).abs() < 1e-16);
        assert!((p.sum() - 1.0).abs() < 1e-15);
    }

    #[test]
    fn extreme_inputs_stay_finite() {
        let z = array![[-800.0, 800.0], [1000.0, 999.0]];
        let s = applied(Activation::Sigmoid, &z);
        assert_eq!(s[[0, 0]], 0.0);
        assert_eq!(s[[0, 1]], 1.0);
        let p = applied(Activation::Softmax, &z);
        assert!(p.iter().all(|v| v.is_finite()));
        assert_eq!(p[[0, 1]], 1.0);
        // softmax(1000, 999) = (1/(1+e^-1), e^-1/(1+e^-1)) since only differences matter.
        assert!((p[[1, 0]] - sigmoid(1.0)).abs() < 1e-15);
    }

    #[test]
    fn nan_propagates() {
        let z = array![[f64::NAN, 1.0]];
        for f in ALL {
            let a = applied(f, &z);
            assert!(a[[0, 0]].is_nan(), "{f:?} hid a NaN");
        }
    }

    /// The derivative written in terms of the output agrees with a central
    /// difference of `f` at several points away from the relu kink.
    #[test]
    fn derivatives_match_central_differences() {
        let z = array![[-1.7, -0.3, 0.4, 2.2]];
        let h = 1e-6;
        for f in ALL {
            let a = applied(f, &z);
            let upstream = array![[0.3, -1.2, 0.7, 2.0]];
            let mut analytic = upstream.clone();
            f.backprop(a.view(), analytic.view_mut());
            // Numerical: ∂/∂z_j of Σ_i upstream_i a_i(z).
            for j in 0..z.ncols() {
                let mut plus = z.clone();
                plus[[0, j]] += h;
                let mut minus = z.clone();
                minus[[0, j]] -= h;
                let diff = (&applied(f, &plus) - &applied(f, &minus)) * &upstream;
                let numeric = diff.sum() / (2.0 * h);
                assert!(
                    (numeric - analytic[[0, j]]).abs() < 1e-8,
                    "{f:?} column {j}: numeric {numeric}, analytic {}",
                    analytic[[0, j]]
                );
            }
        }
    }

    #[test]
    fn row_sums_match_ndarray() {
        for len in [1, 3, 7, 8, 9, 10, 16, 23] {
            let row: Vec<f64> = (0..len).map(|i| 1.0 / (i as f64 + 0.37)).collect();
            let ours = ndarray_sum(&row);
            assert_eq!(
                ours.to_bits(),
                ArrayView1::from(&row).sum().to_bits(),
                "{len}"
            );
        }
    }

    /// Softmax over a batch gives each row's [`softmax_row`] bit for bit,
    /// for the widths compiled with a constant and the others.
    #[test]
    fn softmax_of_a_batch_is_each_rows_softmax_for_every_width() {
        for width in 1..=12 {
            let z = Array2::from_shape_fn((9, width), |(i, j)| {
                ((i * 13 + j * 7) % 17) as f64 * 0.731 - 4.1 + 1e-9 * i as f64
            });
            let mut expected = z.clone();
            for mut row in expected.rows_mut() {
                softmax_row(row.as_slice_mut().expect("a row of a row-major matrix"));
            }
            let ours = applied(Activation::Softmax, &z);
            let bits = |a: &Array2<f64>| a.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&ours), bits(&expected), "width {width}");
        }
    }

    #[test]
    fn only_softmax_is_output_only() {
        for f in ALL {
            assert_eq!(f.valid_for_hidden(), f != Activation::Softmax);
        }
    }

    #[test]
    fn serde_names_are_snake_case() {
        assert_eq!(
            serde_json::to_string(&Activation::LeakyRelu).unwrap(),
            "\"leaky_relu\""
        );
        let back: Activation = serde_json::from_str("\"softmax\"").unwrap();
        assert_eq!(back, Activation::Softmax);
    }
}
