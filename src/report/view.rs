//! Step results turned into plain, already-formatted views for the templates, so the
//! templates hold layout only and every string they print is escaped by minijinja.

use serde::Serialize;

use super::card_view::{CardView, card_view};
use super::chart::{self, Dash, Series, Weight};
use super::diagnosis_view::{DiagnosisView, diagnosis_view};
use super::format::{mean_sd, number, seconds, stop_reason};
use super::verdict::{
    NOT_ENOUGH_ROWS, Verdict, interval_text, interval_words, no_variance_words, verdict,
};
use crate::build::importance::pooled_importance;
use crate::build::outcome::{DataSummary, FitResult, MetricStat, RowSet, SetMetrics};
use crate::document::spec::{MetricName, word};
use crate::judge::diagnosis::{Diagnosis, NoVariance, Unavailable};
use crate::judge::stats::Interval;
use crate::judge::{BaselineRule, Judgement};
use crate::nn::{ClassificationMetrics, StopReason};

/// What a data step's card shows.
#[derive(Serialize)]
pub(crate) struct DataView {
    pub task: String,
    pub rows_read: usize,
    pub rows_dropped: usize,
    pub features: usize,
    /// Column statistics and warnings.
    pub card: CardView,
    pub targets: String,
    pub split: String,
    pub classes: Vec<ClassRow>,
    pub scale: String,
}

#[derive(Serialize)]
pub(crate) struct ClassRow {
    pub label: String,
    pub train: usize,
    /// `None` when the data step sets no validation rows aside.
    pub validation: Option<usize>,
    pub test: usize,
}

pub(crate) fn data_view(summary: &DataSummary) -> DataView {
    let first = &summary.partitions[0];
    let split = match (summary.partitions.len(), first.validation_rows) {
        (1, 0) => format!(
            "{} training rows, {} held out",
            first.train_rows, first.test_rows
        ),
        (1, validation) => format!(
            "{} training rows, {validation} validation rows, {} held out",
            first.train_rows, first.test_rows
        ),
        (folds, validation) => {
            let folds = format!(
                "{folds} folds of about {} held-out rows each",
                first.test_rows
            );
            match validation {
                0 => folds,
                rows => {
                    format!("{folds}, about {rows} validation rows in each fold's training rows")
                }
            }
        }
    };
    let classes = summary
        .classes
        .iter()
        .flatten()
        .enumerate()
        .map(|(i, label)| ClassRow {
            label: label.clone(),
            train: first.train_classes.get(i).copied().unwrap_or(0),
            validation: (first.validation_rows > 0)
                .then(|| first.validation_classes.get(i).copied().unwrap_or(0)),
            test: first.test_classes.get(i).copied().unwrap_or(0),
        })
        .collect();
    DataView {
        task: word(&summary.task).into(),
        rows_read: summary.rows_read,
        rows_dropped: summary.rows_dropped,
        features: summary.feature_count,
        card: card_view(summary),
        targets: summary.target_names.join(", "),
        split,
        classes,
        scale: word(&summary.scale).into(),
    }
}

/// What a train step's card shows.
#[derive(Serialize)]
pub(crate) struct TrainView {
    pub layers: String,
    pub loss: String,
    pub metric_names: Vec<String>,
    pub metric_rows: Vec<MetricRow>,
    pub stop: String,
    pub epochs: String,
    pub seconds: String,
    pub chart: String,
    pub confusion: Option<ConfusionView>,
    pub hints: Vec<String>,
    pub folds: Vec<FoldRow>,
    /// The heading of the fold table's interval column; empty without a judgement.
    pub fold_interval: String,
    pub verdict: Option<Verdict>,
    pub judged: Option<JudgedView>,
    /// ROC and reliability, or fit plots, of the held-out rows.
    pub diagnosis: Option<DiagnosisView>,
    /// Which rows the chart's second line (and patience) measured: "validation" or "held-out".
    pub watched_rows: &'static str,
    /// Said when the held-out rows chose the weights, so their score is optimistic.
    pub choice_note: Option<String>,
    pub importance: Option<ImportanceView>,
    /// Why the R² cells show a dash, when the targets they score do not vary.
    pub r2_note: Option<String>,
}

