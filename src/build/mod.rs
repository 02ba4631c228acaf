//! Executes a plan: each step's result is loaded from the cache when its key is
//! there, computed otherwise. Training runs (every seed and partition of every train
//! step and sweep combination) are independent, so all uncached runs are gathered and
//! fitted in parallel; each is deterministic, so the results are the same for any
//! number of jobs. Steps that use trained models run after the training.
//!
//! One run is `training`; predictions and exports are `model_use`; the results each
//! step kind produces are `outcome`; a cluster task's part of the runs is `share`.

pub(crate) mod importance;
mod judging;
mod model_use;
pub(crate) mod outcome;
mod result;
pub(crate) mod share;
mod training;

use std::borrow::Cow;
use std::collections::HashMap;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use rayon::prelude::*;

use crate::cache::{Cache, EntryKind};
use crate::data::{self, Prepared, Task};
use crate::document::StepSpec;
use crate::document::spec::MetricName;
use crate::judge;
use crate::plan::input_file::ReadError;
use crate::plan::{Key, Limits, Plan, PlannedStep, Upstream, describe, weights_between};
use model_use::ModelUseError;
use outcome::{
    DataSummary, FitResult, ModelShape, Outcome, PartitionSummary, RunResult, Seconds, SweepResult,
    rank,
};
use result::failures;
pub(crate) use result::{BuildResult, Status, StepResult};
use share::Share;
use training::{ShapeError, fit, model_shape};

/// Why a step failed when it ran: what only the data decides, a file that changed, or
/// a step it reads that failed. `Status::Failed` keeps its message for the report.
#[derive(Debug, thiserror::Error)]
pub(crate) enum StepError {
    #[error(transparent)]
    Read(#[from] ReadError),
    /// The data file's rows do not fit the data step's settings; `file` as written.
    #[error("{file}: {error}")]
    Data {
        file: String,
        error: data::DataError,
    },
    #[error(transparent)]
    Shape(#[from] ShapeError),
    #[error(transparent)]
    ModelUse(#[from] ModelUseError),
    #[error(
        "a network of layer sizes {sizes:?} holds {weights} weights, over the limit of {limit} (raise it with --max-weights)"
    )]
    TooManyWeights {
        sizes: Vec<usize>,
        weights: u128,
        limit: u64,
    },
    /// A sweep's combination failed; `settings` names its values.
    #[error("with {settings}: {error}")]
    InCombination {
        settings: String,
        error: Box<StepError>,
    },
    #[error("not run: its data step '{0}' failed")]
    DataStepFailed(String),
}

/// What a build may use.
#[derive(Clone, Copy)]
pub(crate) struct RunOptions<'a> {
    /// Threads for training runs.
    pub jobs: usize,
    /// Told about each run as it is trained.
    pub progress: Option<&'a dyn Progress>,
    /// Set when the build is no longer wanted (`stet watch` saw a newer document): runs
    /// already started finish and are cached, the rest are not started.
    pub stop: Option<&'a AtomicBool>,
}

/// Told about training as it happens, from the training threads: the console's bar
/// for `stet build`, the served page's progress line for `stet watch`.
pub(crate) trait Progress: Sync {
    /// `runs` runs are about to be trained.
    fn training(&self, runs: usize);
    /// One run of step `step` was trained and cached.
    fn trained(&self, step: &str);
    /// Training is over, finished or stopped.
    fn finished(&self);
}

/// Why a run was not started: the build it belonged to was stopped.
const STOPPED: &str = "not run: the build was stopped";

/// One network to fit.
struct RunTask<'a> {
    step: usize,
    fit: usize,
    run: usize,
    key: &'a Key,
    data: usize,
    partition: usize,
    shape: ModelShape,
    net: &'a crate::document::spec::NetSpec,
    train: crate::document::spec::TrainSpec,
}

/// A train or sweep step waiting for its runs.
struct PendingFits {
    shapes: Vec<ModelShape>,
    runs: Vec<Vec<Option<RunResult>>>,
    /// Per fit, how many runs this step trained in this build.
    trained: Vec<usize>,
}

/// The state after the steps that need no training: their records, the prepared data,
/// and each train step's and sweep's fits with their cached runs.
struct Stage {
    records: Vec<Option<StepResult>>,
    prepared: HashMap<usize, Arc<Prepared>>,
    pending: HashMap<usize, PendingFits>,
}

