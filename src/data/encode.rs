//! Turning text cells into the numeric matrices a network is fitted on.
//!
//! A column is numeric when every cell used parses as a finite number; any
//! other column is text. Text inputs are one-hot encoded with their categories
//! sorted, so the feature order does not depend on row order. Targets decide
//! the task when the settings leave it open: text means classification.
//!
//! The [`Encoding`] remembers every decision, so that new rows (to predict)
//! are encoded exactly like the rows the network learned from.

use std::ops::Range;

use ndarray::Array2;
use serde::{Deserialize, Serialize};

use super::coded_column::CodedColumn;
use super::columns::UsedColumns;
use super::error::DataError;
use super::settings::Task;
use super::table::Table;

/// Cell values that mean "no value", compared case-insensitively after
/// trimming whitespace: the empty cell, `?`, `NA`, `N/A` and `NaN`.
pub(crate) const MISSING_MARKERS: [&str; 5] = ["", "?", "NA", "N/A", "NaN"];

/// Whether a cell is one of the [`MISSING_MARKERS`].
pub(crate) fn is_missing(cell: &str) -> bool {
    let cell = cell.trim();
    MISSING_MARKERS.iter().any(|m| m.eq_ignore_ascii_case(cell))
}

/// Whether a cell reads as a number that is not finite: `inf`, `-Infinity`, or one too
/// large for a double (`1e999`). Such a cell is neither a value nor text to one-hot: it
/// is refused, or left out with the missing values under `missing: drop`.
pub(crate) fn is_non_finite(cell: &str) -> bool {
    !is_missing(cell) && cell.trim().parse::<f64>().is_ok_and(|v| !v.is_finite())
}

/// Most distinct texts a text input, or classes a target, may have unless
/// `--max-categories` says otherwise: one-hot encoding makes a feature of each, so a
/// column of identifiers would ask for rows × distinct numbers.
pub const DEFAULT_MAX_CATEGORIES: usize = 1000;

/// The cell as a finite number, or `None`. Infinities are not accepted: they
/// would turn every scaled value of their column into NaN.
pub(crate) fn parse_number(cell: &str) -> Option<f64> {
    cell.trim().parse::<f64>().ok().filter(|v| v.is_finite())
}

/// How one input column becomes features.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub enum ColumnKind {
    /// One feature: the number itself.
    Numeric,
    /// One 0/1 feature per category, in this (sorted) order.
    Categorical {
        /// The categories seen in the data, sorted.
        categories: Vec<String>,
    },
}

/// One input column and what was learned about it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct InputColumn {
    /// Column name in the table.
    pub(crate) name: String,
    /// Numeric or categorical.
    pub kind: ColumnKind,
    /// True when every row used for fitting (every kept row) has the same
    /// value: such a column carries no information, which the report can say.
    pub(crate) constant: bool,
}

impl InputColumn {
    /// How many features (columns of `x`) it becomes: one, or one per category.
    pub(crate) fn width(&self) -> usize {
        match &self.kind {
            ColumnKind::Numeric => 1,
            ColumnKind::Categorical { categories } => categories.len(),
        }
    }

    /// Names of this column's features: its own name, or `name=category` per category.
    fn feature_names(&self) -> Vec<String> {
        match &self.kind {
            ColumnKind::Numeric => vec![self.name.clone()],
            ColumnKind::Categorical { categories } => categories
                .iter()
                .map(|c| format!("{}={c}", self.name))
                .collect(),
        }
    }
}

/// The features of each of `columns` in the encoded matrix, in feature order: a
/// categorical column's one-hot features lie together.
pub(crate) fn feature_ranges(columns: &[InputColumn]) -> Vec<Range<usize>> {
    let mut start = 0;
    columns
        .iter()
        .map(|column| {
            start += column.width();
            start - column.width()..start
        })
        .collect()
}

