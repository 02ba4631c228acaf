//! Rescaling numeric features so that they are of similar size: common
//! practice before gradient descent, so that no feature dominates the weight
//! updates merely by its unit.
//!
//! A scaler is fitted on training rows only and then applied unchanged to test
//! rows and new rows: fitting it on test rows would leak information about
//! them into training.

use ndarray::{Array2, ArrayView1, ArrayView2, ArrayViewMut2, Axis};
use serde::{Deserialize, Serialize};

use super::settings::Scale;

/// A per-feature affine map `x' = (x − offset) / divisor`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Scaler {
    /// The kind of scaling that was fitted.
    pub kind: Scale,
    /// Subtracted from each feature.
    pub offset: Vec<f64>,
    /// Then each feature is divided by this; never 0.
    pub divisor: Vec<f64>,
}

impl Scaler {
    /// Fit on the rows `rows` of `x`, read in place. Only features marked true in
    /// `numeric` are scaled; the others (one-hot indicators) keep offset 0 and
    /// divisor 1, as does every feature when `rows` is empty.
    ///
    /// - `Standard`: offset = mean, divisor = population standard deviation
    ///   (dividing by n, not n − 1).
    /// - `Minmax`: offset = minimum, divisor = maximum − minimum, mapping the
    ///   training rows onto [0, 1].
    /// - `None`: offset 0, divisor 1.
    ///
    /// A feature with the same value on every row gets divisor 1, so it maps
    /// to 0 instead of dividing by zero.
    ///
    /// The sums are formed in the order in which ndarray summed the column of a
    /// copied matrix of these rows, which earlier versions fitted on, so the
    /// offsets and divisors (and the cache entries holding them) are unchanged
    /// to the last bit.
    ///
    /// # Panics
    /// If `numeric` does not have one entry per column of `x`, or a row is out of range.
    pub(crate) fn fit(kind: Scale, x: ArrayView2<f64>, rows: &[usize], numeric: &[bool]) -> Scaler {
        assert_eq!(
            numeric.len(),
            x.ncols(),
            "the numeric mask needs one entry per feature"
        );
        let width = x.ncols();
        let mut offset = vec![0.0; width];
        let mut divisor = vec![1.0; width];
        if kind != Scale::None && !rows.is_empty() {
            let scaled: Vec<usize> = (0..width).filter(|&j| numeric[j]).collect();
            // Row by row, each feature's statistics accumulate in row order: the same
            // order as a pass down the column, without reading across rows per value.
            let mut min = vec![f64::INFINITY; width];
            let mut max = vec![f64::NEG_INFINITY; width];
            let mut sum = vec![0.0; width];
            for &r in rows {
                let row = x.row(r);
                for &j in &scaled {
                    min[j] = f64::min(min[j], row[j]);
                    max[j] = f64::max(max[j], row[j]);
                    sum[j] += row[j];
                }
            }
            let n = rows.len() as f64;
            let mean: Vec<f64> = (0..width)
                .map(|j| column_sum(x, rows, j, sum[j]) / n)
                .collect();
            let mut squares = vec![-0.0; width];
            if kind == Scale::Standard {
                for &r in rows {
                    let row = x.row(r);
                    for &j in &scaled {
                        squares[j] += (row[j] - mean[j]).powi(2);
                    }
                }
            }
            for &j in &scaled {
                // Checked on the values themselves: a computed standard
                // deviation of a constant column can come out as a tiny
                // rounding error instead of 0.
                let constant = min[j] == max[j];
                let (o, d) = match kind {
                    Scale::Standard => (mean[j], (squares[j] / n).sqrt()),
                    Scale::Minmax => (min[j], max[j] - min[j]),
                    Scale::None => unreachable!("handled above"),
                };
                offset[j] = o;
                divisor[j] = if constant { 1.0 } else { d };
            }
        }
        Scaler {
            kind,
            offset,
            divisor,
        }
    }

    /// The first feature whose offset or divisor overflowed (values near 1e308 make
    /// the sum, the squares or the range infinite), which would scale it to NaN or 0.
    pub(crate) fn first_overflow(&self) -> Option<usize> {
        (0..self.offset.len())
            .find(|&j| !(self.offset[j].is_finite() && self.divisor[j].is_finite()))
    }

    /// Apply the fitted map to the rows of `x`.
    ///
    /// # Panics
    /// If `x` does not have as many columns as the scaler was fitted on.
    pub fn apply(&self, x: ArrayView2<f64>) -> Array2<f64> {
        let mut out = x.to_owned();
        self.apply_in_place(out.view_mut());
        out
    }

