//! `sweep` settings, and the expansion of a sweep into validated train settings, one
//! per combination of its varied values.

use schemars::JsonSchema;
use serde::{Deserialize, Serialize};
use serde_yaml::{Mapping, Value};

use super::schema::{VarySchema, Word};
use super::{
    Checker, NET_KEYS, NetSpec, RawNet, RawTrain, TRAIN_KEYS, TrainSpec, describe_misfit,
    validate_net, validate_train,
};
use crate::document::StepBlock;
use crate::document::problem::{Problem, nearest};

/// A metric a sweep can rank by or a compare step can show.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MetricName {
    Loss,
    Accuracy,
    LogLoss,
    Mse,
    Mae,
    R2,
}

impl MetricName {
    /// The name used in summaries and the metric tables.
    pub fn key(self) -> &'static str {
        super::word(&self)
    }

    /// Whether a larger value is better (accuracy, R²) or worse (the losses and errors).
    pub fn higher_is_better(self) -> bool {
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
    pub from: String,
    /// Setting name → the values to try, in the order written.
    pub vary: Vec<(String, Vec<Value>)>,
    /// Seeds per combination: the train step's seed, then the next ones.
    pub repeat: usize,
    /// `None`: held-out accuracy to classify, held-out loss to regress.
    pub rank_by: Option<MetricName>,
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
    pub fn combinations(&self) -> Vec<Vec<(String, Value)>> {
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
pub fn value_text(value: &Value) -> String {
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

/// A fit's varied settings as text: `learning_rate = 0.1, activation = relu`.
pub fn describe(settings: &[(String, String)]) -> String {
    settings
        .iter()
        .map(|(name, value)| format!("{name} = {value}"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A combination's values as the report shows them.
pub fn settings_text(combination: &[(String, Value)]) -> Vec<(String, String)> {
    combination
        .iter()
        .map(|(name, value)| (name.clone(), value_text(value)))
        .collect()
}

/// The train and net settings of one combination: the base steps' YAML with the varied
/// values put in, validated as if written there. Problems point at `span` (the sweep's
/// `vary` line) and name the combination.
pub fn variant(
    train: &StepBlock,
    net: &StepBlock,
    combination: &[(String, Value)],
    default_seed: u64,
    span: std::ops::Range<usize>,
    problems: &mut Vec<Problem>,
) -> Option<(NetSpec, TrainSpec)> {
    let mut train_map = mapping(&train.yaml);
    let mut net_map = mapping(&net.yaml);
    for (name, value) in combination {
        let target = if TRAIN_KEYS.contains(&name.as_str()) {
            &mut train_map
        } else {
            &mut net_map
        };
        target.insert(Value::String(name.clone()), value.clone());
    }
    let described = describe(&settings_text(combination));
    let before = problems.len();
    let mut check = Checker {
        block: None,
        fallback: span.clone(),
        prefix: format!("with {described}: "),
        problems,
    };
    let raw_train = serde_path_to_error::deserialize(Value::Mapping(train_map.clone()))
        .map_err(|error| describe_misfit(&train_map, &error).1);
    let raw_net = serde_path_to_error::deserialize(Value::Mapping(net_map.clone()))
        .map_err(|error| describe_misfit(&net_map, &error).1);
    let (raw_train, raw_net): (RawTrain, RawNet) = match (raw_train, raw_net) {
        (Ok(t), Ok(n)) => (t, n),
        (train, net) => {
            for message in [train.err(), net.err()].into_iter().flatten() {
                check.require(false, "vary", || message);
            }
            return None;
        }
    };
    let net_spec = validate_net(raw_net, &mut check);
    let train_spec = validate_train(raw_train, default_seed, &mut check);
    (problems.len() == before).then_some((net_spec, train_spec))
}

fn mapping(yaml: &str) -> Mapping {
    serde_yaml::from_str(yaml).unwrap_or_default()
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
}