/// Every decision made while encoding a table, enough to encode new rows the same way.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Encoding {
    /// Input columns in feature order.
    pub columns: Vec<InputColumn>,
    /// One name per feature column of `x`; one-hot features read `site=north`.
    pub feature_names: Vec<String>,
    /// The target columns, as named in the settings.
    pub(crate) target_names: Vec<String>,
    /// The task, as set or as deduced from the target.
    pub task: Task,
    /// Class labels, sorted (numerically when they are all numbers); classify only.
    pub classes: Option<Vec<String>>,
}

impl Encoding {
    /// Encode rows of another table (e.g. new rows to predict) with this
    /// encoding. Every input column must be present by name (the error lists
    /// all missing ones); other columns, targets included, are ignored. Cells
    /// must not be missing, numeric columns must hold numbers and categories
    /// must be known; errors name the line and column. The result is
    /// unscaled, like [`Prepared::x`](super::Prepared::x).
    pub fn encode_inputs(&self, table: &Table) -> Result<Array2<f64>, DataError> {
        let mut positions = Vec::with_capacity(self.columns.len());
        let mut missing = Vec::new();
        for column in &self.columns {
            match table.column(&column.name) {
                Some(p) => positions.push(p),
                None => missing.push(column.name.clone()),
            }
        }
        if !missing.is_empty() {
            return Err(DataError::MissingInputColumns {
                missing,
                available: table.headers.clone(),
            });
        }
        let rows: Vec<usize> = (0..table.row_count()).collect();
        encode_rows(table, &self.columns, &positions, &rows)
    }

    /// The columns of `table` that name its rows for a reader: neither an input nor a
    /// target, at most `count` of them, in file order.
    pub(crate) fn identifying_columns(&self, table: &Table, count: usize) -> Vec<usize> {
        let used = |name: &String| {
            self.columns.iter().any(|column| &column.name == name)
                || self.target_names.contains(name)
        };
        (0..table.headers.len())
            .filter(|&col| !used(&table.headers[col]))
            .take(count)
            .collect()
    }

    /// The targets of new rows (a labelled batch), encoded as the rows the network
    /// learned from; `None` when the table lacks a target column. A row whose target
    /// cell is missing, or (classify) holds a label outside the classes, is left out
    /// and counted; a regression target that is not a number is an error, as in the
    /// data step.
    pub(crate) fn encode_targets(&self, table: &Table) -> Result<Option<KnownTargets>, DataError> {
        let Some(positions) = self
            .target_names
            .iter()
            .map(|name| table.column(name))
            .collect::<Option<Vec<usize>>>()
        else {
            return Ok(None);
        };
        let columns: Vec<ParsedColumn> = positions
            .iter()
            .map(|&c| ParsedColumn::new(table, c))
            .collect();
        let mut known = KnownTargets::default();
        let mut values: Vec<f64> = Vec::new();
        for row in 0..table.row_count() {
            if columns.iter().any(|column| is_missing(column.value(row))) {
                known.empty_rows += 1;
                continue;
            }
            match &self.classes {
                Some(classes) => {
                    let label = columns[0].value(row);
                    match classes.iter().position(|class| class == label) {
                        Some(class) => {
                            known.rows.push(row);
                            values.push(class as f64);
                        }
                        None => known.count_unseen(label),
                    }
                }
                None => {
                    for (column, &col) in columns.iter().zip(&positions) {
                        values.push(column.number(row).ok_or_else(|| DataError::NotNumeric {
                            line: table.line(row),
                            column: table.headers[col].clone(),
                            value: column.value(row).to_string(),
                            reason: "because the task is `regress`",
                        })?);
                    }
                    known.rows.push(row);
                }
            }
        }
        known.y = match &self.classes {
            Some(classes) => {
                let labels: Vec<usize> = values.iter().map(|&class| class as usize).collect();
                one_hot_labels(&labels, classes.len())
            }
            None => Array2::from_shape_vec((known.rows.len(), positions.len()), values)
                .expect("one value per target column of each kept row"),
        };
        Ok(Some(known))
    }

