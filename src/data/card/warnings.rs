//! The problems a data card points out before training: columns that carry nothing or
//! identify rows, repeated rows and rows shared by training and held-out rows, inputs
//! that give the answer away, rare classes, and values far from the training mean.
//!
//! Each is a warning, not an error: the data may be right, and the person reading the
//! card decides.

use std::hash::{BuildHasher, Hasher};

use hashbrown::{DefaultHashBuilder, HashTable};
use ndarray::ArrayView1;
use serde::{Deserialize, Serialize};

use super::profile::{ColumnProfile, Role, Values};
use crate::data::encode::{self, ColumnKind};
use crate::data::prepare::Prepared;

/// Fewest distinct values at which a column whose values are mostly unique to a row
/// looks like an identifier (below it, a small table's few texts).
pub(crate) const IDENTIFIER_LIKE_DISTINCT: usize = 20;

/// Fewest rows on which an input that splits the classes cleanly is worth a warning:
/// with fewer, a clean split happens by chance too often to mean anything.
pub(crate) const SEPARATION_MIN_ROWS: usize = 10;

/// Correlation with a numeric target above which an input may be the target in disguise.
pub(crate) const STRONG_CORRELATION: f64 = 0.99;

/// A class with a smaller share of the rows than this is rare enough that accuracy hides
/// how it is predicted.
pub(crate) const RARE_CLASS_SHARE: f64 = 0.1;

/// Standard deviations from the training mean beyond which a value is suspect: under a
/// normal distribution about 2 values in a billion lie so far out.
pub(crate) const FAR_FROM_MEAN_SDS: f64 = 6.0;

/// A problem the data card points out.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) enum DataWarning {
    /// Every value read is the same.
    Constant {
        column: String,
        role: Role,
        value: String,
    },
    /// Nearly every row has its own value, like a row number or a name.
    IdentifierLike {
        column: String,
        distinct: usize,
        count: usize,
    },
    /// Rows equal, in every used column, to an earlier row.
    DuplicateRows { rows: usize, example: SameRows },
    /// Held-out rows equal to a training row of the same partition.
    HeldOutInTraining { rows: usize, example: SameRows },
    /// One input's values alone tell the classes apart on every row.
    SeparatesClasses { column: String, target: String },
    /// An input follows a numeric target almost exactly.
    CorrelatesWithTarget {
        column: String,
        target: String,
        r: f64,
    },
    /// A class has under [`RARE_CLASS_SHARE`] of the rows.
    RareClass {
        column: String,
        class: String,
        rows: usize,
        total: usize,
    },
    /// Values more than [`FAR_FROM_MEAN_SDS`] training standard deviations from the
    /// training mean; the farthest is described.
    FarFromMean {
        column: String,
        values: usize,
        farthest: f64,
        line: u64,
        sds: f64,
        mean: f64,
        sd: f64,
    },
}

/// A row (by file line) and an earlier or training row equal to it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub(crate) struct SameRows {
    pub line: u64,
    pub same_as: u64,
}

/// A warning's kind, as the JSON summary names it.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum WarningCode {
    Constant,
    IdentifierLike,
    DuplicateRows,
    HeldOutInTraining,
    SeparatesClasses,
    CorrelatesWithTarget,
    RareClass,
    FarFromMean,
}

impl DataWarning {
    pub(crate) fn code(&self) -> WarningCode {
        match self {
            DataWarning::Constant { .. } => WarningCode::Constant,
            DataWarning::IdentifierLike { .. } => WarningCode::IdentifierLike,
            DataWarning::DuplicateRows { .. } => WarningCode::DuplicateRows,
            DataWarning::HeldOutInTraining { .. } => WarningCode::HeldOutInTraining,
            DataWarning::SeparatesClasses { .. } => WarningCode::SeparatesClasses,
            DataWarning::CorrelatesWithTarget { .. } => WarningCode::CorrelatesWithTarget,
            DataWarning::RareClass { .. } => WarningCode::RareClass,
            DataWarning::FarFromMean { .. } => WarningCode::FarFromMean,
        }
    }

    /// The column the warning is about; `None` for whole rows.
    pub(crate) fn column(&self) -> Option<&str> {
        match self {
            DataWarning::Constant { column, .. }
            | DataWarning::IdentifierLike { column, .. }
            | DataWarning::SeparatesClasses { column, .. }
            | DataWarning::CorrelatesWithTarget { column, .. }
            | DataWarning::RareClass { column, .. }
            | DataWarning::FarFromMean { column, .. } => Some(column),
            DataWarning::DuplicateRows { .. } | DataWarning::HeldOutInTraining { .. } => None,
        }
    }
}

