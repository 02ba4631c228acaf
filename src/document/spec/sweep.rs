//! `sweep` settings, and the expansion of a sweep into validated train settings, one
//! per combination of its varied values.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_yaml::value::{Tag, TaggedValue};
use serde_yaml::{Mapping, Value};

use super::schema::{VarySchema, Word};
use super::{
    Checker, LossChoice, NET_KEYS, NetSpec, OptimizerKind, OutputChoice, RawNet, RawTrain,
    TRAIN_KEYS, TrainSpec, Written, accepts, rows_or_full, validate_net, validate_train,
};
use crate::document::problem::{Problem, nearest};
use crate::nn::{Activation, BatchSize, Init, Precision};

/// A metric a sweep can rank by or a compare step can show.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum MetricName {
    Loss,
    Accuracy,
    LogLoss,
    Mse,
    Mae,
    R2,
}

impl MetricName {
    /// The name used in summaries and the metric tables.
    pub(crate) fn key(self) -> &'static str {
        super::word(&self)
    }

    /// Whether a larger value is better (accuracy, R²) or worse (the losses and errors).
    pub(crate) fn higher_is_better(self) -> bool {
        matches!(self, MetricName::Accuracy | MetricName::R2)
    }
}

#[derive(Deserialize, JsonSchema)]
#[serde(deny_unknown_fields)]
#[schemars(rename = "sweep")]
pub(super) struct RawSweep {
    from: String,
    #[schemars(with = "VarySchema")]
    vary: Mapping,
    repeat: Option<usize>,
    #[schemars(with = "Option<Word<MetricName>>")]
    rank_by: Option<MetricName>,
}

/// `sweep`: a train step run once per combination of the varied settings.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SweepSpec {
    pub(crate) from: String,
    /// Setting name → the values to try, in the order written.
    pub(crate) vary: Vec<(String, Vec<Value>)>,
    /// Seeds per combination: the train step's seed, then the next ones.
    pub(crate) repeat: usize,
    /// `None`: held-out accuracy to classify, held-out loss to regress.
    pub(crate) rank_by: Option<MetricName>,
}

/// Settings a sweep cannot vary: they choose which steps a run reads.
pub(super) const FIXED: &[&str] = &["data", "net"];

pub(super) fn validate_sweep(raw: RawSweep, check: &mut Checker<'_>) -> SweepSpec {
    let mut vary = Vec::new();
    for (key, values) in raw.vary {
        let Some(name) = key.as_str().map(str::to_string) else {
            check.require(false, "vary", || {
                "vary maps setting names to lists of values".into()
            });
            continue;
        };
        let known = TRAIN_KEYS.iter().chain(*NET_KEYS).any(|k| *k == name);
        if !known || FIXED.contains(&name.as_str()) {
            let suggestion = nearest(
                &name,
                TRAIN_KEYS
                    .iter()
                    .chain(*NET_KEYS)
                    .copied()
                    .filter(|k| !FIXED.contains(k)),
            )
            .map_or(String::new(), |s| format!(" (did you mean '{s}'?)"));
            check.require(false, "vary", || {
                format!("a sweep can vary train and net settings other than data and net, not '{name}'{suggestion}")
            });
            continue;
        }
        match values {
            Value::Sequence(values) if !values.is_empty() => {
                if let Some(twice) = repeated(&values) {
                    let twice = value_text(twice);
                    check.require(false, "vary", || {
                        format!("vary: {name} lists {twice} twice; each value is run once")
                    });
                }
                vary.push((name, values))
            }
            _ => check.require(false, "vary", || {
                format!("vary: {name} needs a non-empty list of values")
            }),
        }
    }
    check.require(!vary.is_empty(), "vary", || {
        "vary names no setting to vary".into()
    });
    let repeat = raw.repeat.unwrap_or(1);
    check.require(repeat >= 1, "repeat", || "repeat must be at least 1".into());
    SweepSpec {
        from: raw.from,
        vary,
        repeat,
        rank_by: raw.rank_by,
    }
}

/// The first value that appears again later in `values`.
pub(super) fn repeated<T: PartialEq>(values: &[T]) -> Option<&T> {
    values
        .iter()
        .enumerate()
        .find(|(i, value)| values[i + 1..].contains(value))
        .map(|(_, value)| value)
}

impl SweepSpec {
    /// Every combination of the varied values, the first setting varying slowest.
    pub(crate) fn combinations(&self) -> Vec<Vec<(String, Value)>> {
        let mut grid: Vec<Vec<(String, Value)>> = vec![Vec::new()];
        for (name, values) in &self.vary {
            grid = grid
                .into_iter()
                .flat_map(|prefix| {
                    values.iter().map(move |value| {
                        let mut combination = prefix.clone();
                        combination.push((name.clone(), value.clone()));
                        combination
                    })
                })
                .collect();
        }
        grid
    }
}

