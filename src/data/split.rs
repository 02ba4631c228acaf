//! Choosing which rows train and which rows test.
//!
//! Classification splits are stratified: each class is divided on its own, so
//! the test rows have about the class proportions of the whole table, and a
//! rare class cannot vanish from training by bad luck. Regression splits are
//! plain shuffles. All randomness comes from one ChaCha8 generator seeded
//! with the experiment's seed; ChaCha8 and rand's shuffle give the same
//! sequence on every platform, so a seed names the same split everywhere.

use rand::SeedableRng;
use rand::seq::SliceRandom;
use rand_chacha::ChaCha8Rng;

use super::error::DataError;
use super::settings::Split;

/// Row indices of one training/test division, each list sorted.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(super) struct RowSplit {
    /// Rows to fit on.
    pub train: Vec<usize>,
    /// Training rows set aside to steer patience and sweep ranking; empty without
    /// a validation fraction.
    pub validation: Vec<usize>,
    /// Rows held out.
    pub(crate) test: Vec<usize>,
}

/// The class of every row, for stratified splits.
#[derive(Clone, Copy, Debug)]
pub(super) struct Strata<'a> {
    /// Class index per row.
    pub labels: &'a [usize],
    /// Class names, indexed by label (for messages).
    pub classes: &'a [String],
}

impl Strata<'_> {
    /// Rows of each class, in row order.
    fn rows_by_class(&self) -> Vec<Vec<usize>> {
        let mut by_class = vec![Vec::new(); self.classes.len()];
        for (row, &label) in self.labels.iter().enumerate() {
            by_class[label].push(row);
        }
        by_class
    }
}

/// Divide `n_rows` rows as `split` says: one division for a holdout, one per
/// fold for k-fold, then set `validation` of each division's training rows aside.
/// `strata` is given for classification.
pub(super) fn split_rows(
    split: Split,
    validation: Option<f64>,
    n_rows: usize,
    strata: Option<Strata>,
    seed: u64,
) -> Result<Vec<RowSplit>, DataError> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let splits = train_test_splits(split, n_rows, strata, &mut rng)?;
    let Some(fraction) = validation else {
        return Ok(splits);
    };
    // Drawn after the train/test split from the same generator, so setting
    // validation leaves the held-out rows exactly where they were.
    splits
        .into_iter()
        .map(|s| set_validation_aside(s, fraction, strata, &mut rng))
        .collect()
}

/// The train/test divisions alone.
fn train_test_splits(
    split: Split,
    n_rows: usize,
    strata: Option<Strata>,
    rng: &mut ChaCha8Rng,
) -> Result<Vec<RowSplit>, DataError> {
    match split {
        Split::Holdout(fraction) => {
            // Written so that NaN fails too.
            if !(0.0..1.0).contains(&fraction) {
                return Err(DataError::HoldoutOutOfRange { value: fraction });
            }
            let groups = match strata {
                Some(s) => s.rows_by_class(),
                None => vec![(0..n_rows).collect()],
            };
            Ok(vec![holdout(groups, fraction, rng)])
        }
        Split::Folds(k) => {
            if k < 2 {
                return Err(DataError::TooFewFolds { folds: k });
            }
            let fold_of = match strata {
                Some(s) => {
                    let by_class = s.rows_by_class();
                    if let Some((class, rows)) = by_class
                        .iter()
                        .enumerate()
                        .min_by_key(|(_, rows)| rows.len())
                        .filter(|(_, rows)| rows.len() < k)
                    {
                        return Err(DataError::FoldsExceedClass {
                            folds: k,
                            class: s.classes[class].clone(),
                            count: rows.len(),
                        });
                    }
                    stratified_folds(by_class, n_rows, k, rng)
                }
                None => {
                    if n_rows < k {
                        return Err(DataError::FoldsExceedRows {
                            folds: k,
                            rows: n_rows,
                        });
                    }
                    chunked_folds(n_rows, k, rng)
                }
            };
            Ok((0..k)
                .map(|fold| {
                    let (test, train) = (0..n_rows).partition(|&row| fold_of[row] == fold);
                    RowSplit {
                        train,
                        validation: Vec::new(),
                        test,
                    }
                })
                .collect())
        }
    }
}