    /// Whether each feature is a numeric column (true) or a one-hot indicator
    /// (false): the mask [`Scaler::fit`](super::scale::Scaler::fit) expects.
    pub(crate) fn numeric_mask(&self) -> Vec<bool> {
        self.columns
            .iter()
            .flat_map(|c| match &c.kind {
                ColumnKind::Numeric => vec![true],
                ColumnKind::Categorical { categories } => vec![false; categories.len()],
            })
            .collect()
    }
}

/// The targets of a labelled batch of new rows, as [`Encoding::encode_targets`] reads them.
#[derive(Clone, Debug, Default, PartialEq)]
pub(crate) struct KnownTargets {
    /// Rows with a usable target, in table order.
    pub rows: Vec<usize>,
    /// Their targets as the network learned them: values in the targets' own units, or
    /// classes one-hot (one 0/1 column for two).
    pub y: Array2<f64>,
    /// Rows whose target cell is missing.
    pub empty_rows: usize,
    /// Labels outside the model's classes, each with its row count, in order of first
    /// appearance.
    pub unseen_labels: Vec<(String, usize)>,
}

impl KnownTargets {
    fn count_unseen(&mut self, label: &str) {
        match self
            .unseen_labels
            .iter_mut()
            .find(|(seen, _)| seen == label)
        {
            Some((_, rows)) => *rows += 1,
            None => self.unseen_labels.push((label.to_string(), 1)),
        }
    }
}

/// The result of fitting an encoding to the kept rows of a table.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct Encoded {
    /// The decisions made.
    pub encoding: Encoding,
    /// Unscaled inputs, one row per kept row.
    pub x: Array2<f64>,
    /// Targets, one row per kept row.
    pub y: Array2<f64>,
    /// Class index per kept row (classify only).
    pub labels: Option<Vec<usize>>,
}

/// Learn the encoding from the `kept` rows (none of which has a missing value
/// in a used column) and encode them.
pub(super) fn fit(
    table: &Table,
    used: &UsedColumns,
    kept: &[usize],
    requested: Option<Task>,
    max_categories: usize,
) -> Result<Encoded, DataError> {
    let columns: Vec<InputColumn> = used
        .inputs
        .iter()
        .map(|&c| describe_input(table, c, kept, max_categories))
        .collect::<Result<_, _>>()?;
    let x = encode_rows(table, &columns, &used.inputs, kept)?;
    let target_names: Vec<String> = used
        .targets
        .iter()
        .map(|&c| table.headers[c].clone())
        .collect();

    let text_target = used.targets.iter().any(|&c| {
        let column = ParsedColumn::new(table, c);
        kept.iter().any(|&r| column.number(r).is_none())
    });
    let task = requested.unwrap_or(if text_target {
        Task::Classify
    } else {
        Task::Regress
    });

    let (y, classes, labels) = match task {
        Task::Regress => (regress_targets(table, &used.targets, kept)?, None, None),
        Task::Classify => {
            if used.targets.len() != 1 {
                return Err(DataError::ClassifyNeedsOneTarget {
                    count: target_names.len(),
                    targets: target_names,
                    implied: requested.is_none(),
                });
            }
            let (classes, labels) = class_labels(table, used.targets[0], kept, max_categories)?;
            (
                one_hot_labels(&labels, classes.len()),
                Some(classes),
                Some(labels),
            )
        }
    };

    let feature_names = columns
        .iter()
        .flat_map(InputColumn::feature_names)
        .collect();
    Ok(Encoded {
        encoding: Encoding {
            columns,
            feature_names,
            target_names,
            task,
            classes,
        },
        x,
        y,
        labels,
    })
}

