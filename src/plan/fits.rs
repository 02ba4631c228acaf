//! The fits of each train step and sweep (one per sweep combination) and their runs
//! (one per seed and partition), with the limits on how many runs and how much
//! training a step may ask for checked before any list is made.

use crate::data::Split;
use crate::document::spec::sweep::SweepSpec;
use crate::document::spec::sweep::{Base, Variant, Varied, describe, variant};
use crate::document::spec::{NetSpec, TrainSpec};
use crate::document::{Problem, StepBlock, StepKind, StepSpec};

use super::keys::run_key;
use super::{FitPlan, Limits, PlannedStep, RunPlan, Upstream, check_net_size, setting_span};

/// Planning resolves a train step's references to a data and a net step, and a
/// sweep's `from` to a train step, or makes no plan.
const TRAIN_READS: &str = "a train step reads a data and a net step";

/// One fit's settings, before its runs are listed.
struct FitSettings {
    settings: Vec<Varied>,
    net: NetSpec,
    train: TrainSpec,
}

/// The fits of a train step (its own settings) or a sweep (one per combination, each
/// checked as if its values were written in the base train and net steps). The
/// number of runs and the work are checked against the limits before any list of
/// runs is made, so no setting sizes an allocation unchecked.
pub(super) fn fits(
    steps: &[PlannedStep],
    blocks: &[&StepBlock],
    index: usize,
    default_seed: u64,
    limits: Limits,
    problems: &mut Vec<Problem>,
) -> Vec<FitPlan> {
    let step = &steps[index];
    let (data, fits, repeat) = match &step.spec {
        StepSpec::Train(train) => {
            let (data, net) = step.train_inputs().expect(TRAIN_READS);
            let StepSpec::Net(net) = &steps[net].spec else {
                unreachable!("{TRAIN_READS}")
            };
            let own = FitSettings {
                settings: Vec::new(),
                net: net.clone(),
                train: train.clone(),
            };
            (data, vec![own], 1)
        }
        StepSpec::Sweep(sweep) => {
            let Upstream::Sweep { from: base } = step.upstream else {
                unreachable!("a sweep's upstream is its from step")
            };
            let (data, net) = steps[base].train_inputs().expect(TRAIN_READS);
            let runs = sweep_runs(sweep, partitions(&steps[data]));
            if runs > limits.max_sweep_runs as u128 {
                problems.push(too_many_runs(blocks[index], sweep, runs, limits));
                return Vec::new();
            }
            let span = setting_span(blocks[index], "vary");
            let fits = sweep
                .combinations()
                .iter()
                .filter_map(|combination| {
                    let Variant {
                        settings,
                        net,
                        train,
                    } = variant(
                        base_spec(&steps[base], train_of),
                        base_spec(&steps[net], net_of),
                        combination,
                        default_seed,
                        span.clone(),
                        problems,
                    )?;
                    let prefix = format!("with {}: ", describe(&settings));
                    check_net_size(blocks[index], &net.hidden, limits, &prefix, problems);
                    Some(FitSettings {
                        settings,
                        net,
                        train,
                    })
                })
                .collect();
            (data, fits, sweep.repeat)
        }
        _ => return Vec::new(),
    };
    let work = Work::of(&steps[data], &fits, repeat);
    if work.row_passes > u128::from(limits.max_work) {
        problems.push(too_much_work(blocks[index], step.kind, &work, limits));
        return Vec::new();
    }
    fits.into_iter()
        .map(|fit| fit_plan(steps, data, fit, repeat))
        .collect()
}

/// A planned step's validated spec of one kind and the settings its block wrote.
fn base_spec<'a, T>(step: &'a PlannedStep, spec_of: fn(&StepSpec) -> Option<&T>) -> Base<'a, T> {
    Base {
        spec: spec_of(&step.spec).expect(TRAIN_READS),
        written: &step.written,
    }
}

fn train_of(spec: &StepSpec) -> Option<&TrainSpec> {
    match spec {
        StepSpec::Train(train) => Some(train),
        _ => None,
    }
}