/// Every warning, column warnings first (in column order), then row warnings.
pub(super) fn find(columns: &[ColumnProfile], prepared: &Prepared) -> Vec<DataWarning> {
    let mut found: Vec<DataWarning> = columns.iter().filter_map(constant).collect();
    found.extend(columns.iter().filter_map(identifier_like));
    found.extend(separating_inputs(columns, prepared));
    found.extend(correlated_inputs(prepared));
    found.extend(rare_classes(prepared));
    found.extend(far_from_mean(prepared));
    found.extend(duplicate_rows(prepared));
    found.extend(held_out_in_training(prepared));
    found
}

fn constant(column: &ColumnProfile) -> Option<DataWarning> {
    if column.distinct != 1 {
        return None;
    }
    let value = match &column.values {
        Values::Numeric(Some(stats)) => stats.min.to_string(),
        Values::Text { most_common } => most_common.first()?.0.clone(),
        Values::Numeric(None) => return None,
    };
    Some(DataWarning::Constant {
        column: column.name.clone(),
        role: column.role,
        value,
    })
}

/// An input whose values are mostly unique to a row: text with many distinct values, or
/// whole numbers that never repeat. Measurements that never repeat are normal, so other
/// numbers are not flagged.
fn identifier_like(column: &ColumnProfile) -> Option<DataWarning> {
    let (distinct, count) = (column.distinct, column.count);
    let flagged = column.role == Role::Input
        && match &column.values {
            Values::Text { .. } => looks_like_identifier(distinct, count),
            Values::Numeric(Some(stats)) => {
                stats.whole && distinct == count && distinct >= IDENTIFIER_LIKE_DISTINCT
            }
            Values::Numeric(None) => false,
        };
    flagged.then(|| DataWarning::IdentifierLike {
        column: column.name.clone(),
        distinct,
        count,
    })
}

/// Whether `distinct` texts over `count` cells are mostly unique to a row.
fn looks_like_identifier(distinct: usize, count: usize) -> bool {
    distinct >= IDENTIFIER_LIKE_DISTINCT && 2 * distinct > count
}

/// Each input column's name and kind, and where its features lie in the prepared matrix.
fn input_features(prepared: &Prepared) -> Vec<(&str, &ColumnKind, std::ops::Range<usize>)> {
    let columns = &prepared.encoding.columns;
    columns
        .iter()
        .zip(encode::feature_ranges(columns))
        .map(|(column, range)| (column.name.as_str(), &column.kind, range))
        .collect()
}

/// Inputs that tell the classes apart on every kept row: a text input whose every
/// category holds one class, or a numeric input whose classes lie in separate intervals.
fn separating_inputs(columns: &[ColumnProfile], prepared: &Prepared) -> Vec<DataWarning> {
    let Some(labels) = &prepared.labels else {
        return Vec::new();
    };
    if labels.len() < SEPARATION_MIN_ROWS {
        return Vec::new();
    }
    let target = &prepared.encoding.target_names[0];
    let class_count = prepared.encoding.classes.as_ref().map_or(0, Vec::len);
    // The card lists the inputs first, in feature order, so they pair up with the ranges.
    input_features(prepared)
        .into_iter()
        .zip(columns)
        .filter(|((_, kind, range), profile)| match kind {
            ColumnKind::Numeric => {
                separates_by_intervals(prepared.x.column(range.start), labels, class_count)
            }
            ColumnKind::Categorical { .. } => {
                !looks_like_identifier(profile.distinct, profile.count)
                    && each_category_one_class(prepared, range.clone(), labels)
            }
        })
        .map(|((name, _, _), _)| DataWarning::SeparatesClasses {
            column: name.to_string(),
            target: target.clone(),
        })
        .collect()
}

/// Whether the classes' ranges of values do not overlap: then thresholds on this input
/// alone classify every row. (Equivalent to each class forming one unbroken run when the
/// rows are sorted by value, without the sort.)
fn separates_by_intervals(values: ArrayView1<f64>, labels: &[usize], classes: usize) -> bool {
    let mut ranges = vec![(f64::INFINITY, f64::NEG_INFINITY); classes];
    for (&value, &label) in values.iter().zip(labels) {
        let (low, high) = &mut ranges[label];
        *low = low.min(value);
        *high = high.max(value);
    }
    ranges.retain(|(low, high)| low <= high);
    ranges.sort_by(|a, b| a.0.total_cmp(&b.0));
    ranges.len() > 1 && ranges.windows(2).all(|pair| pair[0].1 < pair[1].0)
}

/// Whether every category of the one-hot features in `range` occurs with one class only.
fn each_category_one_class(
    prepared: &Prepared,
    range: std::ops::Range<usize>,
    labels: &[usize],
) -> bool {
    let mut class_of = vec![None; range.len()];
    for (row, &label) in labels.iter().enumerate() {
        let features = prepared.x.row(row);
        let Some(category) = range.clone().position(|j| features[j] == 1.0) else {
            continue;
        };
        match class_of[category] {
            None => class_of[category] = Some(label),
            Some(seen) if seen != label => return false,
            Some(_) => {}
        }
    }
    true
}