/// Shuffle each group and hold out round(fraction · size) of it, but always
/// leave at least one of its rows for training.
fn holdout(groups: Vec<Vec<usize>>, fraction: f64, rng: &mut ChaCha8Rng) -> RowSplit {
    let mut train = Vec::new();
    let mut test = Vec::new();
    for mut rows in groups {
        rows.shuffle(rng);
        let n_test =
            ((fraction * rows.len() as f64).round() as usize).min(rows.len().saturating_sub(1));
        test.extend_from_slice(&rows[..n_test]);
        train.extend_from_slice(&rows[n_test..]);
    }
    train.sort_unstable();
    test.sort_unstable();
    RowSplit {
        train,
        validation: Vec::new(),
        test,
    }
}

/// Move round(fraction · size) of each class's training rows (all training rows
/// when regressing) to the validation rows. Unlike the holdout, which quietly keeps
/// one row back, a class left without training rows is an error: the two fractions
/// together ask for more rows than the class has.
fn set_validation_aside(
    split: RowSplit,
    fraction: f64,
    strata: Option<Strata>,
    rng: &mut ChaCha8Rng,
) -> Result<RowSplit, DataError> {
    // Written so that NaN fails too.
    if !(fraction > 0.0 && fraction < 1.0) {
        return Err(DataError::ValidationOutOfRange { value: fraction });
    }
    let groups: Vec<(Option<String>, Vec<usize>)> = match strata {
        Some(s) => {
            let mut by_class = vec![Vec::new(); s.classes.len()];
            for &row in &split.train {
                by_class[s.labels[row]].push(row);
            }
            s.classes.iter().cloned().map(Some).zip(by_class).collect()
        }
        None => vec![(None, split.train)],
    };
    let (mut train, mut validation) = (Vec::new(), Vec::new());
    for (class, mut rows) in groups {
        let count = rows.len();
        let n_validation = (fraction * count as f64).round() as usize;
        if count > 0 && n_validation >= count {
            return Err(DataError::ValidationLeavesNoTraining {
                fraction,
                class,
                count,
            });
        }
        rows.shuffle(rng);
        validation.extend_from_slice(&rows[..n_validation]);
        train.extend_from_slice(&rows[n_validation..]);
    }
    train.sort_unstable();
    validation.sort_unstable();
    Ok(RowSplit {
        train,
        validation,
        test: split.test,
    })
}

/// Fold of every row: each class's shuffled rows are dealt to the folds in
/// turn. The deal carries on from class to class, so fold sizes differ by at
/// most one overall as well as within each class.
fn stratified_folds(
    by_class: Vec<Vec<usize>>,
    n_rows: usize,
    k: usize,
    rng: &mut ChaCha8Rng,
) -> Vec<usize> {
    let mut fold_of = vec![0; n_rows];
    let mut next = 0;
    for mut rows in by_class {
        rows.shuffle(rng);
        for row in rows {
            fold_of[row] = next % k;
            next += 1;
        }
    }
    fold_of
}

/// Fold of every row: the shuffled rows cut into k contiguous chunks whose
/// sizes differ by at most one (the first n mod k chunks are one larger).
fn chunked_folds(n_rows: usize, k: usize, rng: &mut ChaCha8Rng) -> Vec<usize> {
    let mut order: Vec<usize> = (0..n_rows).collect();
    order.shuffle(rng);
    let (base, extra) = (n_rows / k, n_rows % k);
    let mut fold_of = vec![0; n_rows];
    let mut start = 0;
    for fold in 0..k {
        let size = base + usize::from(fold < extra);
        for &row in &order[start..start + size] {
            fold_of[row] = fold;
        }
        start += size;
    }
    fold_of
}

#[cfg(test)]
mod tests {
    use super::*;

    fn classes(n: usize) -> Vec<String> {
        (0..n).map(|c| format!("c{c}")).collect()
    }

