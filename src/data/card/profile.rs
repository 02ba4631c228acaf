//! One column's statistics over every row the data step read.
//!
//! They are computed from the column's distinct texts and how often each occurs, not
//! cell by cell: a column repeats a few values over many rows (the reason
//! [`CodedColumn`] exists), so sorting for the median costs the distinct values, not
//! the rows.

use serde::{Deserialize, Serialize};

use crate::data::coded_column::CodedColumn;
use crate::data::encode::{is_missing, is_non_finite, parse_number};

/// Bars in a numeric column's histogram: enough to show a shape, few enough to draw
/// inline beside the numbers.
pub(crate) const HISTOGRAM_BINS: usize = 12;

/// Most common values listed for a text column.
pub(crate) const MOST_COMMON_SHOWN: usize = 3;

/// What a column is to the data step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Role {
    Input,
    Target,
}

/// A column's statistics over every row read.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct ColumnProfile {
    pub name: String,
    pub role: Role,
    /// Cells holding a usable value.
    pub count: usize,
    /// Cells without one: empty, a missing-value marker, a non-finite number, or (in a
    /// numeric column) text in a row that was dropped. `count + missing` is the rows read.
    pub missing: usize,
    /// Distinct values: numbers compared as numbers ("1" and "1.0" are one), texts
    /// without surrounding spaces.
    pub distinct: usize,
    pub values: Values,
}

/// The statistics that depend on the column's kind.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) enum Values {
    /// `None` when the column holds no number at all.
    Numeric(Option<NumericStats>),
    /// The most common texts with their counts, most common first (ties in text order).
    Text { most_common: Vec<(String, usize)> },
}

/// Summary statistics of a numeric column's values.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub(crate) struct NumericStats {
    pub min: f64,
    /// The middle value, or the mean of the two middle values for an even count
    /// (Hyndman and Fan's definition 7, numpy's default `linear` quantile method).
    pub median: f64,
    pub max: f64,
    pub mean: f64,
    /// Sample standard deviation (divided by n − 1); `None` for a single value.
    pub sd: Option<f64>,
    /// Values per bar, the bars equally wide from `min` to `max` (the last one closed).
    pub histogram: Vec<usize>,
    /// Whether every value is a whole number, for the identifier check.
    pub whole: bool,
}

/// The statistics of a column that the encoding reads as numbers.
pub(crate) fn numeric(column: &CodedColumn, name: &str, role: Role) -> ColumnProfile {
    let rows = occurrences(column);
    let mut values: Vec<(f64, usize)> = column
        .texts()
        .zip(rows)
        .filter_map(|(text, count)| Some((parse_number(text)?, count)))
        .filter(|&(_, count)| count > 0)
        .collect();
    values.sort_by(|a, b| a.0.total_cmp(&b.0));
    let merged = merge_equal(values);
    let count = merged.iter().map(|&(_, c)| c).sum();
    ColumnProfile {
        name: name.to_string(),
        role,
        count,
        missing: column.rows() - count,
        distinct: merged.len(),
        values: Values::Numeric(numeric_stats(&merged)),
    }
}

