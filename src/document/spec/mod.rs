//! Step settings in two stages: serde structs that mirror the YAML exactly (unknown
//! keys rejected), then validated specs with every default applied. Nothing past this
//! module sees raw YAML. A validated spec serialises canonically (fixed field order),
//! which is what enters a step's cache key.

mod accepts;
pub(crate) mod compare;
pub(crate) mod model_use;
pub mod schema;
pub(crate) mod sweep;

use std::sync::LazyLock;

use schemars::JsonSchema;
use serde::de::DeserializeOwned;
use serde::{Deserialize, Deserializer, Serialize};
use serde_yaml::{Mapping, Value};

use super::StepBlock;
use super::names::fields;
pub(crate) use super::names::word;
use super::problem::{Problem, nearest};
use super::yaml::{self, Block};
use crate::data::{DataSettings, Missing, Scale, Split, Task};
use crate::nn::{Activation, BatchSize, Init, Optimizer, Precision};
pub(crate) use compare::{ChartChoice, CompareSpec};
pub(crate) use model_use::{ExportFormat, ExportSpec, PredictSpec};
use schema::{BatchSchema, Word, no_default};
pub(crate) use sweep::{MetricName, SweepSpec};

/// The kinds of step a document can declare.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StepKind {
    Data,
    Net,
    Train,
    Sweep,
    Compare,
    Predict,
    Export,
}

impl StepKind {
    pub(crate) const ALL: [StepKind; 7] = [
        StepKind::Data,
        StepKind::Net,
        StepKind::Train,
        StepKind::Sweep,
        StepKind::Compare,
        StepKind::Predict,
        StepKind::Export,
    ];

    /// The word used in the info string and in summaries.
    pub fn word(self) -> &'static str {
        word(&self)
    }

    /// The one place that names each kind's raw settings struct: `action` is done with
    /// that type, so the setting names and the editors' schema cannot miss a kind.
    pub(crate) fn with_raw<A: RawAction>(self, action: A) -> A::Output {
        match self {
            StepKind::Data => action.with::<RawData>(),
            StepKind::Net => action.with::<RawNet>(),
            StepKind::Train => action.with::<RawTrain>(),
            StepKind::Sweep => action.with::<sweep::RawSweep>(),
            StepKind::Compare => action.with::<compare::RawCompare>(),
            StepKind::Predict => action.with::<model_use::RawPredict>(),
            StepKind::Export => action.with::<model_use::RawExport>(),
        }
    }

    /// The settings a block of this kind may set: the keys its raw struct reads.
    pub fn settings(self) -> &'static [&'static str] {
        struct Fields;
        impl RawAction for Fields {
            type Output = &'static [&'static str];
            fn with<R: DeserializeOwned + JsonSchema>(self) -> Self::Output {
                fields::<R>()
            }
        }
        self.with_raw(Fields)
    }

    pub(crate) fn from_word(word: &str) -> Option<StepKind> {
        StepKind::ALL.into_iter().find(|kind| kind.word() == word)
    }
}

/// Something done with a step kind's raw settings struct, whichever type it is
/// (see [`StepKind::with_raw`]).
pub(crate) trait RawAction {
    type Output;
    fn with<R: DeserializeOwned + JsonSchema>(self) -> Self::Output;
}

/// A step's validated settings, defaults applied.
#[derive(Clone, Debug, PartialEq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum StepSpec {
    Data(DataSpec),
    Net(NetSpec),
    Train(TrainSpec),
    Sweep(SweepSpec),
    Compare(CompareSpec),
    Predict(PredictSpec),
    Export(ExportSpec),
}

/// `data`: which CSV file to read and how to prepare it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct DataSpec {
    /// The path as written, relative to the document's folder.
    pub(crate) file: String,
    pub settings: DataSettings,
}

/// The output layer's activation, or `auto` to choose it from the task.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum OutputChoice {
    Auto,
    Sigmoid,
    Softmax,
    Linear,
    Tanh,
}

