//! Views of the steps that set fits side by side: a sweep's ranked combinations and a
//! compare step's table and overlaid chart.

use serde::Serialize;

use super::chart::{self, Axes, Series};
use super::format::number;
use super::verdict::{NOT_ENOUGH_ROWS, evidence, p_text};
use super::view::{HONEST_CHOICE, mean_curve, stat_text, stop_counts};
use crate::build::outcome::{FitResult, RowSet, SetMetrics, SweepResult, rank};
use crate::document::spec::{ChartChoice, CompareSpec, MetricName};
use crate::judge::{self, PairOutcome, Paired};
use crate::plan::describe;

/// Lines a chart of several fits draws at most, so that it stays legible.
const MAX_LINES: usize = 8;

/// A sweep's card.
#[derive(Serialize)]
pub(crate) struct SweepView {
    pub setting_names: Vec<String>,
    pub metric_names: Vec<String>,
    pub rows_label: &'static str,
    pub rank_by: String,
    pub rows: Vec<SweepRow>,
    pub runs_per_combination: usize,
    pub loss_chart: String,
    pub loss_chart_note: String,
    /// How many combinations are within noise of the best, or why none was tested.
    pub noise_note: String,
    /// The ranking metric against a numeric setting, when one was varied.
    pub setting_chart: Option<String>,
    pub setting_chart_note: String,
    /// Said when the held-out rows chose the best, so its score is optimistic.
    pub choice_note: Option<String>,
}

#[derive(Serialize)]
pub(crate) struct SweepRow {
    pub rank: usize,
    pub best: bool,
    /// Its paired test against the best is not significant at 0.05.
    pub within_noise: bool,
    /// Its verdict against the model without a hidden layer, in a few words.
    pub versus_linear: String,
    pub settings: Vec<String>,
    pub values: Vec<String>,
    pub stop: String,
}

/// How a card names a set of rows.
pub(crate) fn rows_label(rows: RowSet) -> &'static str {
    match rows {
        RowSet::Test => "held out",
        RowSet::Validation => "validation",
        RowSet::Train => "training",
    }
}

pub(crate) fn sweep_view(result: &SweepResult) -> SweepView {
    let first = &result.fits[0];
    let stats_names: Vec<&'static str> = first
        .metric_stats(result.rank_rows)
        .map(|stats| stats.iter().map(|s| s.name).collect())
        .unwrap_or_default();
    let rows = result
        .ranking
        .iter()
        .enumerate()
        .map(|(rank, &i)| {
            let fit = &result.fits[i];
            SweepRow {
                rank: rank + 1,
                best: rank == 0,
                within_noise: result.within_noise_of_best.get(i) == Some(&Some(true)),
                versus_linear: fit
                    .judgement
                    .as_deref()
                    .map_or("—".into(), versus_linear_cell),
                settings: fit
                    .settings
                    .iter()
                    .map(|varied| varied.text.clone())
                    .collect(),
                values: fit
                    .metric_stats(result.rank_rows)
                    .map(|stats| stats.iter().map(stat_text).collect())
                    .unwrap_or_default(),
                stop: stop_counts(fit),
            }
        })
        .collect();
    let shown: Vec<&FitResult> = result
        .ranking
        .iter()
        .take(MAX_LINES)
        .map(|&i| &result.fits[i])
        .collect();
    let series: Vec<Series> = shown
        .iter()
        .map(|fit| Series {
            label: describe(&fit.settings),
            points: mean_curve(&fit.runs, false),
            dashed: false,
        })
        .collect();
    let loss_chart_note = if result.fits.len() > MAX_LINES {
        format!(
            "Mean training loss per epoch of the {MAX_LINES} best-ranked combinations, log scale."
        )
    } else {
        "Mean training loss per epoch of each combination, log scale.".to_string()
    };
    let (setting_chart, setting_chart_note) = setting_chart(result);
    SweepView {
        setting_names: first
            .settings
            .iter()
            .map(|varied| varied.name.clone())
            .collect(),
        metric_names: stats_names.iter().map(|n| n.replace('_', " ")).collect(),
        rows_label: rows_label(result.rank_rows),
        rank_by: result.rank_by.key().replace('_', " "),
        rows,
        runs_per_combination: first.runs.len(),
        loss_chart: chart::line_chart(&series, &Axes::loss(true)),
        loss_chart_note,
        noise_note: noise_note(result),
        setting_chart,
        setting_chart_note,
        choice_note: (result.rank_rows == RowSet::Test).then(|| {
            format!(
                "The best was chosen on the held-out rows, so its held-out score is optimistic. {HONEST_CHOICE}"
            )
        }),
    }
}

