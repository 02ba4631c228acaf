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
//! The kernels here do exactly that; a layer's [`affine`] map reads its
//! bias where the first block would read `C`, the same addition as filling
//! `C`'s rows with the bias first. Where the
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
    c: ArrayViewMut2<f64>,
) {
    let start = if accumulate { Start::C } else { Start::Zero };
    if let Some(c) = try_direct(a, b, start, c) {
        packed_or_general(a, b, accumulate, c);
    }
}

/// `c ← a·b + bias`, `bias` added to every row: a layer's affine map. The
/// same bits as setting each row of `c` to `bias` and accumulating `a·b` onto
/// it, which is what happens where the direct kernel does not apply; the
/// direct kernel reads the bias where it would have read `c`, which saves
/// writing the rows.
///
/// # Panics
/// If the shapes do not chain or `bias` is not one value per column of `c`.
pub(crate) fn affine(a: ArrayView2<f64>, b: ArrayView2<f64>, bias: &[f64], c: ArrayViewMut2<f64>) {
    assert_eq!(bias.len(), c.ncols(), "one bias per column");
    if let Some(mut c) = try_direct(a, b, Start::Bias(bias.as_ptr()), c) {
        set_rows(&mut c, bias);
        packed_or_general(a, b, true, c);
    }
}

/// [`affine`] in single precision (no direct kernel).
///
/// # Panics
/// As [`affine`].
pub(crate) fn affine_f32(
    a: ArrayView2<f32>,
    b: ArrayView2<f32>,
    bias: &[f32],
    mut c: ArrayViewMut2<f32>,
) {
    assert_eq!(bias.len(), c.ncols(), "one bias per column");
    set_rows(&mut c, bias);
    gemm_f32(a, b, true, c);
}

/// Every row of `c` set to `row`.
fn set_rows<T: Copy>(c: &mut ArrayViewMut2<T>, row: &[T]) {
    match c.as_slice_mut() {
        Some(values) if !values.is_empty() => fill_rows(values, row),
        _ => c.rows_mut().into_iter().for_each(|mut r| {
            r.iter_mut().zip(row).for_each(|(v, &b)| *v = b);
        }),
    }
}

/// Every row of the row-major `values` set to `row`, by doubling the filled
/// part: a few long copies instead of one short copy per row, which for narrow
/// layers costs more in calls than in bytes (and ndarray's broadcasting
/// assignment more still).
fn fill_rows<T: Copy>(values: &mut [T], row: &[T]) {
    values[..row.len()].copy_from_slice(row);
    let mut filled = row.len();
    while filled < values.len() {
        let copy = filled.min(values.len() - filled);
        values.copy_within(..copy, filled);
        filled += copy;
    }
}

/// Runs the product in the direct kernel when it applies (small, row-
/// contiguous `b` and `c`, non-negative strides, AVX2 and FMA) and returns
/// `None`, as it does when `c` is empty (nothing to compute); otherwise hands
/// `c` back untouched.
///
/// # Panics
/// If the shapes do not chain.
fn try_direct<'c>(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    start: Start,
    mut c: ArrayViewMut2<'c, f64>,
) -> Option<ArrayViewMut2<'c, f64>> {
    let (m, k, n) = dimensions(&a, &b, &c);
    if m == 0 || n == 0 {
        return None;
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
            start,
        };
        // SAFETY: `direct` detected AVX2 and FMA; the shapes were checked
        // against the views, whose strides are non-negative, so every offset
        // the kernel forms (`i·rsa + p·csa`, `p·ldb + j`, `i·ldc + j` for
        // `i < m`, `p < k`, `j < n`) lies inside the viewed memory, and a
        // bias holds one value per column.
        unsafe { x86::direct(&shape, a.as_ptr(), b.as_ptr(), c.as_mut_ptr()) };
        return None;
    }
    // Only the direct kernel reads `start`; the other paths are told by their callers.
    let _ = start;
    Some(c)
}