/// `net`: the shape of a network, independent of the data it will meet.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct NetSpec {
    pub(crate) hidden: Vec<usize>,
    pub activation: Activation,
    pub(crate) output: OutputChoice,
    pub(crate) init: Init,
}

/// The training objective, or `auto` to choose it from the task.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum LossChoice {
    Auto,
    Mse,
    CrossEntropy,
}

/// `train`: which data and net, and how to fit them.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TrainSpec {
    pub(crate) data: String,
    pub(crate) net: String,
    pub(crate) loss: LossChoice,
    pub(crate) optimizer: Optimizer,
    pub(crate) batch: BatchSize,
    pub(crate) epochs: usize,
    pub target_loss: Option<f64>,
    pub(crate) patience: Option<usize>,
    pub(crate) l2: f64,
    pub(crate) shuffle: bool,
    pub(crate) seed: u64,
    /// Left out of the serialisation (and so of cache keys) at its default, `f64`, so
    /// that the keys of runs written before the setting existed stay valid.
    #[serde(skip_serializing_if = "Precision::is_f64")]
    pub(crate) precision: Precision,
    /// Permutation importance on the held-out rows; `None` leaves it to the data (on
    /// up to `IMPORTANCE_MAX_DEFAULT_INPUTS` input columns). Left out of the
    /// serialisation when unset, like `precision`, so keys of documents without it stay.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub(crate) importance: Option<bool>,
    /// Shuffles per input column; left out of the serialisation at its default.
    #[serde(skip_serializing_if = "is_default_importance_repeats")]
    pub(crate) importance_repeats: usize,
}

/// Shuffles per input column when `importance_repeats` is not written.
pub(crate) const DEFAULT_IMPORTANCE_REPEATS: usize = 5;

fn is_default_importance_repeats(repeats: &usize) -> bool {
    *repeats == DEFAULT_IMPORTANCE_REPEATS
}

/// The settings a block wrote, by name; the rest took their defaults. Kept beside a
/// spec rather than in it, so it never enters the spec's serialisation (its key).
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub(crate) struct Written(Vec<&'static str>);

impl Written {
    /// The keys of a block's settings that are among `known` (deserialising the
    /// block refused any other).
    fn of(settings: &Mapping, known: &[&'static str]) -> Written {
        Written(
            known
                .iter()
                .copied()
                .filter(|name| settings.contains_key(*name))
                .collect(),
        )
    }

    pub(crate) fn contains(&self, setting: &str) -> bool {
        self.0.contains(&setting)
    }

    /// A setting's value if it was written, `None` when its default applies.
    fn kept<T>(&self, setting: &str, value: T) -> Option<T> {
        self.contains(setting).then_some(value)
    }
}

/// One step's validated settings and which of them the block wrote.
#[derive(Clone, Debug)]
pub(crate) struct ParsedStep {
    pub(crate) spec: StepSpec,
    pub(crate) written: Written,
}

/// What predict and export may read as `model`: a train step, or a sweep, which
/// stands for its best combination.
pub(crate) const MODEL_KINDS: &[StepKind] = &[StepKind::Train, StepKind::Sweep];

fn reference<'a>(id: &'a str, setting: &'static str, kinds: &'static [StepKind]) -> Reference<'a> {
    Reference { id, setting, kinds }
}

/// A step id that a step reads, the setting that names it, and the kinds it may be.
pub(crate) struct Reference<'a> {
    pub id: &'a str,
    pub(crate) setting: &'static str,
    pub(crate) kinds: &'static [StepKind],
}

