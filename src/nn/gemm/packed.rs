//! The packed product for large `f64` products on processors with AVX-512.
//!
//! `C` is computed in tiles of [`MR`] rows × [`NR`] columns (three vectors of
//! eight lanes), whose 24 accumulators stay in registers through the whole
//! chain over `k`. For each block of [`KC`] values of `k`, a block of `B` of
//! up to [`NC`] columns is copied into contiguous panels of `NR` columns
//! (sized to stay in the 1 MiB L2 cache), and each eight-row tile of `A` into
//! a contiguous strip (which stays in L1 while every panel of the block
//! passes it). Copies are zero-padded to whole tiles, so the kernel needs no
//! edge cases; only its stores are masked.
//!
//! Bits: each entry is formed exactly as `matrixmultiply` forms it (see the
//! parent module): one fused chain over a block of `k` from zero, then added
//! to `C`. One detail of its edges is copied too: it computes the last
//! `m mod 8` rows and `n mod 4` columns (its 8 × 4 tile's remainders) into a
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
    _mm512_add_pd, _mm512_fmadd_pd, _mm512_load_pd, _mm512_mask_blend_pd, _mm512_mask_storeu_pd,
    _mm512_maskz_loadu_pd, _mm512_set1_pd, _mm512_setzero_pd,
};
use std::cell::RefCell;

use ndarray::{ArrayView2, ArrayViewMut2, Axis, s};

use super::KC;

/// Values per vector register.
const LANES: usize = 8;
/// Rows of a tile of `C`.
const MR: usize = 8;
/// Columns of a tile of `C`: with `MR`, 24 of the 32 vector registers hold
/// accumulators, three hold a row of the `B` panel.
const NR: usize = 3 * LANES;
/// Columns of `B` packed per block: 264 × [`KC`] values take 528 KiB.
const NC: usize = 11 * NR;
/// `matrixmultiply`'s `f64` FMA tile, whose remainders it computes apart.
const THEIR_ROWS: usize = 8;
const THEIR_COLS: usize = 4;
/// Products with fewer multiply–adds stay on one thread: below this, the
/// cost of waking a second one is a noticeable share.
const PARALLEL_MIN_WORK: usize = 1 << 21;

/// Whether the processor runs this kernel.
pub(super) fn available() -> bool {
    std::arch::is_x86_feature_detected!("avx512f") && std::arch::is_x86_feature_detected!("fma")
}

