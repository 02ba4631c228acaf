//! Splitting a document's uncached runs into N shares for N cluster tasks. Runs are
//! sorted by key, so every task computes the same split from the same plan and cache
//! without talking to the others; share K takes every N-th run from position K − 1, so
//! shares differ in size by at most one.

use std::fmt;
use std::str::FromStr;

/// Share `index` (1-based) of `count`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Share {
    pub index: usize,
    pub count: usize,
}

impl Share {
    /// Positions (into the key-sorted runs) that this share trains.
    pub fn pick(self, runs: usize) -> impl Iterator<Item = usize> {
        (self.index - 1..runs).step_by(self.count)
    }
}

/// A `--shard` value that is not `K/N` with 1 ≤ K ≤ N; carries the text given.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
#[error("expected K/N with 1 ≤ K ≤ N, such as 2/8, not '{given}'")]
pub struct ShareError {
    pub given: String,
}

impl FromStr for Share {
    type Err = ShareError;

    /// `K/N` with 1 ≤ K ≤ N.
    fn from_str(text: &str) -> Result<Share, ShareError> {
        let expected = || ShareError {
            given: text.to_string(),
        };
        let (k, n) = text.split_once('/').ok_or_else(expected)?;
        let (index, count): (usize, usize) = (
            k.trim().parse().map_err(|_| expected())?,
            n.trim().parse().map_err(|_| expected())?,
        );
        if index == 0 || index > count {
            return Err(expected());
        }
        Ok(Share { index, count })
    }
}

impl fmt::Display for Share {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn shares(runs: usize, count: usize) -> Vec<Vec<usize>> {
        (1..=count)
            .map(|index| Share { index, count }.pick(runs).collect())
            .collect()
    }

    #[test]
    fn shares_are_disjoint_cover_every_run_and_differ_by_at_most_one() {
        for runs in [0, 1, 7, 8, 13, 100] {
            for count in [1, 2, 3, 4, 8, 9] {
                let all = shares(runs, count);
                let mut seen: Vec<usize> = all.iter().flatten().copied().collect();
                seen.sort_unstable();
                assert_eq!(
                    seen,
                    (0..runs).collect::<Vec<_>>(),
                    "{runs} runs, {count} shares"
                );
                let sizes: Vec<usize> = all.iter().map(Vec::len).collect();
                let (lo, hi) = (sizes.iter().min().unwrap(), sizes.iter().max().unwrap());
                assert!(hi - lo <= 1, "{sizes:?}");
            }
        }
    }

    #[test]
    fn share_k_takes_every_nth_run_from_position_k_minus_one() {
        assert_eq!(
            shares(10, 4),
            [vec![0, 4, 8], vec![1, 5, 9], vec![2, 6], vec![3, 7]]
        );
        assert_eq!(shares(2, 3), [vec![0], vec![1], vec![]]);
    }

    #[test]
    fn a_share_reads_as_k_of_n() {
        assert_eq!("3/8".parse::<Share>(), Ok(Share { index: 3, count: 8 }));
        assert!("0/8".parse::<Share>().is_err());
        assert!("9/8".parse::<Share>().is_err());
        assert!("x".parse::<Share>().is_err());
    }

    #[test]
    fn a_bad_share_is_an_error_carrying_the_text_given() {
        let error = "9/8".parse::<Share>().unwrap_err();
        assert_eq!(
            error,
            ShareError {
                given: "9/8".into()
            }
        );
        assert_eq!(
            error.to_string(),
            "expected K/N with 1 ≤ K ≤ N, such as 2/8, not '9/8'"
        );
    }
}
