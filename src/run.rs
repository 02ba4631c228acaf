//! Executes a plan: each step's result is loaded from the cache when its key is
//! there, computed otherwise. Training runs (one per partition of each train step) are
//! independent, so all uncached runs are gathered and fitted in parallel; each is
//! deterministic, so the results are the same for any number of jobs.

use std::collections::HashMap;
use std::sync::Arc;
use std::time::Instant;

use rayon::prelude::*;
use serde::Serialize;

use crate::cache::{Cache, EntryKind};
use crate::data::{self, Prepared};
use crate::document::StepSpec;
use crate::document::spec::{NetSpec, TrainSpec};
use crate::fit::{fit, model_shape};
use crate::outcome::{
    DataSummary, ModelShape, Outcome, PartitionSummary, RunResult, Seconds, TrainResult,
};
use crate::plan::{Key, Plan, PlannedStep};

/// Whether a step ran, was reused, or failed.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "status", rename_all = "snake_case")]
pub enum Status {
    Ran { seconds: Seconds },
    Reused,
    Failed { error: String },
}

/// A step's status and, unless it failed, its result.
#[derive(Clone, Debug)]
pub struct StepRecord {
    pub status: Status,
    pub outcome: Option<Outcome>,
}

/// What a build may use.
#[derive(Clone, Copy, Debug)]
pub struct RunOptions {
    /// Threads for training runs.
    pub jobs: usize,
}

/// One network to fit: a train step's settings on one partition of its data.
struct RunTask<'a> {
    step: usize,
    partition: usize,
    key: Key,
    data: usize,
    shape: ModelShape,
    net: &'a NetSpec,
    train: &'a TrainSpec,
}

/// Runs every step of the plan, reusing what the cache holds.
pub fn execute(plan: &Plan, cache: &Cache, options: RunOptions) -> Vec<StepRecord> {
    let mut records: Vec<Option<StepRecord>> = vec![None; plan.steps.len()];
    let mut prepared: HashMap<usize, Arc<Prepared>> = HashMap::new();
    let mut tasks = Vec::new();
    let mut train_runs: HashMap<usize, (ModelShape, Vec<Option<RunResult>>)> = HashMap::new();

    for &index in &plan.order {
        let step = &plan.steps[index];
        let record = match &step.spec {
            StepSpec::Data(_) => run_data_step(step, cache, &mut prepared, index),
            StepSpec::Net(_) => run_net_step(step, cache),
            StepSpec::Train(train) => {
                match plan_train_step(plan, index, train, &records, cache, &mut tasks) {
                    Ok((shape, runs)) => {
                        train_runs.insert(index, (shape, runs));
                        continue;
                    }
                    Err(error) => StepRecord {
                        status: Status::Failed { error },
                        outcome: None,
                    },
                }
            }
        };
        records[index] = Some(record);
    }

    let mut trained_seconds: HashMap<usize, Seconds> = HashMap::new();
    for (step, partition, result) in fit_all(plan, cache, &mut prepared, tasks, options) {
        *trained_seconds.entry(step).or_default() += result.seconds;
        let runs = &mut train_runs
            .get_mut(&step)
            .expect("task of a planned train step")
            .1;
        runs[partition] = Some(result);
    }
    for (index, (shape, runs)) in train_runs {
        let status = match trained_seconds.get(&index) {
            Some(&seconds) => Status::Ran { seconds },
            None => Status::Reused,
        };
        let runs = runs
            .into_iter()
            .map(|run| run.expect("every run fitted or cached"))
            .collect();
        records[index] = Some(StepRecord {
            status,
            outcome: Some(Outcome::Train(TrainResult { shape, runs })),
        });
    }
    records
        .into_iter()
        .map(|r| r.expect("every step recorded"))
        .collect()
}

fn run_data_step(
    step: &PlannedStep,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
    index: usize,
) -> StepRecord {
    if let Some(summary) = cache.load::<DataSummary>(&step.key, EntryKind::DataSummary) {
        return StepRecord {
            status: Status::Reused,
            outcome: Some(Outcome::Data(summary)),
        };
    }
    let started = Instant::now();
    match prepare_data(step) {
        Ok(ready) => {
            let summary = summarise(step, &ready);
            cache.store(&step.key, EntryKind::Prepared, &ready);
            cache.store(&step.key, EntryKind::DataSummary, &summary);
            prepared.insert(index, Arc::new(ready));
            StepRecord {
                status: Status::Ran {
                    seconds: started.elapsed().as_secs_f64(),
                },
                outcome: Some(Outcome::Data(summary)),
            }
        }
        Err(error) => StepRecord {
            status: Status::Failed { error },
            outcome: None,
        },
    }
}

