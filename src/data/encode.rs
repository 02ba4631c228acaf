//! Turning text cells into the numeric matrices a network is fitted on.
//!
//! A column is numeric when every cell used parses as a finite number; any
//! other column is text. Text inputs are one-hot encoded with their categories
//! sorted, so the feature order does not depend on row order. Targets decide
//! the task when the settings leave it open: text means classification.
//!
//! The [`Encoding`] remembers every decision, so that new rows (to predict)
//! are encoded exactly like the rows the network learned from.

use ndarray::Array2;
use serde::{Deserialize, Serialize};

use super::columns::UsedColumns;
use super::error::DataError;
use super::settings::Task;
use super::table::Table;

/// Cell values that mean "no value", compared case-insensitively after
/// trimming whitespace: the empty cell, `?`, `NA`, `N/A` and `NaN`.
pub const MISSING_MARKERS: [&str; 5] = ["", "?", "NA", "N/A", "NaN"];

/// Whether a cell is one of the [`MISSING_MARKERS`].
pub fn is_missing(cell: &str) -> bool {
    let cell = cell.trim();
    MISSING_MARKERS.iter().any(|m| m.eq_ignore_ascii_case(cell))
}

/// The cell as a finite number, or `None`. Infinities are not accepted: they
/// would turn every scaled value of their column into NaN.
pub fn parse_number(cell: &str) -> Option<f64> {
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
    pub name: String,
    /// Numeric or categorical.
    pub kind: ColumnKind,
    /// True when every row used for fitting (every kept row) has the same
    /// value: such a column carries no information, which the report can say.
    pub constant: bool,
}

impl InputColumn {
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

/// Every decision made while encoding a table, enough to encode new rows the same way.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Encoding {
    /// Input columns in feature order.
    pub columns: Vec<InputColumn>,
    /// One name per feature column of `x`; one-hot features read `site=north`.
    pub feature_names: Vec<String>,
    /// The target columns, as named in the settings.
    pub target_names: Vec<String>,
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
        let rows: Vec<usize> = (0..table.rows.len()).collect();
        encode_rows(table, &self.columns, &positions, &rows)
    }

    /// Whether each feature is a numeric column (true) or a one-hot indicator
    /// (false): the mask [`Scaler::fit`](super::Scaler::fit) expects.
    pub fn numeric_mask(&self) -> Vec<bool> {
        self.columns
            .iter()
            .flat_map(|c| match &c.kind {
                ColumnKind::Numeric => vec![true],
                ColumnKind::Categorical { categories } => vec![false; categories.len()],
            })
            .collect()
    }

    /// One name per column of `y`: the target names for regression, the
    /// target name for two classes (the column is 1 for `classes[1]`), and
    /// `target=class` per class otherwise.
    pub fn output_names(&self) -> Vec<String> {
        match &self.classes {
            Some(classes) if classes.len() > 2 => classes
                .iter()
                .map(|c| format!("{}={c}", self.target_names[0]))
                .collect(),
            _ => self.target_names.clone(),
        }
    }
}