/// Numeric inputs whose Pearson correlation with a numeric target exceeds
/// [`STRONG_CORRELATION`] in size.
fn correlated_inputs(prepared: &Prepared) -> Vec<DataWarning> {
    if prepared.labels.is_some() {
        return Vec::new();
    }
    let mut found = Vec::new();
    for (name, kind, range) in input_features(prepared) {
        if !matches!(kind, ColumnKind::Numeric) {
            continue;
        }
        for (t, target) in prepared.encoding.target_names.iter().enumerate() {
            let r = pearson(prepared.x.column(range.start), prepared.y.column(t));
            if let Some(r) = r.filter(|r| r.abs() > STRONG_CORRELATION) {
                found.push(DataWarning::CorrelatesWithTarget {
                    column: name.to_string(),
                    target: target.clone(),
                    r,
                });
            }
        }
    }
    found
}

/// Pearson's correlation coefficient; `None` when either side is constant.
fn pearson(a: ArrayView1<f64>, b: ArrayView1<f64>) -> Option<f64> {
    let n = a.len() as f64;
    let (mean_a, mean_b) = (a.sum() / n, b.sum() / n);
    let (mut ab, mut aa, mut bb) = (0.0, 0.0, 0.0);
    for (x, y) in a.iter().zip(b) {
        let (da, db) = (x - mean_a, y - mean_b);
        ab += da * db;
        aa += da * da;
        bb += db * db;
    }
    let r = ab / (aa * bb).sqrt();
    (aa > 0.0 && bb > 0.0 && r.is_finite()).then_some(r)
}

/// Classes with under [`RARE_CLASS_SHARE`] of the kept rows.
fn rare_classes(prepared: &Prepared) -> Vec<DataWarning> {
    let Some(classes) = &prepared.encoding.classes else {
        return Vec::new();
    };
    let total = prepared.x.nrows();
    let all: Vec<usize> = (0..total).collect();
    prepared
        .class_counts(&all)
        .into_iter()
        .zip(classes)
        .filter(|&(rows, _)| (rows as f64) < RARE_CLASS_SHARE * total as f64)
        .map(|(rows, class)| DataWarning::RareClass {
            column: prepared.encoding.target_names[0].clone(),
            class: class.clone(),
            rows,
            total,
        })
        .collect()
}

/// Numeric inputs and targets with values more than [`FAR_FROM_MEAN_SDS`] sample
/// standard deviations from the mean of a partition's training rows.
fn far_from_mean(prepared: &Prepared) -> Vec<DataWarning> {
    let inputs = input_features(prepared)
        .into_iter()
        .filter(|(_, kind, _)| matches!(kind, ColumnKind::Numeric))
        .map(|(name, _, range)| (name, prepared.x.column(range.start)));
    let targets = prepared
        .encoding
        .target_names
        .iter()
        .enumerate()
        .filter(|_| prepared.labels.is_none())
        .map(|(t, name)| (name.as_str(), prepared.y.column(t)));
    inputs
        .chain(targets)
        .filter_map(|(name, values)| far_values(name, values, prepared))
        .collect()
}

/// The warning for one column's values, if any lies too far out in some partition.
fn far_values(name: &str, values: ArrayView1<f64>, prepared: &Prepared) -> Option<DataWarning> {
    let mut flagged = vec![false; values.len()];
    let mut farthest: Option<(f64, usize, f64, f64)> = None;
    for partition in &prepared.partitions {
        let training: Vec<f64> = partition.train_rows.iter().map(|&r| values[r]).collect();
        let Some((mean, sd)) = mean_and_spread(&training) else {
            continue;
        };
        for (row, &value) in values.iter().enumerate() {
            let sds = (value - mean).abs() / sd;
            if sds > FAR_FROM_MEAN_SDS {
                flagged[row] = true;
                if farthest.is_none_or(|(most, ..)| sds > most) {
                    farthest = Some((sds, row, mean, sd));
                }
            }
        }
    }
    let (sds, row, mean, sd) = farthest?;
    Some(DataWarning::FarFromMean {
        column: name.to_string(),
        values: flagged.iter().filter(|&&f| f).count(),
        farthest: values[row],
        line: prepared.lines[row],
        sds,
        mean,
        sd,
    })
}

/// Mean and sample standard deviation (n − 1), when there is a finite, non-zero spread.
fn mean_and_spread(values: &[f64]) -> Option<(f64, f64)> {
    if values.len() < 2 {
        return None;
    }
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    (sd > 0.0 && sd.is_finite()).then_some((mean, sd))
}

