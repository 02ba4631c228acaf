//! The `--json` summary for scripts and CI: one object per step in document order.
//! Non-finite numbers (a diverged run) are written as null.

use serde_json::{Map, Value, json};

use super::card_view::warning_text;
use super::format::stop_code;
use super::verdict::verdict;
use crate::build::importance::pooled_importance;
use crate::build::outcome::{
    FitResult, MetricStat, Outcome, PredictScore, RowSet, RunResult, SetMetrics,
};
use crate::build::{BuildResult, Status};
use crate::data::card::{ColumnProfile, DataCard, Values};
use crate::document::StepSpec;
use crate::document::names::word;
use crate::document::spec::sweep::Varied;
use crate::judge::diagnosis::{Diagnosis, Roc, Unavailable};
use crate::judge::stats::{self, Interval};
use crate::judge::{self, Judgement, PairOutcome, Paired, Scores};
use crate::plan::{Plan, PlannedStep};

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
                    importance_field(result, &mut object);
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
                        .enumerate()
                        .map(|(i, (fit, &trained))| {
                            let mut run = Map::new();
                            run.insert("settings".into(), settings(&fit.settings));
                            run.insert(
                                "status".into(),
                                json!(if trained > 0 { "ran" } else { "reused" }),
                            );
                            run.insert("runs_trained".into(), json!(trained));
                            train_fields(fit, &mut run);
                            run.insert(
                                "within_noise_of_best".into(),
                                json!(sweep.within_noise_of_best.get(i).copied().flatten()),
                            );
                            Value::Object(run)
                        })
                        .collect();
                    object.insert("runs".into(), Value::Array(runs));
                }
                Some(Outcome::Compare) => {
                    object.insert("pairs".into(), compare_pairs(plan, results, step));
                }
                Some(Outcome::Data(data)) => data_fields(&data.card, &mut object),
                Some(Outcome::Predict(predict)) => {
                    object.insert("rows".into(), json!(predict.lines.len()));
                    if let Some(scored) = &predict.scored {
                        batch_fields(scored, &mut object);
                    }
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

/// A data step's column statistics and warnings.
fn data_fields(card: &DataCard, object: &mut Map<String, Value>) {
    let columns = card.columns.iter().map(column_stats).collect();
    object.insert("columns".into(), Value::Array(columns));
    let warnings = card
        .warnings
        .iter()
        .map(|warning| {
            json!({
                "column": warning.column(),
                "code": word(&warning.code()),
                "message": warning_text(warning),
            })
        })
        .collect();
    object.insert("warnings".into(), Value::Array(warnings));
}

fn column_stats(column: &ColumnProfile) -> Value {
    let mut object = Map::new();
    object.insert("name".into(), json!(column.name));
    object.insert("role".into(), json!(word(&column.role)));
    object.insert("count".into(), json!(column.count));
    object.insert("missing".into(), json!(column.missing));
    object.insert("distinct".into(), json!(column.distinct));
    match &column.values {
        Values::Numeric(stats) => {
            object.insert("kind".into(), json!("numeric"));
            if let Some(stats) = stats {
                for (name, value) in [
                    ("min", Some(stats.min)),
                    ("median", Some(stats.median)),
                    ("max", Some(stats.max)),
                    ("mean", Some(stats.mean)),
                    ("sd", stats.sd),
                ] {
                    object.insert(name.into(), value.map_or(Value::Null, number));
                }
            }
        }
        Values::Text { most_common } => {
            object.insert("kind".into(), json!("text"));
            let listed = most_common
                .iter()
                .map(|(value, count)| json!({"value": value, "count": count}))
                .collect();
            object.insert("most_common".into(), Value::Array(listed));
        }
    }
    Value::Object(object)
}

fn train_fields(result: &FitResult, object: &mut Map<String, Value>) {
    let mut metrics = Map::new();
    let mut sd = Map::new();
    // Validation appears only where a data step set rows aside, so summaries of
    // documents without it keep their shape.
    let sets = [
        ("train", RowSet::Train),
        ("validation", RowSet::Validation),
        ("test", RowSet::Test),
    ];
    for (name, rows) in sets {
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
        let part_intervals = result
            .judgement
            .as_ref()
            .map_or(&[][..], |judged| &judged.part_intervals[..]);
        let folds = result
            .runs
            .iter()
            .enumerate()
            .map(|(i, run)| fold(run, part_intervals.get(i)))
            .collect();
        object.insert("folds".into(), Value::Array(folds));
    }
    if let Some(judgement) = &result.judgement {
        judgement_fields(judgement, object);
    }
}

/// A train step's permutation importance, most important first.
fn importance_field(result: &FitResult, object: &mut Map<String, Value>) {
    let Some(stats) = pooled_importance(&result.runs) else {
        return;
    };
    let inputs = stats
        .iter()
        .map(|stat| {
            json!({
                "input": stat.input,
                "mean": number(stat.mean),
                "sd": number(stat.sd),
                "loss_mean": number(stat.loss_mean),
                "loss_sd": number(stat.loss_sd),
            })
        })
        .collect();
    object.insert("importance".into(), Value::Array(inputs));
}

/// A labelled predict batch: the rows scored and left out, and, when any row was
/// scored, its metrics as a train step's held-out rows have them.
fn batch_fields(scored: &PredictScore, object: &mut Map<String, Value>) {
    object.insert("scored_rows".into(), json!(scored.rows));
    object.insert("empty_target_rows".into(), json!(scored.empty_rows));
    let unseen = scored
        .unseen_labels
        .iter()
        .map(|(label, rows)| json!({"label": label, "rows": rows}))
        .collect();
    object.insert("unseen_labels".into(), Value::Array(unseen));
    let Some(scores) = &scored.scores else {
        return;
    };
    object.insert("metrics".into(), set(&scores.metrics));
    let interval = scores.intervals.as_deref().map(interval_object);
    object.insert("interval".into(), json!(interval));
    match &scores.metrics {
        SetMetrics::Classification { metrics, .. } => {
            object.insert("confusion".into(), json!(metrics.confusion));
        }
        SetMetrics::Regression { .. } => {
            let each = scores.targets.iter().map(self::scores).collect();
            object.insert("targets".into(), Value::Array(each));
        }
    }
}

/// A fit against the baseline and the model without a hidden layer (`judge`).
fn judgement_fields(judgement: &Judgement, object: &mut Map<String, Value>) {
    object.insert("held_out_rows".into(), json!(judgement.held_out_rows));
    object.insert(
        "baseline".into(),
        json!({"rule": word(&judgement.baseline_rule), "test": scores(&judgement.baseline)}),
    );
    object.insert(
        "linear".into(),
        json!({"train": scores(&judgement.linear_train), "test": scores(&judgement.linear)}),
    );
    let interval = judgement.intervals.as_deref().map(interval_object);
    object.insert("interval".into(), json!(interval));
    object.insert(
        "versus_linear".into(),
        judgement.versus_linear.as_ref().map_or(Value::Null, paired),
    );
    object.insert("verdict".into(), json!(word(&verdict(judgement).tone)));
    object.insert("held_out_lines".into(), json!(judgement.held_out_lines));
    diagnosis_fields(&judgement.diagnosis, object);
}

/// Where the fit goes wrong (`judge::diagnosis`): a value the rows cannot give is
/// null, with its reason under `unavailable`.
fn diagnosis_fields(diagnosis: &Diagnosis, object: &mut Map<String, Value>) {
    let mut reasons = Map::new();
    let mut known = |name: &str, value: Result<f64, Unavailable>| match value {
        Ok(value) => number(value),
        Err(why) => {
            reasons.insert(name.into(), json!(why.to_string()));
            Value::Null
        }
    };
    if let Some(auc) = diagnosis.auc() {
        object.insert("auc".into(), known("auc", auc));
    }
    match diagnosis {
        Diagnosis::TwoClasses { roc, reliability } => {
            let brier = reliability.as_ref().map(|r| r.brier).map_err(|e| *e);
            object.insert("brier".into(), known("brier", brier));
            let curve = roc.as_ref().ok().map(roc_fields);
            object.insert("roc".into(), json!(curve));
        }
        Diagnosis::SeveralClasses { auc_per_class } => {
            let each = auc_per_class
                .iter()
                .map(|auc| known("auc_per_class", *auc))
                .collect();
            object.insert("auc_per_class".into(), Value::Array(each));
        }
        Diagnosis::Regression { targets } => {
            let each = targets.as_ref().ok().map(|fits| {
                fits.iter()
                    .map(|fit| scores(&fit.scores))
                    .collect::<Vec<Value>>()
            });
            if let Err(why) = targets {
                reasons.insert("targets".into(), json!(why.to_string()));
            }
            object.insert("targets".into(), json!(each));
        }
    }
    if !reasons.is_empty() {
        object.insert("unavailable".into(), Value::Object(reasons));
    }
}

fn roc_fields(roc: &Roc) -> Value {
    let points: Vec<Value> = roc
        .points
        .iter()
        .map(|p| {
            json!({
                "false_positive_rate": number(p.false_positive_rate),
                "true_positive_rate": number(p.true_positive_rate),
                "threshold": p.threshold.map_or(Value::Null, number),
            })
        })
        .collect();
    json!({"points": points, "youden_threshold": roc.points[roc.youden].threshold})
}

/// Per metric a `[low, high]` pair, and the `level`.
fn interval_object(all: &[(String, Interval)]) -> Value {
    let mut pairs = Map::new();
    pairs.insert("level".into(), json!(stats::LEVEL));
    for (name, interval) in all {
        pairs.insert(name.clone(), pair(interval));
    }
    Value::Object(pairs)
}

fn scores(scores: &Scores) -> Value {
    named_numbers(scores.named())
}

/// Named scores as one JSON object, each a number (`null` when not finite).
fn named_numbers(named: Vec<(&str, f64)>) -> Value {
    Value::Object(
        named
            .into_iter()
            .map(|(k, v)| (k.to_string(), number(v)))
            .collect(),
    )
}

fn pair(interval: &Interval) -> Value {
    json!([number(interval.low), number(interval.high)])
}

/// A paired test: McNemar's p-value, or the squared-error difference's interval.
fn paired(test: &Paired) -> Value {
    let mut object = match test {
        Paired::Mcnemar {
            p_value,
            only_first,
            only_second,
        } => json!({"test": "mcnemar_exact", "p_value": number(*p_value),
                    "only_first": only_first, "only_second": only_second}),
        Paired::SquaredErrorDifference { mean, interval } => {
            json!({"test": "paired_bootstrap", "difference": number(*mean),
                   "interval": pair(interval), "level": stats::LEVEL})
        }
    };
    object["significant"] = json!(test.significant());
    object
}

/// A compare step's paired tests between its runs (a sweep stands for its best).
fn compare_pairs(plan: &Plan, results: &BuildResult, step: &PlannedStep) -> Value {
    let runs: Vec<(&str, Option<&Judgement>)> = step
        .upstream
        .all()
        .into_iter()
        .filter_map(|u| {
            let fit = match results.steps[u].outcome.as_ref()? {
                Outcome::Train(fit) => fit,
                Outcome::Sweep(sweep) => sweep.best(),
                _ => return None,
            };
            Some((plan.steps[u].id.as_str(), fit.judgement.as_deref()))
        })
        .collect();
    let judgements: Vec<Option<&Judgement>> = runs.iter().map(|(_, j)| *j).collect();
    let pairs = judge::pairs(&judgements)
        .into_iter()
        .map(|p| {
            let mut object = match &p.outcome {
                PairOutcome::Tested(test) => paired(test),
                PairOutcome::NotPaired => json!({"test": "not_paired"}),
                PairOutcome::NotEnoughRows => json!({"test": "not_enough_rows"}),
            };
            object["a"] = json!(runs[p.a].0);
            object["b"] = json!(runs[p.b].0);
            object
        })
        .collect();
    Value::Array(pairs)
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

/// A fold's run; `intervals` are those of its held-out rows when the judgement read
/// it (`None` for a repeat's later seeds, `Some(None)` when its rows are too few).
fn fold(run: &RunResult, intervals: Option<&Option<Vec<(String, Interval)>>>) -> Value {
    let mut metrics = Map::new();
    metrics.insert("train".into(), set(&run.train));
    if let Some(validation) = &run.validation {
        metrics.insert("validation".into(), set(validation));
    }
    if let Some(test) = &run.test {
        metrics.insert("test".into(), set(test));
    }
    let interval = intervals
        .and_then(|part| part.as_deref())
        .map(interval_object);
    json!({"seconds": run.seconds, "metrics": metrics, "stop": stop(run), "interval": interval})
}

fn set(metrics: &SetMetrics) -> Value {
    named_numbers(metrics.named())
}

fn number(value: f64) -> Value {
    if value.is_finite() {
        json!(value)
    } else {
        Value::Null
    }
}
