//! `stet diff --html`: the comparison as a page in the report's look, every cell
//! formatted as the text output formats it.

use serde::Serialize;

use super::Templates;
use crate::diff::text::{METRIC_HEADER, metric_cells, setting_cells, settings_text, status};
use crate::diff::{Comparison, MetricMove, StepDiff};

#[derive(Serialize)]
struct DiffView<'a> {
    old: &'a str,
    new: &'a str,
    version: &'static str,
    summary: String,
    header: [&'static str; 6],
    steps: Vec<StepView>,
    added: &'a [String],
    removed: &'a [String],
}

#[derive(Serialize)]
struct StepView {
    id: String,
    kind: String,
    status: String,
    settings: Vec<Vec<String>>,
    /// The step's own metrics, then one table per sweep combination.
    tables: Vec<TableView>,
}

#[derive(Serialize)]
struct TableView {
    label: String,
    rows: Vec<Vec<String>>,
}

/// The comparison as an HTML page.
pub(crate) fn render(
    comparison: &Comparison,
    templates: &Templates,
) -> Result<String, minijinja::Error> {
    let view = DiffView {
        old: &comparison.old,
        new: &comparison.new,
        version: env!("CARGO_PKG_VERSION"),
        summary: format!(
            "{} steps matched · {} added · {} removed",
            comparison.steps.len(),
            comparison.added.len(),
            comparison.removed.len()
        ),
        header: METRIC_HEADER,
        steps: comparison.steps.iter().map(step_view).collect(),
        added: &comparison.added,
        removed: &comparison.removed,
    };
    templates
        .env
        .get_template("diff.html")?
        .render(minijinja::value::Serde(&view))
}

fn step_view(step: &StepDiff) -> StepView {
    let mut tables = vec![table(String::new(), &step.metrics)];
    if let Some(combinations) = &step.combinations {
        tables.extend(combinations.matched.iter().map(|combination| {
            table(
                format!(
                    "combination {}: {}",
                    settings_text(&combination.settings),
                    status(&combination.status)
                ),
                &combination.metrics,
            )
        }));
        for (word, list) in [
            ("added", &combinations.added),
            ("removed", &combinations.removed),
        ] {
            tables.extend(list.iter().map(|settings| {
                table(
                    format!("combination {word}: {}", settings_text(settings)),
                    &[],
                )
            }));
        }
    }
    StepView {
        id: step.id.clone(),
        kind: step.kind.clone(),
        status: status(&step.status),
        settings: step.settings.iter().map(setting_cells).collect(),
        tables,
    }
}

fn table(label: String, metrics: &[MetricMove]) -> TableView {
    TableView {
        label,
        rows: metrics.iter().map(metric_cells).collect(),
    }
}