/// A value as the report shows it, in YAML's flow style (`[12, 6]`, `relu`, `0.01`).
pub(crate) fn value_text(value: &Value) -> String {
    match value {
        Value::Null => "null".into(),
        Value::Bool(b) => b.to_string(),
        Value::Number(n) => n.to_string(),
        Value::String(text) => text.clone(),
        Value::Sequence(items) => format!(
            "[{}]",
            items.iter().map(value_text).collect::<Vec<_>>().join(", ")
        ),
        Value::Mapping(map) => format!(
            "{{{}}}",
            map.iter()
                .map(|(k, v)| format!("{}: {}", value_text(k), value_text(v)))
                .collect::<Vec<_>>()
                .join(", ")
        ),
        Value::Tagged(tagged) => value_text(&tagged.value),
    }
}

/// One varied setting at one of its values, read into the type its raw setting takes:
/// null (`~`) means the default, as it does written in the base step. Serialised (in a
/// sweep's results) as `{setting: value}`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Override {
    Loss(Option<LossChoice>),
    Optimizer(Option<OptimizerKind>),
    LearningRate(Option<f64>),
    Momentum(Option<f64>),
    /// The base step refuses a null batch too, so it is never the default here.
    Batch(#[serde(with = "rows_or_full")] BatchSize),
    Epochs(Option<usize>),
    TargetLoss(Option<f64>),
    Patience(Option<usize>),
    L2(Option<f64>),
    Shuffle(Option<bool>),
    Seed(Option<u64>),
    Precision(Option<Precision>),
    Importance(Option<bool>),
    ImportanceRepeats(Option<usize>),
    Hidden(Option<Vec<usize>>),
    Activation(Option<Activation>),
    Output(Option<OutputChoice>),
    Init(Option<Init>),
}

impl Override {
    /// Reads `setting: value` as written under `vary`. serde_yaml reads an enum's
    /// variant from a tag, so the value is tagged with the setting's name.
    fn read(setting: &str, value: &Value) -> Result<Override, serde_yaml::Error> {
        serde_yaml::from_value(Value::Tagged(Box::new(TaggedValue {
            tag: Tag::new(setting),
            value: value.clone(),
        })))
    }

    /// Puts the value in place of the base step's setting.
    fn apply(&self, train: &mut RawTrain, net: &mut RawNet) {
        match self.clone() {
            Override::Loss(loss) => train.loss = loss,
            Override::Optimizer(kind) => train.optimizer = kind,
            Override::LearningRate(rate) => train.learning_rate = rate,
            Override::Momentum(momentum) => train.momentum = momentum,
            Override::Batch(batch) => train.batch = Some(batch),
            Override::Epochs(epochs) => train.epochs = epochs,
            Override::TargetLoss(target) => train.target_loss = target,
            Override::Patience(patience) => train.patience = patience,
            Override::L2(l2) => train.l2 = l2,
            Override::Shuffle(shuffle) => train.shuffle = shuffle,
            Override::Seed(seed) => train.seed = seed,
            Override::Precision(precision) => train.precision = precision,
            Override::Importance(importance) => train.importance = importance,
            Override::ImportanceRepeats(repeats) => train.importance_repeats = repeats,
            Override::Hidden(hidden) => net.hidden = hidden,
            Override::Activation(activation) => net.activation = activation,
            Override::Output(output) => net.output = output,
            Override::Init(init) => net.init = init,
        }
    }

    /// The value as a number, for settings that take one (a chart's axis).
    fn number(&self) -> Option<f64> {
        match *self {
            Override::LearningRate(value)
            | Override::Momentum(value)
            | Override::TargetLoss(value)
            | Override::L2(value) => value,
            Override::Epochs(count) | Override::Patience(count) => count.map(|n| n as f64),
            Override::Batch(BatchSize::Rows(rows)) => Some(rows as f64),
            Override::Seed(seed) => seed.map(|n| n as f64),
            _ => None,
        }
    }
}

/// A varied setting's value in one combination, and the value as the document wrote it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Varied {
    pub(crate) name: String,
    pub(crate) value: Override,
    /// For display, in YAML's flow style (`[12, 6]`, `relu`, `0.01`).
    pub text: String,
}

impl Varied {
    /// The value as a number, when the setting takes one.
    pub fn number(&self) -> Option<f64> {
        self.value.number()
    }
}

/// A fit's varied settings as text: `learning_rate = 0.1, activation = relu`.
pub fn describe(settings: &[Varied]) -> String {
    describe_text(
        settings
            .iter()
            .map(|varied| (&varied.name, varied.text.clone())),
    )
}

