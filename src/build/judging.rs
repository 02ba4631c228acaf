//! Each fit's judgement (`crate::judge`): loaded by its key, or computed from its
//! runs' held-out outputs and its partitions' references, which are themselves loaded
//! or fitted once per data step and partition, however many fits read them.

use std::collections::HashMap;
use std::collections::hash_map::Entry;
use std::sync::Arc;

use ndarray::Array2;
use rayon::prelude::*;

use super::outcome::{FitResult, RowSet, RunResult, SweepResult};
use super::{StepError, prepared_for};
use crate::cache::{Cache, EntryKind};
use crate::data::{Prepared, Task};
use crate::judge::{self, Held, Judgement, Reference, RowErrors};
use crate::plan::keys::reference_key;
use crate::plan::{FitPlan, Key, Plan, PlannedStep};

/// Every fit's judgement, in fit order; `None` for a fit without held-out rows.
pub(super) fn judge_fits(
    plan: &Plan,
    step: &PlannedStep,
    runs: &[Vec<Option<RunResult>>],
    task: Task,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
) -> Result<Vec<Option<Box<Judgement>>>, StepError> {
    let cached: Vec<Option<Box<Judgement>>> = step
        .fits
        .iter()
        .map(|fit| {
            cache
                .load(&fit.judgement_key(), EntryKind::Judgement)
                .map(Box::new)
        })
        .collect();
    let mut references: HashMap<Key, Reference> = HashMap::new();
    for ((fit, fit_runs), judgement) in step.fits.iter().zip(runs).zip(&cached) {
        if judgement.is_some() || held_out(fit, fit_runs).is_none() {
            continue;
        }
        for run in fit.judged_runs() {
            let key = reference_key(&plan.steps[fit.data].key, run.partition);
            if let Entry::Vacant(slot) = references.entry(key) {
                let reference =
                    load_or_fit(plan, fit.data, run.partition, slot.key(), cache, prepared)?;
                slot.insert(reference);
            }
        }
    }
    Ok(step
        .fits
        .par_iter()
        .zip(runs)
        .zip(cached)
        .map(|((fit, fit_runs), cached)| {
            if cached.is_some() {
                return cached;
            }
            let outputs = held_out(fit, fit_runs)?;
            let data_key = &plan.steps[fit.data].key;
            let parts: Vec<Held<'_>> = fit
                .judged_runs()
                .iter()
                .zip(outputs)
                .map(|(run, outputs)| Held {
                    reference: &references[&reference_key(data_key, run.partition)],
                    outputs,
                })
                .collect();
            let judgement = judge::judge(task, data_key, &parts, fit.judged_runs()[0].seed);
            cache.store(&fit.judgement_key(), EntryKind::Judgement, &judgement);
            Some(Box::new(judgement))
        })
        .collect())
}

/// The held-out outputs of the runs a judgement reads; `None` without held-out rows.
fn held_out<'a>(fit: &FitPlan, runs: &'a [Option<RunResult>]) -> Option<Vec<&'a Array2<f64>>> {
    judged_of(fit, runs)
        .into_iter()
        .map(|run| run.as_ref()?.held_out_outputs.as_ref())
        .collect()
}

/// The entries of `runs` (in the order of `fit.runs`) that a judgement reads: the
/// first seed on each partition.
fn judged_of<'a, T>(fit: &FitPlan, runs: &'a [T]) -> Vec<&'a T> {
    let judged = fit.judged_runs();
    fit.runs
        .iter()
        .zip(runs)
        .filter(|(plan, _)| judged.iter().any(|j| std::ptr::eq(*j, *plan)))
        .map(|(_, run)| run)
        .collect()
}

fn load_or_fit(
    plan: &Plan,
    data: usize,
    partition: usize,
    key: &Key,
    cache: &Cache,
    prepared: &mut HashMap<usize, Arc<Prepared>>,
) -> Result<Reference, StepError> {
    if let Some(reference) = cache.load::<Reference>(key, EntryKind::Reference) {
        return Ok(reference);
    }
    let ready = prepared_for(plan, data, cache, prepared)?;
    let reference = judge::reference(&ready, partition);
    cache.store(key, EntryKind::Reference, &reference);
    Ok(reference)
}

/// Per fit of a sweep, whether its paired test against the best is not significant
/// on the rows it is ranked on (validation or held-out rows).
pub(super) fn within_noise_of_best(sweep: &SweepResult, step: &PlannedStep) -> Vec<Option<bool>> {
    let errors: Vec<Option<RowErrors>> = sweep
        .fits
        .iter()
        .zip(&step.fits)
        .map(|(fit, plan)| ranked_row_errors(fit, plan, sweep.rank_rows))
        .collect();
    let best = sweep.ranking[0];
    let seed = step.fits[0].train.seed;
    errors
        .iter()
        .enumerate()
        .map(|(i, fit_errors)| {
            if i == best {
                return None;
            }
            judge::paired(errors[best].as_ref()?, fit_errors.as_ref()?, seed)
                .map(|test| !test.significant())
        })
        .collect()
}

/// How each of a fit's ranking rows went (its judged runs' rows, in partition order);
/// `None` when it has none, or when it is ranked on its training rows.
fn ranked_row_errors(fit: &FitResult, plan: &FitPlan, rows: RowSet) -> Option<RowErrors> {
    match rows {
        RowSet::Test => Some(fit.judgement.as_ref()?.network_errors.clone()),
        RowSet::Validation => {
            let parts: Option<Vec<&RowErrors>> = judged_of(plan, &fit.runs)
                .into_iter()
                .map(|run| run.validation_errors.as_ref())
                .collect();
            RowErrors::joined(&parts?)
        }
        RowSet::Train => None,
    }
}
