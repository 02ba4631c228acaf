//! The data card as the report shows it: one row of statistics per column with a small
//! histogram, and each warning in words. The JSON summary takes its warning sentences
//! from here too, so the report and scripts read the same words.

use serde::Serialize;

use super::format::number;
use crate::build::outcome::DataSummary;
use crate::data::ColumnKind;
use crate::data::card::{
    ColumnProfile, DataWarning, FAR_FROM_MEAN_SDS, NumericStats, RARE_CLASS_SHARE, Role, Values,
};

/// The card's table and warnings.
#[derive(Serialize)]
pub(crate) struct CardView {
    pub columns: Vec<ProfileRow>,
    pub warnings: Vec<WarningLine>,
}

/// One column's row of statistics.
#[derive(Serialize)]
pub(crate) struct ProfileRow {
    pub name: String,
    pub role: &'static str,
    /// How the step reads it: numeric, text with its one-hot inputs, or the target.
    pub kind: String,
    pub count: usize,
    pub missing: usize,
    pub distinct: usize,
    /// Min, median, max, mean, sd, formatted; empty for text.
    pub numbers: Vec<String>,
    /// A text column's most common values with their counts, e.g. `north (14), east (13)`.
    pub most_common: String,
    /// Inline SVG; empty for text.
    pub histogram: String,
}

/// One warning: the column it names (none for whole rows) and the sentence.
#[derive(Serialize)]
pub(crate) struct WarningLine {
    pub column: Option<String>,
    pub text: String,
}

pub(crate) fn card_view(summary: &DataSummary) -> CardView {
    let columns = summary
        .card
        .columns
        .iter()
        .map(|profile| profile_row(profile, summary))
        .collect();
    let warnings = summary
        .card
        .warnings
        .iter()
        .map(|warning| WarningLine {
            column: warning.column().map(str::to_string),
            text: warning_text(warning),
        })
        .collect();
    CardView { columns, warnings }
}

fn profile_row(profile: &ColumnProfile, summary: &DataSummary) -> ProfileRow {
    let (numbers, most_common, histogram) = match &profile.values {
        Values::Numeric(Some(stats)) => (numeric_cells(stats), String::new(), svg(stats)),
        Values::Numeric(None) => (Vec::new(), String::new(), String::new()),
        Values::Text { most_common } => {
            let listed: Vec<String> = most_common
                .iter()
                .map(|(text, count)| format!("{text} ({count})"))
                .collect();
            (Vec::new(), listed.join(", "), String::new())
        }
    };
    ProfileRow {
        name: profile.name.clone(),
        role: match profile.role {
            Role::Input => "input",
            Role::Target => "target",
        },
        kind: kind(profile, summary),
        count: profile.count,
        missing: profile.missing,
        distinct: profile.distinct,
        numbers,
        most_common,
        histogram,
    }
}

/// How the data step reads the column, and whether it is the target.
fn kind(profile: &ColumnProfile, summary: &DataSummary) -> String {
    let input = summary.columns.iter().find(|c| c.name == profile.name);
    match (profile.role, input.map(|c| &c.kind), &summary.classes) {
        (Role::Input, Some(ColumnKind::Categorical { categories }), _) => {
            format!("text, {} one-hot inputs", categories.len())
        }
        (Role::Input, ..) => "numeric".to_string(),
        (Role::Target, _, Some(classes)) => format!("target, {} classes", classes.len()),
        (Role::Target, _, None) => "target, numeric".to_string(),
    }
}

fn numeric_cells(stats: &NumericStats) -> Vec<String> {
    let sd = stats.sd.map_or_else(|| "—".to_string(), number);
    vec![
        number(stats.min),
        number(stats.median),
        number(stats.max),
        number(stats.mean),
        sd,
    ]
}

/// Width and height of a histogram, in CSS pixels: the height of a table row.
const HISTOGRAM_SIZE: (usize, usize) = (60, 16);

