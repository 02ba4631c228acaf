//! `compare` settings: a table and one overlaid chart of several trains and sweeps.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};

use super::Checker;
use super::schema::Word;
use super::sweep::{MetricName, repeated};

/// What the compare card charts.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum ChartChoice {
    /// Training and validation loss per epoch, one line pair per run.
    Loss,
    /// The first listed metric, one bar per run.
    Metric,
    None,
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "compare")]
pub(super) struct RawCompare {
    runs: Vec<String>,
    #[schemars(with = "Option<Vec<Word<MetricName>>>")]
    metrics: Option<Vec<MetricName>>,
    #[schemars(with = "Option<Word<ChartChoice>>")]
    chart: Option<ChartChoice>,
    log_scale: Option<bool>,
}

/// `compare`: listed trains and sweeps side by side.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct CompareSpec {
    pub runs: Vec<String>,
    /// `None`: loss and accuracy to classify, loss, mae and r2 to regress.
    pub(crate) metrics: Option<Vec<MetricName>>,
    pub(crate) chart: ChartChoice,
    pub(crate) log_scale: bool,
}

pub(super) fn validate_compare(raw: RawCompare, check: &mut Checker<'_>) -> CompareSpec {
    check.require(!raw.runs.is_empty(), "runs", || {
        "runs must list at least one train or sweep step".into()
    });
    if let Some(twice) = repeated(&raw.runs) {
        check.require(false, "runs", || {
            format!("runs lists '{twice}' twice; each run is one row of the table")
        });
    }
    if let Some(metrics) = &raw.metrics {
        check.require(!metrics.is_empty(), "metrics", || {
            "metrics must list at least one metric".into()
        });
    }
    CompareSpec {
        runs: raw.runs,
        metrics: raw.metrics,
        chart: raw.chart.unwrap_or(ChartChoice::Loss),
        log_scale: raw.log_scale.unwrap_or(true),
    }
}