impl StepSpec {
    /// The steps this one reads, in the order its upstream results are used.
    pub(crate) fn references(&self) -> Vec<Reference<'_>> {
        match self {
            StepSpec::Data(_) | StepSpec::Net(_) => Vec::new(),
            StepSpec::Train(train) => vec![
                reference(&train.data, "data", &[StepKind::Data]),
                reference(&train.net, "net", &[StepKind::Net]),
            ],
            StepSpec::Sweep(sweep) => vec![reference(&sweep.from, "from", &[StepKind::Train])],
            StepSpec::Compare(compare) => compare
                .runs
                .iter()
                .map(|id| reference(id, "runs", &[StepKind::Train, StepKind::Sweep]))
                .collect(),
            StepSpec::Predict(predict) => vec![reference(&predict.model, "model", MODEL_KINDS)],
            StepSpec::Export(export) => vec![reference(&export.model, "model", MODEL_KINDS)],
        }
    }
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "data")]
struct RawData {
    file: String,
    inputs: Option<Vec<String>>,
    target: OneOrMany,
    #[schemars(with = "Option<Word<Task>>")]
    task: Option<Task>,
    #[schemars(with = "Option<Word<Scale>>")]
    scale: Option<Scale>,
    #[schemars(with = "Option<Word<Missing>>")]
    missing: Option<Missing>,
    holdout: Option<f64>,
    folds: Option<usize>,
    validation: Option<f64>,
    seed: Option<u64>,
    #[schemars(with = "Option<Word<Scale>>")]
    scale_target: Option<Scale>,
}

#[derive(Deserialize, JsonSchema)]
#[serde(untagged)]
#[schemars(inline)]
enum OneOrMany {
    One(String),
    Many(Vec<String>),
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "net")]
pub(crate) struct RawNet {
    hidden: Option<Vec<usize>>,
    #[schemars(with = "Option<Word<Activation>>")]
    activation: Option<Activation>,
    #[schemars(with = "Option<Word<OutputChoice>>")]
    output: Option<OutputChoice>,
    #[schemars(with = "Option<Word<Init>>")]
    init: Option<Init>,
}
/// The net settings, which a sweep may also vary.
pub(crate) static NET_KEYS: LazyLock<&[&str]> = LazyLock::new(fields::<RawNet>);

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum OptimizerKind {
    Sgd,
    Adam,
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "train")]
pub(crate) struct RawTrain {
    data: String,
    net: String,
    #[schemars(with = "Option<Word<LossChoice>>")]
    loss: Option<LossChoice>,
    #[schemars(with = "Option<Word<OptimizerKind>>")]
    optimizer: Option<OptimizerKind>,
    learning_rate: Option<f64>,
    momentum: Option<f64>,
    #[serde(default, deserialize_with = "batch_size")]
    #[schemars(with = "BatchSchema", transform = no_default)]
    batch: Option<BatchSize>,
    epochs: Option<usize>,
    target_loss: Option<f64>,
    patience: Option<usize>,
    l2: Option<f64>,
    shuffle: Option<bool>,
    seed: Option<u64>,
    #[schemars(with = "Option<Word<Precision>>")]
    precision: Option<Precision>,
    importance: Option<bool>,
    importance_repeats: Option<usize>,
}
/// The train settings, which a sweep may also vary.
pub(crate) static TRAIN_KEYS: LazyLock<&[&str]> = LazyLock::new(fields::<RawTrain>);

fn batch_size<'de, D: Deserializer<'de>>(deserializer: D) -> Result<Option<BatchSize>, D::Error> {
    rows_or_full::deserialize(deserializer).map(Some)
}

/// `batch` in the document's words: a row count or the word `full`.
mod rows_or_full {
    use serde::{Deserialize, Deserializer, Serializer};

    use crate::nn::BatchSize;

    pub(super) fn deserialize<'de, D: Deserializer<'de>>(
        deserializer: D,
    ) -> Result<BatchSize, D::Error> {
        #[derive(Deserialize)]
        #[serde(untagged)]
        enum Raw {
            Rows(usize),
            Word(String),
        }
        match Raw::deserialize(deserializer)? {
            Raw::Rows(rows) => Ok(BatchSize::Rows(rows)),
            Raw::Word(word) if word == "full" => Ok(BatchSize::Full),
            Raw::Word(word) => Err(serde::de::Error::custom(format!(
                "batch must be a number of rows or 'full', not '{word}'"
            ))),
        }
    }

    pub(super) fn serialize<S: Serializer>(
        batch: &BatchSize,
        serializer: S,
    ) -> Result<S::Ok, S::Error> {
        match batch {
            BatchSize::Rows(rows) => serializer.serialize_u64(*rows as u64),
            BatchSize::Full => serializer.serialize_str("full"),
        }
    }
}

