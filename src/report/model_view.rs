//! Views of the steps that use a trained model: predictions and the export.

use serde::Serialize;

use super::format::number;
use super::view::{
    ConfusionView, MetricRow, confusion_table, interval_cell, log_loss_repeats_loss,
};
use crate::build::outcome::{BatchScores, PredictResult, PredictScore, SetMetrics};
use crate::document::spec::ExportFormat;
use crate::export::ExportResult;
use crate::judge::Scores;

/// Rows a predict card shows; the written CSV has them all.
const SHOWN_ROWS: usize = 50;

#[derive(Serialize)]
pub(crate) struct PredictView {
    /// Whether rows have a predicted class label (classification) besides the values.
    pub labelled: bool,
    /// The headings of the columns that name each row: its identifying columns, or
    /// "line" when the file has none.
    pub row_names: Vec<String>,
    pub output_names: Vec<String>,
    pub rows: Vec<PredictRow>,
    pub total: usize,
    pub shown: usize,
    /// The rows whose target the file gives, scored; `None` without a target column.
    pub scored: Option<BatchView>,
}

#[derive(Serialize)]
pub(crate) struct PredictRow {
    /// The cells that name the row: its identifying cells, or its line.
    pub names: Vec<String>,
    pub predicted: String,
    pub values: Vec<String>,
}

/// A labelled batch: its scores, and the reason for every row or score left out.
#[derive(Serialize)]
pub(crate) struct BatchView {
    /// `None` when no row could be scored.
    pub scores: Option<BatchScoresView>,
    pub reasons: Vec<String>,
}

/// A labelled batch's scores, laid out as the train card lays out its held-out rows'.
#[derive(Serialize)]
pub(crate) struct BatchScoresView {
    /// How many rows were scored, and in which units.
    pub caption: String,
    pub metric_names: Vec<String>,
    /// The scores, then their 95 % intervals when the rows carry them.
    pub rows: Vec<MetricRow>,
    pub confusion: Option<ConfusionView>,
    /// Regression with several targets: each target's scores.
    pub targets: Vec<TargetRow>,
}

#[derive(Serialize)]
pub(crate) struct TargetRow {
    pub target: String,
    pub values: Vec<String>,
}

pub(crate) fn predict_view(
    result: &PredictResult,
    classes: Option<&[String]>,
    targets: &[String],
) -> PredictView {
    let rows: Vec<PredictRow> = result
        .lines
        .iter()
        .enumerate()
        .zip(&result.predicted)
        .zip(&result.outputs)
        .take(SHOWN_ROWS)
        .map(|(((row, line), predicted), values)| PredictRow {
            names: match result.identifiers.get(row) {
                Some(cells) if !cells.is_empty() => cells.clone(),
                _ => vec![line.to_string()],
            },
            predicted: predicted.clone(),
            values: values.iter().map(|v| number(*v)).collect(),
        })
        .collect();
    PredictView {
        labelled: result.labelled,
        row_names: if result.identifier_names.is_empty() {
            vec!["line".into()]
        } else {
            result.identifier_names.clone()
        },
        output_names: result.output_names.clone(),
        shown: rows.len(),
        rows,
        total: result.lines.len(),
        scored: result
            .scored
            .as_ref()
            .map(|scored| batch_view(scored, classes, targets)),
    }
}

/// What a labelled batch's scores say, with the reason for every row or score left out.
fn batch_view(scored: &PredictScore, classes: Option<&[String]>, targets: &[String]) -> BatchView {
    let mut reasons = left_out(scored, targets);
    let Some(scores) = &scored.scores else {
        reasons.insert(0, "No row could be scored.".into());
        return BatchView {
            scores: None,
            reasons,
        };
    };
    if scores.intervals.is_none() {
        reasons.push(NO_INTERVAL_REASON.into());
    }
    let (metric_names, rows) = metric_table(scores);
    let (confusion, loss_units) = match &scores.metrics {
        SetMetrics::Classification { metrics, .. } => (
            classes.map(|labels| confusion_table(&metrics.confusion, labels, "the scored rows")),
            "",
        ),
        SetMetrics::Regression { .. } => (
            None,
            "; the loss in the scaled units training saw, the rest in the targets' own units",
        ),
    };
    BatchView {
        scores: Some(BatchScoresView {
            caption: format!(
                "{} whose {} the file gives, scored like held-out rows{loss_units}",
                rows_text(scored.rows),
                targets.join(", ")
            ),
            metric_names,
            rows,
            confusion,
            targets: target_rows(&scores.targets, targets),
        }),
        reasons,
    }
}

