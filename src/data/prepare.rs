//! The whole preparation of a table for training: pick columns, handle
//! missing values, encode, split, and fit one scaler per partition.
//!
//! The encoding is learned from all kept rows (categories and classes must be
//! the same in every partition, or feature columns would not line up), while
//! the scaler, which uses the values themselves, is fitted per partition on
//! its training rows only.

use ndarray::{Array2, Axis};
use serde::{Deserialize, Serialize};

use super::coded_column::CodedColumn;
use super::columns::{self, UsedColumns};
use super::encode::{self, Encoding, is_missing, is_non_finite};
use super::error::DataError;
use super::scale::Scaler;
use super::settings::{DataSettings, Missing, Task};
use super::split::{self, Strata};
use super::table::Table;

/// One training/test division of the kept rows and the scaler fitted on its training rows.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Partition {
    /// Indices into the kept rows (rows of [`Prepared::x`]), sorted.
    pub train_rows: Vec<usize>,
    /// Training rows set aside for patience and sweep ranking (not fitted on), sorted;
    /// empty without `validation`.
    pub validation_rows: Vec<usize>,
    /// Indices into the kept rows, sorted; empty for a holdout of 0.
    pub test_rows: Vec<usize>,
    /// Fitted on `train_rows` only.
    pub scaler: Scaler,
    /// Maps each target column onto the units the network trains in, fitted on
    /// `train_rows` only; the identity for classification and `scale_target: none`.
    pub target_scaler: Scaler,
}

/// The matrices of one partition, inputs scaled by its scaler, targets as in [`Prepared::y`].
#[derive(Clone, Debug, PartialEq)]
pub struct SplitData {
    /// Scaled training inputs.
    pub x_train: Array2<f64>,
    /// Training targets.
    pub(crate) y_train: Array2<f64>,
    /// Scaled test inputs.
    pub x_test: Array2<f64>,
    /// Test targets.
    pub y_test: Array2<f64>,
}

/// A table ready for training.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Prepared {
    /// How columns became features and targets.
    pub encoding: Encoding,
    /// Encoded, unscaled inputs of the kept rows.
    pub x: Array2<f64>,
    /// Classify: one 0/1 column when there are exactly two classes
    /// (1 = `classes[1]`), else one indicator column per class.
    /// Regress: the numeric targets.
    pub y: Array2<f64>,
    /// Class index per kept row (classify only).
    pub labels: Option<Vec<usize>>,
    /// 1-based file line of each kept row, to point at rows in the report.
    pub lines: Vec<u64>,
    /// Data rows in the table.
    pub rows_read: usize,
    /// Rows left out for a missing value in a used column.
    pub rows_dropped: usize,
    /// One partition for a holdout, k for k-fold.
    pub partitions: Vec<Partition>,
}

impl Prepared {
    /// Scaled inputs and targets of partition `partition`.
    ///
    /// # Panics
    /// If there is no such partition.
    pub fn split(&self, partition: usize) -> SplitData {
        let p = &self.partitions[partition];
        let pick = |m: &Array2<f64>, rows: &[usize]| m.select(Axis(0), rows);
        // Scaled where they were copied to, so no third copy of the inputs is made.
        let scaled = |rows: &[usize]| {
            let mut x = pick(&self.x, rows);
            p.scaler.apply_in_place(x.view_mut());
            x
        };
        SplitData {
            x_train: scaled(&p.train_rows),
            y_train: pick(&self.y, &p.train_rows),
            x_test: scaled(&p.test_rows),
            y_test: pick(&self.y, &p.test_rows),
        }
    }

    /// Number of `rows` (indices into the kept rows) in each class, in class
    /// order; empty for regression.
    pub fn class_counts(&self, rows: &[usize]) -> Vec<usize> {
        let (Some(labels), Some(classes)) = (&self.labels, &self.encoding.classes) else {
            return Vec::new();
        };
        let mut counts = vec![0; classes.len()];
        for &row in rows {
            counts[labels[row]] += 1;
        }
        counts
    }
}