fn stage(plan: &Plan, cache: &Cache) -> Stage {
    let mut records: Vec<Option<StepResult>> = vec![None; plan.steps.len()];
    let mut prepared: HashMap<usize, Arc<Prepared>> = HashMap::new();
    let mut pending: HashMap<usize, PendingFits> = HashMap::new();
    for &index in &plan.order {
        let step = &plan.steps[index];
        let record = match &step.spec {
            StepSpec::Data(_) => run_data_step(step, plan.limits, cache, &mut prepared, index),
            StepSpec::Net(_) => marker_step(step, cache),
            StepSpec::Train(_) | StepSpec::Sweep(_) => match plan_fits(plan, step, &records, cache)
            {
                Ok(fits) => {
                    pending.insert(index, fits);
                    continue;
                }
                Err(error) => StepResult::failed(error),
            },
            // These read trained models, so they wait for the training.
            StepSpec::Compare(_) | StepSpec::Predict(_) | StepSpec::Export(_) => continue,
        };
        records[index] = Some(record);
    }
    Stage {
        records,
        prepared,
        pending,
    }
}

/// Every run not in the cache, in document order, so that a run two steps share is
/// credited to the first of them.
fn queued_runs<'a>(plan: &'a Plan, pending: &HashMap<usize, PendingFits>) -> Vec<RunTask<'a>> {
    let mut tasks = Vec::new();
    for (&index, fits) in pending {
        let step = &plan.steps[index];
        for (f, fit_plan) in step.fits.iter().enumerate() {
            for (r, run) in fit_plan.runs.iter().enumerate() {
                if fits.runs[f][r].is_none() {
                    tasks.push(RunTask {
                        step: index,
                        fit: f,
                        run: r,
                        key: &run.key,
                        data: fit_plan.data,
                        partition: run.partition,
                        shape: fits.shapes[f].clone(),
                        net: &fit_plan.net,
                        train: crate::document::spec::TrainSpec {
                            seed: run.seed,
                            ..fit_plan.train.clone()
                        },
                    });
                }
            }
        }
    }
    tasks.sort_by_key(|task| (plan.steps[task.step].piece, task.fit, task.run));
    tasks
}

/// For each run key, the first task that needs it.
fn owners<'k>(tasks: &[RunTask<'k>]) -> HashMap<&'k Key, usize> {
    let mut owners = HashMap::new();
    for (i, task) in tasks.iter().enumerate() {
        owners.entry(task.key).or_insert(i);
    }
    owners
}

/// Runs every step of the plan, reusing what the cache holds.
pub(crate) fn execute(plan: &Plan, cache: &Cache, options: &RunOptions) -> BuildResult {
    arithmetic_pool(options.jobs).install(|| execute_steps(plan, cache, options))
}

/// A pool of at most `jobs` threads and never more than the cores. Everything that
/// computes runs inside it (training, and the large products of predict and export,
/// which split over the current pool), so `--jobs` bounds every arithmetic thread.
fn arithmetic_pool(jobs: usize) -> rayon::ThreadPool {
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    rayon::ThreadPoolBuilder::new()
        .num_threads(jobs.clamp(1, cores))
        .build()
        .expect("a thread pool")
}

fn execute_steps(plan: &Plan, cache: &Cache, options: &RunOptions) -> BuildResult {
    let Stage {
        mut records,
        mut prepared,
        mut pending,
    } = stage(plan, cache);
    let tasks = queued_runs(plan, &pending);
    let owners = owners(&tasks);
    let mut unique: Vec<usize> = owners.values().copied().collect();
    unique.sort_unstable();
    let fitted = fit_all(plan, cache, &mut prepared, &tasks, &unique, options);
    let mut trained_seconds: HashMap<usize, Seconds> = HashMap::new();
    let mut unfitted: HashMap<usize, String> = HashMap::new();
    for (i, task) in tasks.iter().enumerate() {
        let result = match &fitted[task.key] {
            Ok(result) => result.clone(),
            Err(error) => {
                unfitted.entry(task.step).or_insert_with(|| error.clone());
                continue;
            }
        };
        let fits = pending.get_mut(&task.step).expect("a pending step");
        if owners[task.key] == i {
            *trained_seconds.entry(task.step).or_default() += result.seconds;
            fits.trained[task.fit] += 1;
        }
        fits.runs[task.fit][task.run] = Some(result);
    }
    for (index, fits) in pending {
        if let Some(error) = unfitted.remove(&index) {
            records[index] = Some(StepResult::failed(error));
            continue;
        }
        let status = match trained_seconds.get(&index) {
            Some(&seconds) => Status::Ran { seconds },
            None => Status::Reused,
        };
        let step = &plan.steps[index];
        let judged = data_summary(plan, &records, step.fits[0].data).and_then(|summary| {
            judging::judge_fits(plan, step, &fits.runs, summary.task, cache, &mut prepared)
        });
        records[index] = Some(match judged {
            Ok(judgements) => assemble(step, fits, judgements, status, &records, plan),
            Err(error) => StepResult::failed(error),
        });
    }

    for &index in &plan.order {
        let step = &plan.steps[index];
        let record = match &step.spec {
            StepSpec::Compare(_) => match step
                .upstream
                .all()
                .into_iter()
                .find(|&u| failed(&records[u]))
            {
                Some(u) => StepResult::failed(format!("not run: '{}' failed", plan.steps[u].id)),
                None => marker_step(step, cache),
            },
            StepSpec::Predict(_) | StepSpec::Export(_) => {
                use_model_step(plan, step, &records, cache, &mut prepared)
            }
            _ => continue,
        };
        records[index] = Some(record);
    }
    let steps = records
        .into_iter()
        .map(|r| r.expect("every step recorded"))
        .collect();
    BuildResult { steps }
}