/// The metric names and rows of a batch's table: the train card's held-out metrics
/// (log loss left out when it is the loss again), then their intervals.
fn metric_table(scores: &BatchScores) -> (Vec<String>, Vec<MetricRow>) {
    let hide_log_loss = log_loss_repeats_loss(&scores.metrics);
    let shown: Vec<(&str, f64)> = scores
        .metrics
        .named()
        .into_iter()
        .filter(|(name, _)| !(hide_log_loss && *name == "log_loss"))
        .collect();
    let mut rows = vec![MetricRow {
        rows: "scored rows",
        values: shown.iter().map(|(_, v)| number(*v)).collect(),
    }];
    if let Some(intervals) = &scores.intervals {
        let interval_of = |name: &str| {
            // Shown as "loss", the log loss carries its interval.
            let name = if hide_log_loss && name == "loss" {
                "log_loss"
            } else {
                name
            };
            interval_cell(intervals, name)
        };
        rows.push(MetricRow {
            rows: "95 % interval",
            values: shown.iter().map(|(name, _)| interval_of(name)).collect(),
        });
    }
    let names = shown
        .iter()
        .map(|(name, _)| name.replace('_', " "))
        .collect();
    (names, rows)
}

/// Why the scored rows carry no interval: there is one.
const NO_INTERVAL_REASON: &str = "No 95 % interval: it needs at least two scored rows.";

/// Each target's scores, when there are several (one target's are the table's).
fn target_rows(scores: &[Scores], targets: &[String]) -> Vec<TargetRow> {
    if scores.len() < 2 {
        return Vec::new();
    }
    scores
        .iter()
        .zip(targets)
        .map(|(target_scores, target)| TargetRow {
            target: target.clone(),
            values: target_scores
                .named()
                .iter()
                .map(|(_, v)| number(*v))
                .collect(),
        })
        .collect()
}

/// Why rows of a labelled batch were predicted but not scored.
fn left_out(scored: &PredictScore, targets: &[String]) -> Vec<String> {
    let mut reasons = Vec::new();
    if scored.empty_rows > 0 {
        reasons.push(format!(
            "{} with an empty {} cell predicted but not scored.",
            rows_text(scored.empty_rows),
            targets.join(" or ")
        ));
    }
    if !scored.unseen_labels.is_empty() {
        let listed: Vec<String> = scored
            .unseen_labels
            .iter()
            .map(|(label, rows)| format!("{label} ({})", rows_text(*rows)))
            .collect();
        reasons.push(format!(
            "Labels the model never saw: {}; those rows were predicted but not scored.",
            listed.join(", ")
        ));
    }
    reasons
}

fn rows_text(rows: usize) -> String {
    if rows == 1 {
        "1 row".into()
    } else {
        format!("{rows} rows")
    }
}

#[derive(Serialize)]
pub(crate) struct ExportView {
    pub bytes: usize,
    pub layers: usize,
    /// The file format's name as people write it.
    pub format: &'static str,
    /// Whether the file lists class labels (a classifier's export).
    pub classes: bool,
}

/// The written file's size is that of the bytes the build wrote, stamped with the
/// same document hash.
pub(crate) fn export_view(result: &ExportResult, document_hash: &str) -> ExportView {
    ExportView {
        bytes: result.file(document_hash).len(),
        layers: result.model.network.layers.len(),
        format: match result.format {
            ExportFormat::Json => "JSON",
            ExportFormat::Onnx => "ONNX",
        },
        classes: result.model.classes.is_some(),
    }
}
