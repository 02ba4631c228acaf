//! The rows a network trains or is measured on, read straight from a shared
//! data matrix.
//!
//! A prepared data set holds one unscaled matrix for all its rows; each
//! partition is a list of row indices and a per-column scaling fitted on its
//! training rows. Copying a scaled matrix out for every run would hold the
//! data set twice or more in memory (five folds trained in parallel: six
//! times), so [`Rows`] describes a subset lazily and the engine gathers and
//! scales only the rows of one batch or chunk at a time. A gathered value is
//! `(x − offset) / divisor`, the same expression a scaler applies to a whole
//! matrix, so the results are the same bits either way.

use ndarray::{Array2, ArrayView2, ArrayViewMut2, Axis, Slice, s};

use super::float::Float;
use super::network::Network;

/// Rows predicted at a time by [`Rows::predict`]: enough to keep the matrix
/// products efficient, few enough that the hidden activations of a large
/// data set are never held all at once.
const PREDICT_CHUNK: usize = 1024;

/// Some rows of an input matrix `x` and target matrix `y`, optionally
/// scaled per input column.
#[derive(Clone, Copy, Debug)]
pub struct Rows<'a> {
    x: ArrayView2<'a, f64>,
    y: ArrayView2<'a, f64>,
    /// Indices into the rows of `x` and `y`; `None` for all rows in order.
    pick: Option<&'a [usize]>,
    /// Per-column `(offset, divisor)`; `None` leaves inputs as they are.
    scaling: Option<(&'a [f64], &'a [f64])>,
}