/// The ranking metric against the first varied setting whose values are all numbers,
/// averaged over the other settings' values; a log axis when the values span a
/// factor of 20 or more (learning rates usually do).
fn setting_chart(result: &SweepResult) -> (Option<String>, String) {
    let names: Vec<&String> = result.fits[0]
        .settings
        .iter()
        .map(|varied| &varied.name)
        .collect();
    for (position, name) in names.iter().enumerate() {
        let mut points: Vec<(f64, Vec<f64>)> = Vec::new();
        let numeric = result
            .fits
            .iter()
            .all(|fit| fit.settings[position].number().is_some());
        if !numeric {
            continue;
        }
        for fit in &result.fits {
            let x = fit.settings[position].number().expect("checked numeric");
            let Some(stat) = fit.metric(result.rank_by, result.rank_rows) else {
                continue;
            };
            match points.iter_mut().find(|(px, _)| *px == x) {
                Some((_, values)) => values.push(stat.mean),
                None => points.push((x, vec![stat.mean])),
            }
        }
        if points.len() < 2 {
            continue;
        }
        points.sort_by(|a, b| a.0.total_cmp(&b.0));
        let line: Vec<(f64, f64)> = points
            .iter()
            .map(|(x, values)| (*x, values.iter().sum::<f64>() / values.len() as f64))
            .collect();
        let (lo, hi) = (line[0].0, line[line.len() - 1].0);
        let log_x = lo > 0.0 && hi / lo >= 20.0;
        let metric = result.rank_by.key().replace('_', " ");
        let svg = chart::line_chart(
            &[Series {
                label: metric.clone(),
                points: line,
                dashed: false,
            }],
            &Axes {
                x_label: name,
                y_label: &metric,
                log_x,
                log_y: false,
            },
        );
        let note = format!(
            "{} on the {} rows against {name}{}{}.",
            capitalise(&metric),
            rows_label(result.rank_rows),
            if names.len() > 1 {
                ", averaged over the other settings"
            } else {
                ""
            },
            if log_x { " (log axis)" } else { "" }
        );
        return (Some(svg), note);
    }
    (None, String::new())
}

fn capitalise(text: &str) -> String {
    let mut chars = text.chars();
    chars
        .next()
        .map_or(String::new(), |c| c.to_uppercase().chain(chars).collect())
}

/// A compare step's card.
#[derive(Serialize)]
pub(crate) struct CompareView {
    pub metric_names: Vec<String>,
    /// How the best run was chosen: the metric and the rows.
    pub best_note: String,
    pub rows: Vec<CompareRow>,
    /// The paired tests between the runs; `None` for a single run.
    pub pairs: Option<PairsView>,
    pub chart: Option<String>,
    pub chart_note: String,
}

#[derive(Serialize)]
pub(crate) struct CompareRow {
    pub id: String,
    pub what: String,
    pub rows_label: &'static str,
    pub values: Vec<String>,
    pub best: bool,
}

/// One entry of a comparison: an id and the fit it stands for.
pub(crate) struct Compared<'a> {
    pub id: &'a str,
    /// For a sweep, which combination (its best) is shown.
    pub what: String,
    pub fit: &'a FitResult,
}

/// The default columns: what a practitioner reads first for the task.
fn default_metrics(fit: &FitResult) -> Vec<MetricName> {
    match fit.runs.first().map(|run| &run.train) {
        Some(SetMetrics::Classification { .. }) => vec![MetricName::Loss, MetricName::Accuracy],
        _ => vec![MetricName::Loss, MetricName::Mae, MetricName::R2],
    }
}

