//! What a build produces: one result per step, in plan order. The report, the JSON
//! summary and the command's closing lines read a build only through `BuildResult`.

use serde::Serialize;

use super::outcome::{Outcome, Seconds};
use crate::plan::Plan;

/// Whether a step ran, was reused, or failed.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(tag = "status", rename_all = "snake_case")]
pub(crate) enum Status {
    Ran { seconds: Seconds },
    Reused,
    Failed { error: String },
}

/// A step's status and, unless it failed, its result.
#[derive(Clone, Debug)]
pub(crate) struct StepResult {
    pub status: Status,
    pub outcome: Option<Outcome>,
    /// For train steps and sweeps: how many runs of each fit trained in this build
    /// (the rest were reused).
    pub trained: Vec<usize>,
}

impl StepResult {
    pub(super) fn new(status: Status, outcome: Outcome) -> StepResult {
        StepResult {
            status,
            outcome: Some(outcome),
            trained: Vec::new(),
        }
    }

    pub(super) fn failed(error: impl std::fmt::Display) -> StepResult {
        StepResult {
            status: Status::Failed {
                error: error.to_string(),
            },
            outcome: None,
            trained: Vec::new(),
        }
    }
}

/// Every step's result, in the order of `Plan::steps`.
#[derive(Clone, Debug)]
pub(crate) struct BuildResult {
    pub steps: Vec<StepResult>,
}

impl BuildResult {
    /// How many steps ran, were reused or failed, and the seconds spent training.
    pub(crate) fn tally(&self) -> Tally {
        self.steps.iter().fold(Tally::default(), |mut tally, step| {
            match &step.status {
                Status::Ran { seconds } => {
                    tally.ran += 1;
                    if matches!(step.outcome, Some(Outcome::Train(_) | Outcome::Sweep(_))) {
                        tally.training += seconds;
                    }
                }
                Status::Reused => tally.reused += 1,
                Status::Failed { .. } => tally.failed += 1,
            }
            tally
        })
    }

    /// The id and error of every failed step.
    pub(crate) fn failures(&self, plan: &Plan) -> Vec<(String, String)> {
        failures(plan, self.steps.iter().map(Some))
    }
}

/// How many steps ran, were reused or failed, and the seconds spent training.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Tally {
    pub ran: usize,
    pub reused: usize,
    pub failed: usize,
    pub training: Seconds,
}

/// The id and error of every failed step; `results` are in plan order, `None` for a
/// step not yet run.
pub(super) fn failures<'a>(
    plan: &Plan,
    results: impl IntoIterator<Item = Option<&'a StepResult>>,
) -> Vec<(String, String)> {
    plan.steps
        .iter()
        .zip(results)
        .filter_map(|(step, result)| match result {
            Some(StepResult {
                status: Status::Failed { error },
                ..
            }) => Some((step.id.clone(), error.clone())),
            _ => None,
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::build::outcome::{FitResult, ModelShape};
    use crate::nn::{Activation, Loss};

    fn trained_fit() -> Outcome {
        Outcome::Train(FitResult {
            settings: Vec::new(),
            shape: ModelShape {
                sizes: vec![2, 1],
                hidden: Activation::Relu,
                output: Activation::Sigmoid,
                loss: Loss::CrossEntropy,
                hints: Vec::new(),
            },
            runs: Vec::new(),
            judgement: None,
        })
    }

    #[test]
    fn a_builds_tally_counts_only_train_and_sweep_seconds_as_training() {
        let results = BuildResult {
            steps: vec![
                StepResult::new(Status::Ran { seconds: 0.5 }, Outcome::Net),
                StepResult::new(Status::Ran { seconds: 2.0 }, trained_fit()),
                StepResult::new(Status::Reused, trained_fit()),
                StepResult::failed("the data file changed"),
            ],
        };
        let tally = results.tally();
        assert_eq!((tally.ran, tally.reused, tally.failed), (2, 1, 1));
        assert_eq!(tally.training, 2.0);
    }
}