/// Checks of one block's values, each reported at the line of its key.
pub(crate) struct Checker<'a> {
    /// The block as written, to find a key's line; `None` for settings made by a sweep.
    pub(crate) block: Option<Block<'a>>,
    /// Where a problem points when its key's line is not found.
    pub(crate) fallback: std::ops::Range<usize>,
    /// Put before each message (a sweep says which combination it was checking).
    pub(crate) prefix: String,
    pub problems: &'a mut Vec<Problem>,
}

impl Checker<'_> {
    pub(crate) fn require(&mut self, ok: bool, key: &str, message: impl FnOnce() -> String) {
        if !ok {
            let span = self
                .block
                .and_then(|block| key_span(block, key))
                .unwrap_or(self.fallback.clone());
            let message = format!("{}{}", self.prefix, message());
            self.problems.push(Problem::new(span, message));
        }
    }
}

/// The byte span of the line where `key:` is set in a block.
pub(crate) fn key_span(block: Block<'_>, key: &str) -> Option<std::ops::Range<usize>> {
    let mut offset = block.offset;
    for line in block.text.split_inclusive('\n') {
        let trimmed = line.trim_start();
        if trimmed
            .strip_prefix(key)
            .is_some_and(|rest| rest.trim_start().starts_with(':'))
        {
            let indent = line.len() - trimmed.len();
            return Some(offset + indent..offset + line.trim_end().len());
        }
        offset += line.len();
    }
    None
}

/// Parses and validates one step's settings; `None` when a problem was recorded.
pub(crate) fn parse_step(
    step: &StepBlock,
    default_seed: u64,
    problems: &mut Vec<Problem>,
) -> Option<ParsedStep> {
    let block = step.yaml_block();
    let before = problems.len();
    let mut written = Written::default();
    let mut check = Checker {
        block: Some(block),
        fallback: step.info_span.clone(),
        prefix: String::new(),
        problems,
    };
    let spec = match step.kind {
        StepKind::Data => {
            let raw: RawData = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Data(validate_data(raw, default_seed, &mut check))
        }
        StepKind::Net => {
            let raw: RawNet = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Net(validate_net(raw, &mut check))
        }
        StepKind::Train => {
            let raw: RawTrain = deserialize(block, &step.info_span, check.problems, &mut written)?;
            refuse_momentum_with_adam(&raw, &mut check);
            StepSpec::Train(validate_train(raw, default_seed, &mut check))
        }
        StepKind::Sweep => {
            let raw = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Sweep(sweep::validate_sweep(raw, &mut check))
        }
        StepKind::Compare => {
            let raw = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Compare(compare::validate_compare(raw, &mut check))
        }
        StepKind::Predict => {
            let raw = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Predict(model_use::validate_predict(raw, &mut check))
        }
        StepKind::Export => {
            let raw = deserialize(block, &step.info_span, check.problems, &mut written)?;
            StepSpec::Export(model_use::validate_export(raw, &mut check))
        }
    };
    (problems.len() == before).then_some(ParsedStep { spec, written })
}

/// Reads a block's settings into its raw struct. Every problem names the setting and
/// points at its line: the block is parsed as a YAML map first, tags are refused, and
/// a value that does not fit is described in the document's words (see `accepts`).
fn deserialize<T: serde::de::DeserializeOwned>(
    block: Block<'_>,
    info_span: &std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
    // Receives the names of the settings the block wrote.
    written: &mut Written,
) -> Option<T> {
    let known = fields::<T>();
    let no_settings = || {
        Problem::new(info_span.clone(), "the step has no settings")
            .with_help(format!("settings of this kind: {}", known.join(", ")))
    };
    if block.text.trim().is_empty() {
        problems.push(no_settings());
        return None;
    }
    let settings = match yaml::parse_value(block, problems)? {
        Value::Mapping(settings) => settings,
        // A block of comments only.
        Value::Null => {
            problems.push(no_settings());
            return None;
        }
        other => {
            let span = block.offset..block.offset + block.text.trim_end().len();
            problems.push(
                Problem::new(
                    span,
                    format!(
                        "settings are written as `name: value` lines, not as {}",
                        shape_of(&other)
                    ),
                )
                .with_help(format!("settings of this kind: {}", known.join(", "))),
            );
            return None;
        }
    };
    if refuse_tags(block, &settings, problems) {
        return None;
    }
    *written = Written::of(&settings, known);
    match serde_path_to_error::deserialize(Value::Mapping(settings.clone())) {
        Ok(raw) => Some(raw),
        Err(error) => {
            problems.push(misfit_problem(block, info_span, known, &settings, &error));
            None
        }
    }
}

