//! The packed kernel for large products on processors with AVX-512, in `f64`
//! and `f32` ([`Element`]).
//!
//! `C` is computed in tiles of [`MR`] rows × three vectors of columns (24
//! `f64` or 48 `f32`), whose 24 accumulators stay in registers through the
//! whole chain over `k`. For each block of [`KC`] values of `k`, a block of
//! `B` of up to [`PANELS`] panels is copied into contiguous panels of one
//! tile's width (528 KiB, sized to stay in the 1 MiB L2 cache), zero-padded
//! to whole tiles. `A` is read in place, an eight-row strip at a time (which
//! stays in L1 while every panel of the block passes it): the kernel reads
//! one value per row and step of `k`, which is as cheap from a strided strip
//! as from a copy, and copying it cost more than a quarter of the kernel's
//! time. Only a last strip of fewer than eight rows is copied, zero-padded,
//! so the kernel needs no edge cases; only its stores are masked.
//!
//! Bits: each entry is formed exactly as `matrixmultiply` forms it (see the
//! parent module; its `f32` kernel works alike, also with blocks of 256): one
//! fused chain over a block of `k` from zero, then added to `C`. One detail
//! of its edges is copied too: it computes the last `m mod 8` rows and
//! `n mod 4` (`f32`: `n mod 8`) columns, its tile's remainders, into a
//! scratch tile as `ab + 0` and adds that to `C`, where its full tiles add
//! `ab` itself. The two differ only when `ab` underflowed to −0 and `C` is −0,
//! but they do differ, so the store adds `+0` there and `−0` (which changes
//! nothing) elsewhere.
//!
//! Threads: the rows of `C` are split between the threads of the rayon pool
//! the caller runs in (a training run alone uses both cores; runs in parallel
//! do not oversubscribe), never `k`, so the result is the same for any
//! number of threads. Each thread packs in its own buffers, reused between
//! products.

use std::arch::x86_64::{
    __m512, __m512d, _mm512_add_pd, _mm512_add_ps, _mm512_fmadd_pd, _mm512_fmadd_ps,
    _mm512_load_pd, _mm512_load_ps, _mm512_mask_blend_pd, _mm512_mask_blend_ps,
    _mm512_mask_storeu_pd, _mm512_mask_storeu_ps, _mm512_maskz_loadu_pd, _mm512_maskz_loadu_ps,
    _mm512_set1_pd, _mm512_set1_ps, _mm512_setzero_pd, _mm512_setzero_ps,
};
use std::cell::RefCell;

use ndarray::{ArrayView2, ArrayViewMut2, Axis, s};

use super::KC;

/// Rows of a tile of `C`.
const MR: usize = 8;
/// Vectors per row of a tile: with `MR`, 24 of the 32 vector registers hold
/// accumulators, three hold a row of the `B` panel.
const VECTORS: usize = 3;
/// Panels of `B` packed per block: 11 × 3 vectors × [`KC`] take 528 KiB.
const PANELS: usize = 11;
/// `matrixmultiply`'s FMA tile has 8 rows (and [`Element::THEIR_COLS`]
/// columns); it computes its remainders apart.
const THEIR_ROWS: usize = 8;
/// Products with fewer multiply–adds stay on one thread: below this, the
/// cost of waking a second one is a noticeable share (case B's loss over
/// 1024-row chunks, 2²¹ multiply–adds, trained slower split in two).
const PARALLEL_MIN_WORK: usize = 1 << 22;

