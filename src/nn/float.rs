//! The float type training arithmetic runs in.
//!
//! Networks are stored, exported, applied and measured in `f64` ([`Network`](super::Network));
//! a run may train in `f32` instead ([`Precision::F32`]), where single-precision
//! products run about twice as fast on large layers. Initial weights are drawn in
//! `f64` either way and rounded for an `f32` run, so both precisions start from the
//! same draws; the trained network is converted back to `f64` (exactly: every `f32`
//! is an `f64`).

use ndarray::linalg::general_mat_mul;
use ndarray::{ArrayView2, ArrayViewMut2, NdFloat};
use serde::{Deserialize, Serialize};

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
    pub fn is_f64(&self) -> bool {
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

    /// `e^x` in a form the compiler vectorises (see `vector`).
    fn vector_exp(self) -> Self;

    /// `c ← a·b`, or `c ← a·b + c` with `accumulate` (see `gemm`).
    fn gemm(a: ArrayView2<Self>, b: ArrayView2<Self>, accumulate: bool, c: ArrayViewMut2<Self>);

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

    #[inline(always)]
    fn vector_exp(self) -> f64 {
        vector::exp(self)
    }

    fn gemm(a: ArrayView2<f64>, b: ArrayView2<f64>, accumulate: bool, c: ArrayViewMut2<f64>) {
        gemm::gemm(a, b, accumulate, c);
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

    /// Computed in `f64` and rounded: the `f64` exponential is within one `f64` ulp,
    /// far inside half an `f32` ulp, and it vectorises as well (measured in
    /// bench/README.md).
    #[inline(always)]
    fn vector_exp(self) -> f32 {
        vector::exp(f64::from(self)) as f32
    }

    /// Always `matrixmultiply`'s single-precision product.
    fn gemm(a: ArrayView2<f32>, b: ArrayView2<f32>, accumulate: bool, mut c: ArrayViewMut2<f32>) {
        let beta = if accumulate { 1.0 } else { 0.0 };
        general_mat_mul(1.0, &a, &b, beta, &mut c);
    }

    fn reads_rows(_: usize, _: usize, _: usize) -> bool {
        false
    }
}