/// Encode the `rows` of `table`, reading input `columns[i]` from table column
/// `positions[i]`.
fn encode_rows(
    table: &Table,
    columns: &[InputColumn],
    positions: &[usize],
    rows: &[usize],
) -> Result<Array2<f64>, DataError> {
    let width = columns.iter().map(InputColumn::width).sum();
    // Each distinct text of a column is looked at once; rows then only look up codes.
    let features: Vec<(ParsedColumn, Vec<Feature>)> = columns
        .iter()
        .zip(positions)
        .map(|(column, &pos)| {
            let parsed = ParsedColumn::new(table, pos);
            let features = parsed
                .values
                .iter()
                .map(|v| Feature::of(v, column))
                .collect();
            (parsed, features)
        })
        .collect();
    let mut x = Array2::zeros((rows.len(), width));
    for (out, &row) in rows.iter().enumerate() {
        let mut first = 0;
        for (column, (parsed, features)) in columns.iter().zip(&features) {
            let code = parsed.column.code(row);
            match features[code] {
                Feature::Number(value) => {
                    x[[out, first]] = value;
                    first += 1;
                }
                Feature::Category { index, count } => {
                    x[[out, first + index]] = 1.0;
                    first += count;
                }
                Feature::Missing => {
                    return Err(DataError::MissingInput {
                        line: table.line(row),
                        column: column.name.clone(),
                        value: parsed.values[code].to_string(),
                    });
                }
                Feature::NotNumeric => {
                    return Err(DataError::NotNumeric {
                        line: table.line(row),
                        column: column.name.clone(),
                        value: parsed.values[code].to_string(),
                        reason: "because the column was numeric in the training data",
                    });
                }
                Feature::UnknownCategory => {
                    let ColumnKind::Categorical { categories } = &column.kind else {
                        unreachable!("only a categorical column has categories")
                    };
                    return Err(DataError::UnknownCategory {
                        line: table.line(row),
                        column: column.name.clone(),
                        value: parsed.values[code].to_string(),
                        known: categories.clone(),
                    });
                }
            }
        }
    }
    Ok(x)
}

/// What one distinct text of an input column becomes.
#[derive(Clone, Copy, Debug)]
enum Feature {
    /// The value of a numeric column's feature.
    Number(f64),
    /// A one-hot feature among the column's `count`.
    Category {
        index: usize,
        count: usize,
    },
    Missing,
    NotNumeric,
    UnknownCategory,
}

impl Feature {
    /// The feature the trimmed text `value` gives in `column`.
    fn of(value: &str, column: &InputColumn) -> Feature {
        if is_missing(value) {
            return Feature::Missing;
        }
        match &column.kind {
            ColumnKind::Numeric => parse_number(value).map_or(Feature::NotNumeric, Feature::Number),
            ColumnKind::Categorical { categories } => categories
                .iter()
                .position(|c| c == value)
                .map_or(Feature::UnknownCategory, |index| Feature::Category {
                    index,
                    count: categories.len(),
                }),
        }
    }
}

/// A table column's distinct texts, trimmed, each parsed as a number once.
struct ParsedColumn<'t> {
    column: &'t CodedColumn,
    /// Per code: the text without surrounding whitespace.
    values: Vec<&'t str>,
    /// Per code: the text as a finite number, if it is one.
    numbers: Vec<Option<f64>>,
}

impl<'t> ParsedColumn<'t> {
    fn new(table: &'t Table, col: usize) -> ParsedColumn<'t> {
        let column = table.coded(col);
        let values: Vec<&str> = column.texts().map(str::trim).collect();
        let numbers = values.iter().map(|v| parse_number(v)).collect();
        ParsedColumn {
            column,
            values,
            numbers,
        }
    }

    /// Row `row`'s trimmed text.
    fn value(&self, row: usize) -> &'t str {
        self.values[self.column.code(row)]
    }

    /// Row `row`'s number, if its text is one.
    fn number(&self, row: usize) -> Option<f64> {
        self.numbers[self.column.code(row)]
    }

    /// The distinct trimmed texts of `rows`, in byte order.
    fn sorted_distinct(&self, rows: &[usize]) -> Vec<String> {
        let mut seen = vec![false; self.values.len()];
        for &row in rows {
            seen[self.column.code(row)] = true;
        }
        let mut distinct: Vec<String> = self
            .values
            .iter()
            .zip(seen)
            .filter(|(_, seen)| *seen)
            .map(|(value, _)| value.to_string())
            .collect();
        distinct.sort();
        // Two texts that differ only in surrounding spaces trim to one value.
        distinct.dedup();
        distinct
    }
}

