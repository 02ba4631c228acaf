//! Each fit's judgement (`crate::judge`): loaded by its key, or computed from its
//! runs' held-out outputs and its partitions' references, which are themselves loaded
//! or fitted once per data step and partition, however many fits read them.

use std::collections::HashMap;
use std::collections::hash_map::Entry;
use std::sync::Arc;

use ndarray::Array2;
use rayon::prelude::*;

use super::outcome::{RunResult, SweepResult};
use super::{StepError, prepared_for};
use crate::cache::{Cache, EntryKind};
use crate::data::{Prepared, Task};
use crate::judge::{self, Held, Judgement, Reference};
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
    let judged = fit.judged_runs();
    fit.runs
        .iter()
        .zip(runs)
        .filter(|(plan, _)| judged.iter().any(|j| std::ptr::eq(*j, *plan)))
        .map(|(_, run)| run.as_ref()?.held_out_outputs.as_ref())
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
/// on the held-out rows it is ranked on.
pub(super) fn within_noise_of_best(sweep: &SweepResult, seed: u64) -> Vec<Option<bool>> {
    let best = sweep.ranking[0];
    let best_errors = sweep.fits[best]
        .judgement
        .as_ref()
        .map(|judgement| &judgement.network_errors);
    sweep
        .fits
        .iter()
        .enumerate()
        .map(|(i, fit)| {
            if i == best || sweep.rank_rows != super::outcome::RowSet::Test {
                return None;
            }
            let errors = &fit.judgement.as_ref()?.network_errors;
            judge::paired(best_errors?, errors, seed).map(|test| !test.significant())
        })
        .collect()
}