fn prepare_data(step: &PlannedStep) -> Result<Prepared, String> {
    let StepSpec::Data(spec) = &step.spec else {
        unreachable!("a data step has a data spec")
    };
    let file = &step.files[0];
    let table =
        data::read_table(&file.bytes).map_err(|error| format!("{}: {error}", file.written))?;
    data::prepare(&table, &spec.settings).map_err(|error| format!("{}: {error}", file.written))
}

fn summarise(step: &PlannedStep, prepared: &Prepared) -> DataSummary {
    let StepSpec::Data(spec) = &step.spec else {
        unreachable!("a data step has a data spec")
    };
    let encoding = &prepared.encoding;
    DataSummary {
        file: spec.file.clone(),
        task: encoding.task,
        rows_read: prepared.rows_read,
        rows_dropped: prepared.rows_dropped,
        columns: encoding.columns.clone(),
        feature_count: prepared.x.ncols(),
        target_names: encoding.target_names.clone(),
        classes: encoding.classes.clone(),
        scale: spec.settings.scale,
        partitions: prepared
            .partitions
            .iter()
            .map(|partition| PartitionSummary {
                train_rows: partition.train_rows.len(),
                test_rows: partition.test_rows.len(),
                train_classes: class_counts(prepared, &partition.train_rows),
                test_classes: class_counts(prepared, &partition.test_rows),
            })
            .collect(),
    }
}

fn class_counts(prepared: &Prepared, rows: &[usize]) -> Vec<usize> {
    if prepared.labels.is_some() {
        prepared.class_counts(rows)
    } else {
        Vec::new()
    }
}

fn run_net_step(step: &PlannedStep, cache: &Cache) -> StepRecord {
    let status = if cache.load::<()>(&step.key, EntryKind::Net).is_some() {
        Status::Reused
    } else {
        cache.store(&step.key, EntryKind::Net, &());
        Status::Ran { seconds: 0.0 }
    };
    StepRecord {
        status,
        outcome: Some(Outcome::Net),
    }
}

/// Works out a train step's shape and which of its runs are cached; queues the rest.
fn plan_train_step<'a>(
    plan: &'a Plan,
    index: usize,
    train: &'a TrainSpec,
    records: &[Option<StepRecord>],
    cache: &Cache,
    tasks: &mut Vec<RunTask<'a>>,
) -> Result<(ModelShape, Vec<Option<RunResult>>), String> {
    let step = &plan.steps[index];
    let (data_index, net_index) = (step.upstream[0], step.upstream[1]);
    let summary = match records[data_index]
        .as_ref()
        .and_then(|r| r.outcome.as_ref())
    {
        Some(Outcome::Data(summary)) => summary,
        _ => {
            return Err(format!(
                "not run: its data step '{}' failed",
                plan.steps[data_index].id
            ));
        }
    };
    let StepSpec::Net(net) = &plan.steps[net_index].spec else {
        unreachable!("references were checked when planning")
    };
    let shape = model_shape(summary, net, train)?;
    let runs = step
        .runs
        .iter()
        .enumerate()
        .map(|(partition, key)| {
            let key = key.clone();
            let cached = cache.load::<RunResult>(&key, EntryKind::Run);
            if cached.is_none() {
                tasks.push(RunTask {
                    step: index,
                    partition,
                    key,
                    data: data_index,
                    shape: shape.clone(),
                    net,
                    train,
                });
            }
            cached
        })
        .collect();
    Ok((shape, runs))
}

/// Fits every queued run on a pool of `jobs` threads.
fn fit_all(
    plan: &Plan,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
    tasks: Vec<RunTask<'_>>,
    options: RunOptions,
) -> Vec<(usize, usize, RunResult)> {
    for task in &tasks {
        if !prepared.contains_key(&task.data) {
            let step = &plan.steps[task.data];
            let ready = cache
                .load::<Prepared>(&step.key, EntryKind::Prepared)
                .or_else(|| prepare_data(step).ok())
                .expect("a data step that succeeded once prepares again");
            prepared.insert(task.data, Arc::new(ready));
        }
    }
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(options.jobs.max(1))
        .build()
        .expect("a thread pool");
    pool.install(|| {
        tasks
            .par_iter()
            .map(|task| {
                let result = fit(
                    &prepared[&task.data],
                    task.partition,
                    &task.shape,
                    task.net,
                    task.train,
                );
                cache.store(&task.key, EntryKind::Run, &result);
                (task.step, task.partition, result)
            })
            .collect()
    })
}
