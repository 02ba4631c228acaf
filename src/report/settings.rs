//! A step's settings as the compact key–value rows its card shows: every setting with
//! its value after defaults, the ones the author did not write marked as defaults.

use serde::Serialize;

use super::compare_view::rows_label;
use crate::build::outcome::Outcome;
use crate::data::Split;
use crate::document::StepSpec;
use crate::document::spec::sweep::value_text;
use crate::document::spec::{MetricName, Written, word};
use crate::nn::{BatchSize, Optimizer};

/// One row of a settings table.
#[derive(Clone, Debug, Serialize)]
pub(crate) struct SettingRow {
    pub name: &'static str,
    pub value: String,
    /// Not written in the block: the default applies.
    pub default: bool,
}

/// The settings rows of a step; `written` tells the settings written apart from defaults.
/// `outcome`, the step's result when it has one, names what a default resolved to
/// where only the data decides it (a sweep's ranking metric and rows).
pub(crate) fn rows(
    spec: &StepSpec,
    written: &Written,
    outcome: Option<&Outcome>,
) -> Vec<SettingRow> {
    let row = |name: &'static str, value: String| SettingRow {
        default: !written.contains(name),
        name,
        value,
    };
    match spec {
        StepSpec::Data(data) => {
            let settings = &data.settings;
            let mut rows = vec![
                row("file", data.file.clone()),
                row("target", settings.target.join(", ")),
                row(
                    "inputs",
                    settings
                        .inputs
                        .as_ref()
                        .map_or("all other columns".into(), |inputs| inputs.join(", ")),
                ),
                row(
                    "task",
                    settings
                        .task
                        .map_or("from the target column".into(), |task| word(&task).into()),
                ),
                row("scale", word(&settings.scale).into()),
                row("missing", word(&settings.missing).into()),
            ];
            rows.push(match settings.split {
                Split::Holdout(fraction) => row("holdout", fraction.to_string()),
                Split::Folds(folds) => row("folds", folds.to_string()),
            });
            rows.push(row(
                "validation",
                settings
                    .validation
                    .map_or("none".into(), |fraction| fraction.to_string()),
            ));
            rows.push(row("seed", settings.seed.to_string()));
            rows
        }
        StepSpec::Net(net) => vec![
            row(
                "hidden",
                format!(
                    "[{}]",
                    net.hidden
                        .iter()
                        .map(ToString::to_string)
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ),
            row("activation", word(&net.activation).into()),
            row("output", word(&net.output).into()),
            row("init", word(&net.init).into()),
        ],
        StepSpec::Train(train) => {
            let mut rows = vec![
                row("data", train.data.clone()),
                row("net", train.net.clone()),
            ];
            rows.push(row("loss", word(&train.loss).into()));
            match &train.optimizer {
                Optimizer::Sgd {
                    learning_rate,
                    momentum,
                } => {
                    rows.push(row("optimizer", "sgd".into()));
                    rows.push(row("learning_rate", learning_rate.to_string()));
                    rows.push(row("momentum", momentum.to_string()));
                }
                Optimizer::Adam { learning_rate, .. } => {
                    rows.push(row("optimizer", "adam".into()));
                    rows.push(row("learning_rate", learning_rate.to_string()));
                }
            }
            rows.push(row(
                "batch",
                match train.batch {
                    BatchSize::Rows(rows) => rows.to_string(),
                    BatchSize::Full => word(&BatchSize::Full).into(),
                },
            ));
            rows.push(row("epochs", train.epochs.to_string()));
            if let Some(target) = train.target_loss {
                rows.push(row("target_loss", target.to_string()));
            }
            if let Some(patience) = train.patience {
                rows.push(row("patience", patience.to_string()));
            }
            rows.push(row("l2", train.l2.to_string()));
            rows.push(row("shuffle", train.shuffle.to_string()));
            rows.push(row("seed", train.seed.to_string()));
            rows.push(row("precision", word(&train.precision).into()));
            rows
        }
        StepSpec::Sweep(sweep) => {
            let mut rows = vec![row("from", sweep.from.clone())];
            for (name, values) in &sweep.vary {
                let values: Vec<String> = values.iter().map(value_text).collect();
                rows.push(SettingRow {
                    name: "vary",
                    value: format!("{name}: [{}]", values.join(", ")),
                    default: false,
                });
            }
            rows.push(row("repeat", sweep.repeat.to_string()));
            rows.push(row("rank_by", rank_by_text(sweep.rank_by, outcome)));
            rows
        }
        StepSpec::Compare(compare) => vec![
            row("runs", compare.runs.join(", ")),
            row(
                "metrics",
                compare
                    .metrics
                    .as_ref()
                    .map_or("from the task".into(), |metrics| {
                        metrics
                            .iter()
                            .map(|m| m.key())
                            .collect::<Vec<_>>()
                            .join(", ")
                    }),
            ),
            row("chart", word(&compare.chart).into()),
            row("log_scale", compare.log_scale.to_string()),
        ],
        StepSpec::Predict(predict) => vec![
            row("model", predict.model.clone()),
            row("file", predict.file.clone()),
            row("write", predict.write.clone().unwrap_or_else(|| "—".into())),
        ],
        StepSpec::Export(export) => vec![
            row("model", export.model.clone()),
            row("write", export.write.clone()),
            row("format", word(&export.format).to_string()),
        ],
    }
}

/// The metric a sweep ranked by and on which rows, once it ran; before, what the
/// default depends on.
fn rank_by_text(written: Option<MetricName>, outcome: Option<&Outcome>) -> String {
    match outcome {
        Some(Outcome::Sweep(sweep)) => format!(
            "{}, on the {} rows",
            sweep.rank_by.key(),
            rows_label(sweep.rank_rows)
        ),
        _ => written.map_or(
            "accuracy to classify, loss to regress; on the validation rows, else held out".into(),
            |metric| metric.key().to_string(),
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::document::StepBlock;
    use crate::document::spec::StepKind;
    use crate::document::spec::parse_step;

    fn parsed_train(yaml: &str) -> crate::document::spec::ParsedStep {
        let block = StepBlock {
            kind: StepKind::Train,
            id: "t".into(),
            yaml: yaml.into(),
            yaml_offset: 0,
            info_span: 0..0,
            span: 0..0,
        };
        parse_step(&block, 0, &mut Vec::new()).expect("the block is valid")
    }

    // The report learns which settings were written from the parsed step, not by
    // reading the block's YAML again.
    #[test]
    fn settings_not_written_in_the_block_are_marked_as_defaults() {
        let parsed = parsed_train("data: d\nnet: n\nepochs: 40\n");
        let rows = rows(&parsed.spec, &parsed.written, None);
        let default_of = |name: &str| rows.iter().find(|row| row.name == name).unwrap().default;
        assert!(!default_of("epochs"));
        assert!(!default_of("data"));
        assert!(default_of("learning_rate"));
        assert!(default_of("seed"));
    }
}
