//! Freshness, for `stet status`: for each step, whether a build would reuse it or run it, and why.

use serde::Serialize;

use crate::cache::manifest::{Manifest, StepInputs};
use crate::cache::{Cache, EntryKind};
use crate::document::StepKind;
use crate::plan::{Plan, PlannedStep, short_key};

/// What a build would do with one step.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct StepStatus {
    pub id: String,
    pub kind: StepKind,
    pub short_key: String,
    /// `None` when the result would be reused; otherwise why it would run.
    pub run_reason: Option<&'static str>,
    /// For train steps: (cached runs, all runs).
    pub runs: Option<(usize, usize)>,
}

/// Whether each step's result is in the cache, and if not, what changed since the
/// document was last built.
pub(crate) fn status(plan: &Plan, cache: &Cache, previous: &Manifest) -> Vec<StepStatus> {
    plan.steps
        .iter()
        .map(|step| {
            let (cached, runs) = cached(step, cache);
            StepStatus {
                id: step.id.clone(),
                kind: step.kind,
                short_key: short_key(&step.key).to_string(),
                run_reason: (!cached).then(|| reason(plan, step, previous)),
                runs,
            }
        })
        .collect()
}

/// Training runs over the whole document, each counted once however many steps share
/// it: (cached, all).
pub(crate) fn run_totals(plan: &Plan, cache: &Cache) -> (usize, usize) {
    let keys: std::collections::BTreeSet<&str> = plan
        .steps
        .iter()
        .flat_map(|step| {
            step.fits
                .iter()
                .flat_map(|fit| fit.runs.iter().map(|run| run.key.as_str()))
        })
        .collect();
    let cached = keys
        .iter()
        .filter(|key| cache.contains(key, EntryKind::Run))
        .count();
    (cached, keys.len())
}

fn cached(step: &PlannedStep, cache: &Cache) -> (bool, Option<(usize, usize)>) {
    let entries = step.result_entries();
    let present = entries
        .iter()
        .filter(|(key, kind)| cache.contains(key, *kind))
        .count();
    let runs =
        matches!(step.kind, StepKind::Train | StepKind::Sweep).then_some((present, entries.len()));
    (present == entries.len(), runs)
}

fn reason(plan: &Plan, step: &PlannedStep, previous: &Manifest) -> &'static str {
    let Some(before) = previous.steps.get(&step.id) else {
        return "never run";
    };
    let now = StepInputs::of(plan, step);
    if now.settings != before.settings {
        "settings changed"
    } else if now.files != before.files {
        "file changed"
    } else if now.upstream != before.upstream {
        "upstream changed"
    } else {
        "not in the cache"
    }
}
