//! The statistics a verdict rests on: the Wilson score interval for a proportion,
//! McNemar's exact test for two classifiers on the same rows, and percentile bootstrap
//! intervals over rows (one sample, and paired differences). Every resample is drawn
//! from a ChaCha8 stream seeded by the caller, so an interval has the same bits on every
//! build and machine.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// The confidence level of every interval stet prints.
pub const LEVEL: f64 = 0.95;

/// Resamples in every bootstrap: the count Efron & Tibshirani (1993, §19.3) suggest for
/// percentile intervals, and cheap enough to add little to a build.
pub const RESAMPLES: usize = 1000;

/// The upper 2.5 % point of the standard normal distribution, Φ⁻¹(0.975)
/// (scipy.stats.norm.isf(0.025) = 1.959963984540054).
const Z_975: f64 = 1.959963984540054;

/// A two-sided interval `[low, high]`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Interval {
    pub low: f64,
    pub high: f64,
}

impl Interval {
    /// Whether the interval holds `value` (both ends included).
    pub fn contains(&self, value: f64) -> bool {
        self.low <= value && value <= self.high
    }
}

/// The 95 % Wilson score interval for `successes` out of `trials` (Wilson, 1927), in
/// the form statsmodels' `proportion_confint(method="wilson")` computes it.
///
/// # Panics
/// If `trials` is zero or `successes` exceeds it.
pub fn wilson(successes: usize, trials: usize) -> Interval {
    assert!(trials > 0 && successes <= trials, "{successes} of {trials}");
    let n = trials as f64;
    let p = successes as f64 / n;
    let z2 = Z_975 * Z_975;
    let denominator = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / denominator;
    let half = Z_975 * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt() / denominator;
    Interval {
        low: centre - half,
        high: centre + half,
    }
}

/// McNemar's exact two-sided p-value for two classifiers on the same rows, from the
/// discordant counts: rows only the first got right, rows only the second got right.
/// Twice the binomial(n, ½) probability of the smaller count or fewer, capped at 1 (as
/// statsmodels' `mcnemar(table, exact=True)`); no discordant rows give 1.
pub fn mcnemar_exact(only_first: usize, only_second: usize) -> f64 {
    let n = only_first + only_second;
    let k = only_first.min(only_second);
    (2.0 * binomial_half_cdf(k, n)).min(1.0)
}

/// P(X ≤ k) for X ~ binomial(n, ½), summed in log space so large n neither overflows
/// the binomial coefficients nor underflows ½ⁿ.
fn binomial_half_cdf(k: usize, n: usize) -> f64 {
    let log_half_n = n as f64 * 0.5f64.ln();
    let mut log_choose = 0.0; // ln C(n, 0)
    let mut log_terms = Vec::with_capacity(k + 1);
    for i in 0..=k {
        log_terms.push(log_choose + log_half_n);
        log_choose += ((n - i) as f64).ln() - ((i + 1) as f64).ln();
    }
    let largest = log_terms.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let sum: f64 = log_terms.iter().map(|t| (t - largest).exp()).sum();
    (largest + sum.ln()).exp()
}

/// The 95 % percentile bootstrap interval of `statistic` over `rows` rows (Efron &
/// Tibshirani, 1993, ch. 13): `RESAMPLES` samples of `rows` indices drawn with
/// replacement from a stream seeded by `seed`; the interval is their 2.5 % and 97.5 %
/// percentiles (linear interpolation, as numpy's default `percentile`). Resamples whose
/// statistic is not finite are left out.
///
/// # Panics
/// If `rows` is zero.
pub fn bootstrap(rows: usize, seed: u64, statistic: impl Fn(&[usize]) -> f64) -> Interval {
    assert!(rows > 0, "a bootstrap needs rows");
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut sample = vec![0; rows];
    let mut values: Vec<f64> = (0..RESAMPLES)
        .filter_map(|_| {
            for slot in sample.iter_mut() {
                *slot = index_below(&mut rng, rows);
            }
            Some(statistic(&sample)).filter(|value| value.is_finite())
        })
        .collect();
    values.sort_by(f64::total_cmp);
    let tail = (1.0 - LEVEL) / 2.0;
    Interval {
        low: percentile(&values, tail),
        high: percentile(&values, 1.0 - tail),
    }
}