fn shape_of(value: &Value) -> &'static str {
    match value {
        Value::Sequence(_) => "a list",
        Value::Tagged(_) => "a tagged value",
        _ => "a single value",
    }
}

/// Records a problem for every setting that carries a YAML tag; whether there was one.
fn refuse_tags(block: Block<'_>, settings: &Mapping, problems: &mut Vec<Problem>) -> bool {
    let before = problems.len();
    for (key, value) in settings {
        let name = key.as_str().unwrap_or_default();
        if let Some((tag, tagged)) = yaml::first_tag(key).or_else(|| yaml::first_tag(value)) {
            let span = key_span(block, name).unwrap_or(block.offset..block.offset);
            let plain = match tagged {
                Value::Null => tag.trim_start_matches('!').to_string(),
                other => sweep::value_text(other),
            };
            let help = if matches!(value, Value::Tagged(_)) {
                format!("write the value itself: {name}: {plain}")
            } else {
                format!("write {plain} without the tag")
            };
            problems.push(
                Problem::new(
                    span,
                    format!("{name}: YAML tags such as `{tag}` are not setting values"),
                )
                .with_help(help),
            );
        }
    }
    problems.len() > before
}

/// The problem for settings that did not deserialise: an unknown or missing setting,
/// or a value that does not fit its setting, at that setting's line.
fn misfit_problem(
    block: Block<'_>,
    info_span: &std::ops::Range<usize>,
    known: &[&str],
    settings: &Mapping,
    error: &serde_path_to_error::Error<serde_yaml::Error>,
) -> Problem {
    let message = error.inner().to_string();
    if let Some(unknown) = yaml::unknown_key(&yaml::plain_text(&message)) {
        let span = key_span(block, unknown).unwrap_or(info_span.clone());
        return Problem::new(span, yaml::plain_text(&message)).with_help(
            match nearest(unknown, known.iter().copied()) {
                Some(suggestion) => format!("did you mean '{suggestion}'?"),
                None => format!("known settings here: {}", known.join(", ")),
            },
        );
    }
    let (setting, message, help) = describe_misfit(settings, error);
    // A missing setting has no line of its own; the step's info string stands for it.
    let span = match setting {
        "" => None,
        setting => key_span(block, setting),
    };
    let problem = Problem::new(span.unwrap_or(info_span.clone()), message);
    match help {
        Some(help) => problem.with_help(help),
        None => problem,
    }
}

/// The setting whose value did not deserialise, the message naming it and what it
/// accepts, and a suggestion.
fn describe_misfit<'a>(
    settings: &Mapping,
    error: &'a serde_path_to_error::Error<serde_yaml::Error>,
) -> (&'a str, String, Option<String>) {
    let setting = match error.path().iter().next() {
        Some(serde_path_to_error::Segment::Map { key }) => key.as_str(),
        _ => "",
    };
    let value = settings.get(setting).unwrap_or(&Value::Null);
    match accepts::misfit(setting, value) {
        Some((message, help)) => (setting, message, help),
        None => (setting, yaml::plain_text(&error.inner().to_string()), None),
    }
}