fn failed(record: &Option<StepResult>) -> bool {
    !matches!(
        record,
        Some(StepResult {
            outcome: Some(_),
            ..
        })
    )
}

fn run_data_step(
    step: &PlannedStep,
    limits: Limits,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
    index: usize,
) -> StepResult {
    if let Some(summary) = cache.load::<DataSummary>(&step.key, EntryKind::DataSummary) {
        return StepResult::new(Status::Reused, Outcome::Data(summary));
    }
    let started = Instant::now();
    let read = read_data(step).and_then(|table| Ok((prepare_table(step, &table, limits)?, table)));
    match read {
        Ok((ready, table)) => {
            let summary = summarise(step, &ready, data::card::describe(&table, &ready));
            cache.store(&step.key, EntryKind::Prepared, &ready);
            cache.store(&step.key, EntryKind::DataSummary, &summary);
            prepared.insert(index, Arc::new(ready));
            StepResult::new(
                Status::Ran {
                    seconds: started.elapsed().as_secs_f64(),
                },
                Outcome::Data(summary),
            )
        }
        Err(error) => StepResult::failed(error),
    }
}

fn prepare_data(step: &PlannedStep, limits: Limits) -> Result<Prepared, StepError> {
    prepare_table(step, &read_data(step)?, limits)
}

/// The data step's file as a table.
fn read_data(step: &PlannedStep) -> Result<data::Table, StepError> {
    Ok(step.files[0].read(|reader| data::read_table(reader))?)
}

fn prepare_table(
    step: &PlannedStep,
    table: &data::Table,
    limits: Limits,
) -> Result<Prepared, StepError> {
    let StepSpec::Data(spec) = &step.spec else {
        unreachable!("a data step has a data spec")
    };
    data::prepare(table, &spec.settings, limits.max_categories).map_err(|error| StepError::Data {
        file: step.files[0].written.clone(),
        error,
    })
}

/// A data step's prepared matrices: from this build, the cache, or prepared again.
fn prepared_for(
    plan: &Plan,
    data: usize,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
) -> Result<Arc<Prepared>, StepError> {
    if let Some(ready) = prepared.get(&data) {
        return Ok(ready.clone());
    }
    let step = &plan.steps[data];
    let ready = match cache.load::<Prepared>(&step.key, EntryKind::Prepared) {
        Some(ready) => ready,
        None => {
            let ready = prepare_data(step, plan.limits)?;
            cache.store(&step.key, EntryKind::Prepared, &ready);
            ready
        }
    };
    let ready = Arc::new(ready);
    prepared.insert(data, ready.clone());
    Ok(ready)
}

fn summarise(step: &PlannedStep, prepared: &Prepared, card: data::card::DataCard) -> DataSummary {
    let StepSpec::Data(spec) = &step.spec else {
        unreachable!("a data step has a data spec")
    };
    let encoding = &prepared.encoding;
    let counts = |rows: &[usize]| {
        if prepared.labels.is_some() {
            prepared.class_counts(rows)
        } else {
            Vec::new()
        }
    };
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
        scale_target: spec.settings.target_scale(encoding.task),
        partitions: prepared
            .partitions
            .iter()
            .map(|partition| PartitionSummary {
                train_rows: partition.train_rows.len(),
                validation_rows: partition.validation_rows.len(),
                test_rows: partition.test_rows.len(),
                train_classes: counts(&partition.train_rows),
                validation_classes: counts(&partition.validation_rows),
                test_classes: counts(&partition.test_rows),
            })
            .collect(),
        card,
    }
}