/// The vector operations the kernel needs of its element type, and
/// `matrixmultiply`'s tile width for it. Implemented for `f64` and `f32`
/// only: the packing buffers hand out their bytes as either.
pub(super) trait Element: Copy + Send + Sync + 'static {
    type Vector: Copy;
    /// Values per vector.
    const LANES: usize;
    /// Columns of `matrixmultiply`'s FMA tile.
    const THEIR_COLS: usize;
    const ZERO: Self;

    // SAFETY (all below): AVX-512F and FMA must be available.
    unsafe fn zero() -> Self::Vector;
    unsafe fn negative_zero() -> Self::Vector;
    unsafe fn splat(x: Self) -> Self::Vector;
    /// `LANES` values at `p`, which is aligned to 64 bytes.
    unsafe fn load(p: *const Self) -> Self::Vector;
    /// `x·y + acc`, rounded once.
    unsafe fn fma(x: Self::Vector, y: Self::Vector, acc: Self::Vector) -> Self::Vector;
    unsafe fn add(x: Self::Vector, y: Self::Vector) -> Self::Vector;
    /// `y` in the lanes set in `mask`, `x` elsewhere.
    unsafe fn blend(mask: u16, x: Self::Vector, y: Self::Vector) -> Self::Vector;
    /// The lanes set in `mask` read from `p`, zero elsewhere.
    unsafe fn load_masked(mask: u16, p: *const Self) -> Self::Vector;
    /// The lanes set in `mask` written to `p`.
    unsafe fn store_masked(p: *mut Self, mask: u16, v: Self::Vector);
}

