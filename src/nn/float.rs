//! The float type training arithmetic runs in.
//!
//! Networks are stored, exported, applied and measured in `f64` ([`Network`](super::Network));
//! a run may train in `f32` instead ([`Precision::F32`]), where single-precision
//! products run about twice as fast on large layers. Initial weights are drawn in
//! `f64` either way and rounded for an `f32` run, so both precisions start from the
//! same draws; the trained network is converted back to `f64` (exactly: every `f32`
//! is an `f64`).

use std::borrow::Cow;

use ndarray::{ArrayView2, ArrayViewMut2, NdFloat};
use serde::{Deserialize, Serialize};

use super::network::Network;
use super::{gemm, vector};

/// The float type of a run's training arithmetic.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Precision {
    /// Double precision (the default).
    #[default]
    F64,
    /// Single precision: faster on large layers, about 7 significant digits.
    F32,
}

impl Precision {
    /// Whether this is the default, `f64`.
    pub(crate) fn is_f64(&self) -> bool {
        *self == Precision::F64
    }
}

/// What the engine needs of its float type beyond ndarray's [`NdFloat`]: conversions
/// to and from the `f64` that data and stored networks use, and the two kernels that
/// have a fast path of our own for `f64`.
pub trait Float: NdFloat {
    /// The nearest value of this type.
    fn round_from(value: f64) -> Self;

    /// The same value as an `f64` (exact).
    fn widen(self) -> f64;

    /// `f64` data as this type without copying, where it is `f64`.
    fn view(data: ArrayView2<'_, f64>) -> Option<ArrayView2<'_, Self>>;

    /// A network of this type as the `f64` network it stands for (exact), without
    /// copying where it is `f64`.
    fn widened(network: &Network<Self>) -> Cow<'_, Network>;

    /// `e^x` in a form the compiler vectorises (see `vector`).
    fn vector_exp(self) -> Self;

    /// `c ← a·b`, or `c ← a·b + c` with `accumulate` (see `gemm`).
    fn gemm(a: ArrayView2<Self>, b: ArrayView2<Self>, accumulate: bool, c: ArrayViewMut2<Self>);

    /// `c ← a·b + bias`, `bias` added to every row (see `gemm::affine`).
    fn affine(a: ArrayView2<Self>, b: ArrayView2<Self>, bias: &[Self], c: ArrayViewMut2<Self>);

    /// Whether [`Float::gemm`] takes a kernel that reads its right operand by rows
    /// for an `(m × k)·(k × n)` product, so that a transposed right operand is worth
    /// copying first.
    fn reads_rows(m: usize, k: usize, n: usize) -> bool;
}

impl Float for f64 {
    fn round_from(value: f64) -> f64 {
        value
    }

    fn widen(self) -> f64 {
        self
    }

    fn view(data: ArrayView2<'_, f64>) -> Option<ArrayView2<'_, f64>> {
        Some(data)
    }

    fn widened(network: &Network) -> Cow<'_, Network> {
        Cow::Borrowed(network)
    }

    #[inline(always)]
    fn vector_exp(self) -> f64 {
        vector::exp(self)
    }

    fn gemm(a: ArrayView2<f64>, b: ArrayView2<f64>, accumulate: bool, c: ArrayViewMut2<f64>) {
        gemm::gemm(a, b, accumulate, c);
    }

    fn affine(a: ArrayView2<f64>, b: ArrayView2<f64>, bias: &[f64], c: ArrayViewMut2<f64>) {
        gemm::affine(a, b, bias, c);
    }

    fn reads_rows(m: usize, k: usize, n: usize) -> bool {
        gemm::direct(m, k, n)
    }
}

impl Float for f32 {
    fn round_from(value: f64) -> f32 {
        value as f32
    }

    fn widen(self) -> f64 {
        f64::from(self)
    }

    fn view(_: ArrayView2<'_, f64>) -> Option<ArrayView2<'_, f32>> {
        None
    }

    fn widened(network: &Network<f32>) -> Cow<'_, Network> {
        Cow::Owned(network.to_precision())
    }