    /// 30 rows of class 0, 10 of class 1, interleaved.
    fn labels() -> Vec<usize> {
        (0..40).map(|i| usize::from(i % 4 == 3)).collect()
    }

    fn strata<'a>(labels: &'a [usize], classes: &'a [String]) -> Option<Strata<'a>> {
        Some(Strata { labels, classes })
    }

    #[test]
    fn stratified_holdout_keeps_class_proportions() {
        let (l, c) = (labels(), classes(2));
        let s = &split_rows(Split::Holdout(0.3), None, 40, strata(&l, &c), 7).unwrap()[0];
        let test_ones = s.test.iter().filter(|&&r| l[r] == 1).count();
        // round(0.3 · 30) = 9 of class 0, round(0.3 · 10) = 3 of class 1.
        assert_eq!((s.test.len() - test_ones, test_ones), (9, 3));
        assert_eq!(s.train.len(), 28);
        assert!(s.train.is_sorted() && s.test.is_sorted());
        let mut all: Vec<usize> = s.train.iter().chain(&s.test).copied().collect();
        all.sort_unstable();
        assert_eq!(all, (0..40).collect::<Vec<_>>());
    }

    #[test]
    fn holdout_always_leaves_a_training_row_per_class() {
        // Class 1 has a single row: round(0.6 · 1) = 1 would take it all.
        let l = vec![0, 0, 0, 0, 1];
        let c = classes(2);
        let s = &split_rows(Split::Holdout(0.6), None, 5, strata(&l, &c), 1).unwrap()[0];
        assert!(s.train.contains(&4));
        assert_eq!(s.test.len(), 2); // round(0.6 · 4) = 2.4 → 2
    }

    #[test]
    fn zero_holdout_gives_an_empty_test_set() {
        let s = &split_rows(Split::Holdout(0.0), None, 10, None, 1).unwrap()[0];
        assert!(s.test.is_empty());
        assert_eq!(s.train, (0..10).collect::<Vec<_>>());
    }

    #[test]
    fn regression_holdout_takes_rounded_share() {
        let s = &split_rows(Split::Holdout(0.25), None, 10, None, 3).unwrap()[0];
        // round(2.5) = 3: f64::round rounds halves away from zero.
        assert_eq!((s.train.len(), s.test.len()), (7, 3));
    }

    #[test]
    fn holdout_outside_zero_to_one_is_an_error() {
        for value in [1.0, -0.1, 1.5, f64::NAN] {
            let err = split_rows(Split::Holdout(value), None, 10, None, 1).unwrap_err();
            assert!(
                matches!(err, DataError::HoldoutOutOfRange { .. }),
                "{value}"
            );
        }
    }

    #[test]
    fn stratified_folds_hold_each_row_out_once_with_balanced_classes() {
        let (l, c) = (labels(), classes(2));
        let folds = split_rows(Split::Folds(5), None, 40, strata(&l, &c), 11).unwrap();
        assert_eq!(folds.len(), 5);
        let mut held_out = [0; 40];
        for f in &folds {
            for &r in &f.test {
                held_out[r] += 1;
            }
            assert_eq!(f.train.len() + f.test.len(), 40);
            assert!(f.train.iter().all(|r| !f.test.contains(r)));
            let ones = f.test.iter().filter(|&&r| l[r] == 1).count();
            assert_eq!((f.test.len() - ones, ones), (6, 2));
        }
        assert!(held_out.iter().all(|&n| n == 1));
    }

    #[test]
    fn regression_folds_are_near_equal_chunks() {
        let folds = split_rows(Split::Folds(3), None, 10, None, 5).unwrap();
        let sizes: Vec<usize> = folds.iter().map(|f| f.test.len()).collect();
        assert_eq!(sizes, vec![4, 3, 3]);
        let mut all: Vec<usize> = folds.iter().flat_map(|f| f.test.clone()).collect();
        all.sort_unstable();
        assert_eq!(all, (0..10).collect::<Vec<_>>());
    }

