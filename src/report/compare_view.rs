//! Views of the steps that set fits side by side: a sweep's ranked combinations and a
//! compare step's table and overlaid chart.

use serde::Serialize;

use super::chart::{self, Bar, HeatMap, Positions, Series};
use super::format::number;
use super::verdict::{NOT_ENOUGH_ROWS, evidence, p_text};
use super::view::{
    HONEST_CHOICE, log_loss_is_loss, loss_axes, mean_curve, metric_label, shown_stats, stat_text,
    stop_counts,
};
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
    pub combinations: usize,
    /// The best [`TOP_ROWS`] combinations, shown in the card.
    pub rows: Vec<SweepRow>,
    /// The rest, under a disclosure.
    pub more_rows: Vec<SweepRow>,
    pub runs_per_combination: usize,
    pub loss_chart: String,
    pub loss_chart_note: String,
    /// How many combinations are within noise of the best, or why none was tested.
    pub noise_note: String,
    /// The ranking metric over the first two varied settings, when there are two.
    pub heat_map: Option<Figure>,
    /// The ranking metric against each varied setting.
    pub marginals: Vec<Figure>,
    /// Said when the held-out rows chose the best, so its score is optimistic.
    pub choice_note: Option<String>,
}

/// A chart and its caption.
#[derive(Serialize)]
pub(crate) struct Figure {
    pub svg: String,
    pub note: String,
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

/// `scaled_targets`: the sweep's runs trained on scaled targets (every combination
/// reads the same data step), so their loss is in those units.
pub(crate) fn sweep_view(result: &SweepResult, scaled_targets: bool) -> SweepView {
    let first = &result.fits[0];
    let hide = log_loss_is_loss(&result.fits);
    let stats_names: Vec<&'static str> = first
        .metric_stats(result.rank_rows)
        .map(|stats| shown_stats(stats, hide).iter().map(|s| s.name).collect())
        .unwrap_or_default();
    let mut rows: Vec<SweepRow> = result
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
                    .map(|stats| shown_stats(stats, hide).iter().map(stat_text).collect())
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
        .enumerate()
        .map(|(n, fit)| Series::nth(n, describe(&fit.settings), mean_curve(&fit.runs, false)))
        .collect();
    // Ranked by a loss on scaled targets, its charts say the units as the loss chart does.
    let ranked_by = metric_label(result.rank_by, scaled_targets);
    let loss_chart_note = if result.fits.len() > MAX_LINES {
        format!(
            "Mean training loss per epoch of the {MAX_LINES} best-ranked combinations, log scale."
        )
    } else {
        "Mean training loss per epoch of each combination, log scale.".to_string()
    };
    SweepView {
        setting_names: first
            .settings
            .iter()
            .map(|varied| varied.name.clone())
            .collect(),
        metric_names: stats_names.iter().map(|n| n.replace('_', " ")).collect(),
        rows_label: rows_label(result.rank_rows),
        rank_by: result.rank_by.key().replace('_', " "),
        combinations: result.fits.len(),
        more_rows: rows.split_off(rows.len().min(TOP_ROWS)),
        rows,
        runs_per_combination: first.runs.len(),
        loss_chart: chart::line_chart(&series, &loss_axes(true, scaled_targets)),
        loss_chart_note,
        noise_note: noise_note(result),
        heat_map: heat_map(result, &ranked_by),
        marginals: marginals(result, &ranked_by),
        choice_note: (result.rank_rows == RowSet::Test).then(|| {
            format!(
                "The best was chosen on the held-out rows, so its held-out score is optimistic. {HONEST_CHOICE}"
            )
        }),
    }
}

/// Sweeps with more rows than this show the best ones and the rest under a disclosure.
const TOP_ROWS: usize = 10;

/// The ranking metric's value in every run of a fit (each seed and fold).
fn run_values(result: &SweepResult, fit: &FitResult) -> Vec<f64> {
    let key = result.rank_by.key();
    fit.runs
        .iter()
        .filter_map(|run| run.metrics_on(result.rank_rows))
        .filter_map(|set| set.named().into_iter().find(|(name, _)| *name == key))
        .map(|(_, value)| value)
        .collect()
}

/// A varied setting's values in the order first met, and each one's runs' values of
/// the ranking metric (over seeds and every other setting).
fn by_value(result: &SweepResult, position: usize) -> Vec<(String, Option<f64>, Vec<f64>)> {
    let mut groups: Vec<(String, Option<f64>, Vec<f64>)> = Vec::new();
    for fit in &result.fits {
        let varied = &fit.settings[position];
        let values = run_values(result, fit);
        match groups.iter_mut().find(|(text, _, _)| *text == varied.text) {
            Some((_, _, group)) => group.extend(values),
            None => groups.push((varied.text.clone(), varied.number(), values)),
        }
    }
    if groups.iter().all(|(_, number, _)| number.is_some()) {
        groups.sort_by(|a, b| a.1.unwrap_or(0.0).total_cmp(&b.1.unwrap_or(0.0)));
    }
    groups
}

/// Mean and sample standard deviation (0 for fewer than two values).
fn mean_and_sd(values: &[f64]) -> (f64, f64) {
    let finite: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if finite.is_empty() {
        return (f64::NAN, 0.0);
    }
    let n = finite.len() as f64;
    let mean = finite.iter().sum::<f64>() / n;
    let sd = if finite.len() > 1 {
        (finite.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt()
    } else {
        0.0
    };
    (mean, sd)
}

/// The ranking metric (mean over seeds and other settings) over the first two varied
/// settings, the one with more values down the side so the cells stay wide enough for
/// their numbers.
/// `metric`: the ranking metric's name as the chart says it.
fn heat_map(result: &SweepResult, metric: &str) -> Option<Figure> {
    let first = &result.fits[0].settings;
    if first.len() < 2 {
        return None;
    }
    let (mut across, mut down) = (0, 1);
    let count = |position| by_value(result, position).len();
    if count(across) > count(down) {
        std::mem::swap(&mut across, &mut down);
    }
    let columns: Vec<String> = by_value(result, across).into_iter().map(|g| g.0).collect();
    let rows: Vec<String> = by_value(result, down).into_iter().map(|g| g.0).collect();
    let mut runs = vec![vec![Vec::new(); columns.len()]; rows.len()];
    for fit in &result.fits {
        let column = columns.iter().position(|c| *c == fit.settings[across].text);
        let row = rows.iter().position(|r| *r == fit.settings[down].text);
        if let (Some(row), Some(column)) = (row, column) {
            runs[row][column].extend(run_values(result, fit));
        }
    }
    let cells: Vec<Vec<f64>> = runs
        .iter()
        .map(|row| row.iter().map(|values| mean_and_sd(values).0).collect())
        .collect();
    let higher_is_better = result.rank_by.higher_is_better();
    let best = best_cell(&cells, higher_is_better);
    let svg = chart::heat_map(&HeatMap {
        x_name: &first[across].name,
        x_labels: columns,
        y_name: &first[down].name,
        y_labels: rows,
        cells,
        best,
        higher_is_better,
    });
    let others = if first.len() > 2 {
        " and the other settings"
    } else {
        ""
    };
    Some(Figure {
        svg,
        note: format!(
            "{} on the {} rows, mean over seeds{others}; lighter is better, the best cell outlined.",
            capitalise(metric),
            rows_label(result.rank_rows)
        ),
    })
}

/// The (row, column) of the best finite cell.
fn best_cell(cells: &[Vec<f64>], higher_is_better: bool) -> Option<(usize, usize)> {
    let mut best: Option<((usize, usize), f64)> = None;
    for (i, row) in cells.iter().enumerate() {
        for (j, &value) in row.iter().enumerate() {
            let better = match best {
                None => value.is_finite(),
                Some((_, b)) if higher_is_better => value > b,
                Some((_, b)) => value < b,
            };
            if better {
                best = Some(((i, j), value));
            }
        }
    }
    best.map(|(at, _)| at)
}

/// Numbers spanning more than this factor get a log axis (learning rates usually do).
const LOG_SPAN: f64 = 20.0;

/// For each varied setting, the ranking metric's mean ± sd over seeds and the other
/// settings at each of its values; numbers on a number line, other values as categories.
/// `metric`: the ranking metric's name as the chart says it.
fn marginals(result: &SweepResult, metric: &str) -> Vec<Figure> {
    result.fits[0]
        .settings
        .iter()
        .enumerate()
        .map(|(position, varied)| {
            let groups = by_value(result, position);
            let means: Vec<(f64, f64)> = groups.iter().map(|g| mean_and_sd(&g.2)).collect();
            let numbers: Option<Vec<f64>> = groups.iter().map(|g| g.1).collect();
            let positions = match numbers {
                Some(values) => {
                    let (lo, hi) = values
                        .iter()
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
                            (lo.min(v), hi.max(v))
                        });
                    let log = lo > 0.0 && hi / lo > LOG_SPAN;
                    Positions::Numbers { values, log }
                }
                None => Positions::Categories(groups.iter().map(|g| g.0.clone()).collect()),
            };
            let log_note = match positions {
                Positions::Numbers { log: true, .. } => " (log axis)",
                _ => "",
            };
            Figure {
                svg: chart::marginal_chart(&positions, &means, &varied.name, metric),
                note: format!(
                    "{} on the {} rows at each {}{log_note}: mean ± sd over seeds and the other settings.",
                    capitalise(metric),
                    rows_label(result.rank_rows),
                    varied.name
                ),
            }
        })
        .collect()
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
    /// It trained on scaled targets, so its loss is in those units.
    pub scaled_targets: bool,
}