/// The paired bootstrap interval of the mean of `first[i] − second[i]` (both measured
/// on the same rows, in the same order).
///
/// # Panics
/// If the lengths differ or there are no rows.
pub(crate) fn paired_mean_difference(first: &[f64], second: &[f64], seed: u64) -> Interval {
    assert_eq!(first.len(), second.len(), "paired values on the same rows");
    let differences: Vec<f64> = first.iter().zip(second).map(|(a, b)| a - b).collect();
    bootstrap(differences.len(), seed, |sample| {
        sample.iter().map(|&i| differences[i]).sum::<f64>() / sample.len() as f64
    })
}

/// An index uniform in `0..bound` by multiply-and-shift (Lemire, 2019), whose bias for
/// bounds this small is far below anything a percentile can show.
fn index_below(rng: &mut ChaCha8Rng, bound: usize) -> usize {
    ((u128::from(rng.next_u64()) * bound as u128) >> 64) as usize
}

/// The `q` quantile of sorted `values`, interpolating between neighbours; NaN for none.
fn percentile(sorted: &[f64], q: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let position = q * (sorted.len() - 1) as f64;
    let below = position.floor() as usize;
    let above = position.ceil() as usize;
    let weight = position - below as f64;
    sorted[below] + (sorted[above] - sorted[below]) * weight
}

#[cfg(test)]
mod tests {
    use super::*;

    // statsmodels 0.15.0 proportion_confint(8, 10, method="wilson") =
    // (0.49016247153664183, 0.9433178485456247).
    #[test]
    fn the_wilson_interval_of_eight_in_ten_matches_statsmodels() {
        let interval = wilson(8, 10);
        assert!(
            (interval.low - 0.49016247153664183).abs() < 1e-12,
            "{interval:?}"
        );
        assert!(
            (interval.high - 0.9433178485456247).abs() < 1e-12,
            "{interval:?}"
        );
    }

    // By hand: C(10,0)+C(10,1) = 11 of 1024 outcomes, doubled: 22/1024.
    #[test]
    fn mcnemar_on_one_against_nine_discordant_rows_is_twice_the_binomial_tail() {
        assert!((mcnemar_exact(1, 9) - 22.0 / 1024.0).abs() < 1e-15);
        assert!((mcnemar_exact(9, 1) - 22.0 / 1024.0).abs() < 1e-15);
        assert_eq!(mcnemar_exact(0, 0), 1.0);
        assert_eq!(mcnemar_exact(5, 5), 1.0);
    }

    #[test]
    fn a_bootstrap_is_the_same_for_the_same_seed_and_moves_with_another() {
        let values: Vec<f64> = (0..50).map(|i| (i * 7 % 13) as f64).collect();
        let mean =
            |sample: &[usize]| sample.iter().map(|&i| values[i]).sum::<f64>() / sample.len() as f64;
        let first = bootstrap(values.len(), 3, mean);
        assert_eq!(first, bootstrap(values.len(), 3, mean));
        assert_ne!(first, bootstrap(values.len(), 4, mean));
        let observed = mean(&(0..values.len()).collect::<Vec<_>>());
        assert!(first.contains(observed), "{first:?} around {observed}");
    }

    // numpy.percentile([1, 2, 3, 4], [25, 97.5]) = [1.75, 3.925].
    #[test]
    fn percentiles_interpolate_as_numpy_does() {
        assert!((percentile(&[1.0, 2.0, 3.0, 4.0], 0.25) - 1.75).abs() < 1e-15);
        assert!((percentile(&[1.0, 2.0, 3.0, 4.0], 0.975) - 3.925).abs() < 1e-12);
    }
}
