//! The summary at the top of a report: each train and sweep step's headline metric on
//! its held-out rows (training rows when it has none), the best one marked, each
//! linking to its card.

use serde::Serialize;

use super::compare_view::rows_label;
use super::format::number;
use super::verdict::{Verdict, headline_interval, short_verdict};
use crate::build::BuildResult;
use crate::build::outcome::{FitResult, Outcome, SetMetrics};
use crate::document::spec::MetricName;
use crate::plan::{Plan, describe};

/// One line of the summary.
#[derive(Serialize)]
pub(crate) struct Headline {
    pub id: String,
    pub metric: String,
    pub value: String,
    pub rows: &'static str,
    /// For a sweep, which combination is shown.
    pub what: String,
    /// The best value of its metric among the lines.
    pub best: bool,
    /// The held-out score's 95 % interval and the verdict in a few words, when the fit
    /// was judged (it has held-out rows).
    pub interval: Option<String>,
    pub verdict: Option<Verdict>,
}

/// The metric a reader looks at first: accuracy for classification, R² for regression
/// (both higher-is-better, so lines of one task compare directly).
fn headline_metric(fit: &FitResult) -> MetricName {
    match fit.runs.first().map(|run| &run.train) {
        Some(SetMetrics::Classification { .. }) => MetricName::Accuracy,
        _ => MetricName::R2,
    }
}

/// The summary lines in document order; steps that failed or did not run are left out.
pub(crate) fn headlines(plan: &Plan, results: &BuildResult) -> Vec<Headline> {
    let mut lines: Vec<(Headline, MetricName, f64)> = plan
        .steps
        .iter()
        .zip(&results.steps)
        .filter_map(|(step, record)| {
            let (fit, what) = match record.outcome.as_ref()? {
                Outcome::Train(fit) => (fit, String::new()),
                Outcome::Sweep(sweep) => (
                    sweep.best(),
                    format!(
                        "best of {} combinations: {}",
                        sweep.fits.len(),
                        describe(&sweep.best().settings)
                    ),
                ),
                _ => return None,
            };
            let metric = headline_metric(fit);
            let rows = fit.report_rows();
            // Held-out targets that do not vary leave R² undefined: a dash, never best.
            let r2_undefined = metric == MetricName::R2
                && fit
                    .judgement
                    .as_deref()
                    .is_some_and(|judged| judged.diagnosis.r2_undefined().is_some());
            let mean = match fit.metric(metric, rows)?.mean {
                _ if r2_undefined => f64::NAN,
                mean => mean,
            };
            let headline = Headline {
                id: step.id.clone(),
                metric: metric.key().replace('_', " "),
                value: number(mean),
                rows: rows_label(rows),
                what,
                best: false,
                interval: fit.judgement.as_deref().and_then(headline_interval),
                verdict: fit.judgement.as_deref().map(short_verdict),
            };
            Some((headline, metric, mean))
        })
        .collect();
    mark_best(&mut lines);
    lines.into_iter().map(|(headline, _, _)| headline).collect()
}

/// Marks the highest value of each metric, when more than one line has it.
fn mark_best(lines: &mut [(Headline, MetricName, f64)]) {
    let metrics: Vec<MetricName> = lines.iter().map(|line| line.1).collect();
    for metric in metrics {
        let same: Vec<usize> = (0..lines.len()).filter(|&i| lines[i].1 == metric).collect();
        if same.len() < 2 {
            continue;
        }
        let best = same
            .iter()
            .copied()
            .filter(|&i| lines[i].2.is_finite())
            .max_by(|&a, &b| lines[a].2.total_cmp(&lines[b].2));
        if let Some(best) = best {
            lines[best].0.best = true;
        }
    }
}