/// The result of fitting an encoding to the kept rows of a table.
#[derive(Clone, Debug, PartialEq)]
pub struct Encoded {
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
pub fn fit(
    table: &Table,
    used: &UsedColumns,
    kept: &[usize],
    requested: Option<Task>,
) -> Result<Encoded, DataError> {
    let columns: Vec<InputColumn> = used
        .inputs
        .iter()
        .map(|&c| describe_input(table, c, kept))
        .collect::<Result<_, _>>()?;
    let x = encode_rows(table, &columns, &used.inputs, kept)?;
    let target_names: Vec<String> = used
        .targets
        .iter()
        .map(|&c| table.headers[c].clone())
        .collect();

    let text_target = used.targets.iter().any(|&c| {
        kept.iter()
            .any(|&r| parse_number(cell(table, r, c)).is_none())
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
            let (classes, labels) = class_labels(table, used.targets[0], kept)?;
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
    let width = columns
        .iter()
        .map(|c| match &c.kind {
            ColumnKind::Numeric => 1,
            ColumnKind::Categorical { categories } => categories.len(),
        })
        .sum();
    let mut x = Array2::zeros((rows.len(), width));
    for (out, &row) in rows.iter().enumerate() {
        let mut feature = 0;
        for (column, &pos) in columns.iter().zip(positions) {
            let value = cell(table, row, pos).trim();
            if is_missing(value) {
                return Err(DataError::MissingInput {
                    line: table.line(row),
                    column: column.name.clone(),
                    value: value.to_string(),
                });
            }
            match &column.kind {
                ColumnKind::Numeric => {
                    x[[out, feature]] =
                        parse_number(value).ok_or_else(|| DataError::NotNumeric {
                            line: table.line(row),
                            column: column.name.clone(),
                            value: value.to_string(),
                            reason: "because the column was numeric in the training data",
                        })?;
                    feature += 1;
                }
                ColumnKind::Categorical { categories } => {
                    let index = categories.iter().position(|c| c == value).ok_or_else(|| {
                        DataError::UnknownCategory {
                            line: table.line(row),
                            column: column.name.clone(),
                            value: value.to_string(),
                            known: categories.clone(),
                        }
                    })?;
                    x[[out, feature + index]] = 1.0;
                    feature += categories.len();
                }
            }
        }
    }
    Ok(x)
}

/// Share of number cells above which an input column is taken to be numeric with a
/// stray bad cell (a typo, a unit written in), rather than a text column to one-hot.
const MOSTLY_NUMERIC: f64 = 0.8;

/// Decide the kind of input column `col` from the kept rows. A column that is mostly
/// numbers with a few text cells is an error naming the first such cell: one-hot
/// encoding it would silently turn a measurement into hundreds of categories.
fn describe_input(table: &Table, col: usize, kept: &[usize]) -> Result<InputColumn, DataError> {
    let values: Vec<&str> = kept.iter().map(|&r| cell(table, r, col).trim()).collect();
    let numbers: Option<Vec<f64>> = values.iter().map(|v| parse_number(v)).collect();
    if numbers.is_none() {
        let numeric = values.iter().filter(|v| parse_number(v).is_some()).count();
        if numeric as f64 >= MOSTLY_NUMERIC * values.len() as f64 {
            let (row, value) = kept
                .iter()
                .zip(&values)
                .find(|(_, v)| parse_number(v).is_none())
                .expect("some cell is not a number");
            return Err(DataError::NotNumeric {
                line: table.line(*row),
                column: table.headers[col].clone(),
                value: value.to_string(),
                reason: "because the rest of the column is numbers",
            });
        }
    }
    let (kind, constant) = match numbers {
        Some(numbers) => {
            // Compare as numbers, so "1" and "1.0" count as the same value.
            let constant = numbers.windows(2).all(|w| w[0] == w[1]);
            (ColumnKind::Numeric, constant)
        }
        None => {
            let categories = sorted_distinct(&values);
            let constant = categories.len() <= 1;
            (ColumnKind::Categorical { categories }, constant)
        }
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
    let mut y = Array2::zeros((kept.len(), targets.len()));
    for (out, &row) in kept.iter().enumerate() {
        for (j, &col) in targets.iter().enumerate() {
            let value = cell(table, row, col).trim();
            y[[out, j]] = parse_number(value).ok_or_else(|| DataError::NotNumeric {
                line: table.line(row),
                column: table.headers[col].clone(),
                value: value.to_string(),
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
) -> Result<(Vec<String>, Vec<usize>), DataError> {
    let values: Vec<&str> = kept.iter().map(|&r| cell(table, r, col).trim()).collect();
    let mut classes = sorted_distinct(&values);
    if values.iter().all(|v| parse_number(v).is_some()) {
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
    let labels = values
        .iter()
        .map(|v| {
            classes
                .iter()
                .position(|c| c == v)
                .expect("every value is among the classes built from the same values")
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

/// Distinct values in byte order.
fn sorted_distinct(values: &[&str]) -> Vec<String> {
    let mut distinct: Vec<String> = values.iter().map(|v| v.to_string()).collect();
    distinct.sort();
    distinct.dedup();
    distinct
}

/// The cell, or "" for a hand-built row that is too short (and so reads as missing).
pub fn cell(table: &Table, row: usize, col: usize) -> &str {
    table.rows[row].get(col).map_or("", String::as_str)
}

#[cfg(test)]
mod tests {
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
            seed: 1,
        };
        let error = super::super::prepare(&table, &settings)
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
        (0..table.rows.len()).collect()
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
        let e = fit(&t, &used(&t, &["temp_c"], &["status"]), &all_rows(&t), None).unwrap();
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
        assert_eq!(
            e.encoding.output_names(),
            vec!["status=healthy", "status=queenless", "status=swarming"]
        );
    }

    #[test]
    fn two_classes_give_a_single_zero_one_column() {
        let t = read_table(b"x,ok\n1,yes\n2,no\n3,yes\n").unwrap();
        let e = fit(&t, &used(&t, &["x"], &["ok"]), &all_rows(&t), None).unwrap();
        assert_eq!(e.encoding.classes, Some(vec!["no".into(), "yes".into()]));
        assert_eq!(e.y, ndarray::array![[1.0], [0.0], [1.0]]);
        assert_eq!(e.encoding.output_names(), vec!["ok"]);
    }

    #[test]
    fn numeric_target_classes_sort_by_value() {
        let t = read_table(b"x,grade\n1,10\n2,2\n3,1\n4,2\n5,10\n").unwrap();
        let e = fit(
            &t,
            &used(&t, &["x"], &["grade"]),
            &all_rows(&t),
            Some(Task::Classify),
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
        let t = read_table(b"a,b,y1,y2\n1,2,0.5,7\n3,4,1.5,8\n").unwrap();
        let e = fit(
            &t,
            &used(&t, &["a", "b"], &["y1", "y2"]),
            &all_rows(&t),
            None,
        )
        .unwrap();
        assert_eq!(e.encoding.task, Task::Regress);
        assert_eq!(e.encoding.classes, None);
        assert_eq!(e.labels, None);
        assert_eq!(e.y, ndarray::array![[0.5, 7.0], [1.5, 8.0]]);
        assert_eq!(e.encoding.output_names(), vec!["y1", "y2"]);
    }

    #[test]
    fn text_target_with_regress_names_line_and_column() {
        let t = read_table(b"x,y\n1,2.0\n2,3.5\n3,high\n").unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["y"]),
            &all_rows(&t),
            Some(Task::Regress),
        )
        .unwrap_err();
        assert_eq!(
            err.to_string(),
            "line 4, column `y`: expected a number because the task is `regress`, found `high`"
        );
    }

    #[test]
    fn classify_with_two_targets_is_an_error() {
        let t = read_table(b"x,a,b\n1,p,q\n2,r,s\n").unwrap();
        let err = fit(&t, &used(&t, &["x"], &["a", "b"]), &all_rows(&t), None).unwrap_err();
        assert!(matches!(
            err,
            DataError::ClassifyNeedsOneTarget {
                count: 2,
                implied: true,
                ..
            }
        ));
        // Said explicitly, the message must not claim the task was deduced.
        let t = read_table(b"x,a,b\n1,1,2\n2,3,4\n").unwrap();
        let err = fit(
            &t,
            &used(&t, &["x"], &["a", "b"]),
            &all_rows(&t),
            Some(Task::Classify),
        )
        .unwrap_err();
        assert_eq!(
            err.to_string(),
            "classification predicts a single target column, but 2 were given (a, b)"
        );
    }

    #[test]
    fn single_class_is_an_error() {
        let t = read_table(b"x,y\n1,a\n2,a\n").unwrap();
        let err = fit(&t, &used(&t, &["x"], &["y"]), &all_rows(&t), None).unwrap_err();
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
        let t = read_table(b"a,b,c,y\n1,k,1,0\n1.0,k,2,1\n1,k,3,0\n").unwrap();
        let e = fit(&t, &used(&t, &["a", "b", "c"], &["y"]), &all_rows(&t), None).unwrap();
        let constant: Vec<bool> = e.encoding.columns.iter().map(|c| c.constant).collect();
        assert_eq!(constant, vec![true, true, false]);
    }

    #[test]
    fn kind_and_categories_come_from_kept_rows_only() {
        // Row 1 (line 3) is left out, so `a` is numeric and `b` has no "zz".
        let t = read_table(b"a,b,y\n1,p,0\nx,zz,1\n3,q,1\n").unwrap();
        let e = fit(&t, &used(&t, &["a", "b"], &["y"]), &[0, 2], None).unwrap();
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
        )
        .unwrap()
        .encoding
    }

    #[test]
    fn new_rows_are_encoded_by_name_without_targets() {
        let new = read_table(b"temp_c,extra,site\n33,zz,south\n35.5,zz,east\n").unwrap();
        let x = site_encoding().encode_inputs(&new).unwrap();
        assert_eq!(
            x,
            ndarray::array![[0.0, 0.0, 1.0, 33.0], [1.0, 0.0, 0.0, 35.5]]
        );
    }

    #[test]
    fn new_rows_missing_columns_are_all_listed() {
        let new = read_table(b"other\n1\n").unwrap();
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
        let new = read_table(b"site,temp_c\nnorth,35\nwest,34\n").unwrap();
        let err = site_encoding().encode_inputs(&new).unwrap_err();
        assert_eq!(
            err.to_string(),
            "line 3, column `site`: `west` is not a category seen in the training data; \
             known categories are: east, north, south"
        );
    }

    #[test]
    fn new_rows_with_missing_or_text_numbers_are_errors() {
        let new = read_table(b"site,temp_c\nnorth,35\nnorth,NA\n").unwrap();
        assert_eq!(
            site_encoding().encode_inputs(&new).unwrap_err(),
            DataError::MissingInput {
                line: 3,
                column: "temp_c".into(),
                value: "NA".into()
            }
        );
        let new = read_table(b"site,temp_c\nnorth,warm\n").unwrap();
        assert!(matches!(
            site_encoding().encode_inputs(&new).unwrap_err(),
            DataError::NotNumeric { line: 2, column, .. } if column == "temp_c"
        ));
    }
}
