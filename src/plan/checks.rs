//! Checks of settings against the steps they read, made once references resolve: a
//! setting that would have no effect or cannot work with its upstream steps (patience
//! without held-out rows, cross-entropy on outputs that are not probabilities, a metric
//! of the other task) and column names against the CSV header. Each is a problem at
//! the setting's line, so the document is refused before anything runs.
//!
//! Steps are looked up by id. The task is known here only when the document settles
//! it (`task:` written, or several targets, which regress); otherwise the run checks it.

use std::path::Path;

use crate::data::{DataError, Split, Task, prepare, read_header, read_table};
use crate::document::problem::nearest;
use crate::document::spec::{
    CompareSpec, DataSpec, LossChoice, MetricName, NetSpec, OutputChoice, PredictSpec, SweepSpec,
    TrainSpec, key_span, word,
};
use crate::document::{Document, Problem, StepSpec};
use crate::nn::Optimizer;
use crate::plan::{FitPlan, Limits, PlannedStep, describe};

/// Every check of this module over a planned document's steps.
pub(super) fn check(
    document: &Document,
    steps: &[PlannedStep],
    limits: Limits,
    problems: &mut Vec<Problem>,
) {
    let lookup = Lookup { document, steps };
    for step in steps {
        let at = |setting: &str| lookup.span(&step.id, setting);
        match &step.spec {
            StepSpec::Data(data) => {
                check_columns(step, data, &at, problems);
                check_validation(step, data, limits, &at, problems);
                check_scale_target(data, &at, problems);
            }
            StepSpec::Train(train) => check_train(&lookup, train, &at, problems),
            StepSpec::Sweep(sweep) => check_sweep(&lookup, sweep, &step.fits, &at, problems),
            StepSpec::Compare(compare) => check_compare(&lookup, compare, &at, problems),
            StepSpec::Predict(predict) => check_predict(&lookup, step, predict, &at, problems),
            _ => {}
        }
    }
}

/// Finds steps and their settings' lines by id.
struct Lookup<'a> {
    document: &'a Document,
    steps: &'a [PlannedStep],
}

impl Lookup<'_> {
    fn step(&self, id: &str) -> Option<&PlannedStep> {
        self.steps.iter().find(|step| step.id == id)
    }

    fn spec(&self, id: &str) -> Option<&StepSpec> {
        self.step(id).map(|step| &step.spec)
    }

    fn data(&self, id: &str) -> Option<(&str, &DataSpec)> {
        let step = self.step(id)?;
        match &step.spec {
            StepSpec::Data(data) => Some((step.id.as_str(), data)),
            _ => None,
        }
    }

    fn net(&self, id: &str) -> Option<&NetSpec> {
        match self.spec(id)? {
            StepSpec::Net(net) => Some(net),
            _ => None,
        }
    }

    fn train(&self, id: &str) -> Option<&TrainSpec> {
        match self.spec(id)? {
            StepSpec::Train(train) => Some(train),
            _ => None,
        }
    }

    /// The data step a train or sweep reads, with its id.
    fn data_of(&self, id: &str) -> Option<(&str, &DataSpec)> {
        match self.spec(id)? {
            StepSpec::Train(train) => self.data(&train.data),
            StepSpec::Sweep(sweep) => self.data_of(&sweep.from),
            _ => None,
        }
    }

    /// The line of `setting:` in step `id`, or its info string.
    fn span(&self, id: &str, setting: &str) -> std::ops::Range<usize> {
        let block = self
            .document
            .steps()
            .find(|block| block.id == id)
            .expect("every planned step has its block");
        key_span(block.yaml_block(), setting).unwrap_or_else(|| block.info_span.clone())
    }
}

/// The task when the document settles it without reading the data.
fn settled_task(data: &DataSpec) -> Option<Task> {
    let several_targets = data.settings.target.len() > 1;
    data.settings
        .task
        .or(several_targets.then_some(Task::Regress))
}

fn task_metrics(task: Task) -> &'static [MetricName] {
    match task {
        Task::Classify => &[MetricName::Loss, MetricName::Accuracy, MetricName::LogLoss],
        Task::Regress => &[
            MetricName::Loss,
            MetricName::Mse,
            MetricName::Mae,
            MetricName::R2,
        ],
    }
}

fn metric_list(task: Task) -> String {
    let names: Vec<&str> = task_metrics(task).iter().map(|m| m.key()).collect();
    names.join(", ")
}

