//! `stet diff`: two builds of an experiment side by side, each read from a report (the
//! summary it carries) or a `--json` summary. Steps are matched by id and sweep
//! combinations by their settings; for each match it lists the settings that changed,
//! the status, and how every metric moved. `text` lays the comparison out for a
//! terminal; the report module renders it as a page; serde writes it for scripts.

pub(crate) mod text;

use std::path::{Path, PathBuf};

use serde::Serialize;
use serde_json::{Map, Value};

use crate::carry::{self, CarryError};
use crate::plan::input_file;

/// The largest file `stet diff` reads.
const MAX_INPUT_BYTES: u64 = 2 << 30;

/// Two builds compared.
#[derive(Debug, Serialize)]
pub struct Comparison {
    pub old: String,
    pub new: String,
    /// Steps present in both, in the new build's order.
    pub steps: Vec<StepDiff>,
    /// Ids of the steps only the new build has.
    pub added: Vec<String>,
    /// Ids of the steps only the old build has.
    pub removed: Vec<String>,
}

/// One step present in both builds.
#[derive(Debug, Serialize)]
pub struct StepDiff {
    pub id: String,
    pub kind: String,
    /// The settings whose values differ (a setting one side lacks is null there).
    pub settings: Vec<SettingChange>,
    pub status: Change<String>,
    pub metrics: Vec<MetricMove>,
    /// A sweep's combinations, matched by their settings.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub combinations: Option<Combinations>,
}

#[derive(Debug, Serialize)]
pub struct Change<T> {
    pub old: T,
    pub new: T,
}

#[derive(Debug, Serialize)]
pub struct SettingChange {
    /// Nested settings are joined with dots.
    pub name: String,
    pub old: Value,
    pub new: Value,
}

/// One metric on one set of rows, in both builds.
#[derive(Debug, Serialize)]
pub struct MetricMove {
    /// `train` or `test`.
    pub rows: String,
    pub name: String,
    pub old: Option<f64>,
    pub new: Option<f64>,
    /// New minus old.
    pub difference: Option<f64>,
    /// Whether the old value lies inside the new build's interval for the metric: the
    /// move is then within the new build's own uncertainty. Absent when the new summary
    /// gives no interval.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub within_new_interval: Option<bool>,
}

/// A sweep's combinations in both builds.
#[derive(Debug, Serialize)]
pub struct Combinations {
    pub matched: Vec<Combination>,
    pub added: Vec<Map<String, Value>>,
    pub removed: Vec<Map<String, Value>>,
}

#[derive(Debug, Serialize)]
pub struct Combination {
    pub settings: Map<String, Value>,
    pub status: Change<String>,
    pub metrics: Vec<MetricMove>,
}

/// Why `stet diff` could not compare (exit code 2).
#[derive(Debug, thiserror::Error)]
pub enum DiffError {
    #[error("cannot read {}: {message}", path.display())]
    Unreadable { path: PathBuf, message: String },
    #[error("{} is neither a stet report nor a --json summary: {why}", path.display())]
    NotABuild { path: PathBuf, why: String },
}

impl Comparison {
    /// Whether any step is in both builds.
    pub fn matched_any(&self) -> bool {
        !self.steps.is_empty()
    }
}

/// Compares the builds in the files `old` and `new`.
pub(crate) fn compare_files(old: &Path, new: &Path) -> Result<Comparison, DiffError> {
    let old_summary = read_build(old)?;
    let new_summary = read_build(new)?;
    Ok(compare(
        old.display().to_string(),
        &old_summary,
        new.display().to_string(),
        &new_summary,
    ))
}

/// A build's summary: the file itself when it is one, else the one its report carries.
fn read_build(path: &Path) -> Result<Value, DiffError> {
    let bytes =
        input_file::read_regular(path, MAX_INPUT_BYTES).map_err(|error| DiffError::Unreadable {
            path: path.to_path_buf(),
            message: error.to_string(),
        })?;
    let not_a_build = |why: String| DiffError::NotABuild {
        path: path.to_path_buf(),
        why,
    };
    let summary = match serde_json::from_slice::<Value>(&bytes) {
        Ok(summary) => summary,
        Err(_) => match carry::read(&bytes) {
            Ok(experiment) => experiment.manifest.summary,
            Err(CarryError::NotAReport) => {
                return Err(not_a_build(
                    "it is not JSON, and carries no stet experiment".into(),
                ));
            }
            Err(error) => return Err(not_a_build(error.to_string())),
        },
    };
    if !is_summary(&summary) {
        return Err(not_a_build(
            "its JSON has no steps with ids, kinds and statuses".into(),
        ));
    }
    Ok(summary)
}