fn validate_data(raw: RawData, default_seed: u64, check: &mut Checker<'_>) -> DataSpec {
    let target = match raw.target {
        OneOrMany::One(name) => vec![name],
        OneOrMany::Many(names) => names,
    };
    check.require(!target.is_empty(), "target", || {
        "target must name at least one column".into()
    });
    check.require(!raw.file.trim().is_empty(), "file", || {
        "file must name a CSV file".into()
    });
    let split = match (raw.holdout, raw.folds) {
        (Some(_), Some(_)) => {
            check.require(false, "folds", || {
                "set either holdout or folds, not both".into()
            });
            Split::Holdout(0.2)
        }
        (_, Some(folds)) => {
            check.require(folds >= 2, "folds", || {
                format!("folds must be at least 2, not {folds}")
            });
            Split::Folds(folds)
        }
        (holdout, None) => {
            let holdout = holdout.unwrap_or(0.2);
            check.require((0.0..1.0).contains(&holdout), "holdout", || {
                format!("holdout is the fraction of rows held out: expected at least 0 and below 1, not {holdout}")
            });
            Split::Holdout(holdout)
        }
    };
    if let Some(validation) = raw.validation {
        // Written so that NaN fails too.
        check.require(validation > 0.0 && validation < 1.0, "validation", || {
            format!("validation is the fraction of training rows set aside: expected above 0 and below 1, not {validation}")
        });
    }
    DataSpec {
        file: raw.file,
        settings: DataSettings {
            inputs: raw.inputs,
            target,
            task: raw.task,
            scale: raw.scale.unwrap_or(Scale::Standard),
            missing: raw.missing.unwrap_or(Missing::Error),
            split,
            validation: raw.validation,
            seed: raw.seed.unwrap_or(default_seed),
            scale_target: raw.scale_target,
        },
    }
}

pub(crate) fn validate_net(raw: RawNet, check: &mut Checker<'_>) -> NetSpec {
    let hidden = raw.hidden.unwrap_or_else(|| vec![8]);
    check.require(hidden.iter().all(|&width| width > 0), "hidden", || {
        "every hidden layer needs at least one unit; use `hidden: []` for no hidden layer".into()
    });
    let activation = raw.activation.unwrap_or(Activation::Tanh);
    check.require(activation != Activation::Softmax, "activation", || {
        "softmax is an output activation; hidden layers take sigmoid, tanh, relu, leaky_relu or linear".into()
    });
    NetSpec {
        hidden,
        activation,
        output: raw.output.unwrap_or(OutputChoice::Auto),
        init: raw.init.unwrap_or(Init::Xavier),
    }
}

impl RawNet {
    /// The written settings of a validated net spec, as read from its block: validated
    /// again, they give the same spec. A sweep puts its varied values into these.
    pub(crate) fn written_in(spec: &NetSpec, written: &Written) -> RawNet {
        let NetSpec {
            hidden,
            activation,
            output,
            init,
        } = spec;
        RawNet {
            hidden: written.kept("hidden", hidden.clone()),
            activation: written.kept("activation", *activation),
            output: written.kept("output", *output),
            init: written.kept("init", *init),
        }
    }
}

impl RawTrain {
    /// The written settings of a validated train spec, as read from its block: validated
    /// again, they give the same spec, defaults that depend on other settings (the
    /// learning rate on the optimizer) included. A sweep puts its varied values into
    /// these.
    pub(crate) fn written_in(spec: &TrainSpec, written: &Written) -> RawTrain {
        let TrainSpec {
            data,
            net,
            loss,
            optimizer,
            batch,
            epochs,
            target_loss,
            patience,
            l2,
            shuffle,
            seed,
            precision,
            importance,
            importance_repeats,
        } = spec;
        // A written momentum beside adam is refused, so only sgd can carry one.
        let (kind, learning_rate, momentum) = match *optimizer {
            Optimizer::Sgd {
                learning_rate,
                momentum,
            } => (OptimizerKind::Sgd, learning_rate, Some(momentum)),
            Optimizer::Adam { learning_rate, .. } => (OptimizerKind::Adam, learning_rate, None),
        };
        RawTrain {
            data: data.clone(),
            net: net.clone(),
            loss: written.kept("loss", *loss),
            optimizer: written.kept("optimizer", kind),
            learning_rate: written.kept("learning_rate", learning_rate),
            momentum: momentum.and_then(|momentum| written.kept("momentum", momentum)),
            batch: written.kept("batch", *batch),
            epochs: written.kept("epochs", *epochs),
            target_loss: *target_loss,
            patience: *patience,
            l2: written.kept("l2", *l2),
            shuffle: written.kept("shuffle", *shuffle),
            seed: written.kept("seed", *seed),
            precision: written.kept("precision", *precision),
            importance: *importance,
            importance_repeats: written.kept("importance_repeats", *importance_repeats),
        }
    }
}