/// The packed kernel for large products where the processor has AVX-512,
/// else `matrixmultiply`. `c` is not empty: [`try_direct`] has returned those.
fn packed_or_general(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    accumulate: bool,
    mut c: ArrayViewMut2<f64>,
) {
    #[cfg(target_arch = "x86_64")]
    if a.nrows() * a.ncols() * b.ncols() > DIRECT_MAX_WORK
        && c.strides()[1] == 1
        && packed::available()
    {
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
    start: Start,
}

/// What the first block of `k` is added to (`matrixmultiply` adds each
/// later block to `C`).
#[derive(Clone, Copy)]
#[cfg_attr(not(target_arch = "x86_64"), allow(dead_code))]
enum Start {
    /// `ab + 0`, which also turns a −0 sum into +0.
    Zero,
    /// `ab + C`.
    C,
    /// `ab + bias[j]` in column `j`: `C` as it would be with every row set
    /// to the bias.
    Bias(*const f64),
}

#[cfg(target_arch = "x86_64")]
mod x86 {
    use std::arch::x86_64::{
        __m256d, __m256i, _mm256_add_pd, _mm256_broadcast_sd, _mm256_fmadd_pd, _mm256_loadu_pd,
        _mm256_maskload_pd, _mm256_maskstore_pd, _mm256_set_epi64x, _mm256_setzero_pd,
        _mm256_storeu_pd,
    };

    use super::{KC, Shape, Start};

    /// Rows of `C` per tile: with two vectors a row this keeps 4 × 2
    /// accumulators in registers, enough independent chains to hide the
    /// fused multiply–add's latency.
    const ROWS: usize = 4;
    /// `f64` lanes per AVX2 vector.
    const LANES: usize = 4;

    /// The direct product. Tiles of `C` are visited in any order (each entry
    /// is independent); within an entry the chain over `k` is sequential.
    ///
    /// # Safety
    /// AVX2 and FMA must be available, and the pointers valid for the
    /// offsets described in [`super::gemm`].
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn direct(s: &Shape, a: *const f64, b: *const f64, c: *mut f64) {
        let mut i = 0;
        // SAFETY (all tiles): rows i.. and the columns named lie inside A, B
        // and C.
        unsafe {
            // Products one vector wide (a layer of a few classes, or its
            // gradient over a long batch) take eight rows a tile, so that
            // eight independent chains hide the latency as two vectors a row
            // do for wider ones.
            if s.n <= LANES {
                while s.m - i >= 2 * ROWS {
                    row_tiles::<{ 2 * ROWS }>(s, a, b, c, i);
                    i += 2 * ROWS;
                }
            }
            while s.m - i >= ROWS {
                row_tiles::<ROWS>(s, a, b, c, i);
                i += ROWS;
            }
            // The last rows together, for the same reason.
            match s.m - i {
                3 => row_tiles::<3>(s, a, b, c, i),
                2 => row_tiles::<2>(s, a, b, c, i),
                1 => row_tiles::<1>(s, a, b, c, i),
                _ => {}
            }
        }
    }

    /// All tiles of rows `i..i + R` of `C`: eight columns at a time, then four,
    /// then the last one to three through masked loads and stores (the masked
    /// lanes read nothing and compute with zeros that are never stored), so
    /// that narrow layers (three classes, say) still run four lanes at a time.
    ///
    /// # Safety
    /// As [`direct`], with `i + R ≤ m`.
    #[inline(always)]
    unsafe fn row_tiles<const R: usize>(
        s: &Shape,
        a: *const f64,
        b: *const f64,
        c: *mut f64,
        i: usize,
    ) {
        let a = unsafe { a.add(i * s.rsa) };
        let c = unsafe { c.add(i * s.ldc) };
        let mut j = 0;
        unsafe {
            while j + 2 * LANES <= s.n {
                tile::<R, 2>(s, a, b, c, j, None);
                j += 2 * LANES;
            }
            if j + LANES <= s.n {
                tile::<R, 1>(s, a, b, c, j, None);
                j += LANES;
            }
            if j < s.n {
                tile::<R, 1>(s, a, b, c, j, Some(lane_mask(s.n - j)));
            }
        }
    }

    /// A mask selecting the first `lanes` (1 to 3) lanes of a vector.
    #[inline(always)]
    fn lane_mask(lanes: usize) -> __m256i {
        let on = |q: usize| if q < lanes { -1 } else { 0 };
        // SAFETY: AVX is enabled in every caller.
        unsafe { _mm256_set_epi64x(on(3), on(2), on(1), on(0)) }
    }

    /// Loads four values at `p`, or with `mask` only the lanes it selects
    /// (the others are zero and `p` is not read there).
    #[inline(always)]
    unsafe fn load(p: *const f64, mask: Option<__m256i>) -> __m256d {
        unsafe {
            match mask {
                Some(mask) => _mm256_maskload_pd(p, mask),
                None => _mm256_loadu_pd(p),
            }
        }
    }

    /// Computes the `R × 4V` block of `C` at column `j` of the rows of `A` at
    /// `a` and of `C` at `c`; with `mask`, only the lanes it selects of the
    /// last vector are read from `B` and written to `C`.
    ///
    /// # Safety
    /// As [`direct`]: `R` rows of `A` and `C`, and columns `j..j + 4V` (the
    /// masked lanes excepted) of `B`, `C` and a bias are in bounds.
    #[inline(always)]
    unsafe fn tile<const R: usize, const V: usize>(
        s: &Shape,
        a: *const f64,
        b: *const f64,
        c: *mut f64,
        j: usize,
        mask: Option<__m256i>,
    ) {
        let vector_mask = |v: usize| if v + 1 == V { mask } else { None };
        let mut start = 0;
        while start < s.k {
            let end = (start + KC).min(s.k);
            // SAFETY: AVX2 and FMA are enabled in every caller; the offsets
            // stay inside the operands as documented above.
            unsafe {
                let mut acc = [[_mm256_setzero_pd(); V]; R];
                for p in start..end {
                    let row = b.add(p * s.ldb + j);
                    let row: [__m256d; V] =
                        std::array::from_fn(|v| load(row.add(v * LANES), vector_mask(v)));
                    for (r, acc) in acc.iter_mut().enumerate() {
                        let x = _mm256_broadcast_sd(&*a.add(r * s.rsa + p * s.csa));
                        for (acc, &y) in acc.iter_mut().zip(&row) {
                            *acc = _mm256_fmadd_pd(x, y, *acc);
                        }
                    }
                }
                // matrixmultiply adds each block to C, except that the first
                // block overwrites C when not accumulating (as `ab + 0`,
                // which also turns a −0 sum into +0); a bias stands for C's
                // rows.
                let first = if start > 0 { Start::C } else { s.start };
                for (r, acc) in acc.iter().enumerate() {
                    let out = c.add(r * s.ldc + j);
                    for (v, &sum) in acc.iter().enumerate() {
                        let at = v * LANES;
                        let mask = vector_mask(v);
                        let addend = match first {
                            Start::Zero => _mm256_setzero_pd(),
                            Start::C => load(out.add(at), mask),
                            Start::Bias(bias) => load(bias.add(j + at), mask),
                        };
                        let value = _mm256_add_pd(sum, addend);
                        match mask {
                            Some(mask) => _mm256_maskstore_pd(out.add(at), mask, value),
                            None => _mm256_storeu_pd(out.add(at), value),
                        }
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

    /// A layer's affine map gives the bits of setting every row of `C` to
    /// the bias and accumulating the product onto it in matrixmultiply, on
    /// the engine's shapes and on ragged ones (every remainder of four
    /// columns, two blocks of `k`, a transposed left operand), and writes
    /// nothing beside its columns.
    #[test]
    fn an_affine_map_gives_the_bits_of_bias_rows_accumulated() {
        for &(m, k, n) in &[
            (1, 1, 1),
            (150, 4, 8),
            (32, 8, 3),
            (32, 2, 16),
            (22, 16, 3),
            (5, 7, 9),
            (7, 5, 10),
            (6, 3, 11),
            (13, 300, 6),
            (3, 600, 17),
            (128, 784, 256),
        ] {
            for transposed in [false, true] {
                let a_owned = if transposed {
                    matrix(k, m, 1)
                } else {
                    matrix(m, k, 1)
                };
                let a = if transposed {
                    a_owned.t()
                } else {
                    a_owned.view()
                };
                let b = matrix(k, n, 2);
                let bias: Vec<f64> = matrix(1, n, 3).iter().copied().collect();
                let mut expected = Array2::zeros((m, n));
                expected.rows_mut().into_iter().for_each(|mut row| {
                    row.assign(&ndarray::ArrayView1::from(&bias));
                });
                general_mat_mul(1.0, &a, &b, 1.0, &mut expected);
                let start = matrix(m, n, 4);
                let product: Product<f64> = |a, b, _, c| {
                    let bias: Vec<f64> = matrix(1, c.ncols(), 3).iter().copied().collect();
                    affine(a, b, &bias, c)
                };
                let ours = into_wider_c(product, a, b.view(), false, &start, 1);
                assert!(
                    same_bits(&ours, &expected),
                    "{m}x{k}x{n} transposed {transposed}"
                );
            }
        }
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