/// Whether `value` has the shape of a `--json` summary.
fn is_summary(value: &Value) -> bool {
    value["hash"].is_string()
        && value["steps"].as_array().is_some_and(|steps| {
            steps.iter().all(|step| {
                step["id"].is_string() && step["kind"].is_string() && step["status"].is_string()
            })
        })
}

fn compare(old_name: String, old: &Value, new_name: String, new: &Value) -> Comparison {
    let old_steps = steps_of(old);
    let new_steps = steps_of(new);
    let steps = new_steps
        .iter()
        .filter_map(|new_step| {
            let old_step = find_step(&old_steps, new_step["id"].as_str()?)?;
            Some(step_diff(old_step, new_step))
        })
        .collect();
    let ids_missing_from = |these: &[&Value], those: &[&Value]| -> Vec<String> {
        these
            .iter()
            .filter_map(|step| step["id"].as_str())
            .filter(|id| find_step(those, id).is_none())
            .map(str::to_string)
            .collect()
    };
    Comparison {
        added: ids_missing_from(&new_steps, &old_steps),
        removed: ids_missing_from(&old_steps, &new_steps),
        old: old_name,
        new: new_name,
        steps,
    }
}

fn find_step<'a>(steps: &[&'a Value], id: &str) -> Option<&'a Value> {
    steps.iter().copied().find(|step| step["id"] == id)
}

fn steps_of(summary: &Value) -> Vec<&Value> {
    summary["steps"]
        .as_array()
        .map(|steps| steps.iter().collect())
        .unwrap_or_default()
}

fn step_diff(old: &Value, new: &Value) -> StepDiff {
    let combinations = (old["runs"].is_array() || new["runs"].is_array())
        .then(|| combinations(&old["runs"], &new["runs"]));
    StepDiff {
        id: text_of(&new["id"]),
        kind: text_of(&new["kind"]),
        settings: setting_changes(&old["settings"], &new["settings"]),
        status: status_change(old, new),
        metrics: metric_moves(old, new),
        combinations,
    }
}

fn status_change(old: &Value, new: &Value) -> Change<String> {
    Change {
        old: text_of(&old["status"]),
        new: text_of(&new["status"]),
    }
}

fn text_of(value: &Value) -> String {
    value.as_str().unwrap_or_default().to_string()
}

/// The settings whose values differ, by their dotted names in sorted order.
fn setting_changes(old: &Value, new: &Value) -> Vec<SettingChange> {
    let old = flattened(old);
    let new = flattened(new);
    let mut names: Vec<&String> = old.keys().chain(new.keys()).collect();
    names.sort();
    names.dedup();
    names
        .into_iter()
        .filter(|name| old.get(*name) != new.get(*name))
        .map(|name| SettingChange {
            name: name.clone(),
            old: old.get(name).cloned().unwrap_or(Value::Null),
            new: new.get(name).cloned().unwrap_or(Value::Null),
        })
        .collect()
}

/// Nested objects flattened to dotted names; the `settings` level a data step's
/// settings sit under is left out of the names.
fn flattened(value: &Value) -> std::collections::BTreeMap<String, Value> {
    let mut out = std::collections::BTreeMap::new();
    flatten_into("", value, &mut out);
    out
}

fn flatten_into(prefix: &str, value: &Value, out: &mut std::collections::BTreeMap<String, Value>) {
    match value {
        Value::Object(map) => {
            for (key, inner) in map {
                let name = match (prefix, key.as_str()) {
                    (prefix, "settings") => prefix.to_string(),
                    ("", key) => key.to_string(),
                    (prefix, key) => format!("{prefix}.{key}"),
                };
                flatten_into(&name, inner, out);
            }
        }
        Value::Null if prefix.is_empty() => {}
        other => {
            out.insert(prefix.to_string(), other.clone());
        }
    }
}

/// The row sets a step's metrics are on, and whether the summary gives intervals for
/// them: a fit's `metrics.train` and `metrics.test` (held out), or a predict step's
/// labelled batch, flat under `metrics`.
fn row_sets(step: &Value) -> Vec<(&'static str, &Value, bool)> {
    match step["kind"].as_str() {
        Some("predict") => vec![("batch", &step["metrics"], true)],
        _ => vec![
            ("train", &step["metrics"]["train"], false),
            ("test", &step["metrics"]["test"], true),
        ],
    }
}