/// Adam keeps its own moment estimates, so a written `momentum` would silently do
/// nothing. Only a written train step is checked: a sweep that varies the optimizer
/// may try adam from a base that sets momentum for sgd (see `plan::checks`).
fn refuse_momentum_with_adam(raw: &RawTrain, check: &mut Checker<'_>) {
    let adam = matches!(raw.optimizer, Some(OptimizerKind::Adam));
    check.require(!(adam && raw.momentum.is_some()), "momentum", || {
        "momentum applies to sgd only, and this step trains with adam, which keeps its own moment estimates".into()
    });
}

pub(crate) fn validate_train(
    raw: RawTrain,
    default_seed: u64,
    check: &mut Checker<'_>,
) -> TrainSpec {
    let kind = raw.optimizer.unwrap_or(OptimizerKind::Sgd);
    let learning_rate = raw.learning_rate.unwrap_or(match kind {
        OptimizerKind::Sgd => 0.01,
        OptimizerKind::Adam => 0.001,
    });
    check.require(
        learning_rate > 0.0 && learning_rate.is_finite(),
        "learning_rate",
        || format!("learning_rate must be a positive number, not {learning_rate}"),
    );
    let momentum = raw.momentum.unwrap_or(0.9);
    check.require((0.0..1.0).contains(&momentum), "momentum", || {
        format!("momentum must be at least 0 and below 1, not {momentum}")
    });
    // Adam keeps its own moment estimates; `momentum` is a setting of sgd only.
    let optimizer = match kind {
        OptimizerKind::Sgd => Optimizer::Sgd {
            learning_rate,
            momentum,
        },
        OptimizerKind::Adam => Optimizer::Adam {
            learning_rate,
            beta1: 0.9,
            beta2: 0.999,
            epsilon: 1e-8,
        },
    };
    let batch = raw.batch.unwrap_or(BatchSize::Rows(32));
    check.require(batch != BatchSize::Rows(0), "batch", || {
        "batch must be at least 1 row, or 'full'".into()
    });
    let epochs = raw.epochs.unwrap_or(1000);
    check.require(epochs > 0, "epochs", || "epochs must be at least 1".into());
    if let Some(target) = raw.target_loss {
        check.require(target >= 0.0 && target.is_finite(), "target_loss", || {
            format!("target_loss must be a loss value of 0 or more, not {target}")
        });
    }
    if let Some(patience) = raw.patience {
        check.require(patience > 0, "patience", || {
            "patience must be at least 1 epoch".into()
        });
    }
    let l2 = raw.l2.unwrap_or(0.0);
    check.require(l2 >= 0.0 && l2.is_finite(), "l2", || {
        format!("l2 must be 0 or more, not {l2}")
    });
    let importance_repeats = raw.importance_repeats.unwrap_or(DEFAULT_IMPORTANCE_REPEATS);
    check.require(importance_repeats > 0, "importance_repeats", || {
        "importance_repeats must be at least 1 shuffle".into()
    });
    TrainSpec {
        data: raw.data,
        net: raw.net,
        loss: raw.loss.unwrap_or(LossChoice::Auto),
        optimizer,
        batch,
        epochs,
        target_loss: raw.target_loss,
        patience: raw.patience,
        l2,
        shuffle: raw.shuffle.unwrap_or(true),
        seed: raw.seed.unwrap_or(default_seed),
        precision: raw.precision.unwrap_or_default(),
        importance: raw.importance,
        importance_repeats,
    }
}
