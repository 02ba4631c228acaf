//! The comparison as plain text for a terminal: one block per matched step, its changed
//! settings and metrics in aligned columns, then the steps added and removed. The only
//! styling is bold step headings, and only when asked for (a terminal), so piped output
//! is plain text.

use serde_json::{Map, Value};

use super::{Change, Combination, Comparison, MetricMove, SettingChange, StepDiff};
use crate::report::format::number;

/// The lines `stet diff` prints; with `colour`, step headings in bold.
pub(crate) fn lines(comparison: &Comparison, colour: bool) -> Vec<String> {
    let mut lines = vec![
        format!("old: {}", comparison.old),
        format!("new: {}", comparison.new),
    ];
    if !comparison.matched_any() {
        lines.push("no step matched: the two builds share no step id".into());
    }
    for step in &comparison.steps {
        lines.push(String::new());
        lines.extend(step_lines(step, colour));
    }
    if !comparison.added.is_empty() || !comparison.removed.is_empty() {
        lines.push(String::new());
    }
    if !comparison.added.is_empty() {
        lines.push(format!("steps added: {}", comparison.added.join(", ")));
    }
    if !comparison.removed.is_empty() {
        lines.push(format!("steps removed: {}", comparison.removed.join(", ")));
    }
    lines
}

fn step_lines(step: &StepDiff, colour: bool) -> Vec<String> {
    let heading = format!("{} {}", step.kind, step.id);
    let mut lines = vec![if colour {
        format!("\u{1b}[1m{heading}\u{1b}[0m")
    } else {
        heading
    }];
    lines.push(format!("  status: {}", status(&step.status)));
    if step.settings.is_empty() {
        lines.push("  settings unchanged".into());
    } else {
        lines.push("  settings:".into());
        let rows = step.settings.iter().map(setting_cells).collect();
        lines.extend(aligned(rows, "    ", &[false, false, false, false]));
    }
    lines.extend(metric_table(&step.metrics, "  "));
    if let Some(combinations) = &step.combinations {
        for combination in &combinations.matched {
            lines.extend(combination_lines(combination));
        }
        for (word, list) in [
            ("added", &combinations.added),
            ("removed", &combinations.removed),
        ] {
            for settings in list {
                lines.push(format!("  combination {word}: {}", settings_text(settings)));
            }
        }
    }
    lines
}

fn combination_lines(combination: &Combination) -> Vec<String> {
    let mut lines = vec![format!(
        "  combination {}: {}",
        settings_text(&combination.settings),
        status(&combination.status)
    )];
    lines.extend(metric_table(&combination.metrics, "    "));
    lines
}

/// `old → new`, or the one word when it did not change.
pub(crate) fn status(change: &Change<String>) -> String {
    if change.old == change.new {
        change.new.clone()
    } else {
        format!("{} → {}", change.old, change.new)
    }
}

/// A combination's settings as `name=value` pairs.
pub(crate) fn settings_text(settings: &Map<String, Value>) -> String {
    settings
        .iter()
        .map(|(name, value)| format!("{name}={}", value_text(value)))
        .collect::<Vec<_>>()
        .join(" ")
}

/// A setting's value as written in JSON, strings without quotes, absent as a dash.
pub(crate) fn value_text(value: &Value) -> String {
    match value {
        Value::Null => "—".into(),
        Value::String(text) => text.clone(),
        other => other.to_string(),
    }
}

/// A changed setting as cells: name, old, arrow, new.
pub(crate) fn setting_cells(change: &SettingChange) -> Vec<String> {
    vec![
        change.name.clone(),
        value_text(&change.old),
        "→".into(),
        value_text(&change.new),
    ]
}

/// The header of a metric table.
pub(crate) const METRIC_HEADER: [&str; 6] = ["rows", "metric", "old", "new", "difference", ""];

/// A metric's move as cells under `METRIC_HEADER`.
pub(crate) fn metric_cells(metric: &MetricMove) -> Vec<String> {
    let optional = |value: Option<f64>| value.map_or_else(|| "—".into(), number);
    let difference = match metric.difference {
        Some(difference) if difference > 0.0 => format!("+{}", number(difference)),
        other => optional(other),
    };
    let note = match metric.within_new_interval {
        Some(true) => "within the new interval",
        Some(false) => "outside the new interval",
        None => "",
    };
    vec![
        metric.rows.clone(),
        metric.name.clone(),
        optional(metric.old),
        optional(metric.new),
        difference,
        note.into(),
    ]
}

fn metric_table(metrics: &[MetricMove], indent: &str) -> Vec<String> {
    if metrics.is_empty() {
        return Vec::new();
    }
    let mut rows = vec![METRIC_HEADER.iter().map(|s| s.to_string()).collect()];
    rows.extend(metrics.iter().map(metric_cells));
    aligned(rows, indent, &[false, false, true, true, true, false])
}

/// Rows padded into columns (right-aligned where `right`), trailing spaces trimmed.
fn aligned(rows: Vec<Vec<String>>, indent: &str, right: &[bool]) -> Vec<String> {
    let columns = rows.iter().map(Vec::len).max().unwrap_or(0);
    let widths: Vec<usize> = (0..columns)
        .map(|column| {
            rows.iter()
                .filter_map(|row| row.get(column))
                .map(|cell| cell.chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    rows.iter()
        .map(|row| {
            let cells: Vec<String> = row
                .iter()
                .zip(&widths)
                .zip(right)
                .map(|((cell, &width), &right)| {
                    if right {
                        format!("{cell:>width$}")
                    } else {
                        format!("{cell:<width$}")
                    }
                })
                .collect();
            format!("{indent}{}", cells.join("  "))
                .trim_end()
                .to_string()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn columns_line_up_whatever_the_widths() {
        let rows = vec![
            vec!["test".to_string(), "accuracy".into(), "0.9".into()],
            vec!["train".to_string(), "loss".into(), "0.01234".into()],
        ];
        assert_eq!(
            aligned(rows, "  ", &[false, false, true]),
            ["  test   accuracy      0.9", "  train  loss      0.01234"]
        );
    }
}