/// The histogram as bars, tallest bar the full height; an empty bar is a hairline, so
/// gaps in the values show.
fn svg(stats: &NumericStats) -> String {
    let (width, height) = HISTOGRAM_SIZE;
    let bars = stats.histogram.len();
    let bar_width = width / bars;
    let tallest = stats.histogram.iter().copied().max().unwrap_or(0).max(1);
    let mut rects = String::new();
    for (i, &count) in stats.histogram.iter().enumerate() {
        let h = (count * height).div_ceil(tallest).max(1);
        let empty = if count == 0 { " class=\"empty\"" } else { "" };
        rects.push_str(&format!(
            "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{h}\"{empty}/>",
            i * bar_width,
            height - h,
            bar_width - 1,
        ));
    }
    format!(
        "<svg class=\"histogram\" width=\"{width}\" height=\"{height}\" viewBox=\"0 0 {width} \
         {height}\" role=\"img\" aria-label=\"histogram of {bars} equal bars from {} to {}\">{rects}</svg>",
        number(stats.min),
        number(stats.max),
    )
}

/// A warning in words: what was found, and why it matters.
pub(crate) fn warning_text(warning: &DataWarning) -> String {
    match warning {
        DataWarning::Constant {
            role: Role::Input,
            value,
            ..
        } => format!("every row read holds `{value}`: the column carries no information"),
        DataWarning::Constant {
            role: Role::Target,
            value,
            ..
        } => format!(
            "the target holds `{value}` on every row read: there is nothing to learn, and \
             R², which compares errors with the target's spread, means nothing here"
        ),
        DataWarning::IdentifierLike {
            distinct, count, ..
        } => format!(
            "{distinct} distinct values in {count} rows: most values occur on one row only, \
             like an identifier or free text, so what the model learns from it does not carry \
             over to new rows; consider listing `inputs:` without it"
        ),
        DataWarning::DuplicateRows { rows, example } => format!(
            "{} in every column used (line {} repeats line {}): repeated rows weigh more in \
             training and can land on both sides of the split",
            plural(
                *rows,
                "row repeats an earlier row",
                "rows repeat an earlier row"
            ),
            example.line,
            example.same_as,
        ),
        DataWarning::HeldOutInTraining { rows, example } => format!(
            "{} a training row in every column used (line {} equals line {}): possible \
             leakage, the held-out score partly measures memory of training rows",
            plural(*rows, "held-out row equals", "held-out rows equal"),
            example.line,
            example.same_as,
        ),
        DataWarning::SeparatesClasses { target, .. } => format!(
            "this input alone tells the classes of `{target}` apart on every row: possible \
             leakage (is it recorded after the outcome, or derived from it?)"
        ),
        DataWarning::CorrelatesWithTarget { target, r, .. } => format!(
            "correlation {} with the target `{target}`: this input alone nearly determines \
             it; possible leakage (is it derived from the target?)",
            number(*r),
        ),
        DataWarning::RareClass {
            class, rows, total, ..
        } => {
            let share = *rows as f64 / *total as f64;
            format!(
                "class `{class}` has {rows} of {total} rows ({}, under {}): a model that never \
                 predicts it still scores {} accuracy, so judge it by this class's recall in \
                 the confusion matrix",
                percent(share),
                percent(RARE_CLASS_SHARE),
                percent(1.0 - share),
            )
        }
        DataWarning::FarFromMean {
            values,
            farthest,
            line,
            sds,
            mean,
            sd,
            ..
        } => format!(
            "{} more than {FAR_FROM_MEAN_SDS} standard deviations from the training mean \
             ({} ± {}): the farthest, {} on line {line}, is {} standard deviations away; \
             check for a typing or unit error",
            plural(*values, "value lies", "values lie"),
            number(*mean),
            number(*sd),
            number(*farthest),
            number(*sds),
        ),
    }
}

fn plural(count: usize, one: &str, many: &str) -> String {
    format!("{count} {}", if count == 1 { one } else { many })
}

fn percent(share: f64) -> String {
    format!("{:.1} %", share * 100.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::data::card::SameRows;

    #[test]
    fn a_rare_class_says_what_accuracy_hides() {
        let warning = DataWarning::RareClass {
            column: "status".into(),
            class: "sick".into(),
            rows: 3,
            total: 40,
        };
        assert_eq!(
            warning_text(&warning),
            "class `sick` has 3 of 40 rows (7.5 %, under 10.0 %): a model that never predicts \
             it still scores 92.5 % accuracy, so judge it by this class's recall in the \
             confusion matrix"
        );
    }

    #[test]
    fn a_single_duplicate_row_is_named_in_the_singular() {
        let warning = DataWarning::DuplicateRows {
            rows: 1,
            example: SameRows {
                line: 9,
                same_as: 4,
            },
        };
        assert!(
            warning_text(&warning).starts_with("1 row repeats an earlier row in every column"),
            "{}",
            warning_text(&warning)
        );
    }
}