/// Prepare `table` for training as `settings` say.
/// `max_categories` bounds the distinct texts of a text input and the classes of a
/// target (`--max-categories`).
pub fn prepare(
    table: &Table,
    settings: &DataSettings,
    max_categories: usize,
) -> Result<Prepared, DataError> {
    let used = columns::resolve(table, settings)?;
    let kept = kept_rows(table, &used, settings.missing)?;
    let rows_read = table.row_count();
    let rows_dropped = rows_read - kept.len();
    // Two rows are the least that can be both learned from and tested or
    // told apart; anything fewer is almost surely a wrong file.
    const MIN_ROWS: usize = 2;
    if kept.len() < MIN_ROWS {
        return Err(DataError::TooFewRows {
            rows: kept.len(),
            read: rows_read,
            dropped: rows_dropped,
            needed: MIN_ROWS,
        });
    }

    let encoded = encode::fit(table, &used, &kept, settings.task, max_categories)?;
    let strata = match (&encoded.labels, &encoded.encoding.classes) {
        (Some(labels), Some(classes)) => Some(Strata { labels, classes }),
        _ => None,
    };
    let numeric = encoded.encoding.numeric_mask();
    if settings.scale_target.is_some() && encoded.encoding.task == Task::Classify {
        return Err(DataError::ScaleTargetOnClasses {
            column: settings.target.join(", "),
        });
    }
    let target_scale = settings.target_scale(encoded.encoding.task);
    let every_target = vec![true; encoded.y.ncols()];
    let partitions = split::split_rows(
        settings.split,
        settings.validation,
        kept.len(),
        strata,
        settings.seed,
    )?
    .into_iter()
    .map(|s| {
        let scaler = Scaler::fit(settings.scale, encoded.x.view(), &s.train, &numeric);
        if let Some(feature) = scaler.first_overflow() {
            return Err(DataError::ScaleOverflow {
                column: encoded.encoding.feature_names[feature].clone(),
            });
        }
        let target_scaler = Scaler::fit(target_scale, encoded.y.view(), &s.train, &every_target);
        if target_scaler.first_overflow().is_some() {
            return Err(DataError::ScaleOverflow {
                column: settings.target.join(", "),
            });
        }
        Ok(Partition {
            scaler,
            target_scaler,
            train_rows: s.train,
            validation_rows: s.validation,
            test_rows: s.test,
        })
    })
    .collect::<Result<_, _>>()?;

    Ok(Prepared {
        encoding: encoded.encoding,
        x: encoded.x,
        y: encoded.y,
        labels: encoded.labels,
        lines: kept.iter().map(|&r| table.line(r)).collect(),
        rows_read,
        rows_dropped,
        partitions,
    })
}