/// The statistics of a column the encoding reads as text (categories or classes).
pub(crate) fn text(column: &CodedColumn, name: &str, role: Role) -> ColumnProfile {
    let rows = occurrences(column);
    let mut values: Vec<(&str, usize)> = column
        .texts()
        .zip(rows)
        .filter(|&(text, count)| count > 0 && !is_missing(text) && !is_non_finite(text))
        .map(|(text, count)| (text.trim(), count))
        .collect();
    values.sort_by(|a, b| a.0.cmp(b.0));
    // Texts that differ only in surrounding spaces are one value, as in the encoding.
    let mut merged: Vec<(String, usize)> = Vec::new();
    for (text, count) in values {
        match merged.last_mut() {
            Some((last, total)) if last == text => *total += count,
            _ => merged.push((text.to_string(), count)),
        }
    }
    let count = merged.iter().map(|(_, c)| c).sum();
    let distinct = merged.len();
    merged.sort_by(|a, b| b.1.cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
    merged.truncate(MOST_COMMON_SHOWN);
    ColumnProfile {
        name: name.to_string(),
        role,
        count,
        missing: column.rows() - count,
        distinct,
        values: Values::Text {
            most_common: merged,
        },
    }
}

/// How many rows hold each distinct text, by code.
fn occurrences(column: &CodedColumn) -> Vec<usize> {
    let mut counts = vec![0; column.distinct()];
    for row in 0..column.rows() {
        counts[column.code(row)] += 1;
    }
    counts
}

/// Sorted (value, count) pairs with equal values joined.
fn merge_equal(sorted: Vec<(f64, usize)>) -> Vec<(f64, usize)> {
    let mut merged: Vec<(f64, usize)> = Vec::with_capacity(sorted.len());
    for (value, count) in sorted {
        match merged.last_mut() {
            Some((last, total)) if *last == value => *total += count,
            _ => merged.push((value, count)),
        }
    }
    merged
}

/// Statistics of sorted, distinct values with their counts.
fn numeric_stats(values: &[(f64, usize)]) -> Option<NumericStats> {
    let (&(min, _), &(max, _)) = (values.first()?, values.last()?);
    let n: usize = values.iter().map(|&(_, c)| c).sum();
    let mean = values.iter().map(|&(v, c)| v * c as f64).sum::<f64>() / n as f64;
    // Two passes (mean first), which keeps the rounding of a large mean out of the spread.
    let squares: f64 = values
        .iter()
        .map(|&(v, c)| (v - mean).powi(2) * c as f64)
        .sum();
    let sd = (n > 1).then(|| (squares / (n - 1) as f64).sqrt());
    let median = if n % 2 == 1 {
        nth(values, n / 2)
    } else {
        // Halved before adding, so two values near the largest double do not overflow;
        // halving is exact, so this equals (a + b) / 2 otherwise.
        nth(values, n / 2 - 1) / 2.0 + nth(values, n / 2) / 2.0
    };
    Some(NumericStats {
        min,
        median,
        max,
        mean,
        sd,
        histogram: histogram(values, min, max),
        whole: values.iter().all(|&(v, _)| v.fract() == 0.0),
    })
}

/// The value at 0-based position `index` of the sorted values, counts expanded.
fn nth(values: &[(f64, usize)], index: usize) -> f64 {
    let mut seen = 0;
    for &(value, count) in values {
        seen += count;
        if index < seen {
            return value;
        }
    }
    unreachable!("index {index} lies within the {seen} values")
}

/// Counts in [`HISTOGRAM_BINS`] equal bars from `min` to `max`; all in the first bar
/// when every value is the same.
fn histogram(values: &[(f64, usize)], min: f64, max: f64) -> Vec<usize> {
    let mut bars = vec![0; HISTOGRAM_BINS];
    let width = max - min;
    for &(value, count) in values {
        let bar = if width > 0.0 && width.is_finite() {
            ((value - min) / width * HISTOGRAM_BINS as f64) as usize
        } else {
            0
        };
        bars[bar.min(HISTOGRAM_BINS - 1)] += count;
    }
    bars
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::table::read_table;

    fn column(cells: &str) -> CodedColumn {
        let csv = format!("x\n{}\n", cells.replace(' ', "\n"));
        read_table(csv.as_bytes()).unwrap().coded(0).clone()
    }

    fn stats(profile: &ColumnProfile) -> &NumericStats {
        match &profile.values {
            Values::Numeric(Some(stats)) => stats,
            other => panic!("{other:?}"),
        }
    }

    // By hand: the values 1, 1, 2, 4, 7 (the "1.0" is 1), NA and ? missing. Mean 15/5 = 3,
    // squared deviations 4 + 4 + 1 + 1 + 16 = 26 over n − 1 = 4 gives 6.5.
    #[test]
    fn a_numeric_column_gives_its_statistics_over_the_values_present() {
        let p = numeric(&column("4 1 NA 7 1.0 ? 2"), "x", Role::Input);
        assert_eq!((p.count, p.missing, p.distinct), (5, 2, 4));
        let s = stats(&p);
        assert_eq!((s.min, s.median, s.max, s.mean), (1.0, 2.0, 7.0, 3.0));
        assert_eq!(s.sd, Some(6.5f64.sqrt()));
        assert!(s.whole);
        // Width (7 − 1) / 12 = 0.5: 1 in bar 0, 2 in bar 2, 4 in bar 6, 7 in the last.
        assert_eq!(s.histogram, vec![2, 0, 1, 0, 0, 0, 1, 0, 0, 0, 0, 1]);
    }

    #[test]
    fn an_even_count_takes_the_mean_of_the_two_middle_values() {
        let p = numeric(&column("3 1.5 10 2"), "x", Role::Input);
        assert_eq!(stats(&p).median, 2.5);
        assert!(!stats(&p).whole);
    }

    #[test]
    fn a_single_value_has_no_standard_deviation_and_one_bar() {
        let p = numeric(&column("5 NA"), "x", Role::Target);
        let s = stats(&p);
        assert_eq!((s.sd, s.median), (None, 5.0));
        assert_eq!(s.histogram[0], 1);
    }

    #[test]
    fn a_text_column_counts_trimmed_texts_and_lists_the_most_common() {
        let csv = "c\nb\n\" a\"\nc\na\nNA\nb\nd\nb\n";
        let table = read_table(csv.as_bytes()).unwrap();
        let p = text(table.coded(0), "c", Role::Target);
        assert_eq!((p.count, p.missing, p.distinct), (7, 1, 4));
        assert_eq!(
            p.values,
            Values::Text {
                most_common: vec![("b".into(), 3), ("a".into(), 2), ("c".into(), 1)]
            }
        );
    }
}