    /// Apply the fitted map to the rows of `x`, overwriting them.
    ///
    /// # Panics
    /// If `x` does not have as many columns as the scaler was fitted on.
    pub(crate) fn apply_in_place(&self, mut x: ArrayViewMut2<f64>) {
        assert_eq!(
            x.ncols(),
            self.offset.len(),
            "the scaler was fitted on a different number of features"
        );
        for (j, mut column) in x.axis_iter_mut(Axis(1)).enumerate() {
            let (o, d) = (self.offset[j], self.divisor[j]);
            column.mapv_inplace(|v| (v - o) / d);
        }
    }
}

impl Scaler {
    /// Whether the map leaves every value as it is (offset 0, divisor 1).
    pub(crate) fn is_identity(&self) -> bool {
        self.offset.iter().all(|&o| o == 0.0) && self.divisor.iter().all(|&d| d == 1.0)
    }

    /// Map scaled values back to their own units, `x = x' · divisor + offset`,
    /// overwriting them: how a network trained on scaled targets reports in the
    /// targets' units.
    ///
    /// # Panics
    /// If `x` does not have as many columns as the scaler was fitted on.
    pub(crate) fn unapply_in_place(&self, mut x: ArrayViewMut2<f64>) {
        assert_eq!(
            x.ncols(),
            self.offset.len(),
            "the scaler was fitted on a different number of features"
        );
        for (j, mut column) in x.axis_iter_mut(Axis(1)).enumerate() {
            let (o, d) = (self.offset[j], self.divisor[j]);
            column.mapv_inplace(|v| v * d + o);
        }
    }
}