/// Rows with no missing or non-finite value in a used column; with `Missing::Error`
/// the first other row is an error naming its line and column.
fn kept_rows(table: &Table, used: &UsedColumns, missing: Missing) -> Result<Vec<usize>, DataError> {
    // In file order, so the column named is the leftmost one a person would see.
    let mut checked: Vec<usize> = used.all().collect();
    checked.sort_unstable();
    // Whether each distinct text of each checked column is missing or not finite.
    let markers: Vec<(&CodedColumn, Vec<bool>)> = checked
        .iter()
        .map(|&c| {
            let column = table.coded(c);
            let gap = |text: &str| is_missing(text) || is_non_finite(text);
            (column, column.texts().map(gap).collect())
        })
        .collect();
    let first_missing = |row: usize| {
        markers
            .iter()
            .position(|(column, missing)| missing[column.code(row)])
            .map(|i| checked[i])
    };
    let (kept, with_missing): (Vec<usize>, Vec<usize>) =
        (0..table.row_count()).partition(|&row| first_missing(row).is_none());
    if missing == Missing::Error
        && let Some(&row) = with_missing.first()
    {
        let col = first_missing(row).expect("row was found to have a missing value");
        let (line, column) = (table.line(row), table.headers[col].clone());
        let value = table.cell(row, col).trim().to_string();
        let more_rows = with_missing.len() - 1;
        return Err(if is_non_finite(&value) {
            DataError::NonFinite {
                line,
                column,
                value,
                more_rows,
            }
        } else {
            DataError::MissingValue {
                line,
                column,
                value,
                more_rows,
            }
        });
    }
    Ok(kept)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::DEFAULT_MAX_CATEGORIES;
    use crate::data::settings::{Scale, Split};
    use crate::data::table::read_table;

    fn settings(target: &str) -> DataSettings {
        DataSettings {
            inputs: None,
            target: vec![target.to_string()],
            task: None,
            scale: Scale::Standard,
            missing: Missing::Error,
            split: Split::Holdout(0.0),
            validation: None,
            seed: 1,
            scale_target: None,
        }
    }

    const GAPS: &[u8] = b"a,b,y\n\
        1,p,0\n\
        ,p,1\n\
        3,NA,0\n\
        4,q,?\n\
        5,q,1\n";

    #[test]
    fn missing_error_names_first_line_column_and_how_many_more() {
        let err = prepare(
            &read_table(GAPS).unwrap(),
            &settings("y"),
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap_err();
        assert_eq!(
            err,
            DataError::MissingValue {
                line: 3,
                column: "a".into(),
                value: String::new(),
                more_rows: 2
            }
        );
        assert_eq!(
            err.to_string(),
            "line 3, column `a`: the value is missing (empty cell), and 2 more rows have \
             missing values; set `missing: drop` to drop rows with missing values"
        );
    }

    #[test]
    fn missing_error_names_the_leftmost_missing_column() {
        let s = DataSettings {
            inputs: Some(vec!["b".into(), "a".into()]),
            ..settings("y")
        };
        let t = read_table(b"a,b,y\n1,p,0\nNA,,1\n".as_slice()).unwrap();
        assert!(matches!(
            prepare(&t, &s, DEFAULT_MAX_CATEGORIES).unwrap_err(),
            DataError::MissingValue { line: 3, column, more_rows: 0, .. } if column == "a"
        ));
    }

    #[test]
    fn missing_drop_leaves_rows_out_and_counts_them() {
        let s = DataSettings {
            missing: Missing::Drop,
            ..settings("y")
        };
        let p = prepare(&read_table(GAPS).unwrap(), &s, DEFAULT_MAX_CATEGORIES).unwrap();
        assert_eq!((p.rows_read, p.rows_dropped), (5, 3));
        assert_eq!(p.lines, vec![2, 6]);
        assert_eq!(p.x, ndarray::array![[1.0, 1.0, 0.0], [5.0, 0.0, 1.0]]);
        assert_eq!(p.encoding.task, Task::Regress);
    }

    #[test]
    fn missing_values_in_unused_columns_do_not_count() {
        let s = DataSettings {
            inputs: Some(vec!["a".into()]),
            ..settings("b")
        };
        let t = read_table(b"a,b,notes\n1,x,\n2,y,?\n".as_slice()).unwrap();
        let p = prepare(&t, &s, DEFAULT_MAX_CATEGORIES).unwrap();
        assert_eq!(p.rows_dropped, 0);
        assert_eq!(p.encoding.classes, Some(vec!["x".into(), "y".into()]));
    }

    #[test]
    fn too_few_rows_after_dropping_is_an_error() {
        let s = DataSettings {
            missing: Missing::Drop,
            ..settings("y")
        };
        let t = read_table(b"x,y\n1,2\nNA,3\n".as_slice()).unwrap();
        let err = prepare(&t, &s, DEFAULT_MAX_CATEGORIES).unwrap_err();
        assert_eq!(
            err.to_string(),
            "too few rows: 1 left of 2 read (1 dropped for missing values); at least 2 are needed"
        );
        let header_only = read_table(b"x,y\n".as_slice()).unwrap();
        assert!(matches!(
            prepare(&header_only, &settings("y"), DEFAULT_MAX_CATEGORIES).unwrap_err(),
            DataError::TooFewRows {
                rows: 0,
                read: 0,
                ..
            }
        ));
    }

    #[test]
    fn scaler_is_fitted_on_training_rows_only() {
        // Regression folds of 4 rows in 2 folds: 2 training rows each.
        let t = read_table(b"x,y\n1,0\n2,0\n3,0\n10,0\n".as_slice()).unwrap();
        let s = DataSettings {
            split: Split::Folds(2),
            scale: Scale::Minmax,
            ..settings("y")
        };
        let p = prepare(&t, &s, DEFAULT_MAX_CATEGORIES).unwrap();
        for (i, part) in p.partitions.iter().enumerate() {
            let train: Vec<f64> = part.train_rows.iter().map(|&r| p.x[[r, 0]]).collect();
            let min = train.iter().copied().fold(f64::INFINITY, f64::min);
            let max = train.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            assert_eq!(part.scaler.offset, vec![min]);
            assert_eq!(part.scaler.divisor, vec![max - min]);
            let data = p.split(i);
            assert_eq!((data.x_train.nrows(), data.x_test.nrows()), (2, 2));
        }
    }

    #[test]
    fn split_selects_and_scales_partition_rows() {
        let t = read_table(b"x,c\n1,a\n2,b\n3,a\n4,b\n5,a\n6,b\n".as_slice()).unwrap();
        let s = DataSettings {
            split: Split::Holdout(0.34),
            ..settings("c")
        };
        let p = prepare(&t, &s, DEFAULT_MAX_CATEGORIES).unwrap();
        let part = &p.partitions[0];
        // round(0.34 · 3) = 1 test row per class.
        assert_eq!(p.class_counts(&part.test_rows), vec![1, 1]);
        assert_eq!(p.class_counts(&part.train_rows), vec![2, 2]);
        let data = p.split(0);
        for (i, &row) in part.test_rows.iter().enumerate() {
            let expected = (p.x[[row, 0]] - part.scaler.offset[0]) / part.scaler.divisor[0];
            assert_eq!(data.x_test[[i, 0]], expected);
            assert_eq!(data.y_test[[i, 0]], p.y[[row, 0]]);
        }
        // Standard scaling on the training rows gives them mean 0.
        assert!(data.x_train.column(0).sum().abs() < 1e-12);
    }

    #[test]
    fn class_counts_are_empty_for_regression() {
        let t = read_table(b"x,y\n1,2\n3,4\n".as_slice()).unwrap();
        let p = prepare(&t, &settings("y"), DEFAULT_MAX_CATEGORIES).unwrap();
        assert!(p.class_counts(&[0, 1]).is_empty());
    }

    #[test]
    fn prepared_round_trips_through_json() {
        let t = read_table(b"x,c\n1,a\n2,b\n3,a\n4,b\n".as_slice()).unwrap();
        let p = prepare(&t, &settings("c"), DEFAULT_MAX_CATEGORIES).unwrap();
        let json = serde_json::to_string(&p).unwrap();
        let back: Prepared = serde_json::from_str(&json).unwrap();
        assert_eq!(back, p);
    }
}