/// No rows for patience to watch: none held out and none set aside for validation.
fn no_rows_to_watch(data: &DataSpec) -> bool {
    data.settings.split == Split::Holdout(0.0) && data.settings.validation.is_none()
}

fn check_train(
    lookup: &Lookup<'_>,
    train: &TrainSpec,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    let (Some((data_id, data)), Some(net)) = (lookup.data(&train.data), lookup.net(&train.net))
    else {
        return;
    };
    if train.patience.is_some() && no_rows_to_watch(data) {
        problems.push(patience_problem(at("patience"), data_id, ""));
    }
    if let Some(message) = loss_misfit(net, &train.net, train, data_id, settled_task(data)) {
        problems.push(Problem::new(at("loss"), message));
    }
}

fn patience_problem(span: std::ops::Range<usize>, data_id: &str, prefix: &str) -> Problem {
    Problem::new(
        span,
        format!("{prefix}patience stops on the held-out rows' loss, but data step '{data_id}' holds out no rows (holdout: 0)"),
    )
    .with_help("hold out rows (holdout above 0, or folds), set validation rows aside, or remove patience")
}

/// Why cross-entropy cannot train this net on this data, if it cannot.
fn loss_misfit(
    net: &NetSpec,
    net_id: &str,
    train: &TrainSpec,
    data_id: &str,
    task: Option<Task>,
) -> Option<String> {
    if train.loss != LossChoice::CrossEntropy {
        return None;
    }
    if matches!(net.output, OutputChoice::Linear | OutputChoice::Tanh) {
        return Some(format!(
            "loss: cross_entropy needs outputs that are probabilities (sigmoid or softmax), but net '{net_id}' has output: {}",
            word(&net.output)
        ));
    }
    (task == Some(Task::Regress)).then(|| {
        format!("loss: cross_entropy is a classification loss, but data step '{data_id}' regresses; use mse or auto")
    })
}

fn check_sweep(
    lookup: &Lookup<'_>,
    sweep: &SweepSpec,
    fits: &[FitPlan],
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    let Some((data_id, data)) = lookup.data_of(&sweep.from) else {
        return;
    };
    let varies = |setting: &str| sweep.vary.iter().any(|(name, _)| name == setting);
    // A setting of the base train is judged there; the sweep answers for what it
    // varies. A varied momentum must meet sgd in at least one combination.
    let sgd = |fit: &FitPlan| matches!(fit.train.optimizer, Optimizer::Sgd { .. });
    if varies("momentum") && !fits.is_empty() && !fits.iter().any(sgd) {
        problems.push(Problem::new(
            at("vary"),
            "vary: momentum has no effect here: every combination trains with adam, which keeps its own moment estimates",
        ));
    }
    if varies("patience") && no_rows_to_watch(data) {
        problems.push(patience_problem(at("vary"), data_id, "vary: "));
    }
    if varies("loss") || varies("output") {
        let base_net = lookup
            .train(&sweep.from)
            .map_or("", |train| train.net.as_str());
        let mut seen = Vec::new();
        for fit in fits {
            let task = settled_task(data);
            if let Some(message) = loss_misfit(&fit.net, base_net, &fit.train, data_id, task) {
                let message = format!("with {}: {message}", describe(&fit.settings));
                if !seen.contains(&message) {
                    problems.push(Problem::new(at("vary"), message.clone()));
                    seen.push(message);
                }
            }
        }
    }
    if let (Some(rank_by), Some(task)) = (sweep.rank_by, settled_task(data))
        && !task_metrics(task).contains(&rank_by)
    {
        problems.push(
            Problem::new(
                at("rank_by"),
                format!(
                    "rank_by: {} is not a metric of data step '{data_id}', which is set to {}",
                    rank_by.key(),
                    word(&task)
                ),
            )
            .with_help(format!("metrics of this task: {}", metric_list(task))),
        );
    }
}

fn check_compare(
    lookup: &Lookup<'_>,
    compare: &CompareSpec,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    let Some(metrics) = &compare.metrics else {
        return;
    };
    let tasks: Vec<(&str, Task)> = compare
        .runs
        .iter()
        .filter_map(|run| Some((run.as_str(), settled_task(lookup.data_of(run)?.1)?)))
        .collect();
    for metric in metrics {
        if let Some((run, task)) = tasks
            .iter()
            .find(|(_, task)| !task_metrics(*task).contains(metric))
        {
            problems.push(
                Problem::new(
                    at("metrics"),
                    format!(
                        "metrics: {} is not a metric of '{run}', whose data is set to {}",
                        metric.key(),
                        word(task)
                    ),
                )
                .with_help(format!("metrics of this task: {}", metric_list(*task))),
            );
        }
    }
}

