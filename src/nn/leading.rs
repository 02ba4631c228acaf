//! The leading rows of the engine's row-major work buffers, as views.
//!
//! Each update takes a dozen such views (activations, deltas, the batch).
//! ndarray's general `slice(s![..n, ..])` costs tens of nanoseconds a call,
//! which in a 32-row update of an Iris-sized network was about a tenth of the
//! time (bench/README.md); a view built from the buffer's leading elements, or
//! the whole buffer when the batch fills it, costs next to nothing.

use ndarray::{Array2, ArrayView2, ArrayViewMut2, Axis, Slice};

/// Rows `..n` of `buffer`.
///
/// # Panics
/// If `n` exceeds the buffer's rows.
pub(crate) fn rows<F>(buffer: &Array2<F>, n: usize) -> ArrayView2<'_, F> {
    if n == buffer.nrows() {
        return buffer.view();
    }
    let width = buffer.ncols();
    match buffer.as_slice() {
        Some(values) => ArrayView2::from_shape((n, width), &values[..n * width])
            .expect("n rows of a row-major buffer"),
        None => buffer.slice_axis(Axis(0), Slice::from(..n)),
    }
}

/// Rows `..n` of `buffer`, writable.
///
/// # Panics
/// If `n` exceeds the buffer's rows.
pub(crate) fn rows_mut<F>(buffer: &mut Array2<F>, n: usize) -> ArrayViewMut2<'_, F> {
    if n == buffer.nrows() {
        return buffer.view_mut();
    }
    let width = buffer.ncols();
    if buffer.is_standard_layout() {
        let values = buffer
            .as_slice_mut()
            .expect("a standard-layout buffer is one slice");
        return ArrayViewMut2::from_shape((n, width), &mut values[..n * width])
            .expect("n rows of a row-major buffer");
    }
    buffer.slice_axis_mut(Axis(0), Slice::from(..n))
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::s;

    /// Every prefix, including the empty and the whole one, is the view
    /// general slicing gives, for a row-major and a column-major buffer.
    #[test]
    fn leading_rows_are_the_views_general_slicing_gives() {
        let row_major = Array2::from_shape_fn((5, 3), |(i, j)| (i * 3 + j) as f64);
        let column_major = row_major.t().to_owned().reversed_axes();
        for mut buffer in [row_major, column_major] {
            for n in 0..=5 {
                let expected = buffer.slice(s![..n, ..]).to_owned();
                assert_eq!(rows(&buffer, n), expected, "{n} rows");
                assert_eq!(rows_mut(&mut buffer, n), expected, "{n} rows, writable");
            }
        }
    }
}