pub(crate) fn compare_view(spec: &CompareSpec, entries: &[Compared<'_>]) -> CompareView {
    let metrics = spec.metrics.clone().unwrap_or_else(|| {
        entries
            .first()
            .map_or(Vec::new(), |e| default_metrics(e.fit))
    });
    let choice = common_choice_rows(entries);
    let best_by = metrics.first().copied().unwrap_or(MetricName::Loss);
    let fits: Vec<&FitResult> = entries.iter().map(|entry| entry.fit).collect();
    let best = rank(&fits, best_by, choice).first().copied();
    let rows = entries
        .iter()
        .enumerate()
        .map(|(index, entry)| {
            let rows = entry.fit.report_rows();
            CompareRow {
                best: Some(index) == best,
                id: entry.id.to_string(),
                what: entry.what.clone(),
                rows_label: rows_label(rows),
                values: metrics
                    .iter()
                    .map(|&metric| {
                        entry
                            .fit
                            .metric(metric, rows)
                            .map_or("—".into(), |stat| stat_text(&stat))
                    })
                    .collect(),
            }
        })
        .collect();
    let (chart, chart_note) = match spec.chart {
        ChartChoice::None => (None, String::new()),
        ChartChoice::Loss => {
            // The training loss favours the most overfit run, so the chart shows
            // the loss on rows the runs did not fit whenever they all have some.
            let unfitted = choice != RowSet::Train;
            let series: Vec<Series> = entries
                .iter()
                .take(MAX_LINES)
                .map(|entry| Series {
                    label: entry.id.to_string(),
                    points: mean_curve(&entry.fit.runs, unfitted),
                    dashed: false,
                })
                .collect();
            let scale = if spec.log_scale {
                "log scale"
            } else {
                "linear scale"
            };
            (
                Some(chart::line_chart(&series, &Axes::loss(spec.log_scale))),
                format!(
                    "Mean {} loss per epoch of each run, {scale}.",
                    rows_label(choice).replace(' ', "-")
                ),
            )
        }
        ChartChoice::Metric => {
            let metric = metrics.first().copied().unwrap_or(MetricName::Loss);
            let bars: Vec<(String, f64)> = entries
                .iter()
                .map(|entry| {
                    let value = entry
                        .fit
                        .metric(metric, entry.fit.report_rows())
                        .map_or(f64::NAN, |s| s.mean);
                    (entry.id.to_string(), value)
                })
                .collect();
            let name = metric.key().replace('_', " ");
            (
                Some(chart::bar_chart(&bars, &name)),
                format!(
                    "{} of each run (held-out rows where there are any).",
                    capitalise(&name)
                ),
            )
        }
    };
    CompareView {
        best_note: format!(
            "★ best by {} on the {} rows",
            best_by.key().replace('_', " "),
            rows_label(choice)
        ),
        metric_names: metrics.iter().map(|m| m.key().replace('_', " ")).collect(),
        rows,
        pairs: pairs_view(entries),
        chart,
        chart_note,
    }
}

/// A combination's paired test against the model without a hidden layer.
fn versus_linear_cell(judgement: &crate::judge::Judgement) -> String {
    match &judgement.versus_linear {
        None => NOT_ENOUGH_ROWS.into(),
        Some(test) => {
            let words = match (test.significant(), test.first_better()) {
                (true, true) => "beats it",
                (true, false) => "worse",
                (false, _) => "within noise",
            };
            format!("{words} ({})", evidence(test))
        }
    }
}

/// The sweep card's line on the combinations within noise of the best.
fn noise_note(result: &SweepResult) -> String {
    let others = result.fits.len().saturating_sub(1);
    if others == 0 || result.rank_rows != RowSet::Test {
        return String::new();
    }
    let tested = result.within_noise_of_best.iter().flatten().count();
    if tested == 0 {
        return format!("Within noise of the best: {NOT_ENOUGH_ROWS} for a paired test.");
    }
    let within = result
        .within_noise_of_best
        .iter()
        .filter(|w| **w == Some(true))
        .count();
    format!(
        "{within} of the other {others} combinations are within noise of the best (≈): their paired test against it on the held-out rows is not significant at 0.05, so the ranking between them is not settled."
    )
}

/// The matrix of paired tests beneath a comparison's table.
#[derive(Serialize)]
pub(crate) struct PairsView {
    pub ids: Vec<String>,
    pub rows: Vec<PairsRow>,
    pub note: &'static str,
}

#[derive(Serialize)]
pub(crate) struct PairsRow {
    pub id: String,
    pub cells: Vec<String>,
}

fn pairs_view(entries: &[Compared<'_>]) -> Option<PairsView> {
    if entries.len() < 2 {
        return None;
    }
    let judgements: Vec<_> = entries.iter().map(|e| e.fit.judgement.as_deref()).collect();
    let regression = judgements
        .iter()
        .flatten()
        .any(|j| matches!(j.network, crate::judge::Scores::Regression { .. }));
    let mut cells = vec![vec![String::from("—"); entries.len()]; entries.len()];
    for pair in judge::pairs(&judgements) {
        let text = match &pair.outcome {
            PairOutcome::Tested(test) => match test {
                Paired::Mcnemar { p_value, .. } => p_text(*p_value),
                Paired::SquaredErrorDifference { interval, .. } => {
                    format!("{} to {}", number(interval.low), number(interval.high))
                }
            },
            PairOutcome::NotPaired => "not paired".into(),
            PairOutcome::NotEnoughRows => NOT_ENOUGH_ROWS.into(),
        };
        cells[pair.a][pair.b] = text.clone();
        cells[pair.b][pair.a] = text;
    }
    Some(PairsView {
        ids: entries.iter().map(|e| e.id.to_string()).collect(),
        rows: entries
            .iter()
            .zip(cells)
            .map(|(e, cells)| PairsRow {
                id: e.id.to_string(),
                cells,
            })
            .collect(),
        note: if regression {
            "Paired tests on the held-out rows both runs share: the 95 % paired bootstrap interval of the row's squared error, row run minus column run (an interval without 0 is a real difference); runs held out on different rows are not paired."
        } else {
            "Paired tests on the held-out rows both runs share: McNemar's exact p-value (under 0.05 is a real difference); runs held out on different rows are not paired."
        },
    })
}

/// The rows every compared run can be judged on: validation rows when all have
/// them, held-out rows when all have those, else training rows.
fn common_choice_rows(entries: &[Compared<'_>]) -> RowSet {
    let all = |rows: RowSet| entries.iter().all(|entry| entry.fit.choice_rows() == rows);
    if all(RowSet::Validation) {
        RowSet::Validation
    } else if entries
        .iter()
        .all(|entry| entry.fit.report_rows() == RowSet::Test)
    {
        RowSet::Test
    } else {
        RowSet::Train
    }
}