/// The sum of feature `j` over `rows`, as ndarray's `sum` gave it on that column of
/// a copy of the rows (`sequential` is the sum in row order, starting from 0).
///
/// ndarray adds a column in order, one value at a time, when its values are apart
/// in memory; when they are adjacent (a single feature, or a single row) it adds
/// them in eight interleaved partial sums instead, so that case is summed by
/// ndarray itself.
fn column_sum(x: ArrayView2<f64>, rows: &[usize], j: usize, sequential: f64) -> f64 {
    if x.ncols() == 1 || rows.len() == 1 {
        let column: Vec<f64> = rows.iter().map(|&r| x[[r, j]]).collect();
        ArrayView1::from(&column).sum()
    } else {
        sequential
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    fn all(rows: usize) -> Vec<usize> {
        (0..rows).collect()
    }

    fn close(a: f64, b: f64) -> bool {
        (a - b).abs() < 1e-12
    }

    // Feature 0: 2, 4, 4, 4, 5, 5, 7, 9. Computed by hand:
    //   mean = 40 / 8 = 5
    //   squared deviations 9, 1, 1, 1, 0, 0, 4, 16 sum to 32
    //   population variance = 32 / 8 = 4, standard deviation = 2
    //   min = 2, max = 9, range = 7
    // Feature 1 is a one-hot indicator and must stay as it is.
    fn data() -> Array2<f64> {
        array![
            [2.0, 1.0],
            [4.0, 0.0],
            [4.0, 0.0],
            [4.0, 1.0],
            [5.0, 0.0],
            [5.0, 0.0],
            [7.0, 1.0],
            [9.0, 0.0]
        ]
    }

    #[test]
    fn standard_uses_mean_and_population_sd() {
        let s = Scaler::fit(Scale::Standard, data().view(), &all(8), &[true, false]);
        assert_eq!(s.offset, vec![5.0, 0.0]);
        assert_eq!(s.divisor, vec![2.0, 1.0]);
        let scaled = s.apply(data().view());
        // (2 − 5) / 2 = −1.5, (9 − 5) / 2 = 2, (4 − 5) / 2 = −0.5
        assert!(close(scaled[[0, 0]], -1.5));
        assert!(close(scaled[[7, 0]], 2.0));
        assert!(close(scaled[[1, 0]], -0.5));
        assert_eq!(scaled.column(1), data().column(1));
    }

    #[test]
    fn minmax_maps_training_range_to_unit_interval() {
        let s = Scaler::fit(Scale::Minmax, data().view(), &all(8), &[true, false]);
        assert_eq!(s.offset, vec![2.0, 0.0]);
        assert_eq!(s.divisor, vec![7.0, 1.0]);
        let scaled = s.apply(data().view());
        assert!(close(scaled[[0, 0]], 0.0));
        assert!(close(scaled[[7, 0]], 1.0));
        // (4 − 2) / 7
        assert!(close(scaled[[1, 0]], 2.0 / 7.0));
        // Values outside the training range land outside [0, 1].
        let new = s.apply(array![[16.0, 1.0]].view());
        assert!(close(new[[0, 0]], 2.0));
    }

    #[test]
    fn none_is_the_identity() {
        let s = Scaler::fit(Scale::None, data().view(), &all(8), &[true, false]);
        assert_eq!(s.offset, vec![0.0, 0.0]);
        assert_eq!(s.divisor, vec![1.0, 1.0]);
        assert_eq!(s.apply(data().view()), data());
    }

    #[test]
    fn constant_column_gets_divisor_one() {
        // 0.1 is not exact in binary, so the mean of three 0.1s differs from
        // 0.1 by a rounding error; the divisor must still be 1.
        let x = array![[0.1, 3.0], [0.1, 3.0], [0.1, 3.0]];
        for kind in [Scale::Standard, Scale::Minmax] {
            let s = Scaler::fit(kind, x.view(), &all(3), &[true, true]);
            assert_eq!(s.divisor, vec![1.0, 1.0], "{kind:?}");
            let scaled = s.apply(x.view());
            assert!(scaled.iter().all(|v| v.abs() < 1e-15), "{kind:?}: {scaled}");
        }
    }

    #[test]
    fn unapplying_a_standard_scaling_gives_back_the_values() {
        let s = Scaler::fit(Scale::Standard, data().view(), &all(8), &[true, false]);
        let mut back = s.apply(data().view());
        s.unapply_in_place(back.view_mut());
        assert!(back.iter().zip(data().iter()).all(|(a, b)| close(*a, *b)));
        assert!(!s.is_identity());
        assert!(Scaler::fit(Scale::None, data().view(), &all(8), &[true, true]).is_identity());
    }

    #[test]
    fn no_rows_gives_the_identity() {
        let x = Array2::<f64>::zeros((0, 2));
        let s = Scaler::fit(Scale::Standard, x.view(), &[], &[true, true]);
        assert_eq!(s.offset, vec![0.0, 0.0]);
        assert_eq!(s.divisor, vec![1.0, 1.0]);
    }

    #[test]
    fn only_the_given_rows_are_used() {
        // Rows 1, 3 and 7 of feature 0: 4, 4, 9.
        let s = Scaler::fit(Scale::Minmax, data().view(), &[1, 3, 7], &[true, false]);
        assert_eq!(s.offset, vec![4.0, 0.0]);
        assert_eq!(s.divisor, vec![5.0, 1.0]);
    }

    /// How scalers were fitted before they read rows in place: on a copy of the rows,
    /// column by column with ndarray's reductions.
    fn fit_on_copy(kind: Scale, x: ArrayView2<f64>, rows: &[usize], numeric: &[bool]) -> Scaler {
        let x = x.select(Axis(0), rows);
        let mut offset = vec![0.0; x.ncols()];
        let mut divisor = vec![1.0; x.ncols()];
        if kind != Scale::None && x.nrows() > 0 {
            for (j, column) in x.axis_iter(Axis(1)).enumerate() {
                if !numeric[j] {
                    continue;
                }
                let min = column.iter().copied().fold(f64::INFINITY, f64::min);
                let max = column.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                let (o, d) = match kind {
                    Scale::Standard => {
                        let n = column.len() as f64;
                        let mean = column.sum() / n;
                        let variance = column.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
                        (mean, variance.sqrt())
                    }
                    Scale::Minmax => (min, max - min),
                    Scale::None => unreachable!(),
                };
                offset[j] = o;
                divisor[j] = if min == max { 1.0 } else { d };
            }
        }
        Scaler {
            kind,
            offset,
            divisor,
        }
    }

    fn bits(values: &[f64]) -> Vec<u64> {
        values.iter().map(|v| v.to_bits()).collect()
    }

    #[test]
    fn fitting_in_place_matches_fitting_a_copy_bit_for_bit() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(7);
        // Shapes include one feature and one row, where ndarray sums a column
        // differently, and rows of very different sizes, where order shows.
        for (n, width) in [
            (1, 4),
            (2, 1),
            (9, 1),
            (37, 1),
            (5, 3),
            (200, 6),
            (1000, 17),
        ] {
            let x = Array2::from_shape_fn((n, width), |_| {
                let magnitude = 10f64.powi((rng.next_u32() % 16) as i32 - 8);
                (rng.next_u64() >> 11) as f64 / (1u64 << 53) as f64 * magnitude - magnitude / 3.0
            });
            let numeric: Vec<bool> = (0..width).map(|j| j % 4 != 1).collect();
            // A sorted subset of rows, as partitions have.
            let rows: Vec<usize> = (0..n)
                .filter(|_| n == 1 || rng.next_u32() % 3 != 0)
                .collect();
            for kind in [Scale::Standard, Scale::Minmax, Scale::None] {
                let old = fit_on_copy(kind, x.view(), &rows, &numeric);
                let new = Scaler::fit(kind, x.view(), &rows, &numeric);
                assert_eq!(bits(&new.offset), bits(&old.offset), "{kind:?} {n}x{width}");
                assert_eq!(
                    bits(&new.divisor),
                    bits(&old.divisor),
                    "{kind:?} {n}x{width}"
                );
            }
        }
    }
}