/// Share of number cells above which an input column is taken to be numeric with a
/// stray bad cell (a typo, a unit written in), rather than a text column to one-hot.
const MOSTLY_NUMERIC: f64 = 0.8;

/// Decide the kind of input column `col` from the kept rows. A column that is mostly
/// numbers with a few text cells is an error naming the first such cell: one-hot
/// encoding it would silently turn a measurement into hundreds of categories.
fn describe_input(
    table: &Table,
    col: usize,
    kept: &[usize],
    max_categories: usize,
) -> Result<InputColumn, DataError> {
    let column = ParsedColumn::new(table, col);
    let numeric = kept.iter().filter(|&&r| column.number(r).is_some()).count();
    let (kind, constant) = if numeric == kept.len() {
        // Compare as numbers, so "1" and "1.0" count as the same value.
        let mut numbers = kept.iter().map(|&r| column.number(r));
        let first = numbers.next().flatten();
        (ColumnKind::Numeric, numbers.all(|n| n == first))
    } else {
        if numeric as f64 >= MOSTLY_NUMERIC * kept.len() as f64 {
            let row = *kept
                .iter()
                .find(|&&r| column.number(r).is_none())
                .expect("some cell is not a number");
            return Err(DataError::NotNumeric {
                line: table.line(row),
                column: table.headers[col].clone(),
                value: column.value(row).to_string(),
                reason: "because the rest of the column is numbers",
            });
        }
        let categories = column.sorted_distinct(kept);
        // Checked before the rows × categories matrix is made.
        if categories.len() > max_categories {
            return Err(DataError::TooManyCategories {
                column: table.headers[col].clone(),
                distinct: categories.len(),
                limit: max_categories,
            });
        }
        let constant = categories.len() <= 1;
        (ColumnKind::Categorical { categories }, constant)
    };
    Ok(InputColumn {
        name: table.headers[col].clone(),
        kind,
        constant,
    })
}

/// Numeric targets for regression; a text cell is an error naming its line.
fn regress_targets(
    table: &Table,
    targets: &[usize],
    kept: &[usize],
) -> Result<Array2<f64>, DataError> {
    let columns: Vec<ParsedColumn> = targets
        .iter()
        .map(|&c| ParsedColumn::new(table, c))
        .collect();
    let mut y = Array2::zeros((kept.len(), targets.len()));
    for (out, &row) in kept.iter().enumerate() {
        for (j, (&col, column)) in targets.iter().zip(&columns).enumerate() {
            y[[out, j]] = column.number(row).ok_or_else(|| DataError::NotNumeric {
                line: table.line(row),
                column: table.headers[col].clone(),
                value: column.value(row).to_string(),
                reason: "because the task is `regress`",
            })?;
        }
    }
    Ok(y)
}

/// Sorted class labels of the target column and each kept row's class index.
fn class_labels(
    table: &Table,
    col: usize,
    kept: &[usize],
    max_categories: usize,
) -> Result<(Vec<String>, Vec<usize>), DataError> {
    let column = ParsedColumn::new(table, col);
    let mut classes = column.sorted_distinct(kept);
    if classes.len() > max_categories {
        return Err(DataError::TooManyClasses {
            column: table.headers[col].clone(),
            distinct: classes.len(),
            limit: max_categories,
        });
    }
    if kept.iter().all(|&r| column.number(r).is_some()) {
        // Numeric labels sort by value ("2" before "10"); equal values written
        // differently stay distinct classes, ordered by their text.
        let value = |s: &str| parse_number(s).expect("checked to be a number above");
        classes.sort_by(|a, b| value(a).total_cmp(&value(b)).then_with(|| a.cmp(b)));
    }
    if classes.len() < 2 {
        return Err(DataError::SingleClass {
            column: table.headers[col].clone(),
            class: classes.into_iter().next().unwrap_or_default(),
        });
    }
    // Each distinct text's class, found once; texts of rows not kept have none.
    let class_of: Vec<Option<usize>> = column
        .values
        .iter()
        .map(|v| classes.iter().position(|c| c == v))
        .collect();
    let labels = kept
        .iter()
        .map(|&r| {
            class_of[column.column.code(r)]
                .expect("every kept value is among the classes built from the kept values")
        })
        .collect();
    Ok((classes, labels))
}

