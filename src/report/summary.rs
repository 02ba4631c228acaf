//! The `--json` summary for scripts and CI: one object per step in document order.
//! Non-finite numbers (a diverged run) are written as null.

use serde_json::{Map, Value, json};

use super::format::stop_code;
use crate::build::outcome::{FitResult, MetricStat, Outcome, RowSet, RunResult, SetMetrics};
use crate::build::{BuildResult, Status};
use crate::document::StepSpec;
use crate::document::spec::sweep::Varied;
use crate::plan::Plan;

/// The summary as a JSON value.
pub(crate) fn summary(
    document_name: &str,
    document_hash: &str,
    plan: &Plan,
    results: &BuildResult,
) -> Value {
    let steps: Vec<Value> = plan
        .steps
        .iter()
        .zip(&results.steps)
        .map(|(step, record)| {
            let mut object = Map::new();
            object.insert("id".into(), json!(step.id));
            object.insert("kind".into(), json!(step.kind.word()));
            match &record.status {
                Status::Ran { seconds } => {
                    object.insert("status".into(), json!("ran"));
                    object.insert("seconds".into(), json!(seconds));
                }
                Status::Reused => {
                    object.insert("status".into(), json!("reused"));
                }
                Status::Failed { error } => {
                    object.insert("status".into(), json!("failed"));
                    object.insert("error".into(), json!(error));
                }
            }
            object.insert("key".into(), json!(step.key));
            object.insert("settings".into(), spec_settings(&step.spec));
            match &record.outcome {
                Some(Outcome::Train(result)) => {
                    object.insert(
                        "runs_trained".into(),
                        json!(record.trained.iter().sum::<usize>()),
                    );
                    train_fields(result, &mut object);
                }
                Some(Outcome::Sweep(sweep)) => {
                    object.insert(
                        "runs_trained".into(),
                        json!(record.trained.iter().sum::<usize>()),
                    );
                    object.insert("rank_by".into(), json!(sweep.rank_by.key()));
                    object.insert("best".into(), settings(&sweep.best().settings));
                    let runs = sweep
                        .fits
                        .iter()
                        .zip(&record.trained)
                        .map(|(fit, &trained)| {
                            let mut run = Map::new();
                            run.insert("settings".into(), settings(&fit.settings));
                            run.insert(
                                "status".into(),
                                json!(if trained > 0 { "ran" } else { "reused" }),
                            );
                            run.insert("runs_trained".into(), json!(trained));
                            train_fields(fit, &mut run);
                            Value::Object(run)
                        })
                        .collect();
                    object.insert("runs".into(), Value::Array(runs));
                }
                Some(Outcome::Predict(predict)) => {
                    object.insert("rows".into(), json!(predict.lines.len()));
                }
                _ => {}
            }
            Value::Object(object)
        })
        .collect();
    json!({"document": document_name, "hash": document_hash, "steps": steps})
}

/// A step's settings with defaults applied, as its key reads them, without the kind.
fn spec_settings(spec: &StepSpec) -> Value {
    match serde_json::to_value(spec).expect("a spec serialises") {
        Value::Object(tagged) => tagged.into_iter().next().map_or(Value::Null, |(_, v)| v),
        other => other,
    }
}

fn train_fields(result: &FitResult, object: &mut Map<String, Value>) {
    let mut metrics = Map::new();
    let mut sd = Map::new();
    for (name, rows) in [("train", RowSet::Train), ("test", RowSet::Test)] {
        if let Some(stats) = result.metric_stats(rows) {
            metrics.insert(name.into(), stat_means(&stats));
            if result.runs.len() > 1 {
                sd.insert(name.into(), stat_sds(&stats));
            }
        }
    }
    object.insert("metrics".into(), Value::Object(metrics));
    if let [run] = result.runs.as_slice() {
        object.insert("stop".into(), stop(run));
    } else {
        object.insert("sd".into(), Value::Object(sd));
        let folds = result.runs.iter().map(fold).collect();
        object.insert("folds".into(), Value::Array(folds));
    }
}

/// A sweep combination's settings as an object of the values as written.
fn settings(settings: &[Varied]) -> Value {
    Value::Object(
        settings
            .iter()
            .map(|varied| (varied.name.clone(), json!(varied.text)))
            .collect(),
    )
}

fn stat_means(stats: &[MetricStat]) -> Value {
    Value::Object(
        stats
            .iter()
            .map(|s| (s.name.to_string(), number(s.mean)))
            .collect(),
    )
}

fn stat_sds(stats: &[MetricStat]) -> Value {
    Value::Object(
        stats
            .iter()
            .map(|s| (s.name.to_string(), number(s.sd.unwrap_or(0.0))))
            .collect(),
    )
}

fn stop(run: &RunResult) -> Value {
    json!({"reason": stop_code(run.fit.stop), "epoch": run.fit.epochs_run})
}

fn fold(run: &RunResult) -> Value {
    let mut metrics = Map::new();
    metrics.insert("train".into(), set(&run.train));
    if let Some(test) = &run.test {
        metrics.insert("test".into(), set(test));
    }
    json!({"seconds": run.seconds, "metrics": metrics, "stop": stop(run)})
}

fn set(metrics: &SetMetrics) -> Value {
    Value::Object(
        metrics
            .named()
            .into_iter()
            .map(|(k, v)| (k.to_string(), number(v)))
            .collect(),
    )
}

fn number(value: f64) -> Value {
    if value.is_finite() {
        json!(value)
    } else {
        Value::Null
    }
}