/// `c ← a·b`, or `c ← a·b + c` with `accumulate`, for `k > 0` and `c` with
/// contiguous rows; `a` and `b` may have any strides.
///
/// # Panics
/// If the processor lacks AVX-512 or FMA, or `c`'s rows are not contiguous.
pub(super) fn gemm(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    accumulate: bool,
    c: ArrayViewMut2<f64>,
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
        col: n - n % THEIR_COLS,
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
fn split(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    accumulate: bool,
    c: ArrayViewMut2<f64>,
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
    rayon::join(
        || split(a_top, b, accumulate, c_top, edge, upper),
        || {
            split(
                a_bottom,
                b,
                accumulate,
                c_bottom,
                bottom_edge,
                pieces - upper,
            )
        },
    );
}

/// One cache line of packed values.
#[derive(Clone, Copy)]
#[repr(C, align(64))]
struct Line([f64; LANES]);

/// A growable buffer of cache-line-aligned values.
#[derive(Default)]
struct Aligned(Vec<Line>);

impl Aligned {
    /// The first `len` values (a multiple of [`LANES`]), grown as needed.
    fn take(&mut self, len: usize) -> &mut [f64] {
        debug_assert_eq!(len % LANES, 0);
        let lines = len / LANES;
        if self.0.len() < lines {
            self.0.resize(lines, Line([0.0; LANES]));
        }
        // SAFETY: `Line` is `repr(C)` around `[f64; LANES]`, so `lines`
        // lines are `len` initialised, contiguous `f64`s, borrowed mutably
        // through `self` for as long as the slice lives.
        unsafe { std::slice::from_raw_parts_mut(self.0.as_mut_ptr().cast::<f64>(), len) }
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
fn product(
    a: ArrayView2<f64>,
    b: ArrayView2<f64>,
    accumulate: bool,
    mut c: ArrayViewMut2<f64>,
    edge: Edge,
) {
    let ((m, k), n) = (a.dim(), b.ncols());
    let ldc = c.strides()[0];
    let corner = c.as_mut_ptr();
    // Nothing below calls back into rayon, so this borrow cannot be re-entered
    // by other work this thread picks up while waiting.
    BUFFERS.with_borrow_mut(|buffers| {
        for j0 in (0..n).step_by(NC) {
            let nc = NC.min(n - j0);
            for p0 in (0..k).step_by(KC) {
                let kc = KC.min(k - p0);
                let panels = buffers.b.take(kc * nc.div_ceil(NR) * NR);
                pack_b(b.slice(s![p0..p0 + kc, j0..j0 + nc]), panels);
                let strip = buffers.a.take(kc * MR);
                for i0 in (0..m).step_by(MR) {
                    let rows = MR.min(m - i0);
                    pack_a(a.slice(s![i0..i0 + rows, p0..p0 + kc]), strip);
                    for (q, panel) in panels.chunks_exact(kc * NR).enumerate() {
                        let j = j0 + q * NR;
                        let store = Store {
                            rows,
                            cols: NR.min(n - j),
                            add: accumulate || p0 > 0,
                            edge_row: edge.row.saturating_sub(i0),
                            edge_col: edge.col.saturating_sub(j),
                        };
                        // SAFETY: AVX-512F and FMA were checked in `gemm`;
                        // `i0 < m` and `j < n`, so the tile's corner lies in
                        // C, and `store` limits writes to its `rows × cols`
                        // entries, which lie in C too.
                        unsafe {
                            let out = corner.offset(i0 as isize * ldc + j as isize);
                            match store.cols.div_ceil(LANES) {
                                1 => tile::<1>(strip, panel, out, ldc, &store),
                                2 => tile::<2>(strip, panel, out, ldc, &store),
                                _ => tile::<3>(strip, panel, out, ldc, &store),
                            }
                        }
                    }
                }
            }
        }
    });
}

/// Copies a `kc × nc` block of `B` into panels of [`NR`] columns, each stored
/// row after row and zero-padded to full width.
fn pack_b(b: ArrayView2<f64>, out: &mut [f64]) {
    let kc = b.nrows();
    for (panel, out) in b
        .axis_chunks_iter(Axis(1), NR)
        .zip(out.chunks_exact_mut(kc * NR))
    {
        for (row, out) in panel.rows().into_iter().zip(out.chunks_exact_mut(NR)) {
            let (values, padding) = out.split_at_mut(row.len());
            match row.as_slice() {
                Some(row) => values.copy_from_slice(row),
                None => values.iter_mut().zip(&row).for_each(|(o, &v)| *o = v),
            }
            padding.fill(0.0);
        }
    }
}

/// Copies up to [`MR`] rows × `kc` columns of `A` into `out`, column after
/// column, each zero-padded to `MR` values.
fn pack_a(a: ArrayView2<f64>, out: &mut [f64]) {
    let rows = a.nrows();
    if rows < MR {
        out.fill(0.0);
    }
    if a.strides()[0] == 1 {
        // A transposed operand (`xᵀ`): its columns are contiguous.
        for (column, out) in a.columns().into_iter().zip(out.chunks_exact_mut(MR)) {
            out[..rows]
                .iter_mut()
                .zip(&column)
                .for_each(|(o, &v)| *o = v);
        }
    } else {
        for (r, row) in a.rows().into_iter().enumerate() {
            for (out, &v) in out.chunks_exact_mut(MR).zip(&row) {
                out[r] = v;
            }
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
fn lanes_below(v: usize, limit: usize) -> u8 {
    let count = limit.saturating_sub(v * LANES).min(LANES);
    ((1u16 << count) - 1) as u8
}

/// One tile of `C`, `MR` rows × `NV` vectors: the fused chain over the strip
/// of `A` and the panel of `B` (`kc` steps of `MR` and `NR` values), then the
/// store.
///
/// # Safety
/// AVX-512F and FMA must be available; `c` must be valid for reads and
/// writes of `store.rows` rows (stride `ldc`) of `store.cols ≤ NV·LANES`
/// values.
#[target_feature(enable = "avx512f,fma")]
unsafe fn tile<const NV: usize>(
    strip: &[f64],
    panel: &[f64],
    c: *mut f64,
    ldc: isize,
    store: &Store,
) {
    let mut acc = [[_mm512_setzero_pd(); NV]; MR];
    for (a, b) in strip.chunks_exact(MR).zip(panel.chunks_exact(NR)) {
        let mut row = [_mm512_setzero_pd(); NV];
        for (v, lane) in row.iter_mut().enumerate() {
            // SAFETY: `b` holds NR ≥ NV·LANES values and starts on a cache
            // line (panels are whole lines long, from an aligned buffer).
            *lane = unsafe { _mm512_load_pd(b.as_ptr().add(v * LANES)) };
        }
        for (acc, &x) in acc.iter_mut().zip(a) {
            let x = _mm512_set1_pd(x);
            for (acc, &y) in acc.iter_mut().zip(&row) {
                *acc = _mm512_fmadd_pd(x, y, *acc);
            }
        }
    }
    let zero = _mm512_setzero_pd();
    let negative_zero = _mm512_set1_pd(-0.0);
    for (r, acc) in acc.iter().enumerate().take(store.rows) {
        for (v, &ab) in acc.iter().enumerate() {
            let keep = lanes_below(v, store.cols);
            if keep == 0 {
                continue;
            }
            // SAFETY: row r < rows and the kept lanes' columns < cols.
            let out = unsafe { c.offset(r as isize * ldc).add(v * LANES) };
            let value = if store.add {
                // `+0` in matrixmultiply's remainder tiles, `−0` elsewhere.
                let offset = if r >= store.edge_row {
                    zero
                } else {
                    let remainder = !lanes_below(v, store.edge_col);
                    _mm512_mask_blend_pd(remainder, negative_zero, zero)
                };
                // SAFETY: as above, masked to the kept lanes.
                let old = unsafe { _mm512_maskz_loadu_pd(keep, out) };
                _mm512_add_pd(old, _mm512_add_pd(ab, offset))
            } else {
                _mm512_add_pd(ab, zero)
            };
            // SAFETY: as above.
            unsafe { _mm512_mask_storeu_pd(out, keep, value) };
        }
    }
}