/// Two classes: one 0/1 column (1 = class 1). More: one indicator column per class.
fn one_hot_labels(labels: &[usize], n_classes: usize) -> Array2<f64> {
    if n_classes == 2 {
        Array2::from_shape_fn((labels.len(), 1), |(i, _)| labels[i] as f64)
    } else {
        Array2::from_shape_fn((labels.len(), n_classes), |(i, j)| {
            f64::from(u8::from(labels[i] == j))
        })
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn a_categorical_input_spans_one_feature_per_category() {
        let column = |name: &str, kind| super::InputColumn {
            name: name.into(),
            kind,
            constant: false,
        };
        let columns = [
            column("x", super::ColumnKind::Numeric),
            column(
                "site",
                super::ColumnKind::Categorical {
                    categories: vec!["a".into(), "b".into(), "c".into()],
                },
            ),
            column("z", super::ColumnKind::Numeric),
        ];
        assert_eq!(super::feature_ranges(&columns), vec![0..1, 1..4, 4..5]);
    }

    #[test]
    fn a_stray_text_cell_in_a_numeric_column_names_its_line_and_column() {
        let mut csv = String::from("temp_c,status\n");
        for i in 0..9 {
            csv.push_str(&format!(
                "{}.5,{}\n",
                30 + i,
                if i % 2 == 0 { "a" } else { "b" }
            ));
        }
        csv.push_str("35x,b\n");
        let table = super::super::read_table(csv.as_bytes()).unwrap();
        let settings = super::super::DataSettings {
            inputs: None,
            target: vec!["status".into()],
            task: None,
            scale: super::super::Scale::Standard,
            missing: super::super::Missing::Error,
            split: super::super::Split::Holdout(0.2),
            validation: None,
            seed: 1,
            scale_target: None,
        };
        let error = super::super::prepare(&table, &settings, super::super::DEFAULT_MAX_CATEGORIES)
            .unwrap_err()
            .to_string();
        assert_eq!(
            error,
            "line 11, column `temp_c`: expected a number because the rest of the column is numbers, found `35x`"
        );
    }

    use super::*;
    use crate::data::columns;
    use crate::data::table::read_table;

    fn used(table: &Table, inputs: &[&str], targets: &[&str]) -> UsedColumns {
        let names = |n: &[&str]| n.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        UsedColumns {
            inputs: columns::find_all(table, &names(inputs), "input").unwrap(),
            targets: columns::find_all(table, &names(targets), "target").unwrap(),
        }
    }

    fn all_rows(table: &Table) -> Vec<usize> {
        (0..table.row_count()).collect()
    }

    const HIVES: &[u8] = b"site,temp_c,status\n\
        north,35.0,healthy\n\
        south, 31.5 ,queenless\n\
        east,34.0,swarming\n\
        north,36.5,healthy\n";

    #[test]
    fn missing_markers_are_recognised_ignoring_case_and_spaces() {
        for cell in ["", "  ", "?", "NA", "na", "N/A", "NaN", "nan", " NA "] {
            assert!(is_missing(cell), "{cell:?}");
        }
        for cell in ["0", "none", "-", "NAN1"] {
            assert!(!is_missing(cell), "{cell:?}");
        }
    }

    #[test]
    fn numbers_parse_trimmed_and_finite_only() {
        assert_eq!(parse_number(" 2.5 "), Some(2.5));
        assert_eq!(parse_number("-1e3"), Some(-1000.0));
        assert_eq!(parse_number("inf"), None);
        assert_eq!(parse_number("1,5"), None);
    }

    #[test]
    fn text_inputs_are_one_hot_encoded_with_sorted_categories() {
        let t = read_table(HIVES).unwrap();
        let e = fit(
            &t,
            &used(&t, &["site", "temp_c"], &["status"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        assert_eq!(
            e.encoding.columns[0].kind,
            ColumnKind::Categorical {
                categories: vec!["east".into(), "north".into(), "south".into()]
            }
        );
        assert_eq!(e.encoding.columns[1].kind, ColumnKind::Numeric);
        assert_eq!(
            e.encoding.feature_names,
            vec!["site=east", "site=north", "site=south", "temp_c"]
        );
        assert_eq!(e.encoding.numeric_mask(), vec![false, false, false, true]);
        let expected = ndarray::array![
            [0.0, 1.0, 0.0, 35.0],
            [0.0, 0.0, 1.0, 31.5],
            [1.0, 0.0, 0.0, 34.0],
            [0.0, 1.0, 0.0, 36.5],
        ];
        assert_eq!(e.x, expected);
    }

    #[test]
    fn text_target_means_classify_with_sorted_classes_and_one_hot_y() {
        let t = read_table(HIVES).unwrap();
        let e = fit(
            &t,
            &used(&t, &["temp_c"], &["status"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        assert_eq!(e.encoding.task, Task::Classify);
        assert_eq!(
            e.encoding.classes,
            Some(vec![
                "healthy".into(),
                "queenless".into(),
                "swarming".into()
            ])
        );
        assert_eq!(e.labels, Some(vec![0, 1, 2, 0]));
        assert_eq!(
            e.y,
            ndarray::array![
                [1.0, 0.0, 0.0],
                [0.0, 1.0, 0.0],
                [0.0, 0.0, 1.0],
                [1.0, 0.0, 0.0]
            ]
        );
    }

    #[test]
    fn two_classes_give_a_single_zero_one_column() {
        let t = read_table(b"x,ok\n1,yes\n2,no\n3,yes\n".as_slice()).unwrap();
        let e = fit(
            &t,
            &used(&t, &["x"], &["ok"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        assert_eq!(e.encoding.classes, Some(vec!["no".into(), "yes".into()]));
        assert_eq!(e.y, ndarray::array![[1.0], [0.0], [1.0]]);
    }

    #[test]
    fn numeric_target_classes_sort_by_value() {
        let t = read_table(b"x,grade\n1,10\n2,2\n3,1\n4,2\n5,10\n".as_slice()).unwrap();
        let e = fit(
            &t,
            &used(&t, &["x"], &["grade"]),
            &all_rows(&t),
            Some(Task::Classify),
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        // Text order would be "1", "10", "2".
        assert_eq!(
            e.encoding.classes,
            Some(vec!["1".into(), "2".into(), "10".into()])
        );
        assert_eq!(e.labels, Some(vec![2, 1, 0, 1, 2]));
    }

    #[test]
    fn numeric_target_means_regress() {
        let t = read_table(b"a,b,y1,y2\n1,2,0.5,7\n3,4,1.5,8\n".as_slice()).unwrap();
        let e = fit(
            &t,
            &used(&t, &["a", "b"], &["y1", "y2"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        assert_eq!(e.encoding.task, Task::Regress);
        assert_eq!(e.encoding.classes, None);
        assert_eq!(e.labels, None);
        assert_eq!(e.y, ndarray::array![[0.5, 7.0], [1.5, 8.0]]);
    }

    #[test]
    fn text_target_with_regress_names_line_and_column() {
        let t = read_table(b"x,y\n1,2.0\n2,3.5\n3,high\n".as_slice()).unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["y"]),
            &all_rows(&t),
            Some(Task::Regress),
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap_err();
        assert_eq!(
            err.to_string(),
            "line 4, column `y`: expected a number because the task is `regress`, found `high`"
        );
    }

    #[test]
    fn classify_with_two_targets_is_an_error() {
        let t = read_table(b"x,a,b\n1,p,q\n2,r,s\n".as_slice()).unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["a", "b"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap_err();
        assert!(matches!(
            err,
            DataError::ClassifyNeedsOneTarget {
                count: 2,
                implied: true,
                ..
            }
        ));
        // Said explicitly, the message must not claim the task was deduced.
        let t = read_table(b"x,a,b\n1,1,2\n2,3,4\n".as_slice()).unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["a", "b"]),
            &all_rows(&t),
            Some(Task::Classify),
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap_err();
        assert_eq!(
            err.to_string(),
            "classification predicts a single target column, but 2 were given (a, b)"
        );
    }

    #[test]
    fn single_class_is_an_error() {
        let t = read_table(b"x,y\n1,a\n2,a\n".as_slice()).unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["y"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap_err();
        assert_eq!(
            err,
            DataError::SingleClass {
                column: "y".into(),
                class: "a".into()
            }
        );
    }

    #[test]
    fn constant_columns_are_flagged() {
        let t = read_table(b"a,b,c,y\n1,k,1,0\n1.0,k,2,1\n1,k,3,0\n".as_slice()).unwrap();
        let e = fit(
            &t,
            &used(&t, &["a", "b", "c"], &["y"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        let constant: Vec<bool> = e.encoding.columns.iter().map(|c| c.constant).collect();
        assert_eq!(constant, vec![true, true, false]);
    }

    #[test]
    fn kind_and_categories_come_from_kept_rows_only() {
        // Row 1 (line 3) is left out, so `a` is numeric and `b` has no "zz".
        let t = read_table(b"a,b,y\n1,p,0\nx,zz,1\n3,q,1\n".as_slice()).unwrap();
        let e = fit(
            &t,
            &used(&t, &["a", "b"], &["y"]),
            &[0, 2],
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap();
        assert_eq!(e.encoding.feature_names, vec!["a", "b=p", "b=q"]);
        assert_eq!(e.x, ndarray::array![[1.0, 1.0, 0.0], [3.0, 0.0, 1.0]]);
    }

    fn site_encoding() -> Encoding {
        let t = read_table(HIVES).unwrap();
        fit(
            &t,
            &used(&t, &["site", "temp_c"], &["status"]),
            &all_rows(&t),
            None,
            DEFAULT_MAX_CATEGORIES,
        )
        .unwrap()
        .encoding
    }

    #[test]
    fn new_rows_are_encoded_by_name_without_targets() {
        let new = read_table(b"temp_c,extra,site\n33,zz,south\n35.5,zz,east\n".as_slice()).unwrap();
        let x = site_encoding().encode_inputs(&new).unwrap();
        assert_eq!(
            x,
            ndarray::array![[0.0, 0.0, 1.0, 33.0], [1.0, 0.0, 0.0, 35.5]]
        );
    }

    #[test]
    fn new_rows_missing_columns_are_all_listed() {
        let new = read_table(b"other\n1\n".as_slice()).unwrap();
        let err = site_encoding().encode_inputs(&new).unwrap_err();
        assert_eq!(
            err,
            DataError::MissingInputColumns {
                missing: vec!["site".into(), "temp_c".into()],
                available: vec!["other".into()]
            }
        );
        assert!(
            err.to_string().contains("columns `site`, `temp_c`"),
            "{err}"
        );
    }

    #[test]
    fn new_rows_with_unknown_category_name_line_and_column() {
        let new = read_table(b"site,temp_c\nnorth,35\nwest,34\n".as_slice()).unwrap();
        let err = site_encoding().encode_inputs(&new).unwrap_err();
        assert_eq!(
            err.to_string(),
            "line 3, column `site`: `west` is not a category seen in the training data; \
             known categories are: east, north, south"
        );
    }

    #[test]
    fn new_rows_with_missing_or_text_numbers_are_errors() {
        let new = read_table(b"site,temp_c\nnorth,35\nnorth,NA\n".as_slice()).unwrap();
        assert_eq!(
            site_encoding().encode_inputs(&new).unwrap_err(),
            DataError::MissingInput {
                line: 3,
                column: "temp_c".into(),
                value: "NA".into()
            }
        );
        let new = read_table(b"site,temp_c\nnorth,warm\n".as_slice()).unwrap();
        assert!(matches!(
            site_encoding().encode_inputs(&new).unwrap_err(),
            DataError::NotNumeric { line: 2, column, .. } if column == "temp_c"
        ));
    }
}