impl<'a> Rows<'a> {
    /// Every row of `x` and `y`, as they are.
    ///
    /// # Panics
    /// If `x` and `y` have different row counts.
    pub fn all(x: ArrayView2<'a, f64>, y: ArrayView2<'a, f64>) -> Rows<'a> {
        assert_eq!(x.nrows(), y.nrows(), "inputs and targets: row counts");
        Rows {
            x,
            y,
            pick: None,
            scaling: None,
        }
    }

    /// Only the rows at `indices`, in that order.
    ///
    /// # Panics
    /// If an index is out of range.
    pub(crate) fn pick(self, indices: &'a [usize]) -> Rows<'a> {
        let total = self.x.nrows();
        assert!(indices.iter().all(|&i| i < total), "row index out of range");
        // All rows in order read as plain views, without gathering.
        let identity = indices.len() == total && indices.iter().enumerate().all(|(i, &r)| i == r);
        Rows {
            pick: (!identity).then_some(indices),
            ..self
        }
    }

    /// Inputs mapped to `(x − offset[j]) / divisor[j]` in column `j`.
    ///
    /// # Panics
    /// If either slice does not have one entry per input column.
    pub(crate) fn scaled(self, offset: &'a [f64], divisor: &'a [f64]) -> Rows<'a> {
        let columns = self.x.ncols();
        assert!(
            offset.len() == columns && divisor.len() == columns,
            "scaling: one offset and divisor per input column"
        );
        // (v − 0) / 1 is v, so the identity map needs no gathering.
        let identity = offset.iter().all(|&o| o == 0.0) && divisor.iter().all(|&d| d == 1.0);
        Rows {
            scaling: (!identity).then_some((offset, divisor)),
            ..self
        }
    }

    /// Number of rows.
    pub(crate) fn len(&self) -> usize {
        self.pick.map_or(self.x.nrows(), <[usize]>::len)
    }

    /// Whether there are no rows.
    pub(crate) fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Input columns.
    pub(crate) fn inputs(&self) -> usize {
        self.x.ncols()
    }

    /// Target columns.
    pub(crate) fn targets(&self) -> usize {
        self.y.ncols()
    }

    /// The rows `start..end` as views of the matrices, when they can be read
    /// in place (all rows in order, unscaled).
    pub(crate) fn in_place(
        &self,
        start: usize,
        end: usize,
    ) -> Option<(ArrayView2<'a, f64>, ArrayView2<'a, f64>)> {
        (self.pick.is_none() && self.scaling.is_none()).then(|| {
            (
                // One axis only: cheaper per batch than general slicing.
                self.x.slice_axis_move(Axis(0), Slice::from(start..end)),
                self.y.slice_axis_move(Axis(0), Slice::from(start..end)),
            )
        })
    }

    /// Copies the rows at positions `order` (indices into these rows) into
    /// the leading rows of `x_out` and `y_out`, inputs scaled (in `f64`), then
    /// rounded to the float type of the buffers: a run in `f32` converts its
    /// data here, a batch at a time.
    pub(crate) fn gather<F: Float>(
        &self,
        order: impl Iterator<Item = usize>,
        mut x_out: ArrayViewMut2<F>,
        mut y_out: ArrayViewMut2<F>,
    ) {
        for (i, position) in order.enumerate() {
            let row = self.pick.map_or(position, |pick| pick[position]);
            let mut x_row = x_out.row_mut(i);
            match self.scaling {
                Some((offset, divisor)) => {
                    let from = self.x.row(row);
                    for (((v, &x), &o), &d) in x_row.iter_mut().zip(from).zip(offset).zip(divisor) {
                        *v = F::round_from((x - o) / d);
                    }
                }
                None => x_row.zip_mut_with(&self.x.row(row), |v, &x| *v = F::round_from(x)),
            }
            y_out
                .row_mut(i)
                .zip_mut_with(&self.y.row(row), |v, &y| *v = F::round_from(y));
        }
    }

    /// All rows gathered into new matrices `(inputs, targets)`: the scaled copy
    /// that training avoids; permutation importance reorders its columns.
    pub(crate) fn scaled_copy(&self) -> (Array2<f64>, Array2<f64>) {
        let mut x = Array2::zeros((self.len(), self.inputs()));
        let mut y = Array2::zeros((self.len(), self.targets()));
        self.gather(0..self.len(), x.view_mut(), y.view_mut());
        (x, y)
    }

    /// The targets of these rows.
    pub(crate) fn target_matrix(&self) -> Array2<f64> {
        match self.pick {
            None => self.y.to_owned(),
            Some(pick) => self.y.select(ndarray::Axis(0), pick),
        }
    }

    /// `network`'s outputs for each row, computed a chunk of rows at a time.
    /// Each row's outputs depend only on that row, so chunking changes no bit.
    ///
    /// # Panics
    /// If the rows do not have the network's input size.
    pub fn predict(&self, network: &Network) -> Array2<f64> {
        let mut outputs = Array2::zeros((self.len(), network.output_size()));
        let chunk = PREDICT_CHUNK.min(self.len());
        // Rows read in place are chunked too: the hidden layers' activations of every
        // row at once would be the largest thing a big build holds (60,000 rows × 256
        // units: 117 MiB).
        let mut buffers = None;
        for start in (0..self.len()).step_by(chunk.max(1)) {
            let end = (start + chunk).min(self.len());
            let predicted = match self.in_place(start, end) {
                Some((x, _)) => network.predict(x),
                None => {
                    let (x, y) = buffers.get_or_insert_with(|| {
                        (
                            Array2::zeros((chunk, self.inputs())),
                            Array2::zeros((chunk, self.targets())),
                        )
                    });
                    self.gather(start..end, x.view_mut(), y.view_mut());
                    network.predict(x.slice(s![..end - start, ..]))
                }
            };
            outputs.slice_mut(s![start..end, ..]).assign(&predicted);
        }
        outputs
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{Activation, Init};

    fn data() -> (Array2<f64>, Array2<f64>) {
        let x = Array2::from_shape_fn((5, 2), |(i, j)| (i * 2 + j) as f64 * 1.5 - 3.0);
        let y = Array2::from_shape_fn((5, 1), |(i, _)| i as f64);
        (x, y)
    }

    #[test]
    fn picked_and_scaled_rows_equal_a_scaled_copy_bit_for_bit() {
        let (x, y) = data();
        let (offset, divisor) = (vec![0.3, -1.1], vec![2.7, 0.9]);
        let pick = [4, 1, 3];
        let rows = Rows::all(x.view(), y.view())
            .pick(&pick)
            .scaled(&offset, &divisor);
        let (gx, gy) = rows.scaled_copy();
        for (i, &r) in pick.iter().enumerate() {
            for j in 0..2 {
                assert_eq!(gx[[i, j]], (x[[r, j]] - offset[j]) / divisor[j]);
            }
            assert_eq!(gy[[i, 0]], y[[r, 0]]);
        }
        assert_eq!(rows.target_matrix(), gy);
        assert_eq!(rows.len(), 3);
        assert!(rows.in_place(0, 3).is_none());
    }

    #[test]
    fn identity_pick_and_scaling_read_in_place() {
        let (x, y) = data();
        let all = [0, 1, 2, 3, 4];
        let rows = Rows::all(x.view(), y.view())
            .pick(&all)
            .scaled(&[0.0, 0.0], &[1.0, 1.0]);
        let (vx, vy) = rows.in_place(1, 3).expect("identity reads in place");
        assert_eq!(vx, x.slice(s![1..3, ..]));
        assert_eq!(vy, y.slice(s![1..3, ..]));
    }

    // Rows read in place are predicted a chunk at a time too (a big build's largest
    // allocation otherwise), with the bits of one pass over all of them.
    #[test]
    fn rows_read_in_place_are_predicted_in_chunks_with_the_same_bits() {
        let n = PREDICT_CHUNK + 37;
        let x = Array2::from_shape_fn((n, 3), |(i, j)| ((i * 5 + j * 7) % 13) as f64 - 6.0);
        let y = Array2::zeros((n, 2));
        let network = Network::initialise(
            &[3, 6, 2],
            Activation::Tanh,
            Activation::Softmax,
            Init::Xavier,
            4,
        );
        let rows = Rows::all(x.view(), y.view());
        assert!(rows.in_place(0, n).is_some());
        assert_eq!(rows.predict(&network), network.predict(x.view()));
    }

    #[test]
    fn chunked_prediction_equals_one_pass_over_a_copy() {
        // More rows than one chunk, so at least two chunks and a short last one.
        let n = PREDICT_CHUNK + 37;
        let x = Array2::from_shape_fn((n, 3), |(i, j)| ((i * 7 + j * 3) % 11) as f64 - 5.0);
        let y = Array2::zeros((n, 2));
        let pick: Vec<usize> = (0..n).rev().collect();
        let (offset, divisor) = ([1.0, 2.0, 3.0], [2.0, 3.0, 4.0]);
        let network = Network::initialise(
            &[3, 6, 2],
            Activation::Tanh,
            Activation::Softmax,
            Init::Xavier,
            4,
        );
        let rows = Rows::all(x.view(), y.view())
            .pick(&pick)
            .scaled(&offset, &divisor);
        let (copy, _) = rows.scaled_copy();
        assert_eq!(rows.predict(&network), network.predict(copy.view()));
    }

    #[test]
    fn empty_pick_has_no_rows() {
        let (x, y) = data();
        let rows = Rows::all(x.view(), y.view()).pick(&[]);
        assert!(rows.is_empty());
        let network = Network::initialise(
            &[2, 1],
            Activation::Linear,
            Activation::Linear,
            Init::Xavier,
            1,
        );
        assert_eq!(rows.predict(&network).dim(), (0, 1));
    }
}