/// A step with nothing to compute beyond its settings (net, compare): its entry only
/// records that these settings were built, so it reports as reused next time.
fn marker_step(step: &PlannedStep, cache: &Cache) -> StepResult {
    let outcome = match step.spec {
        StepSpec::Compare(_) => Outcome::Compare,
        _ => Outcome::Net,
    };
    let status = if cache.load::<()>(&step.key, EntryKind::Marker).is_some() {
        Status::Reused
    } else {
        cache.store(&step.key, EntryKind::Marker, &());
        Status::Ran { seconds: 0.0 }
    };
    StepResult::new(status, outcome)
}

fn data_summary<'a>(
    plan: &Plan,
    records: &'a [Option<StepResult>],
    data: usize,
) -> Result<&'a DataSummary, StepError> {
    match records[data].as_ref().and_then(|r| r.outcome.as_ref()) {
        Some(Outcome::Data(summary)) => Ok(summary),
        _ => Err(StepError::DataStepFailed(plan.steps[data].id.clone())),
    }
}

/// Works out each fit's shape and which of its runs are cached.
fn plan_fits(
    plan: &Plan,
    step: &PlannedStep,
    records: &[Option<StepResult>],
    cache: &Cache,
) -> Result<PendingFits, StepError> {
    let mut shapes = Vec::new();
    let mut runs = Vec::new();
    for fit_plan in &step.fits {
        let summary = data_summary(plan, records, fit_plan.data)?;
        let shape = model_shape(summary, &fit_plan.net, &fit_plan.train)
            .map_err(StepError::from)
            .and_then(|shape| within_weight_limit(shape, plan.limits))
            .map_err(|error| {
                if fit_plan.settings.is_empty() {
                    error
                } else {
                    StepError::InCombination {
                        settings: describe(&fit_plan.settings),
                        error: Box::new(error),
                    }
                }
            })?;
        shapes.push(shape);
        runs.push(
            fit_plan
                .runs
                .iter()
                .map(|run| cache.load::<RunResult>(&run.key, EntryKind::Run))
                .collect(),
        );
    }
    let trained = vec![0; runs.len()];
    Ok(PendingFits {
        shapes,
        runs,
        trained,
    })
}

/// The plan checked the weights between hidden layers; the data decides the input and
/// output widths (a text column becomes one input per distinct value), so the whole
/// network is checked once its shape is known, before anything is allocated for it.
fn within_weight_limit(shape: ModelShape, limits: Limits) -> Result<ModelShape, StepError> {
    let weights = weights_between(&shape.sizes);
    if weights > u128::from(limits.max_weights) {
        return Err(StepError::TooManyWeights {
            sizes: shape.sizes,
            weights,
            limit: limits.max_weights,
        });
    }
    Ok(shape)
}

/// Runs the steps that need no training (data preparation above all) into the cache,
/// so that cluster tasks load prepared data instead of each preparing it; returns the
/// steps that failed.
pub(crate) fn prepare_only(plan: &Plan, cache: &Cache) -> Vec<(String, String)> {
    failures(plan, stage(plan, cache).records.iter().map(Option::as_ref))
}

/// What one share of a sharded build did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ShareSummary {
    /// Runs not in the cache when the share started, over the whole document.
    pub uncached: usize,
    /// Runs this share trained (and stored).
    pub trained: usize,
    /// Steps that failed before training (a data step that cannot be read, say).
    pub failed: Vec<(String, String)>,
}

/// Trains the uncached runs of share `share` into the cache. Shares are cut from all of
/// the document's runs sorted by key, so every task agrees on them without talking to
/// the others, whenever it starts.
pub(crate) fn execute_share(
    plan: &Plan,
    cache: &Cache,
    options: &RunOptions,
    share: Share,
) -> ShareSummary {
    arithmetic_pool(options.jobs).install(|| execute_share_in_pool(plan, cache, options, share))
}