/// The units of the losses a compare chart draws: each run's targets scaled for
/// training or not. When the runs differ, the legend marks the scaled ones.
#[derive(Clone, Copy, PartialEq, Eq)]
enum LossUnits {
    Targets,
    Scaled,
    Mixed,
}

impl LossUnits {
    fn of(entries: &[Compared<'_>]) -> LossUnits {
        let scaled = entries.iter().filter(|entry| entry.scaled_targets).count();
        match scaled {
            0 => LossUnits::Targets,
            n if n == entries.len() => LossUnits::Scaled,
            _ => LossUnits::Mixed,
        }
    }

    /// The entry's legend or bar label; a short mark, since bar labels have little room.
    fn legend(self, entry: &Compared<'_>) -> String {
        if self == LossUnits::Mixed && entry.scaled_targets {
            format!("{} (scaled)", entry.id)
        } else {
            entry.id.to_string()
        }
    }

    /// Said after the chart's caption.
    fn note(self) -> &'static str {
        match self {
            LossUnits::Mixed => {
                " Runs marked (scaled) trained on scaled targets, the others on the targets as they are, so their losses are in different units and do not compare."
            }
            _ => "",
        }
    }
}

/// The metric that picks the best run: the first column, except that losses in
/// different units do not rank, so runs trained on scaled and unscaled targets are
/// ranked by their MSE, in the targets' own units for both.
fn ranking_metric(first_column: Option<MetricName>, units: LossUnits) -> MetricName {
    match (first_column.unwrap_or(MetricName::Loss), units) {
        (MetricName::Loss, LossUnits::Mixed) => MetricName::Mse,
        (metric, _) => metric,
    }
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
    let units = LossUnits::of(entries);
    let best_by = ranking_metric(metrics.first().copied(), units);
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
                .enumerate()
                .map(|(n, entry)| {
                    Series::nth(
                        n,
                        units.legend(entry),
                        mean_curve(&entry.fit.runs, unfitted),
                    )
                })
                .collect();
            let scale = if spec.log_scale {
                "log scale"
            } else {
                "linear scale"
            };
            (
                Some(chart::line_chart(
                    &series,
                    &loss_axes(spec.log_scale, units == LossUnits::Scaled),
                )),
                format!(
                    "Mean {} loss per epoch of each run, {scale}.{}",
                    rows_label(choice).replace(' ', "-"),
                    units.note()
                ),
            )
        }
        ChartChoice::Metric => {
            let metric = metrics.first().copied().unwrap_or(MetricName::Loss);
            let units = match metric {
                MetricName::Loss => units,
                _ => LossUnits::Targets,
            };
            let bars: Vec<Bar> = entries
                .iter()
                .map(|entry| {
                    let stat = entry.fit.metric(metric, entry.fit.report_rows());
                    Bar {
                        label: units.legend(entry),
                        value: stat.as_ref().map_or(f64::NAN, |s| s.mean),
                        spread: stat.and_then(|s| s.sd),
                    }
                })
                .collect();
            let name = metric_label(metric, units == LossUnits::Scaled);
            (
                Some(chart::bar_chart(&bars, &name)),
                format!(
                    "{} of each run (held-out rows where there are any).{}",
                    capitalise(&name),
                    units.note()
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
    if others == 0 || result.rank_rows == RowSet::Train {
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
    let rows = match result.rank_rows {
        RowSet::Validation => "validation rows",
        _ => "held-out rows",
    };
    format!(
        "{within} of the other {others} combinations are within noise of the best (≈): their paired test against it on the {rows} is not significant at 0.05, so the ranking between them is not settled."
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