/// Implements [`Element`] with one type's intrinsics.
macro_rules! element {
    ($t:ty, $v:ty, $lanes:expr, $their_cols:expr, $mask:ty, $zero:ident, $set1:ident,
     $load:ident, $fma:ident, $add:ident, $blend:ident, $load_masked:ident, $store_masked:ident) => {
        impl Element for $t {
            type Vector = $v;
            const LANES: usize = $lanes;
            const THEIR_COLS: usize = $their_cols;
            const ZERO: $t = 0.0;

            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn zero() -> $v {
                $zero()
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn negative_zero() -> $v {
                $set1(-0.0)
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn splat(x: $t) -> $v {
                $set1(x)
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn load(p: *const $t) -> $v {
                // SAFETY: as the caller guarantees.
                unsafe { $load(p) }
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn fma(x: $v, y: $v, acc: $v) -> $v {
                $fma(x, y, acc)
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn add(x: $v, y: $v) -> $v {
                $add(x, y)
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn blend(mask: u16, x: $v, y: $v) -> $v {
                $blend(mask as $mask, x, y)
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn load_masked(mask: u16, p: *const $t) -> $v {
                // SAFETY: as the caller guarantees.
                unsafe { $load_masked(mask as $mask, p) }
            }
            #[inline]
            #[target_feature(enable = "avx512f,fma")]
            unsafe fn store_masked(p: *mut $t, mask: u16, v: $v) {
                // SAFETY: as the caller guarantees.
                unsafe { $store_masked(p, mask as $mask, v) }
            }
        }
    };
}

element!(
    f64,
    __m512d,
    8,
    4,
    u8,
    _mm512_setzero_pd,
    _mm512_set1_pd,
    _mm512_load_pd,
    _mm512_fmadd_pd,
    _mm512_add_pd,
    _mm512_mask_blend_pd,
    _mm512_maskz_loadu_pd,
    _mm512_mask_storeu_pd
);
element!(
    f32,
    __m512,
    16,
    8,
    u16,
    _mm512_setzero_ps,
    _mm512_set1_ps,
    _mm512_load_ps,
    _mm512_fmadd_ps,
    _mm512_add_ps,
    _mm512_mask_blend_ps,
    _mm512_maskz_loadu_ps,
    _mm512_mask_storeu_ps
);

/// Columns of a tile of `C`.
const fn tile_cols<T: Element>() -> usize {
    VECTORS * T::LANES
}

/// Whether the processor runs this kernel, and the test switch `STET_GEMM_PORTABLE`
/// does not send every product to the path for processors without AVX-512.
pub(super) fn available() -> bool {
    static AVAILABLE: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    *AVAILABLE.get_or_init(|| {
        std::env::var_os("STET_GEMM_PORTABLE").is_none()
            && std::arch::is_x86_feature_detected!("avx512f")
            && std::arch::is_x86_feature_detected!("fma")
    })
}

/// `c ← a·b`, or `c ← a·b + c` with `accumulate`, for `k > 0` and `c` with
/// contiguous rows; `a` and `b` may have any strides.
///
/// # Panics
/// If the processor lacks AVX-512 or FMA, or `c`'s rows are not contiguous.
pub(super) fn gemm<T: Element>(
    a: ArrayView2<T>,
    b: ArrayView2<T>,
    accumulate: bool,
    c: ArrayViewMut2<T>,
) {
    assert!(available(), "the packed product needs AVX-512 and FMA");
    assert!(
        c.ncols() <= 1 || c.strides()[1] == 1,
        "C needs contiguous rows"
    );
    let ((m, k), n) = (a.dim(), b.ncols());
    let pieces = if m * n * k >= PARALLEL_MIN_WORK {
        rayon::current_num_threads().min(m.div_ceil(MR))
    } else {
        1
    };
    let edge = Edge {
        row: m - m % THEIR_ROWS,
        col: n - n % T::THEIR_COLS,
    };
    split(a, b, accumulate, c, edge, pieces);
}

/// Where `matrixmultiply`'s remainder tiles start, in the coordinates of the
/// rows at hand.
#[derive(Clone, Copy)]
struct Edge {
    row: usize,
    col: usize,
}

/// Splits the rows of `C` (at tile boundaries) into `pieces` parts computed
/// in parallel.
fn split<T: Element>(
    a: ArrayView2<T>,
    b: ArrayView2<T>,
    accumulate: bool,
    c: ArrayViewMut2<T>,
    edge: Edge,
    pieces: usize,
) {
    let tiles = a.nrows().div_ceil(MR);
    if pieces <= 1 || tiles < 2 {
        return product(a, b, accumulate, c, edge);
    }
    let upper = pieces / 2;
    let mid = (tiles * upper / pieces).max(1) * MR;
    let (a_top, a_bottom) = a.split_at(Axis(0), mid);
    let (c_top, c_bottom) = c.split_at(Axis(0), mid);
    let bottom_edge = Edge {
        row: edge.row.saturating_sub(mid),
        ..edge
    };
    let lower = pieces - upper;
    rayon::join(
        || split(a_top, b, accumulate, c_top, edge, upper),
        || split(a_bottom, b, accumulate, c_bottom, bottom_edge, lower),
    );
}

/// One cache line.
#[derive(Clone, Copy)]
#[repr(C, align(64))]
struct Line([u64; 8]);

/// A growable buffer of cache-line-aligned values of either element type.
#[derive(Default)]
struct Aligned(Vec<Line>);

impl Aligned {
    /// The first `len` values, grown as needed.
    fn take<T: Element>(&mut self, len: usize) -> &mut [T] {
        let lines = (len * size_of::<T>()).div_ceil(size_of::<Line>());
        if self.0.len() < lines {
            self.0.resize(lines, Line([0; 8]));
        }
        // SAFETY: `T` is `f64` or `f32` (see `Element`): any bits are a
        // value, and 64-byte lines are aligned for it; the `lines` lines
        // hold at least `len` of them, borrowed mutably through `self` for as long as
        // the slice lives.
        unsafe { std::slice::from_raw_parts_mut(self.0.as_mut_ptr().cast::<T>(), len) }
    }
}

/// One thread's packing buffers.
#[derive(Default)]
struct Buffers {
    a: Aligned,
    b: Aligned,
}

thread_local! {
    static BUFFERS: RefCell<Buffers> = RefCell::new(Buffers::default());
}

/// The whole product on the calling thread.
fn product<T: Element>(
    a: ArrayView2<T>,
    b: ArrayView2<T>,
    accumulate: bool,
    mut c: ArrayViewMut2<T>,
    edge: Edge,
) {
    let ((m, k), n) = (a.dim(), b.ncols());
    let nr = tile_cols::<T>();
    let ldc = c.strides()[0];
    let corner = c.as_mut_ptr();
    // Nothing below calls back into rayon, so this borrow cannot be re-entered
    // by other work this thread picks up while waiting.
    BUFFERS.with_borrow_mut(|buffers| {
        for j0 in (0..n).step_by(PANELS * nr) {
            let nc = (PANELS * nr).min(n - j0);
            for p0 in (0..k).step_by(KC) {
                let kc = KC.min(k - p0);
                let panels = buffers.b.take(kc * nc.div_ceil(nr) * nr);
                pack_b(b.slice(s![p0..p0 + kc, j0..j0 + nc]), panels);
                let padded = buffers.a.take(kc * MR);
                for i0 in (0..m).step_by(MR) {
                    let rows = MR.min(m - i0);
                    let block = a.slice(s![i0..i0 + rows, p0..p0 + kc]);
                    let strip = if rows == MR {
                        Strip::of(block)
                    } else {
                        pad_a(block, padded);
                        Strip::of(
                            ArrayView2::from_shape((kc, MR), &*padded)
                                .expect("kc × MR values")
                                .t(),
                        )
                    };
                    for (q, panel) in panels.chunks_exact(kc * nr).enumerate() {
                        let j = j0 + q * nr;
                        let store = Store {
                            rows,
                            cols: nr.min(n - j),
                            add: accumulate || p0 > 0,
                            edge_row: edge.row.saturating_sub(i0),
                            edge_col: edge.col.saturating_sub(j),
                        };
                        // SAFETY: AVX-512F and FMA were checked in `gemm`;
                        // the strip is `MR × kc` values of A or of the padded
                        // copy; `i0 < m` and `j < n`, so the tile's corner
                        // lies in C, and `store` limits writes to its
                        // `rows × cols` entries, which lie in C too.
                        unsafe {
                            let out = corner.offset(i0 as isize * ldc + j as isize);
                            match store.cols.div_ceil(T::LANES) {
                                1 => tile::<T, 1>(&strip, panel, out, ldc, &store),
                                2 => tile::<T, 2>(&strip, panel, out, ldc, &store),
                                _ => tile::<T, VECTORS>(&strip, panel, out, ldc, &store),
                            }
                        }
                    }
                }
            }
        }
    });
}

/// Copies a `kc × nc` block of `B` into panels of one tile's width, each
/// stored row after row and zero-padded to full width.
fn pack_b<T: Element>(b: ArrayView2<T>, out: &mut [T]) {
    let (kc, nr) = (b.nrows(), tile_cols::<T>());
    for (panel, out) in b
        .axis_chunks_iter(Axis(1), nr)
        .zip(out.chunks_exact_mut(kc * nr))
    {
        for (row, out) in panel.rows().into_iter().zip(out.chunks_exact_mut(nr)) {
            let (values, padding) = out.split_at_mut(row.len());
            match row.as_slice() {
                Some(row) => values.copy_from_slice(row),
                None => values.iter_mut().zip(&row).for_each(|(o, &v)| *o = v),
            }
            padding.iter_mut().for_each(|o| *o = T::ZERO);
        }
    }
}

/// Copies fewer than [`MR`] rows × `kc` columns of `A` into `out`, column
/// after column, each zero-padded to `MR` values.
fn pad_a<T: Element>(a: ArrayView2<T>, out: &mut [T]) {
    out.iter_mut().for_each(|o| *o = T::ZERO);
    for (r, row) in a.rows().into_iter().enumerate() {
        for (out, &v) in out.chunks_exact_mut(MR).zip(&row) {
            out[r] = v;
        }
    }
}

/// [`MR`] rows × `kc` columns of `A` where the kernel reads them: the first
/// value and the strides between rows and between columns.
struct Strip<T> {
    first: *const T,
    row_stride: isize,
    column_stride: isize,
}

impl<T: Element> Strip<T> {
    /// The strip of `MR` rows `a`.
    fn of(a: ArrayView2<T>) -> Strip<T> {
        debug_assert_eq!(a.nrows(), MR);
        Strip {
            first: a.as_ptr(),
            row_stride: a.strides()[0],
            column_stride: a.strides()[1],
        }
    }
}

/// What a tile writes: its first `rows × cols` entries, added to `C` or not,
/// and where `matrixmultiply`'s remainders start within it.
struct Store {
    rows: usize,
    cols: usize,
    add: bool,
    edge_row: usize,
    edge_col: usize,
}

/// The lanes of vector `v` of a tile row whose column is below `limit`.
fn lanes_below<T: Element>(v: usize, limit: usize) -> u16 {
    let count = limit.saturating_sub(v * T::LANES).min(T::LANES);
    ((1u32 << count) - 1) as u16
}

/// One tile of `C`, `MR` rows × `NV` vectors: the fused chain over the strip
/// of `A` and the panel of `B` (`kc` steps of one tile's width), then the
/// store.
///
/// # Safety
/// AVX-512F and FMA must be available; `strip` must describe `MR` rows ×
/// `kc` readable values, where `kc` is the panel's rows; `c` must be valid
/// for reads and writes of `store.rows` rows (stride `ldc`) of
/// `store.cols ≤ NV·LANES` values.
#[target_feature(enable = "avx512f,fma")]
unsafe fn tile<T: Element, const NV: usize>(
    strip: &Strip<T>,
    panel: &[T],
    c: *mut T,
    ldc: isize,
    store: &Store,
) {
    // SAFETY (vector operations): the caller guarantees AVX-512F and FMA.
    let mut acc = [[unsafe { T::zero() }; NV]; MR];
    for (p, b) in panel.chunks_exact(tile_cols::<T>()).enumerate() {
        // SAFETY: p < kc, so this column of the strip is readable.
        let a = unsafe { strip.first.offset(p as isize * strip.column_stride) };
        let mut row = [unsafe { T::zero() }; NV];
        for (v, lane) in row.iter_mut().enumerate() {
            // SAFETY: `b` holds a tile's width ≥ NV·LANES values and starts
            // on a cache line (panel rows are whole lines long, in an
            // aligned buffer).
            *lane = unsafe { T::load(b.as_ptr().add(v * T::LANES)) };
        }
        for (r, acc) in acc.iter_mut().enumerate() {
            // SAFETY: r < MR, so this value of the strip is readable.
            let x = unsafe { T::splat(*a.offset(r as isize * strip.row_stride)) };
            for (acc, &y) in acc.iter_mut().zip(&row) {
                *acc = unsafe { T::fma(x, y, *acc) };
            }
        }
    }
    let (zero, negative_zero) = unsafe { (T::zero(), T::negative_zero()) };
    for (r, acc) in acc.iter().enumerate().take(store.rows) {
        for (v, &ab) in acc.iter().enumerate() {
            let keep = lanes_below::<T>(v, store.cols);
            if keep == 0 {
                continue;
            }
            // SAFETY: row r < rows and the kept lanes' columns < cols, so
            // the masked loads and stores below stay inside C.
            unsafe {
                let out = c.offset(r as isize * ldc).add(v * T::LANES);
                let value = if store.add {
                    // `+0` in matrixmultiply's remainder tiles, `−0` elsewhere.
                    let offset = if r >= store.edge_row {
                        zero
                    } else {
                        let remainder = !lanes_below::<T>(v, store.edge_col);
                        T::blend(remainder, negative_zero, zero)
                    };
                    T::add(T::load_masked(keep, out), T::add(ab, offset))
                } else {
                    T::add(ab, zero)
                };
                T::store_masked(out, keep, value);
            }
        }
    }
}