/// Kept rows equal in every used column (inputs and targets as encoded) to an earlier one.
fn duplicate_rows(prepared: &Prepared) -> Option<DataWarning> {
    let mut index = RowIndex::new(prepared);
    let mut rows = 0;
    let mut example = None;
    for row in 0..prepared.x.nrows() {
        if let Some(earlier) = index.earlier_or_insert(row) {
            rows += 1;
            example.get_or_insert(SameRows {
                line: prepared.lines[row],
                same_as: prepared.lines[earlier],
            });
        }
    }
    Some(DataWarning::DuplicateRows {
        rows,
        example: example?,
    })
}

/// Held-out rows equal to a training row of their partition: the held-out score then
/// measures recall of training rows, not generalisation.
fn held_out_in_training(prepared: &Prepared) -> Option<DataWarning> {
    let mut flagged = vec![false; prepared.x.nrows()];
    let mut example = None;
    for partition in &prepared.partitions {
        let mut index = RowIndex::new(prepared);
        for &row in &partition.train_rows {
            index.earlier_or_insert(row);
        }
        for &row in &partition.test_rows {
            if let Some(training) = index.find(row) {
                flagged[row] = true;
                example.get_or_insert(SameRows {
                    line: prepared.lines[row],
                    same_as: prepared.lines[training],
                });
            }
        }
    }
    Some(DataWarning::HeldOutInTraining {
        rows: flagged.iter().filter(|&&f| f).count(),
        example: example?,
    })
}

/// A set of kept rows, looked up by their encoded inputs and targets without copying them.
struct RowIndex<'p> {
    prepared: &'p Prepared,
    rows: HashTable<usize>,
    hasher: DefaultHashBuilder,
}

impl<'p> RowIndex<'p> {
    fn new(prepared: &'p Prepared) -> RowIndex<'p> {
        RowIndex {
            prepared,
            rows: HashTable::new(),
            hasher: DefaultHashBuilder::default(),
        }
    }

    fn hash(&self, row: usize) -> u64 {
        row_hash(self.prepared, &self.hasher, row)
    }

    fn same(&self, a: usize, b: usize) -> bool {
        row_values(self.prepared, a).eq(row_values(self.prepared, b))
    }

    /// A row in the set equal to `row`.
    fn find(&self, row: usize) -> Option<usize> {
        self.rows
            .find(self.hash(row), |&other| self.same(row, other))
            .copied()
    }

    /// A row in the set equal to `row`, or `None` after adding `row`. The set holds
    /// distinct rows only: equal rows share a hash, and many under one hash would make
    /// every lookup and insertion walk them all (quadratic in a file of repeated rows).
    fn earlier_or_insert(&mut self, row: usize) -> Option<usize> {
        let earlier = self.find(row);
        if earlier.is_none() {
            let (prepared, hasher) = (self.prepared, &self.hasher);
            self.rows.insert_unique(self.hash(row), row, |&other| {
                row_hash(prepared, hasher, other)
            });
        }
        earlier
    }
}

/// A kept row's encoded inputs, then its targets.
fn row_values(prepared: &Prepared, row: usize) -> impl Iterator<Item = f64> + '_ {
    prepared
        .x
        .row(row)
        .into_iter()
        .chain(prepared.y.row(row))
        .copied()
}

fn row_hash(prepared: &Prepared, hasher: &DefaultHashBuilder, row: usize) -> u64 {
    let mut state = hasher.build_hasher();
    for value in row_values(prepared, row) {
        // + 0.0 turns −0 into 0: they compare equal, so they must hash alike.
        state.write_u64((value + 0.0).to_bits());
    }
    state.finish()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::array;

    #[test]
    fn classes_meeting_at_one_shared_value_are_not_separated() {
        let labels = [0, 0, 1, 1, 2];
        assert!(separates_by_intervals(
            array![1.0, 2.0, 3.0, 4.0, 9.0].view(),
            &labels,
            3
        ));
        // Class 0 and class 1 both hold 2.5: no threshold puts it on one side only.
        assert!(!separates_by_intervals(
            array![1.0, 2.5, 2.5, 4.0, 9.0].view(),
            &labels,
            3
        ));
        // Class 2 lies between the rows of class 1.
        assert!(!separates_by_intervals(
            array![1.0, 2.0, 3.0, 9.0, 5.0].view(),
            &labels,
            3
        ));
    }

    // By hand: y = 2x exactly gives 1, y = −x gives −1, a constant y gives none.
    #[test]
    fn pearson_is_one_for_a_line_and_none_for_a_constant() {
        let x = array![1.0, 2.0, 4.0, 7.0];
        assert!((pearson(x.view(), (&x * 2.0).view()).unwrap() - 1.0).abs() < 1e-15);
        assert!((pearson(x.view(), (-&x).view()).unwrap() + 1.0).abs() < 1e-15);
        assert_eq!(pearson(x.view(), array![3.0, 3.0, 3.0, 3.0].view()), None);
    }
}