/// `target` and `inputs` name columns of the data file's header.
fn check_columns(
    step: &PlannedStep,
    data: &DataSpec,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    // A file that cannot be read already has its problem, or fails its step with the
    // reader's own message.
    let Some(header) = step.files.first().and_then(|file| header_of(&file.path)) else {
        return;
    };
    let named = [
        ("target", data.settings.target.as_slice()),
        (
            "inputs",
            data.settings.inputs.as_deref().unwrap_or_default(),
        ),
    ];
    for (setting, names) in named {
        for name in names.iter().filter(|name| !header.contains(name)) {
            problems.push(missing_column(
                at(setting),
                setting,
                name,
                &data.file,
                &header,
            ));
        }
    }
}

/// `scale_target` on a classification task: class indicators are never scaled.
fn check_scale_target(
    data: &DataSpec,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    if data.settings.scale_target.is_some() && settled_task(data) == Some(Task::Classify) {
        problems.push(
            Problem::new(
                at("scale_target"),
                "scale_target scales regression targets; this data step classifies",
            )
            .with_help("remove scale_target, or set `task: regress` for a numeric target"),
        );
    }
}

/// `validation` with the holdout (or fold) leaves every class some training rows.
/// Only the data says which classes there are and how many rows each has, so the
/// split is made here, once, to refuse such fractions at their line before anything
/// runs; other problems with the file are the data step's to report when it runs.
fn check_validation(
    step: &PlannedStep,
    data: &DataSpec,
    limits: Limits,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    if data.settings.validation.is_none() {
        return;
    }
    // The plan hashed the file within the size limit; reading stops past that length.
    let Some(Ok(table)) = step
        .files
        .first()
        .map(|file| file.read(|reader| read_table(reader)))
    else {
        return;
    };
    if let Err(error @ DataError::ValidationLeavesNoTraining { .. }) =
        prepare(&table, &data.settings, limits.max_categories)
    {
        problems.push(
            Problem::new(at("validation"), error.to_string())
                .with_help("validation is a fraction of the rows left for training after the holdout (or each fold's held-out rows)"),
        );
    }
}

fn missing_column(
    span: std::ops::Range<usize>,
    setting: &str,
    name: &str,
    file: &str,
    header: &[String],
) -> Problem {
    let problem = Problem::new(span, format!("{setting}: '{file}' has no column '{name}'"));
    match nearest(name, header.iter().map(String::as_str)) {
        Some(near) => problem.with_help(format!("did you mean '{near}'?")),
        None => problem.with_help(format!("its columns: {}", header.join(", "))),
    }
}

fn header_of(path: &Path) -> Option<Vec<String>> {
    read_header(std::fs::File::open(path).ok()?).ok()
}

/// A predict file holds every input column the model reads.
fn check_predict(
    lookup: &Lookup<'_>,
    step: &PlannedStep,
    predict: &PredictSpec,
    at: &dyn Fn(&str) -> std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) {
    let Some((data_id, data)) = lookup.data_of(&predict.model) else {
        return;
    };
    let model_header = lookup
        .step(data_id)
        .and_then(|s| s.files.first())
        .and_then(|file| header_of(&file.path));
    let new_header = step.files.first().and_then(|file| header_of(&file.path));
    let (Some(model_header), Some(new_header)) = (model_header, new_header) else {
        return;
    };
    let inputs: Vec<&String> = match &data.settings.inputs {
        Some(inputs) => inputs.iter().collect(),
        None => model_header
            .iter()
            .filter(|column| !data.settings.target.contains(column))
            .collect(),
    };
    let lacking: Vec<&str> = inputs
        .into_iter()
        .filter(|column| !new_header.contains(column))
        .map(String::as_str)
        .collect();
    if !lacking.is_empty() {
        problems.push(Problem::new(
            at("file"),
            format!(
                "file: '{}' lacks the input column(s) {} that model '{}' reads",
                predict.file,
                lacking
                    .iter()
                    .map(|c| format!("'{c}'"))
                    .collect::<Vec<_>>()
                    .join(", "),
                predict.model
            ),
        ));
    }
}