/// Which inputs the network leans on: permutation importance as a sorted bar chart, or
/// why there is none to draw.
#[derive(Serialize)]
pub(crate) struct ImportanceView {
    pub chart: Option<String>,
    pub note: String,
}

/// The held-out scores of the network, the baseline and the model without a hidden
/// layer side by side, the network's with their 95 % intervals.
#[derive(Serialize)]
pub(crate) struct JudgedView {
    pub metric_names: Vec<String>,
    pub rows: Vec<MetricRow>,
    /// How the held-out rows were pooled (folds: each row scored by its own fold).
    pub note: String,
}

/// The interval of the score `name` as a table cell, `low–high` in the table's number
/// format; empty when `intervals` has none for it.
pub(crate) fn interval_cell(intervals: &[(String, Interval)], name: &str) -> String {
    interval_text(Some(intervals), name, number).unwrap_or_default()
}

pub(crate) fn judged_view(judgement: &Judgement) -> JudgedView {
    let names = judgement.network.named();
    let r2_undefined = judgement.diagnosis.r2_undefined().is_some();
    let interval_of = |name: &str| -> String {
        if r2_undefined && name == "r2" {
            return "—".into();
        }
        match &judgement.intervals {
            None => NOT_ENOUGH_ROWS.into(),
            Some(all) => interval_cell(all, name),
        }
    };
    let values = |scores: &crate::judge::Scores| {
        scores
            .named()
            .iter()
            .map(|&(name, value)| {
                if r2_undefined && name == "r2" {
                    "—".into()
                } else {
                    number(value)
                }
            })
            .collect()
    };
    let baseline = match judgement.baseline_rule {
        BaselineRule::MajorityClass => "majority class (training frequencies)",
        BaselineRule::TrainingMean => "training mean",
    };
    JudgedView {
        metric_names: names
            .iter()
            .map(|(n, _)| format!("held-out {}", n.replace('_', " ")))
            .collect(),
        rows: vec![
            MetricRow {
                rows: "network",
                values: values(&judgement.network),
            },
            MetricRow {
                rows: "95 % interval",
                values: names.iter().map(|(n, _)| interval_of(n)).collect(),
            },
            MetricRow {
                rows: baseline,
                values: values(&judgement.baseline),
            },
            MetricRow {
                rows: "without a hidden layer",
                values: values(&judgement.linear),
            },
        ],
        note: format!(
            "{} held-out rows; without a hidden layer on its own training rows: {}",
            judgement.held_out_rows,
            judgement
                .linear_train
                .named()
                .iter()
                .map(|(n, v)| format!("{} {}", n.replace('_', " "), number(*v)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

#[derive(Serialize)]
pub(crate) struct MetricRow {
    pub rows: &'static str,
    pub values: Vec<String>,
}

#[derive(Serialize)]
pub(crate) struct FoldRow {
    pub fold: usize,
    pub stop: String,
    pub epochs: usize,
    pub values: Vec<String>,
    /// The 95 % interval of the headline metric on this fold's held-out rows;
    /// empty for a run the judgement does not read (a repeat's later seeds).
    pub interval: String,
}

#[derive(Serialize)]
pub(crate) struct ConfusionView {
    pub rows_label: &'static str,
    pub labels: Vec<String>,
    pub rows: Vec<ConfusionRow>,
    /// Each class's AUC against the rest and their macro mean, for several classes
    /// judged on held-out rows.
    pub auc: Option<AucColumn>,
}

/// The confusion table's AUC column: a cell per class, the macro mean for its last row,
/// and why a cell holds no number, each reason after the marker its cells carry.
#[derive(Serialize)]
pub(crate) struct AucColumn {
    pub cells: Vec<String>,
    pub mean: String,
    pub notes: Vec<String>,
}

#[derive(Serialize)]
pub(crate) struct ConfusionRow {
    pub label: String,
    pub cells: Vec<ConfusionCell>,
    pub precision: String,
    pub recall: String,
}

#[derive(Serialize)]
pub(crate) struct ConfusionCell {
    pub count: usize,
    pub diagonal: bool,
}

/// `scaled_targets`: the run trained on scaled targets, so its loss is in those units;
/// `constant_target`: a target column that holds one value in every row read.
pub(crate) fn train_view(
    result: &FitResult,
    classes: Option<&[String]>,
    targets: &[String],
    scaled_targets: bool,
    constant_target: Option<&str>,
) -> TrainView {
    let shape = &result.shape;
    let last = shape.sizes.len() - 1;
    let layers = shape
        .sizes
        .iter()
        .enumerate()
        .map(|(i, size)| match i {
            0 => format!("{size} inputs"),
            i if i == last => format!("{size} {}", word(&shape.output)),
            _ => format!("{size} {}", word(&shape.hidden)),
        })
        .collect::<Vec<_>>()
        .join(" → ");
    let hide = log_loss_is_loss(std::slice::from_ref(result));
    let train_stats = shown_stats(
        result
            .metric_stats(RowSet::Train)
            .expect("every run has training rows"),
        hide,
    );
    let test_stats = result
        .metric_stats(RowSet::Test)
        .map(|stats| shown_stats(stats, hide));
    let metric_names = train_stats
        .iter()
        .map(|stat| stat.name.replace('_', " "))
        .collect();
    let mut metric_rows = vec![MetricRow {
        rows: "training",
        values: stat_values(&train_stats),
    }];
    if let Some(stats) = result.metric_stats(RowSet::Validation) {
        metric_rows.push(MetricRow {
            rows: "validation",
            values: stat_values(&stats),
        });
    }
    if let Some(stats) = &test_stats {
        metric_rows.push(MetricRow {
            rows: "held out",
            values: stat_values(stats),
        });
    }
    let held_out_r2 = result
        .judgement
        .as_deref()
        .and_then(|judgement| judgement.diagnosis.r2_undefined());
    let r2_column = metric_names_position(&train_stats, "r2");
    if let Some(column) = r2_column {
        for row in &mut metric_rows {
            if constant_target.is_some() || (held_out_r2.is_some() && row.rows == "held out") {
                row.values[column] = "—".into();
            }
        }
    }
    let runs = &result.runs;
    let single = runs.len() == 1;
    let mut folds: Vec<FoldRow> = if single {
        Vec::new()
    } else {
        runs.iter()
            .enumerate()
            .map(|(i, run)| fold_row(i, run, hide, result.judgement.as_deref()))
            .collect()
    };
    if let (Some(column), Some(_)) = (r2_column, &held_out_r2) {
        for fold in &mut folds {
            fold.values[column] = "—".into();
            fold.interval = "—".into();
        }
    }
    let r2_note = match (constant_target, &held_out_r2) {
        (Some(column), _) => Some(format!(
            "{column} holds one value in every row read"
        )),
        (None, Some(why)) => Some(no_variance_words(why, targets)),
        (None, None) => None,
    }
    .map(|why| {
        format!(
            "R² shows —: {why}, so there is no variance for it to explain (scikit-learn's convention would print 0, or 1 for exact predictions). MSE and MAE still measure the error."
        )
    });
    let stop = stop_counts(result);
    let epochs = if single {
        format!("{} epochs", runs[0].fit.epochs_run)
    } else {
        let total: usize = runs.iter().map(|run| run.fit.epochs_run).sum();
        format!(
            "{} epochs on average over {} runs",
            total / runs.len(),
            runs.len()
        )
    };
    TrainView {
        layers,
        loss: word(&shape.loss).into(),
        metric_names,
        metric_rows,
        stop,
        epochs,
        seconds: seconds(runs.iter().map(|run| run.seconds).sum()),
        chart: loss_chart(result, scaled_targets),
        confusion: classes.and_then(|labels| confusion_view(result, labels)),
        hints: shape.hints.clone(),
        folds,
        fold_interval: result
            .judgement
            .as_deref()
            .map_or(String::new(), fold_interval_heading),
        verdict: result.judgement.as_deref().map(verdict),
        judged: result.judgement.as_deref().map(judged_view),
        diagnosis: result
            .judgement
            .as_deref()
            .map(|judgement| diagnosis_view(&judgement.diagnosis, targets)),
        watched_rows: match result.choice_rows() {
            RowSet::Validation => "validation",
            _ => "held-out",
        },
        choice_note: early_stop_note(result),
        importance: importance_view(result, held_out_r2.as_ref(), targets),
        r2_note,
    }
}

/// Where the metric `name` sits among a table's columns.
fn metric_names_position(stats: &[MetricStat], name: &str) -> Option<usize> {
    stats.iter().position(|stat| stat.name == name)
}

/// The permutation importance chart, most important input first; `None` when the
/// step did not measure it, and a reason instead of the chart when the run diverged
/// or the held-out R² is undefined (`held_out_r2`), since every bar would then be noise.
fn importance_view(
    result: &FitResult,
    held_out_r2: Option<&NoVariance>,
    targets: &[String],
) -> Option<ImportanceView> {
    let stats = pooled_importance(&result.runs)?;
    let metric = match result.runs[0].test.as_ref()? {
        SetMetrics::Classification { .. } => "accuracy",
        SetMetrics::Regression { .. } => "R²",
    };
    if result
        .judgement
        .as_deref()
        .is_some_and(|judgement| judgement.held_out_rows < 2)
    {
        return Some(ImportanceView {
            chart: None,
            note: "No permutation importance: there is only one held-out row, and shuffling one row moves nothing.".into(),
        });
    }
    if result
        .runs
        .iter()
        .any(|run| run.fit.stop == StopReason::Diverged)
    {
        return Some(ImportanceView {
            chart: None,
            note: "No permutation importance: the run diverged, so the network's outputs are not all finite and shuffling an input changes nothing that can be measured.".into(),
        });
    }
    if let Some(why) = held_out_r2 {
        return Some(ImportanceView {
            chart: None,
            note: format!(
                "No permutation importance: it measures the fall in held-out R², which is undefined because {}.",
                no_variance_words(why, targets)
            ),
        });
    }
    let bars: Vec<chart::Bar> = stats
        .iter()
        .map(|stat| chart::Bar {
            label: stat.input.clone(),
            value: stat.mean,
            spread: Some(stat.sd),
        })
        .collect();
    let shuffles: usize = result
        .runs
        .iter()
        .filter_map(|run| run.importance.as_ref())
        .map(|inputs| inputs.first().map_or(0, |input| input.metric_drops.len()))
        .sum();
    let loss_rises = stats
        .iter()
        .map(|stat| format!("{} {}", stat.input, mean_sd(stat.loss_mean, stat.loss_sd)))
        .collect::<Vec<_>>()
        .join(", ");
    Some(ImportanceView {
        chart: Some(chart::bar_chart(
            &bars,
            &format!("fall in held-out {metric}"),
        )),
        note: format!(
            "Permutation importance: the fall in held-out {metric} when one input's values are shuffled across the held-out rows, mean ± sd over {shuffles} shuffles (a categorical input's one-hot columns move together). Rise in held-out loss: {loss_rises}."
        ),
    })
}

/// Patience that stopped a run on the held-out rows chose its weights on them too.
fn early_stop_note(result: &FitResult) -> Option<String> {
    let stopped_early = result
        .runs
        .iter()
        .any(|run| run.fit.stop == StopReason::NoImprovement);
    (stopped_early && result.choice_rows() == RowSet::Test).then(|| {
        format!(
            "Stopped early on the held-out rows, which also chose the weights kept, so the held-out score is optimistic. {HONEST_CHOICE}"
        )
    })
}

/// How to make a choice without the held-out rows.
pub(crate) const HONEST_CHOICE: &str = "Set validation on the data step to choose on training rows set aside instead; folds show how much a score moves with the rows held out.";

fn stat_values(stats: &[MetricStat]) -> Vec<String> {
    stats.iter().map(stat_text).collect()
}

/// A metric as `mean ± sd` over several runs, or its value for one.
pub(crate) fn stat_text(stat: &MetricStat) -> String {
    match stat.sd {
        Some(sd) => mean_sd(stat.mean, sd),
        None => number(stat.mean),
    }
}

/// Whether every run's log loss is its loss (a classifier trained on cross-entropy),
/// so that tables show the one column "loss" for the two.
pub(crate) fn log_loss_is_loss(fits: &[FitResult]) -> bool {
    fits.iter()
        .flat_map(|fit| &fit.runs)
        .flat_map(|run| std::iter::once(&run.train).chain(run.test.as_ref()))
        .all(log_loss_repeats_loss)
}

/// Whether a set's log loss is its loss again (always, for regression, which has none).
pub(crate) fn log_loss_repeats_loss(set: &SetMetrics) -> bool {
    match set {
        SetMetrics::Classification { loss, metrics } => {
            (loss - metrics.log_loss).abs() <= 1e-9 * loss.abs().max(1.0)
        }
        SetMetrics::Regression { .. } => true,
    }
}

/// The metrics a table shows: log loss only when it is not the loss again.
pub(crate) fn shown_stats(stats: Vec<MetricStat>, hide_log_loss: bool) -> Vec<MetricStat> {
    stats
        .into_iter()
        .filter(|stat| !(hide_log_loss && stat.name == "log_loss"))
        .collect()
}

/// The fold table's interval column heading, naming the headline metric.
fn fold_interval_heading(judgement: &Judgement) -> String {
    let metric = match judgement.network {
        crate::judge::Scores::Classification { .. } => "accuracy",
        crate::judge::Scores::Regression { .. } => "R²",
    };
    format!("held-out {metric} 95 % interval")
}

/// A fold's row in the per-fold table: its held-out metrics.
fn fold_row(
    index: usize,
    run: &crate::build::outcome::RunResult,
    hide_log_loss: bool,
    judgement: Option<&Judgement>,
) -> FoldRow {
    let set = run.test.as_ref().unwrap_or(&run.train);
    let interval = judgement
        .and_then(|judged| {
            let name = judged.network.headline().0;
            let part = judged.part_intervals.get(index)?;
            Some(interval_words(part.as_deref(), name))
        })
        .unwrap_or_default();
    FoldRow {
        interval,
        fold: index + 1,
        stop: stop_reason(run.fit.stop).to_string(),
        epochs: run.fit.epochs_run,
        values: set
            .named()
            .iter()
            .filter(|(name, _)| !(hide_log_loss && *name == "log_loss"))
            .map(|(_, value)| number(*value))
            .collect(),
    }
}

/// The stop reasons of a fit's runs: one reason, or each with its count.
pub(crate) fn stop_counts(result: &FitResult) -> String {
    let mut counts: Vec<(&str, usize)> = Vec::new();
    for run in &result.runs {
        let reason = stop_reason(run.fit.stop);
        match counts.iter_mut().find(|(name, _)| *name == reason) {
            Some((_, count)) => *count += 1,
            None => counts.push((reason, 1)),
        }
    }
    match counts.as_slice() {
        [(reason, _)] => reason.to_string(),
        _ => counts
            .iter()
            .map(|(reason, count)| format!("{reason} ({count})"))
            .collect::<Vec<_>>()
            .join(", "),
    }
}

/// Training and validation loss per epoch. With folds, each fold is a thin line and the
/// mean over folds a bold one, one legend entry each for training and validation.
/// Trained on scaled targets, the axis says so: the loss is not in the targets' units.
fn loss_chart(result: &FitResult, scaled_targets: bool) -> String {
    let runs = &result.runs;
    let mut series = Vec::new();
    let (train_label, validation_label) = if runs.len() > 1 {
        let of = format!(" (mean of {} folds)", runs.len());
        (format!("training{of}"), format!("validation{of}"))
    } else {
        ("training".to_string(), "validation".to_string())
    };
    if runs.len() > 1 {
        for run in runs {
            series.push(loss_line(
                None,
                history_curve(run, false),
                false,
                Weight::Thin,
            ));
            series.push(loss_line(
                None,
                history_curve(run, true),
                true,
                Weight::Thin,
            ));
        }
    }
    let weight = if runs.len() > 1 {
        Weight::Bold
    } else {
        Weight::Regular
    };
    series.push(loss_line(
        Some(train_label),
        mean_curve(runs, false),
        false,
        weight,
    ));
    let validation = mean_curve(runs, true);
    if !validation.is_empty() {
        series.push(loss_line(Some(validation_label), validation, true, weight));
    }
    series.retain(|line| !line.points.is_empty());
    chart::line_chart(&series, &loss_axes(true, scaled_targets))
}

/// A loss chart's axes; trained on scaled targets, the loss axis says so, since the
/// loss is then not in the targets' units.
pub(crate) fn loss_axes(log_y: bool, scaled_targets: bool) -> chart::Axes<'static> {
    let mut axes = chart::Axes::loss(log_y);
    if scaled_targets {
        axes.y_label = "loss (scaled targets)";
    }
    axes
}

/// A metric's name as a chart says it: a loss on scaled targets says so, as
/// [`loss_axes`] does.
pub(crate) fn metric_label(metric: MetricName, scaled_targets: bool) -> String {
    let name = metric.key().replace('_', " ");
    if scaled_targets && metric == MetricName::Loss {
        format!("{name} (scaled targets)")
    } else {
        name
    }
}

/// A line of a loss chart: training loss in the first colour, solid; validation in the
/// second, dashed.
fn loss_line(
    label: Option<String>,
    points: Vec<(f64, f64)>,
    validation: bool,
    weight: Weight,
) -> Series {
    Series {
        label,
        points,
        colour: usize::from(validation),
        dash: if validation {
            Dash::Dashed
        } else {
            Dash::Solid
        },
        weight,
    }
}

/// One run's loss per epoch, thinned for drawing.
fn history_curve(run: &crate::build::outcome::RunResult, validation: bool) -> Vec<(f64, f64)> {
    chart::thin(
        run.fit
            .history
            .iter()
            .enumerate()
            .filter_map(|(e, losses)| {
                let value = if validation {
                    losses.validation
                } else {
                    Some(losses.train)
                };
                value.map(|v| ((e + 1) as f64, v))
            })
            .collect(),
    )
}

/// The confusion matrix summed over runs, on held-out rows when there are any.
fn confusion_view(result: &FitResult, labels: &[String]) -> Option<ConfusionView> {
    let held_out = result.runs.iter().all(|run| run.test.is_some());
    let matrices: Vec<&ClassificationMetrics> = result
        .runs
        .iter()
        .filter_map(|run| {
            let set = if held_out {
                run.test.as_ref()
            } else {
                Some(&run.train)
            };
            match set {
                Some(SetMetrics::Classification { metrics, .. }) => Some(metrics),
                _ => None,
            }
        })
        .collect();
    let first = matrices.first()?;
    let k = first.confusion.len();
    let mut total = vec![vec![0usize; k]; k];
    for metrics in &matrices {
        for (i, row) in metrics.confusion.iter().enumerate() {
            for (j, count) in row.iter().enumerate() {
                total[i][j] += count;
            }
        }
    }
    let rows_label = if held_out {
        "held-out rows"
    } else {
        "training rows"
    };
    let mut table = confusion_table(&total, labels, rows_label);
    // The diagnosis ranks the held-out rows, so its AUCs join only their counts.
    table.auc = held_out
        .then_some(result.judgement.as_deref())
        .flatten()
        .and_then(|judgement| auc_column(&judgement.diagnosis, &table.rows));
    Some(table)
}

/// A confusion matrix (`total[true][predicted]`) with each class's precision and
/// recall, on the rows `rows_label` names.
pub(crate) fn confusion_table(
    total: &[Vec<usize>],
    labels: &[String],
    rows_label: &'static str,
) -> ConfusionView {
    let rows = total
        .iter()
        .enumerate()
        .map(|(i, row)| {
            let predicted_here: usize = total.iter().map(|r| r[i]).sum();
            let actual_here: usize = row.iter().sum();
            ConfusionRow {
                label: labels.get(i).cloned().unwrap_or_default(),
                cells: row
                    .iter()
                    .enumerate()
                    .map(|(j, &count)| ConfusionCell {
                        count,
                        diagonal: i == j,
                    })
                    .collect(),
                precision: ratio(row[i], predicted_here),
                recall: ratio(row[i], actual_here),
            }
        })
        .collect();
    ConfusionView {
        rows_label,
        labels: labels.to_vec(),
        rows,
        auc: None,
    }
}

/// Each class's one-vs-rest AUC beside its held-out `rows`, for several classes.
fn auc_column(diagnosis: &Diagnosis, rows: &[ConfusionRow]) -> Option<AucColumn> {
    let Diagnosis::SeveralClasses { auc_per_class } = diagnosis else {
        return None;
    };
    let mut notes = Footnotes::default();
    let cells = auc_per_class
        .iter()
        .zip(rows)
        .map(|(auc, row)| match auc {
            Ok(auc) => number(*auc),
            Err(why) => format!("—{}", notes.mark(auc_unavailable(*why, row))),
        })
        .collect();
    let mean = match diagnosis.auc() {
        Some(Ok(mean)) => number(mean),
        _ => format!(
            "—{}",
            notes.mark("the macro mean needs every class's AUC".into())
        ),
    };
    Some(AucColumn {
        cells,
        mean,
        notes: notes.lines(),
    })
}

/// Why a class has no AUC against the rest, naming the class when the reason is its own.
fn auc_unavailable(why: Unavailable, row: &ConfusionRow) -> String {
    let held_out: usize = row.cells.iter().map(|cell| cell.count).sum();
    match why {
        Unavailable::OneClass if held_out == 0 => format!(
            "no held-out row is {}, so nothing ranks it against the rest",
            row.label
        ),
        Unavailable::OneClass => format!(
            "every held-out row is {}, so nothing ranks it against the rest",
            row.label
        ),
        other => other.to_string(),
    }
}

/// Reasons said once each below a table, numbered in the order cells first cite them.
#[derive(Default)]
struct Footnotes {
    reasons: Vec<String>,
}

impl Footnotes {
    /// The marker of `reason`, which becomes the next footnote when it is new.
    fn mark(&mut self, reason: String) -> String {
        let number = match self.reasons.iter().position(|known| *known == reason) {
            Some(index) => index + 1,
            None => {
                self.reasons.push(reason);
                self.reasons.len()
            }
        };
        superscript(number)
    }

    /// Each reason after its marker, as a sentence.
    fn lines(self) -> Vec<String> {
        self.reasons
            .iter()
            .enumerate()
            .map(|(index, reason)| format!("{} {reason}.", superscript(index + 1)))
            .collect()
    }
}

/// `number` in superscript digits, as a footnote marker.
fn superscript(number: usize) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    number
        .to_string()
        .bytes()
        .map(|digit| DIGITS[usize::from(digit - b'0')])
        .collect()
}

fn ratio(part: usize, whole: usize) -> String {
    if whole == 0 {
        "—".into()
    } else {
        number(part as f64 / whole as f64)
    }
}

/// The mean loss per epoch over runs (each epoch over the runs that reached it), thinned
/// for drawing; the validation loss when `validation`, else the training loss.
pub(crate) fn mean_curve(
    runs: &[crate::build::outcome::RunResult],
    validation: bool,
) -> Vec<(f64, f64)> {
    let longest = runs
        .iter()
        .map(|run| run.fit.history.len())
        .max()
        .unwrap_or(0);
    let points = (0..longest)
        .filter_map(|epoch| {
            let values: Vec<f64> = runs
                .iter()
                .filter_map(|run| run.fit.history.get(epoch))
                .filter_map(|losses| {
                    if validation {
                        losses.validation
                    } else {
                        Some(losses.train)
                    }
                })
                .collect();
            (!values.is_empty()).then(|| {
                (
                    (epoch + 1) as f64,
                    values.iter().sum::<f64>() / values.len() as f64,
                )
            })
        })
        .collect();
    chart::thin(points)
}
