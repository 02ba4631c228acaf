//! Everything that can go wrong while reading and preparing a data set.
//!
//! The messages are shown to the person who wrote the experiment document, so
//! each one names the file line, column or setting at fault and what was
//! expected instead.

use thiserror::Error;

/// Why a table could not be read or prepared.
#[derive(Clone, Debug, PartialEq, Error)]
pub enum DataError {
    /// The file has no header row at all.
    #[error("the CSV file is empty: expected a header row naming the columns")]
    EmptyFile,

    /// The file could not be read at all.
    #[error("the file could not be read: {message}")]
    Read {
        /// The operating system's description.
        message: String,
    },

    /// A column holds more distinct values than a table can number.
    #[error(
        "line {line}, column `{column}`: the column holds more than 2^32 distinct values, \
         more than stet can read"
    )]
    TooManyDistinct {
        /// 1-based line in the file of the value that did not fit.
        line: u64,
        /// The column.
        column: String,
    },

    /// A line holds bytes that are not UTF-8 text.
    #[error("line {line} is not valid UTF-8 text: save the CSV file as UTF-8")]
    InvalidUtf8 {
        /// 1-based line in the file.
        line: u64,
    },

    /// A row has a different number of cells from the header row.
    #[error(
        "line {line} has {found} cells but the header row names {expected} columns: \
         every row needs one cell per column (quote cells that contain commas)"
    )]
    RaggedRow {
        /// 1-based line in the file.
        line: u64,
        /// Cells found on that line.
        found: usize,
        /// Columns in the header row.
        expected: usize,
    },

    /// The CSV reader itself rejected the input.
    #[error("line {line}: the CSV file could not be read: {message}")]
    Csv {
        /// 1-based line in the file.
        line: u64,
        /// The CSV reader's own description.
        message: String,
    },

    /// A header cell is empty, so the column cannot be referred to.
    #[error("column {column} has no name in the header row: give every column a name")]
    EmptyHeader {
        /// 1-based position of the column.
        column: usize,
    },

    /// Two header cells carry the same name, so a name would be ambiguous.
    #[error("columns {first} and {second} are both named `{name}`: column names must be unique")]
    DuplicateHeader {
        /// The repeated name.
        name: String,
        /// 1-based position of its first use.
        first: usize,
        /// 1-based position of its second use.
        second: usize,
    },

    /// The settings name a column the table does not have.
    #[error(
        "{role} column `{name}` is not in the table{}; the columns are: {}",
        suggestion.as_ref().map(|s| format!(" (did you mean `{s}`?)")).unwrap_or_default(),
        available.join(", ")
    )]
    UnknownColumn {
        /// What the column was asked for as: "input" or "target".
        role: &'static str,
        /// The name as written in the settings.
        name: String,
        /// The nearest existing column name, if any is close.
        suggestion: Option<String>,
        /// Every column of the table.
        available: Vec<String>,
    },

    /// The same column is named twice in the inputs or in the targets.
    #[error("column `{name}` is listed twice among the {role} columns")]
    RepeatedColumn {
        /// "input" or "target".
        role: &'static str,
        /// The repeated name.
        name: String,
    },

    /// A column is both a target and an input: the model would be given the answer.
    #[error("column `{name}` is a target and cannot also be an input")]
    TargetInInputs {
        /// The column named in both lists.
        name: String,
    },

    /// No target column was given.
    #[error("no target column given: name the column to predict")]
    NoTarget,

    /// No input column is left to learn from.
    #[error(
        "there are no input columns: the table has no column besides the targets, \
         or the inputs list is empty"
    )]
    NoInputs,

    /// Classification was asked for (or implied by a text target) with several targets.
    #[error(
        "classification predicts a single target column, but {count} were given ({}){}",
        targets.join(", "),
        if *implied { "; the task is classification because a target holds text" } else { "" }
    )]
    ClassifyNeedsOneTarget {
        /// The target columns given.
        targets: Vec<String>,
        /// How many were given.
        count: usize,
        /// True when the task was not set but deduced from a text target.
        implied: bool,
    },

    /// A text input has more distinct values than it may have one-hot features.
    #[error(
        "column `{column}` holds {distinct} distinct texts, over the limit of {limit} \
         categories: one-hot encoding makes a feature of each. It looks like an identifier \
         or free text; list `inputs:` without it (or raise the limit with --max-categories)"
    )]
    TooManyCategories {
        /// The input column.
        column: String,
        /// Its distinct texts in the rows used.
        distinct: usize,
        /// `--max-categories`.
        limit: usize,
    },

    /// A target to classify has more classes than the limit allows.
    #[error(
        "target `{column}` holds {distinct} distinct classes, over the limit of {limit}: \
         is it the column to predict? (raise the limit with --max-categories)"
    )]
    TooManyClasses {
        /// The target column.
        column: String,
        /// Its distinct classes in the rows used.
        distinct: usize,
        /// `--max-categories`.
        limit: usize,
    },

    /// A used cell reads as an infinite number and `missing: error` is set.
    #[error(
        "line {line}, column `{column}`: `{value}` is not a finite number{}; \
         write a finite value, or set `missing: drop` to leave such rows out",
        if *more_rows > 0 { format!(", and {more_rows} more rows have missing or non-finite values") } else { String::new() }
    )]
    NonFinite {
        /// 1-based line in the file of the first row with a missing or non-finite value.
        line: u64,
        /// The column.
        column: String,
        /// The cell as written (trimmed).
        value: String,
        /// Further rows that also have a missing or non-finite value in a used column.
        more_rows: usize,
    },

    /// Fitting the scaling overflowed: the values are too large for double precision.
    #[error(
        "column `{column}`: its values are too large to scale (the scaling's sums \
         overflow double precision); rescale the column in the file, e.g. into other units"
    )]
    ScaleOverflow {
        /// The feature whose offset or divisor is not finite.
        column: String,
    },

    /// `scale_target` is set but the target holds text, so the step classifies.
    #[error(
        "column `{column}` holds text, so this data step classifies and scale_target \
         (which scales regression targets) does not apply; remove scale_target"
    )]
    ScaleTargetOnClasses {
        /// The target column.
        column: String,
    },

    /// A used cell is empty or holds a missing-value marker and `missing: error` is set.
    #[error(
        "line {line}, column `{column}`: the value is missing ({}){}; \
         set `missing: drop` to drop rows with missing values",
        if value.is_empty() { "empty cell".to_string() } else { format!("`{value}`") },
        if *more_rows > 0 { format!(", and {more_rows} more rows have missing values") } else { String::new() }
    )]
    MissingValue {
        /// 1-based line in the file of the first such row.
        line: u64,
        /// Column of the first missing cell on that line.
        column: String,
        /// The cell as written (trimmed).
        value: String,
        /// Further rows that also have a missing value in a used column.
        more_rows: usize,
    },

    /// A new row to encode has a missing input value.
    #[error(
        "line {line}, column `{column}`: the value is missing ({}); \
         every input is needed to make a prediction",
        if value.is_empty() { "empty cell".to_string() } else { format!("`{value}`") }
    )]
    MissingInput {
        /// 1-based line in the file.
        line: u64,
        /// The column.
        column: String,
        /// The cell as written (trimmed).
        value: String,
    },

    /// A cell that must be a number is not one.
    #[error("line {line}, column `{column}`: expected a number {reason}, found `{value}`")]
    NotNumeric {
        /// 1-based line in the file.
        line: u64,
        /// The column.
        column: String,
        /// The cell as written (trimmed).
        value: String,
        /// Why a number is needed here, e.g. "because the task is regress".
        reason: &'static str,
    },

    /// A category in new rows that the training data never showed.
    #[error(
        "line {line}, column `{column}`: `{value}` is not a category seen in the training data; \
         known categories are: {}",
        known.join(", ")
    )]
    UnknownCategory {
        /// 1-based line in the file.
        line: u64,
        /// The column.
        column: String,
        /// The cell as written (trimmed).
        value: String,
        /// The categories the encoding knows.
        known: Vec<String>,
    },

    /// New rows lack input columns the encoding needs.
    #[error(
        "the table lacks input column{} {} needed by the model; its columns are: {}",
        if missing.len() == 1 { "" } else { "s" },
        missing.iter().map(|m| format!("`{m}`")).collect::<Vec<_>>().join(", "),
        available.join(", ")
    )]
    MissingInputColumns {
        /// Every input column that is absent.
        missing: Vec<String>,
        /// The columns the table does have.
        available: Vec<String>,
    },

    /// The target holds a single class, so there is nothing to tell apart.
    #[error(
        "target `{column}` has a single class (`{class}`) in the rows used: \
         classification needs at least two classes"
    )]
    SingleClass {
        /// The target column.
        column: String,
        /// Its only value.
        class: String,
    },

    /// The holdout fraction is outside [0, 1).
    #[error(
        "holdout fraction {value} is out of range: expected a number from 0 (no test rows) \
         up to but not including 1"
    )]
    HoldoutOutOfRange {
        /// The fraction given.
        value: f64,
    },

    /// The validation fraction is outside (0, 1).
    #[error("validation fraction {value} is out of range: expected a number above 0 and below 1")]
    ValidationOutOfRange {
        /// The fraction given.
        value: f64,
    },

    /// Setting validation rows aside would leave a class (or, regressing, the
    /// partition) with no training row.
    #[error(
        "validation {fraction} takes all {count} training rows of {}, leaving none to train on: \
         use a smaller validation fraction{}",
        class.as_ref().map_or("the partition".to_string(), |class| format!("class `{class}`")),
        if *count == 1 { " or a smaller holdout" } else { "" }
    )]
    ValidationLeavesNoTraining {
        /// The validation fraction given.
        fraction: f64,
        /// The class left without training rows; `None` when regressing.
        class: Option<String>,
        /// Its training rows before validation rows were set aside.
        count: usize,
    },

    /// Fewer than two folds were asked for.
    #[error("{folds} folds asked for: cross-validation needs at least 2 folds")]
    TooFewFolds {
        /// The number of folds given.
        folds: usize,
    },

    /// More folds than the smallest class has rows, so some fold would miss that class.
    #[error(
        "{folds} folds asked for, but class `{class}` has only {count} rows: \
         each fold must hold out at least one row of every class, so use at most {count} folds"
    )]
    FoldsExceedClass {
        /// The number of folds given.
        folds: usize,
        /// The smallest class.
        class: String,
        /// Its number of rows.
        count: usize,
    },

    /// More folds than rows (regression).
    #[error("{folds} folds asked for, but only {rows} rows are left: use at most {rows} folds")]
    FoldsExceedRows {
        /// The number of folds given.
        folds: usize,
        /// Rows left after dropping missing values.
        rows: usize,
    },

    /// Too few rows are left to fit and evaluate anything.
    #[error(
        "too few rows: {rows} left of {read} read{}; at least {needed} are needed",
        if *dropped > 0 { format!(" ({dropped} dropped for missing values)") } else { String::new() }
    )]
    TooFewRows {
        /// Rows left.
        rows: usize,
        /// Rows read from the file.
        read: usize,
        /// Rows dropped for missing values.
        dropped: usize,
        /// The minimum.
        needed: usize,
    },
}
