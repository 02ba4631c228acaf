//! Matrix products for the engine: `C ← A·B` or `C ← A·B + C`.
//!
//! For the small products of small networks (Iris-sized layers, short
//! batches) packing the operands, its allocation and masked edge kernels cost
//! more than the arithmetic, so those are computed here directly from the
//! row-major buffers. Large products are packed into cache-sized panels: on
//! processors with AVX-512 by the kernel in [`packed`], elsewhere by
//! `matrixmultiply` (through ndarray's `general_mat_mul`), whose kernel uses
//! AVX2 at most.
//!
//! All paths give the same bits. `matrixmultiply`'s FMA kernel, which it
//! selects at run time on processors with AVX2 and FMA, forms each entry of
//! `A·B` as one fused multiply–add chain over `k` in order, starting from
//! zero, in blocks of [`KC`] values of `k`, and then adds the block to `C`
//! (`C ← ab + C`, or `C ← ab + 0` for the first block without accumulation).
//! The kernels here do exactly that; where the
//! processor lacks AVX2 or FMA, `matrixmultiply` uses other kernels with other
//! rounding, so every product goes to it and nothing changes there.

use ndarray::{ArrayView2, ArrayViewMut2, linalg::general_mat_mul};

#[cfg(target_arch = "x86_64")]
mod packed;

/// `matrixmultiply`'s block depth along `k`, for `f64` and `f32` alike (its
/// `D_KC` and `S_KC`).
const KC: usize = 256;

/// Products with at most this many multiply–adds use the direct kernel. Past
/// it, packing pays for itself and threads start to help (measured: see
/// bench/README.md).
const DIRECT_MAX_WORK: usize = 1 << 17;

/// `c ← a·b`, or `c ← a·b + c` with `accumulate`.
///
/// `b` and `c` need contiguous rows for the direct kernel; `a` may have any
/// strides (so `xᵀ` is passed as a view without copying).
///
/// # Panics
/// If the shapes do not chain.
pub(crate) fn gemm(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    accumulate: bool,
    mut c: ArrayViewMut2<f64>,
) {
    let (m, k, n) = dimensions(&a, &b, &c);
    if m == 0 || n == 0 {
        return;
    }
    #[cfg(target_arch = "x86_64")]
    if direct(m, k, n)
        && b.strides()[1] == 1
        && c.strides()[1] == 1
        && a.strides().iter().all(|&s| s >= 0)
        && b.strides()[0] >= 0
        && c.strides()[0] >= 0
    {
        let shape = Shape {
            m,
            n,
            k,
            rsa: a.strides()[0] as usize,
            csa: a.strides()[1] as usize,
            ldb: b.strides()[0] as usize,
            ldc: c.strides()[0] as usize,
            accumulate,
        };
        // SAFETY: `direct` detected AVX2 and FMA; the shapes were checked
        // against the views, whose strides are non-negative, so every offset
        // the kernel forms (`i·rsa + p·csa`, `p·ldb + j`, `i·ldc + j` for
        // `i < m`, `p < k`, `j < n`) lies inside the viewed memory.
        unsafe { x86::direct(&shape, a.as_ptr(), b.as_ptr(), c.as_mut_ptr()) };
        return;
    }
    #[cfg(target_arch = "x86_64")]
    if m * n * k > DIRECT_MAX_WORK && c.strides()[1] == 1 && packed::available() {
        packed::gemm(a, b, accumulate, c);
        return;
    }
    let beta = if accumulate { 1.0 } else { 0.0 };
    general_mat_mul(1.0, &a, &b, beta, &mut c);
}

/// [`gemm`] in single precision: large products take the packed kernel
/// where the processor has AVX-512, all others `matrixmultiply`.
///
/// # Panics
/// If the shapes do not chain.
pub(crate) fn gemm_f32(
    a: ArrayView2<f32>,
    b: ArrayView2<f32>,
    accumulate: bool,
    mut c: ArrayViewMut2<f32>,
) {
    let (m, k, n) = dimensions(&a, &b, &c);
    #[cfg(target_arch = "x86_64")]
    if m * n * k > DIRECT_MAX_WORK && c.strides()[1] == 1 && packed::available() {
        packed::gemm(a, b, accumulate, c);
        return;
    }
    let beta = if accumulate { 1.0 } else { 0.0 };
    general_mat_mul(1.0, &a, &b, beta, &mut c);
}

/// `(m, k, n)` of an `(m × k)·(k × n)` product into `c`.
///
/// # Panics
/// If the shapes do not chain.
fn dimensions<T>(
    a: &ArrayView2<T>,
    b: &ArrayView2<T>,
    c: &ArrayViewMut2<T>,
) -> (usize, usize, usize) {
    let ((m, k), (k2, n)) = (a.dim(), b.dim());
    assert!(
        k == k2 && c.dim() == (m, n),
        "gemm shapes: {:?}·{:?} into {:?}",
        a.dim(),
        b.dim(),
        c.dim()
    );
    (m, k, n)
}