fn execute_share_in_pool(
    plan: &Plan,
    cache: &Cache,
    options: &RunOptions,
    share: Share,
) -> ShareSummary {
    let Stage {
        records,
        mut prepared,
        pending,
    } = stage(plan, cache);
    let tasks = queued_runs(plan, &pending);
    let owners = owners(&tasks);
    // Shares are cut from every run of the document, cached or not, so that a task that
    // starts after another has finished still agrees on the split.
    let keys: Vec<&Key> = plan
        .steps
        .iter()
        .flat_map(|step| {
            step.fits
                .iter()
                .flat_map(|fit| fit.runs.iter().map(|run| &run.key))
        })
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    let mut mine: Vec<usize> = share
        .pick(keys.len())
        .filter_map(|i| owners.get(keys[i]).copied())
        .collect();
    mine.sort_unstable();
    let fitted = fit_all(plan, cache, &mut prepared, &tasks, &mine, options);
    let mut failed = failures(plan, records.iter().map(Option::as_ref));
    for &i in &mine {
        if let Err(error) = &fitted[tasks[i].key] {
            let id = &plan.steps[tasks[i].step].id;
            if !failed.iter().any(|(failed_id, _)| failed_id == id) {
                failed.push((id.clone(), error.clone()));
            }
        }
    }
    ShareSummary {
        uncached: owners.len(),
        trained: fitted.values().filter(|result| result.is_ok()).count(),
        failed,
    }
}

/// Fits the queued runs `unique` picks (one per key) on the current thread pool. A
/// run whose data cannot be prepared again (its file changed during the build) is an
/// error naming the data step.
fn fit_all<'t>(
    plan: &Plan,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
    tasks: &'t [RunTask<'_>],
    unique: &[usize],
    options: &RunOptions,
) -> HashMap<&'t Key, Result<RunResult, String>> {
    let mut unprepared: HashMap<usize, String> = HashMap::new();
    for &i in unique {
        let data = tasks[i].data;
        if !unprepared.contains_key(&data)
            && let Err(error) = prepared_for(plan, data, cache, prepared)
        {
            let id = &plan.steps[data].id;
            unprepared.insert(
                data,
                format!("not run: its data step '{id}' failed: {error}"),
            );
        }
    }
    let (unique, unfit): (Vec<usize>, Vec<usize>) = unique
        .iter()
        .partition(|&&i| !unprepared.contains_key(&tasks[i].data));
    if let Some(progress) = options.progress {
        progress.training(unique.len());
    }
    let stopped = || {
        options
            .stop
            .is_some_and(|stop| stop.load(Ordering::Relaxed))
    };
    // On the caller's pool (`arithmetic_pool`).
    let results = unique
        .par_iter()
        .map(|&i| {
            let task = &tasks[i];
            if stopped() {
                return (task.key, Err(STOPPED.to_string()));
            }
            let result = fit(
                &prepared[&task.data],
                task.partition,
                &task.shape,
                task.net,
                &task.train,
            );
            cache.store(task.key, EntryKind::Run, &result);
            if let Some(progress) = options.progress {
                progress.trained(&plan.steps[task.step].id);
            }
            (task.key, Ok(result))
        })
        .collect::<HashMap<_, _>>();
    if let Some(progress) = options.progress {
        progress.finished();
    }
    let failed = unfit
        .iter()
        .map(|&i| (tasks[i].key, Err(unprepared[&tasks[i].data].clone())));
    results.into_iter().chain(failed).collect()
}

/// A train step's or sweep's record from its fitted and reused runs.
fn assemble(
    step: &PlannedStep,
    fits: PendingFits,
    judgements: Vec<Option<Box<judge::Judgement>>>,
    status: Status,
    records: &[Option<StepResult>],
    plan: &Plan,
) -> StepResult {
    let trained = fits.trained;
    let results: Vec<FitResult> = step
        .fits
        .iter()
        .zip(fits.shapes)
        .zip(fits.runs)
        .zip(judgements)
        .map(|(((fit_plan, shape), runs), judgement)| FitResult {
            settings: fit_plan.settings.clone(),
            shape,
            runs: runs
                .into_iter()
                .map(|run| run.expect("every run fitted or cached"))
                .collect(),
            judgement,
        })
        .collect();
    let outcome = match &step.spec {
        StepSpec::Sweep(sweep) => {
            let task = match data_summary(plan, records, step.fits[0].data) {
                Ok(summary) => summary.task,
                Err(error) => return StepResult::failed(error),
            };
            let rank_by = sweep.rank_by.unwrap_or(match task {
                Task::Classify => MetricName::Accuracy,
                Task::Regress => MetricName::Loss,
            });
            let rank_rows = results[0].choice_rows();
            if results[0].metric(rank_by, rank_rows).is_none() {
                return StepResult::failed(format!(
                    "rank_by {} is not a metric of this {} task",
                    rank_by.key(),
                    crate::document::spec::word(&task)
                ));
            }
            let ranking = rank(&results, rank_by, rank_rows);
            let mut sweep_result = SweepResult {
                fits: results,
                rank_by,
                rank_rows,
                ranking,
                within_noise_of_best: Vec::new(),
            };
            sweep_result.within_noise_of_best = judging::within_noise_of_best(&sweep_result, step);
            Outcome::Sweep(sweep_result)
        }
        _ => Outcome::Train(
            results
                .into_iter()
                .next()
                .expect("a train step has one fit"),
        ),
    };
    StepResult {
        trained,
        ..StepResult::new(status, outcome)
    }
}