    #[test]
    fn fold_count_errors_name_the_limit() {
        assert_eq!(
            split_rows(Split::Folds(1), None, 10, None, 1).unwrap_err(),
            DataError::TooFewFolds { folds: 1 }
        );
        assert_eq!(
            split_rows(Split::Folds(11), None, 10, None, 1).unwrap_err(),
            DataError::FoldsExceedRows {
                folds: 11,
                rows: 10
            }
        );
        let (l, c) = (labels(), classes(2));
        let err = split_rows(Split::Folds(11), None, 40, strata(&l, &c), 1).unwrap_err();
        assert_eq!(
            err,
            DataError::FoldsExceedClass {
                folds: 11,
                class: "c1".into(),
                count: 10
            }
        );
        assert!(split_rows(Split::Folds(10), None, 40, strata(&l, &c), 1).is_ok());
    }

    #[test]
    fn same_seed_same_split_other_seed_other_split() {
        let (l, c) = (labels(), classes(2));
        let a = split_rows(Split::Holdout(0.3), None, 40, strata(&l, &c), 42).unwrap();
        let b = split_rows(Split::Holdout(0.3), None, 40, strata(&l, &c), 42).unwrap();
        let other = split_rows(Split::Holdout(0.3), None, 40, strata(&l, &c), 43).unwrap();
        assert_eq!(a, b);
        assert_ne!(a[0].test, other[0].test);
    }

    #[test]
    fn validation_is_carved_from_each_class_of_the_training_rows_and_moves_no_test_row() {
        let (l, c) = (labels(), classes(2));
        let plain = &split_rows(Split::Holdout(0.3), None, 40, strata(&l, &c), 7).unwrap()[0];
        let s = &split_rows(Split::Holdout(0.3), Some(0.25), 40, strata(&l, &c), 7).unwrap()[0];
        assert_eq!(s.test, plain.test);
        // Training rows per class after the holdout: 21 and 7; round(0.25 · 21) = 5
        // and round(0.25 · 7) = 2 (1.75) are set aside.
        let ones = s.validation.iter().filter(|&&r| l[r] == 1).count();
        assert_eq!((s.validation.len() - ones, ones), (5, 2));
        assert_eq!(s.train.len(), 21);
        assert!(s.validation.iter().all(|r| plain.train.contains(r)));
        assert!(s.validation.iter().all(|r| !s.train.contains(r)));
        assert!(s.validation.is_sorted());
    }

    #[test]
    fn each_fold_sets_validation_rows_aside_from_its_own_training_rows() {
        let folds = split_rows(Split::Folds(4), Some(0.5), 20, None, 3).unwrap();
        for f in &folds {
            // 15 training rows per fold; round(7.5) = 8 set aside.
            assert_eq!((f.train.len(), f.validation.len(), f.test.len()), (7, 8, 5));
            assert!(f.validation.iter().all(|r| !f.test.contains(r)));
        }
    }

    #[test]
    fn validation_that_would_take_a_class_whole_is_an_error_naming_it() {
        // Class 1 keeps one training row after the holdout; round(0.5 · 1) = 1.
        let l = vec![0, 0, 0, 0, 1, 1];
        let c = classes(2);
        let err = split_rows(Split::Holdout(0.5), Some(0.5), 6, strata(&l, &c), 1).unwrap_err();
        assert_eq!(
            err,
            DataError::ValidationLeavesNoTraining {
                fraction: 0.5,
                class: Some("c1".into()),
                count: 1
            }
        );
        for value in [0.0, 1.0, f64::NAN] {
            let err = split_rows(Split::Holdout(0.2), Some(value), 10, None, 1).unwrap_err();
            assert!(
                matches!(err, DataError::ValidationOutOfRange { .. }),
                "{value}"
            );
        }
    }

    #[test]
    fn split_for_a_seed_is_pinned() {
        // Recorded from this implementation: guards against a dependency
        // update or a code change silently moving every experiment's split.
        let s = &split_rows(Split::Holdout(0.3), None, 10, None, 2024).unwrap()[0];
        assert_eq!(s.test, [1, 4, 9]);
    }
}