/// Every metric either side reports, train rows first, in the new build's order.
fn metric_moves(old: &Value, new: &Value) -> Vec<MetricMove> {
    let mut moves = Vec::new();
    for ((rows, old_set, _), (_, new_set, has_intervals)) in
        row_sets(old).into_iter().zip(row_sets(new))
    {
        let mut names: Vec<&String> = Vec::new();
        for name in [new_set, old_set]
            .into_iter()
            .filter_map(Value::as_object)
            .flat_map(Map::keys)
        {
            if !names.contains(&name) {
                names.push(name);
            }
        }
        for name in names {
            let old_value = old_set[name].as_f64();
            let new_value = new_set[name].as_f64();
            // `interval: {"level": 0.95, "<metric>": [low, high], …}`.
            let interval = has_intervals
                .then(|| interval(&new["interval"][name]))
                .flatten();
            moves.push(MetricMove {
                rows: rows.to_string(),
                name: name.clone(),
                old: old_value,
                new: new_value,
                difference: old_value.zip(new_value).map(|(old, new)| new - old),
                within_new_interval: interval
                    .zip(old_value)
                    .map(|((low, high), old)| low <= old && old <= high),
            });
        }
    }
    moves
}

/// An interval written as `[low, high]`; `None` for anything else (`null` when the
/// held-out rows were too few).
fn interval(value: &Value) -> Option<(f64, f64)> {
    let bounds = value.as_array()?;
    Some((bounds.first()?.as_f64()?, bounds.get(1)?.as_f64()?))
}

/// A sweep's combinations matched by their settings.
fn combinations(old: &Value, new: &Value) -> Combinations {
    let old_runs: Vec<&Value> = old
        .as_array()
        .map(|r| r.iter().collect())
        .unwrap_or_default();
    let new_runs: Vec<&Value> = new
        .as_array()
        .map(|r| r.iter().collect())
        .unwrap_or_default();
    let matched = new_runs
        .iter()
        .filter_map(|new_run| {
            let settings = settings_of(new_run);
            let old_run = find_run(&old_runs, &settings)?;
            Some(Combination {
                status: status_change(old_run, new_run),
                metrics: metric_moves(old_run, new_run),
                settings,
            })
        })
        .collect();
    let missing_from = |these: &[&Value], those: &[&Value]| {
        these
            .iter()
            .map(|run| settings_of(run))
            .filter(|settings| find_run(those, settings).is_none())
            .collect()
    };
    Combinations {
        added: missing_from(&new_runs, &old_runs),
        removed: missing_from(&old_runs, &new_runs),
        matched,
    }
}

fn settings_of(run: &Value) -> Map<String, Value> {
    run["settings"].as_object().cloned().unwrap_or_default()
}

fn find_run<'a>(runs: &[&'a Value], settings: &Map<String, Value>) -> Option<&'a Value> {
    runs.iter()
        .copied()
        .find(|run| &settings_of(run) == settings)
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    #[test]
    fn a_data_steps_nested_settings_compare_by_their_own_names() {
        let old = json!({"file": "a.csv", "settings": {"holdout": 0.2, "scale": "standard"}});
        let new = json!({"file": "a.csv", "settings": {"holdout": 0.3, "scale": "standard"}});
        let changes = setting_changes(&old, &new);
        assert_eq!(changes.len(), 1);
        assert_eq!(changes[0].name, "holdout");
        assert_eq!(
            (changes[0].old.clone(), changes[0].new.clone()),
            (json!(0.2), json!(0.3))
        );
    }

    #[test]
    fn an_old_value_inside_the_new_interval_is_within_it() {
        let old = json!({"metrics": {"test": {"accuracy": 0.90}}});
        let new = json!({"metrics": {"test": {"accuracy": 0.92}},
                         "interval": {"level": 0.95, "accuracy": [0.85, 0.97]}});
        let moves = metric_moves(&old, &new);
        assert_eq!(moves[0].within_new_interval, Some(true));
        let narrow = json!({"metrics": {"test": {"accuracy": 0.92}},
                            "interval": {"level": 0.95, "accuracy": [0.91, 0.93]}});
        assert_eq!(
            metric_moves(&old, &narrow)[0].within_new_interval,
            Some(false)
        );
        let too_few = json!({"metrics": {"test": {"accuracy": 0.92}}, "interval": null});
        assert_eq!(metric_moves(&old, &too_few)[0].within_new_interval, None);
        let without = json!({"metrics": {"test": {"accuracy": 0.92}}});
        assert_eq!(metric_moves(&old, &without)[0].within_new_interval, None);
    }

    #[test]
    fn a_labelled_predict_batchs_metrics_are_compared_with_their_interval() {
        let old = json!({"kind": "predict", "metrics": {"accuracy": 0.90}});
        let new = json!({"kind": "predict", "metrics": {"accuracy": 0.80},
                         "interval": {"level": 0.95, "accuracy": [0.70, 0.88]}});
        let moves = metric_moves(&old, &new);
        assert_eq!(moves.len(), 1);
        assert_eq!(moves[0].rows, "batch");
        assert_eq!(moves[0].within_new_interval, Some(false));
    }
}