fn net_of(spec: &StepSpec) -> Option<&NetSpec> {
    match spec {
        StepSpec::Net(net) => Some(net),
        _ => None,
    }
}

/// How many partitions (folds, or the one holdout split) a data step makes.
fn partitions(data: &PlannedStep) -> usize {
    let StepSpec::Data(spec) = &data.spec else {
        unreachable!("{TRAIN_READS}")
    };
    match spec.settings.split {
        Split::Holdout(_) => 1,
        Split::Folds(folds) => folds,
    }
}

/// A sweep's combinations, counted without listing them.
fn combinations(sweep: &SweepSpec) -> u128 {
    sweep.vary.iter().fold(1u128, |product, (_, values)| {
        product.saturating_mul(values.len() as u128)
    })
}

/// A sweep's runs (combinations × repeats × partitions), counted without listing them.
fn sweep_runs(sweep: &SweepSpec, partitions: usize) -> u128 {
    combinations(sweep)
        .saturating_mul(sweep.repeat as u128)
        .saturating_mul(partitions as u128)
}

fn too_many_runs(block: &StepBlock, sweep: &SweepSpec, runs: u128, limits: Limits) -> Problem {
    let combinations = combinations(sweep);
    Problem::new(
        setting_span(block, "vary"),
        format!(
            "this sweep asks for {runs} training runs ({combinations} combinations), over the limit of {}",
            limits.max_sweep_runs
        ),
    )
    .with_help("raise the limit with --max-sweep-runs")
}

/// The training a step asks for, in row passes: one row forward and back through a
/// network once. An upper estimate, as the data file's line breaks stand for its
/// rows and every row is counted, held out or not.
struct Work {
    row_passes: u128,
    runs: u128,
    most_epochs: usize,
    rows: u64,
}

impl Work {
    fn of(data: &PlannedStep, fits: &[FitSettings], repeat: usize) -> Work {
        let rows: u64 = data.files.iter().map(|file| file.lines).sum();
        let runs_per_fit = (repeat as u128).saturating_mul(partitions(data) as u128);
        let row_passes = fits.iter().fold(0u128, |total, fit| {
            let per_run = (fit.train.epochs as u128).saturating_mul(u128::from(rows));
            total.saturating_add(runs_per_fit.saturating_mul(per_run))
        });
        Work {
            row_passes,
            runs: runs_per_fit.saturating_mul(fits.len() as u128),
            most_epochs: fits.iter().map(|fit| fit.train.epochs).max().unwrap_or(0),
            rows,
        }
    }
}

/// Located at a train step's `epochs` (the default when the block has none) or a
/// sweep's `vary`.
fn too_much_work(block: &StepBlock, kind: StepKind, work: &Work, limits: Limits) -> Problem {
    let (what, setting) = match kind {
        StepKind::Sweep => ("this sweep", "vary"),
        _ => ("this train step", "epochs"),
    };
    Problem::new(
        setting_span(block, setting),
        format!(
            "{what} asks for up to {} row passes ({} runs of up to {} epochs over up to {} rows), over the limit of {}",
            work.row_passes,
            work.runs,
            work.most_epochs,
            work.rows,
            limits.max_work
        ),
    )
    .with_help("raise the limit with --max-work, or ask for fewer epochs or runs")
}

fn fit_plan(steps: &[PlannedStep], data: usize, fit: FitSettings, repeat: usize) -> FitPlan {
    let FitSettings {
        settings,
        net,
        train,
    } = fit;
    let partitions = partitions(&steps[data]);
    let mut runs = Vec::new();
    for r in 0..repeat as u64 {
        // The first repeat is the train step's own seed, so it shares the train's entry.
        let seed = train.seed.wrapping_add(r);
        let seeded = TrainSpec {
            seed,
            ..train.clone()
        };
        for partition in 0..partitions {
            runs.push(RunPlan {
                key: run_key(&steps[data].key, &net, &seeded, partition),
                partition,
                seed,
            });
        }
    }
    FitPlan {
        settings,
        data,
        net,
        train,
        runs,
    }
}