fn describe_text<'a>(settings: impl Iterator<Item = (&'a String, String)>) -> String {
    settings
        .map(|(name, text)| format!("{name} = {text}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// One combination of a sweep: its varied settings and the specs they make.
pub(crate) struct Variant {
    pub settings: Vec<Varied>,
    pub(crate) net: NetSpec,
    pub train: TrainSpec,
}

/// A validated spec and the settings its block wrote.
pub(crate) struct Base<'a, T> {
    pub(crate) spec: &'a T,
    pub(crate) written: &'a Written,
}

/// The train and net settings of one combination: the base steps' written settings
/// with the varied values put in, validated as if written there. Problems point at
/// `span` (the sweep's `vary` line) and name the combination.
pub(crate) fn variant(
    train: Base<'_, TrainSpec>,
    net: Base<'_, NetSpec>,
    combination: &[(String, Value)],
    default_seed: u64,
    span: std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) -> Option<Variant> {
    let described = describe_text(
        combination
            .iter()
            .map(|(name, value)| (name, value_text(value))),
    );
    let before = problems.len();
    let mut check = Checker {
        block: None,
        fallback: span,
        prefix: format!("with {described}: "),
        problems,
    };
    let mut settings = Vec::new();
    for (name, value) in combination {
        match Override::read(name, value) {
            Ok(read) => settings.push(Varied {
                name: name.clone(),
                value: read,
                text: value_text(value),
            }),
            Err(error) => check.require(false, "vary", || misfit_message(name, value, &error)),
        }
    }
    if check.problems.len() > before {
        return None;
    }
    let mut raw_train = RawTrain::written_in(train.spec, train.written);
    let mut raw_net = RawNet::written_in(net.spec, net.written);
    for varied in &settings {
        varied.value.apply(&mut raw_train, &mut raw_net);
    }
    let net = validate_net(raw_net, &mut check);
    let train = validate_train(raw_train, default_seed, &mut check);
    (problems.len() == before).then_some(Variant {
        settings,
        net,
        train,
    })
}

/// What a varied value that does not fit its setting is told: what the setting
/// accepts, in the document's words.
fn misfit_message(setting: &str, value: &Value, error: &serde_yaml::Error) -> String {
    accepts::misfit(setting, value).map_or_else(
        || crate::document::yaml::plain_text(&error.to_string()),
        |(message, _)| message,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn combinations_form_a_grid_with_the_first_setting_slowest() {
        let spec = SweepSpec {
            from: "base".into(),
            vary: vec![
                (
                    "learning_rate".into(),
                    vec![Value::from(0.1), Value::from(0.2), Value::from(0.3)],
                ),
                (
                    "activation".into(),
                    vec![Value::from("tanh"), Value::from("relu")],
                ),
            ],
            repeat: 1,
            rank_by: None,
        };
        let grid = spec.combinations();
        assert_eq!(grid.len(), 6);
        assert_eq!(value_text(&grid[0][0].1), "0.1");
        assert_eq!(value_text(&grid[1][1].1), "relu");
        assert_eq!(value_text(&grid[2][0].1), "0.2");
        let widths: Value = serde_yaml::from_str("[12, 6]").unwrap();
        assert_eq!(value_text(&widths), "[12, 6]");
    }

    // A setting vary accepts but `Override` cannot hold would fail every sweep that
    // varies it; a map fits no setting, so each error must be about the value.
    #[test]
    fn every_setting_a_sweep_may_vary_reads_as_an_override() {
        let variable = TRAIN_KEYS
            .iter()
            .chain(*NET_KEYS)
            .filter(|name| !FIXED.contains(name));
        let map: Value = serde_yaml::from_str("{a: 1}").unwrap();
        for name in variable {
            let error = Override::read(name, &map).unwrap_err().to_string();
            assert!(!error.contains("unknown variant"), "{name}: {error}");
        }
    }

    #[test]
    fn a_varied_value_reads_into_its_settings_type() {
        let read = |name, yaml| Override::read(name, &serde_yaml::from_str(yaml).unwrap());
        assert_eq!(
            read("learning_rate", "1").unwrap(),
            Override::LearningRate(Some(1.0))
        );
        assert_eq!(
            read("hidden", "[12, 6]").unwrap(),
            Override::Hidden(Some(vec![12, 6]))
        );
        // As in the base step, null leaves the setting to its default.
        assert_eq!(read("hidden", "~").unwrap(), Override::Hidden(None));
        assert_eq!(
            read("batch", "full").unwrap(),
            Override::Batch(BatchSize::Full)
        );
        assert_eq!(read("batch", "16").unwrap().number(), Some(16.0));
        assert_eq!(read("activation", "relu").unwrap().number(), None);
        assert!(read("epochs", "-3").is_err());
    }
}