    /// Computed in `f64` and rounded: the `f64` exponential is within one `f64` ulp,
    /// far inside half an `f32` ulp, and it vectorises as well (measured in
    /// bench/README.md).
    #[inline(always)]
    fn vector_exp(self) -> f32 {
        vector::exp(f64::from(self)) as f32
    }

    fn gemm(a: ArrayView2<f32>, b: ArrayView2<f32>, accumulate: bool, c: ArrayViewMut2<f32>) {
        gemm::gemm_f32(a, b, accumulate, c);
    }

    fn affine(a: ArrayView2<f32>, b: ArrayView2<f32>, bias: &[f32], c: ArrayViewMut2<f32>) {
        gemm::affine_f32(a, b, bias, c);
    }

    fn reads_rows(_: usize, _: usize, _: usize) -> bool {
        false
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    /// Distance in units in the last place between two finite floats.
    fn ulps(a: f32, b: f32) -> u32 {
        let key = |v: f32| {
            let bits = v.to_bits() as i32;
            if bits < 0 { i32::MIN - bits } else { bits }
        };
        key(a).abs_diff(key(b))
    }

    /// Against the platform's `expf` over the whole range where `e^x` is a normal
    /// `f32`, densely where sigmoid and softmax use it.
    #[test]
    fn f32_exp_is_within_one_ulp_of_the_platform() {
        let mut worst = (0, 0.0f32);
        for i in 0..400_000 {
            let x = -87.0 + 175.0 * i as f32 / 400_000.0;
            let d = ulps(x.vector_exp(), x.exp());
            if d > worst.0 {
                worst = (d, x);
            }
        }
        assert!(worst.0 <= 1, "{} ulps at {}", worst.0, worst.1);
        assert_eq!(0.0f32.vector_exp(), 1.0);
        assert_eq!(100.0f32.vector_exp(), f32::INFINITY);
        assert_eq!((-110.0f32).vector_exp(), 0.0);
        assert!(f32::NAN.vector_exp().is_nan());
    }

    /// The single-precision product agrees with the double one to what `f32`
    /// rounding allows: each entry of a k-term product is within about k unit
    /// roundoffs (2⁻²⁴) of its magnitude sum (Higham, Accuracy and Stability of
    /// Numerical Algorithms, 2002, §3.1), plus the rounding of the inputs.
    #[test]
    fn f32_products_agree_with_f64_to_single_precision() {
        for &(m, k, n, accumulate) in &[
            (150, 4, 8, false),
            (33, 300, 17, true),
            (128, 784, 256, true),
        ] {
            let a =
                Array2::from_shape_fn((m, k), |(i, j)| ((i * 7 + j * 13) % 29) as f64 / 29.0 - 0.4);
            let b =
                Array2::from_shape_fn((k, n), |(i, j)| ((i * 11 + j * 5) % 31) as f64 / 31.0 - 0.6);
            let c = Array2::from_shape_fn((m, n), |(i, j)| ((i + j) % 3) as f64 - 1.0);
            let (a32, b32) = (a.mapv(|v| v as f32), b.mapv(|v| v as f32));
            let mut single = c.mapv(|v| v as f32);
            f32::gemm(a32.view(), b32.view(), accumulate, single.view_mut());
            let mut double = if accumulate {
                c.clone()
            } else {
                Array2::zeros((m, n))
            };
            f64::gemm(
                a32.mapv(f64::from).view(),
                b32.mapv(f64::from).view(),
                true,
                double.view_mut(),
            );
            let magnitude = a.mapv(f64::abs).dot(&b.mapv(f64::abs)) + 1.0;
            let bound = (k + 2) as f64 * 2f64.powi(-24);
            for ((s, d), size) in single.iter().zip(&double).zip(&magnitude) {
                assert!(
                    (f64::from(*s) - d).abs() <= bound * size,
                    "{m}x{k}x{n}: {s} vs {d}"
                );
            }
        }
    }

    #[test]
    fn precision_words() {
        assert_eq!(serde_json::to_string(&Precision::F32).unwrap(), "\"f32\"");
        assert_eq!(
            serde_json::from_str::<Precision>("\"f64\"").unwrap(),
            Precision::F64
        );
        assert_eq!(Precision::default(), Precision::F64);
    }
}