/// Whether an `(m × k)·(k × n)` product takes the direct kernel (given
/// row-contiguous `b` and `c`): it is small, and the processor has the
/// instructions that make both paths round alike.
pub(crate) fn direct(m: usize, k: usize, n: usize) -> bool {
    #[cfg(target_arch = "x86_64")]
    {
        k > 0
            && m * n * k <= DIRECT_MAX_WORK
            && std::arch::is_x86_feature_detected!("avx2")
            && std::arch::is_x86_feature_detected!("fma")
    }
    #[cfg(not(target_arch = "x86_64"))]
    {
        let _ = (m, k, n);
        false
    }
}

/// Dimensions and element strides of one direct product.
#[cfg_attr(not(target_arch = "x86_64"), allow(dead_code))]
struct Shape {
    m: usize,
    n: usize,
    k: usize,
    rsa: usize,
    csa: usize,
    ldb: usize,
    ldc: usize,
    accumulate: bool,
}

#[cfg(target_arch = "x86_64")]
mod x86 {
    use std::cell::RefCell;

    use super::{KC, Shape};

    /// Rows of `C` per tile: with [`COLS`] this keeps 4 × 2 vectors of
    /// accumulators in registers.
    const ROWS: usize = 4;
    /// Columns of `C` per full-width tile.
    const COLS: usize = 8;
    /// Columns per vector; a last group of fewer columns is computed from a
    /// zero-padded copy of those columns of `B`, so that narrow layers (three
    /// classes, say) still run four lanes at a time.
    const LANES: usize = 4;

    thread_local! {
        /// The padded copy of `B`'s last columns, reused between products.
        static TAIL: RefCell<Vec<f64>> = const { RefCell::new(Vec::new()) };
    }

    /// The direct product. Tiles of `C` are visited in any order (each entry
    /// is independent); within an entry the chain over `k` is sequential.
    ///
    /// # Safety
    /// AVX2 and FMA must be available, and the pointers valid for the
    /// offsets described in [`super::gemm`].
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn direct(s: &Shape, a: *const f64, b: *const f64, c: *mut f64) {
        let full = s.n - s.n % LANES;
        TAIL.with_borrow_mut(|tail| {
            if full < s.n {
                // Every lane is written below, so the buffer needs no clearing.
                if tail.len() < s.k * LANES {
                    tail.resize(s.k * LANES, 0.0);
                }
                for (p, padded) in tail.chunks_exact_mut(LANES).take(s.k).enumerate() {
                    for (q, v) in padded.iter_mut().enumerate() {
                        *v = if full + q < s.n {
                            // SAFETY: p < k and full + q < n.
                            unsafe { *b.add(p * s.ldb + full + q) }
                        } else {
                            0.0
                        };
                    }
                }
            }
            let mut i = 0;
            while i < s.m {
                // SAFETY (all tiles): rows i.. and the columns named lie inside
                // A, B (or the padded copy) and C.
                unsafe {
                    if s.m - i >= ROWS {
                        row_tiles::<ROWS>(s, a, b, c, i, full, tail);
                        i += ROWS;
                    } else {
                        row_tiles::<1>(s, a, b, c, i, full, tail);
                        i += 1;
                    }
                }
            }
        });
    }

    /// All tiles of rows `i..i + R` of `C`.
    ///
    /// # Safety
    /// As [`direct`], with `i + R ≤ m`; `tail` holds the padded last columns
    /// when `full < n`.
    #[inline(always)]
    unsafe fn row_tiles<const R: usize>(
        s: &Shape,
        a: *const f64,
        b: *const f64,
        c: *mut f64,
        i: usize,
        full: usize,
        tail: &[f64],
    ) {
        let a = unsafe { a.add(i * s.rsa) };
        let c = unsafe { c.add(i * s.ldc) };
        let mut j = 0;
        unsafe {
            while j + COLS <= full {
                tile::<R, COLS>(s, a, b.add(j), s.ldb, c.add(j), COLS);
                j += COLS;
            }
            if j < full {
                tile::<R, LANES>(s, a, b.add(j), s.ldb, c.add(j), LANES);
            }
            if full < s.n {
                tile::<R, LANES>(s, a, tail.as_ptr(), LANES, c.add(full), s.n - full);
            }
        }
    }