/// A predict or export step: loads its result by key, or computes it from the model's
/// network and its data step's encoding and scaling.
fn use_model_step(
    plan: &Plan,
    step: &PlannedStep,
    records: &[Option<StepResult>],
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
) -> StepResult {
    let kind = match step.spec {
        StepSpec::Predict(_) => EntryKind::Predict,
        _ => EntryKind::Export,
    };
    if let Some(outcome) = cache.load::<Outcome>(&step.key, kind) {
        return StepResult::new(Status::Reused, outcome);
    }
    let Upstream::Model { model: model_index } = step.upstream else {
        unreachable!("predict and export read a model")
    };
    let outcome = records[model_index]
        .as_ref()
        .and_then(|r| r.outcome.as_ref());
    if !matches!(outcome, Some(Outcome::Train(_) | Outcome::Sweep(_))) {
        return StepResult::failed(format!(
            "not run: its model '{}' failed",
            plan.steps[model_index].id
        ));
    }
    let started = Instant::now();
    // A train step has one fit and a sweep's fits all read the same data step.
    let data = plan.steps[model_index].fits[0].data;
    let computed = prepared_for(plan, data, cache, prepared).and_then(|ready| {
        // Which of the model step's fits is used: a sweep's best, a train step's only.
        let (model, fit_index) = match outcome {
            Some(Outcome::Sweep(sweep)) => (
                Cow::Owned(sweep.best_model(ready.partitions.len())),
                sweep.ranking[0],
            ),
            Some(Outcome::Train(fit)) => (Cow::Borrowed(fit), 0),
            _ => unreachable!("checked above: the model is a train step's or a sweep's"),
        };
        match &step.spec {
            StepSpec::Predict(_) => {
                // The seed of the model's own judgement, so a batch's intervals are
                // drawn as its held-out rows' were.
                let seed = plan.steps[model_index].fits[fit_index].judged_runs()[0].seed;
                model_use::predict(&model, &ready, &step.files[0], seed).map(Outcome::Predict)
            }
            StepSpec::Export(export) => {
                let provenance = model_use::provenance(plan, model_index, fit_index, &model);
                model_use::export(&model, &ready, export.format, provenance)
                    .map(|result| Outcome::Export(Box::new(result)))
            }
            _ => unreachable!("only predict and export use a model"),
        }
        .map_err(StepError::from)
    });
    match computed {
        Ok(outcome) => {
            cache.store(&step.key, kind, &outcome);
            StepResult::new(
                Status::Ran {
                    seconds: started.elapsed().as_secs_f64(),
                },
                outcome,
            )
        }
        Err(error) => StepResult::failed(error),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::nn::{Activation, Loss};

    // (10 + 1)·100 + (100 + 1)·2 = 1,302 weights and biases, over a limit of 1,000.
    #[test]
    fn a_network_over_the_weight_limit_is_a_typed_error_naming_its_layers() {
        let shape = ModelShape {
            sizes: vec![10, 100, 2],
            hidden: Activation::Tanh,
            output: Activation::Sigmoid,
            loss: Loss::CrossEntropy,
            hints: Vec::new(),
        };
        let limits = Limits {
            max_weights: 1_000,
            ..Limits::default()
        };
        let error = within_weight_limit(shape, limits).unwrap_err();
        assert!(
            matches!(
                error,
                StepError::TooManyWeights {
                    weights: 1_302,
                    limit: 1_000,
                    ..
                }
            ),
            "{error}"
        );
        let in_combination = StepError::InCombination {
            settings: "hidden = [100]".into(),
            error: Box::new(error),
        };
        assert!(
            in_combination.to_string().starts_with(
                "with hidden = [100]: a network of layer sizes [10, 100, 2] holds 1302 weights"
            ),
            "{in_combination}"
        );
    }
}