    /// Computes an `R × W` block of `C` from the rows of `A` at `a`, the
    /// columns of `B` at `b` (row stride `ldb`), and writes its first `cols`
    /// columns to `c`.
    ///
    /// # Safety
    /// As [`direct`]: `R` rows of `A` and `C`, `k` rows of `W` values of `B`
    /// and `cols` values of each row of `C` are in bounds.
    #[inline(always)]
    unsafe fn tile<const R: usize, const W: usize>(
        s: &Shape,
        a: *const f64,
        b: *const f64,
        ldb: usize,
        c: *mut f64,
        cols: usize,
    ) {
        let mut start = 0;
        while start < s.k {
            let end = (start + KC).min(s.k);
            let mut acc = [[0.0f64; W]; R];
            for p in start..end {
                let row = unsafe { &*b.add(p * ldb).cast::<[f64; W]>() };
                for (r, acc) in acc.iter_mut().enumerate() {
                    let x = unsafe { *a.add(r * s.rsa + p * s.csa) };
                    for (acc, &y) in acc.iter_mut().zip(row) {
                        *acc = x.mul_add(y, *acc);
                    }
                }
            }
            // matrixmultiply adds each block to C, except that the first
            // block overwrites C when not accumulating (as `ab + 0`, which
            // also turns a −0 sum into +0).
            let add = s.accumulate || start > 0;
            for (r, acc) in acc.iter().enumerate() {
                let out = unsafe { c.add(r * s.ldc) };
                if cols == W {
                    let out = unsafe { &mut *out.cast::<[f64; W]>() };
                    for (out, &v) in out.iter_mut().zip(acc) {
                        *out = v + if add { *out } else { 0.0 };
                    }
                } else {
                    for (q, &v) in acc.iter().enumerate().take(cols) {
                        let out = unsafe { &mut *out.add(q) };
                        *out = v + if add { *out } else { 0.0 };
                    }
                }
            }
            start = end;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::Float;
    use ndarray::{Array2, s};

    /// The packed kernel's element types (any type elsewhere, where there is
    /// no packed kernel to test).
    #[cfg(target_arch = "x86_64")]
    use packed::Element;
    #[cfg(not(target_arch = "x86_64"))]
    trait Element {}
    #[cfg(not(target_arch = "x86_64"))]
    impl<T> Element for T {}

    /// Values with full mantissas, so that any difference in rounding shows.
    fn matrix(rows: usize, cols: usize, seed: u64) -> Array2<f64> {
        Array2::from_shape_fn((rows, cols), |(i, j)| {
            let h = (i as u64 * 7919 + j as u64 * 104729 + seed * 15485863) % 1000003;
            (h as f64 / 1000003.0 - 0.5) * 3.7
        })
    }

    /// matrixmultiply's result for `start`, or `0` when not accumulating.
    fn theirs<T: Float>(
        a: ArrayView2<T>,
        b: ArrayView2<T>,
        accumulate: bool,
        start: &Array2<T>,
    ) -> Array2<T> {
        let mut c = start.clone();
        let beta = if accumulate { T::one() } else { T::zero() };
        general_mat_mul(T::one(), &a, &b, beta, &mut c);
        c
    }

    /// Whether two matrices hold the same bits (`==` would let −0 equal +0).
    fn same_bits<T: Float>(x: &Array2<T>, y: &Array2<T>) -> bool {
        x.dim() == y.dim()
            && x.iter()
                .zip(y)
                .all(|(x, y)| x.widen().to_bits() == y.widen().to_bits())
    }

    /// A product with [`gemm`]'s signature.
    type Product<T> = fn(ArrayView2<T>, ArrayView2<T>, bool, ArrayViewMut2<T>);

    /// The products of one float type to check: the engine's entry point and,
    /// where the processor has AVX-512, the packed kernel itself (so that
    /// small shapes test its edges too).
    fn products<T: Float + Element>(entry: Product<T>) -> Vec<(&'static str, Product<T>)> {
        let mut products = vec![("gemm", entry)];
        #[cfg(target_arch = "x86_64")]
        if packed::available() {
            products.push(("packed", packed::gemm::<T>));
        }
        products
    }

    /// `product` into columns `2..n + 2` of a wider `C` starting as `start`
    /// there, on a pool of `threads`; checks that the columns around are
    /// untouched and returns the product's columns.
    fn into_wider_c<T: Float>(
        product: Product<T>,
        a: ArrayView2<T>,
        b: ArrayView2<T>,
        accumulate: bool,
        start: &Array2<T>,
        threads: usize,
    ) -> Array2<T> {
        let (m, n) = start.dim();
        let mut wide = matrix(m, n + 5, 9).mapv(T::round_from);
        wide.slice_mut(s![.., 2..n + 2]).assign(start);
        let around = |w: &Array2<T>| {
            (
                w.slice(s![.., ..2]).to_owned(),
                w.slice(s![.., n + 2..]).to_owned(),
            )
        };
        let before = around(&wide);
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| product(a, b, accumulate, wide.slice_mut(s![.., 2..n + 2])));
        assert_eq!(around(&wide), before, "outside the product's columns");
        wide.slice(s![.., 2..n + 2]).to_owned()
    }

    /// Bit for bit the same as matrixmultiply, in both float types, including
    /// long `k` (several blocks, the last one short), ragged edges,
    /// transposed left operands, accumulation, `C` inside a wider matrix, the
    /// training benchmark's two large products (128 × 784 · 784 × 256 and
    /// 784 × 128 · 128 × 256), and one and two threads.
    fn same_bits_as_matrixmultiply<T: Float + Element>(entry: Product<T>) {
        for &(m, k, n) in &[
            (1, 1, 1),
            (150, 4, 8),
            (150, 8, 3),
            (8, 150, 3),
            (5, 7, 9),
            (32, 64, 32),
            (13, 300, 6),
            (3, 600, 17),
            (64, 520, 2),
            (128, 784, 256),
            (784, 128, 256),
            (130, 620, 53),
            (61, 257, 600),
            (9, 2000, 250),
            (200, 20, 47),
            (128, 256, 10),
            (128, 10, 256),
        ] {
            for transposed in [false, true] {
                for accumulate in [false, true] {
                    let a_owned = if transposed {
                        matrix(k, m, 1)
                    } else {
                        matrix(m, k, 1)
                    }
                    .mapv(T::round_from);
                    let a = if transposed {
                        a_owned.t()
                    } else {
                        a_owned.view()
                    };
                    let b = matrix(k, n, 2).mapv(T::round_from);
                    let start = matrix(m, n, 3).mapv(T::round_from);
                    let expected = theirs(a, b.view(), accumulate, &start);
                    for (name, product) in products(entry) {
                        for threads in [1, 2] {
                            let ours =
                                into_wider_c(product, a, b.view(), accumulate, &start, threads);
                            assert!(
                                same_bits(&ours, &expected),
                                "{name} {m}x{k}x{n} transposed {transposed} accumulate {accumulate} threads {threads}"
                            );
                        }
                    }
                }
            }
        }
    }

    #[test]
    fn same_bits_as_matrixmultiply_f64() {
        same_bits_as_matrixmultiply::<f64>(gemm);
    }

    #[test]
    fn same_bits_as_matrixmultiply_f32() {
        same_bits_as_matrixmultiply::<f32>(gemm_f32);
    }

    /// Products that underflow to −0 added to a −0 `C`: matrixmultiply gives
    /// −0 from its full tiles but +0 from its remainder rows and columns
    /// (which add `ab + 0`); so must the packed kernel.
    fn negative_zeros_as_matrixmultiply<T: Float + Element>(entry: Product<T>, tiny: f64) {
        let (m, k, n) = (13, 300, 38);
        let a = Array2::from_elem((m, k), T::round_from(tiny));
        let b = Array2::from_elem((k, n), T::round_from(-tiny));
        let start = Array2::from_shape_fn((m, n), |(i, j)| {
            T::round_from(if (i + j) % 5 == 0 { 0.0 } else { -0.0 })
        });
        let expected = theirs(a.view(), b.view(), true, &start);
        let negative = expected
            .iter()
            .filter(|v| v.widen().to_bits() == (-0.0f64).to_bits())
            .count();
        assert!(negative > 0 && negative < m * n, "both signs of zero occur");
        for (name, product) in products(entry) {
            let ours = into_wider_c(product, a.view(), b.view(), true, &start, 2);
            assert!(same_bits(&ours, &expected), "{name}");
        }
    }

    #[test]
    fn negative_zeros_as_matrixmultiply_f64() {
        negative_zeros_as_matrixmultiply::<f64>(gemm, 1e-200);
    }

    #[test]
    fn negative_zeros_as_matrixmultiply_f32() {
        negative_zeros_as_matrixmultiply::<f32>(gemm_f32, 1e-30);
    }

    #[test]
    fn leading_rows_of_a_larger_buffer() {
        let a = matrix(10, 6, 4);
        let b = matrix(6, 5, 5);
        let mut ours = Array2::zeros((10, 5));
        gemm(
            a.slice(s![..7, ..]),
            b.view(),
            false,
            ours.slice_mut(s![..7, ..]),
        );
        let expected = a.slice(s![..7, ..]).dot(&b);
        assert_eq!(ours.slice(s![..7, ..]), expected);
        assert!(ours.slice(s![7.., ..]).iter().all(|&v| v == 0.0));
    }
}
