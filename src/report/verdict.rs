//! A fit's judgement in one plain line for the top of its card: the held-out headline
//! with its interval, the baseline, the model without a hidden layer, and what the
//! paired test says. Worded by us; the numbers come from `judge`.

use serde::Serialize;

use super::format::number;
use crate::judge::diagnosis::{NoVariance, Unavailable};
use crate::judge::stats::Interval;
use crate::judge::{BaselineRule, Judgement, Paired, Scores};

/// Shown instead of an interval or a test the held-out rows cannot carry.
pub(crate) const NOT_ENOUGH_ROWS: &str = "not enough held-out rows";

/// How the network fared, for the card's styling.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub(crate) enum Tone {
    /// Better than the model without a hidden layer, beyond noise.
    Beats,
    /// Not shown to be better than the model without a hidden layer.
    DoesNotBeat,
    /// No better than the baseline: the loudest warning.
    BelowBaseline,
}

/// The verdict line and its tone.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub(crate) struct Verdict {
    pub text: String,
    pub tone: Tone,
}

/// The interval of the metric `name` as "low–high", or why there is none.
pub(crate) fn interval_words(intervals: Option<&[(String, Interval)]>, name: &str) -> String {
    interval_text(intervals, name, score).unwrap_or_else(|| NOT_ENOUGH_ROWS.to_string())
}

/// The interval of the score `name`, as `low–high` with each bound written by `write`;
/// `None` when there are no intervals or none for it.
pub(crate) fn interval_text(
    intervals: Option<&[(String, Interval)]>,
    name: &str,
    write: fn(f64) -> String,
) -> Option<String> {
    intervals?
        .iter()
        .find(|(n, _)| n == name)
        .map(|(_, i)| format!("{}–{}", write(i.low), write(i.high)))
}

/// The score a verdict leads with: the network's, the baseline's and the model's
/// without a hidden layer, and how it is written.
struct Lead {
    name: &'static str,
    words: &'static str,
    network: f64,
    baseline: f64,
    linear: f64,
    higher_is_better: bool,
    /// Writes one of the three values.
    text: fn(f64) -> String,
}

/// Accuracy or R², or the MSE when the held-out targets do not vary and R² is undefined.
fn lead(judgement: &Judgement) -> Lead {
    if judgement.diagnosis.r2_undefined().is_some() {
        return Lead {
            name: "mse",
            words: "held-out mse",
            network: mse(&judgement.network),
            baseline: mse(&judgement.baseline),
            linear: mse(&judgement.linear),
            higher_is_better: false,
            text: number,
        };
    }
    let (name, network) = judgement.network.headline();
    Lead {
        name,
        words: match judgement.network {
            Scores::Classification { .. } => "held-out accuracy",
            Scores::Regression { .. } => "held-out R²",
        },
        network,
        baseline: judgement.baseline.headline().1,
        linear: judgement.linear.headline().1,
        higher_is_better: true,
        text: score,
    }
}

fn mse(scores: &Scores) -> f64 {
    match scores {
        Scores::Regression { mse, .. } => *mse,
        Scores::Classification { .. } => f64::NAN,
    }
}

/// Why R² means nothing on the held-out rows, naming the target when `targets` does.
pub(crate) fn no_variance_words(why: &NoVariance, targets: &[String]) -> String {
    match why {
        NoVariance::OneRow => "there is only one held-out row".into(),
        NoVariance::Constant { target, value } => match targets.get(*target) {
            Some(name) => format!("every held-out row's {name} is {}", number(*value)),
            None => format!("every held-out row has the target {}", number(*value)),
        },
    }
}

pub(crate) fn verdict(judgement: &Judgement) -> Verdict {
    let lead = lead(judgement);
    let network = if lead.network.is_finite() {
        let interval = interval_text(judgement.intervals.as_deref(), lead.name, lead.text)
            .unwrap_or_else(|| NOT_ENOUGH_ROWS.to_string());
        format!("{} ({interval})", (lead.text)(lead.network))
    } else {
        format!("— ({})", Unavailable::NotFinite)
    };
    let baseline_name = baseline_name(judgement);
    let mut parts = vec![
        format!("{} {network}", lead.words),
        format!("{baseline_name} {}", (lead.text)(lead.baseline)),
        format!("without a hidden layer {}", (lead.text)(lead.linear)),
        test_words(judgement.versus_linear.as_ref()),
    ];
    if let Some(why) = judgement.diagnosis.r2_undefined() {
        parts.insert(
            0,
            format!("held-out R² undefined ({})", no_variance_words(&why, &[])),
        );
    }
    let tone = tone(judgement);
    if tone == Tone::BelowBaseline {
        parts.insert(
            0,
            format!(
                "THE NETWORK DOES NOT BEAT THE {}",
                baseline_name.to_uppercase()
            ),
        );
    }
    Verdict {
        text: parts.join(" · "),
        tone,
    }
}

/// The verdict in a few words, for the report's summary at the top.
pub(crate) fn short_verdict(judgement: &Judgement) -> Verdict {
    let tone = tone(judgement);
    let text = match tone {
        Tone::Beats => "beats the model without a hidden layer".to_string(),
        Tone::DoesNotBeat => "does not beat the model without a hidden layer".to_string(),
        Tone::BelowBaseline => format!("no better than the {}", baseline_name(judgement)),
    };
    Verdict { text, tone }
}

/// The 95 % interval of the headline score, as `low–high`; `None` when the held-out
/// rows are too few.
pub(crate) fn headline_interval(judgement: &Judgement) -> Option<String> {
    if judgement.diagnosis.r2_undefined().is_some() {
        return None;
    }
    interval_text(
        judgement.intervals.as_deref(),
        judgement.network.headline().0,
        score,
    )
}

fn tone(judgement: &Judgement) -> Tone {
    let lead = lead(judgement);
    let beats_linear = judgement
        .versus_linear
        .as_ref()
        .is_some_and(|test| test.significant() && test.first_better());
    let no_better = if lead.higher_is_better {
        lead.network <= lead.baseline
    } else {
        lead.network >= lead.baseline
    };
    if no_better {
        Tone::BelowBaseline
    } else if beats_linear {
        Tone::Beats
    } else {
        Tone::DoesNotBeat
    }
}

fn baseline_name(judgement: &Judgement) -> &'static str {
    match judgement.baseline_rule {
        BaselineRule::MajorityClass => "majority class",
        BaselineRule::TrainingMean => "training mean",
    }
}

/// What the paired test against the model without a hidden layer says.
fn test_words(test: Option<&Paired>) -> String {
    let Some(test) = test else {
        return format!("{NOT_ENOUGH_ROWS} for a test");
    };
    let evidence = evidence(test);
    match (test.significant(), test.first_better()) {
        (true, true) => format!("the network beats the model without a hidden layer ({evidence})"),
        (true, false) => format!(
            "the network does not beat the model without a hidden layer: it is worse ({evidence})"
        ),
        (false, _) => format!(
            "the network does not beat the model without a hidden layer: the difference is within noise ({evidence})"
        ),
    }
}

/// A test's number: the p-value, or the squared-error difference and its interval.
pub(crate) fn evidence(test: &Paired) -> String {
    match test {
        Paired::Mcnemar { p_value, .. } => p_text(*p_value),
        Paired::SquaredErrorDifference { mean, interval } => format!(
            "squared error {} by {} ({} to {})",
            if *mean < 0.0 { "lower" } else { "higher" },
            number(mean.abs()),
            number(interval.low),
            number(interval.high)
        ),
    }
}

/// A p-value to two decimals (three under 0.01), the smallest as a bound.
pub(crate) fn p_text(p: f64) -> String {
    if p < 0.001 {
        "p < 0.001".into()
    } else if p < 0.01 {
        format!("p = {p:.3}")
    } else {
        format!("p = {p:.2}")
    }
}

/// Accuracy or R² as a person reads it in a sentence: two decimals.
fn score(value: f64) -> String {
    if value.is_finite() {
        format!("{value:.2}")
    } else {
        "—".into()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn p_values_keep_two_decimals_and_small_ones_a_bound() {
        assert_eq!(p_text(0.4213), "p = 0.42");
        assert_eq!(p_text(0.0031), "p = 0.003");
        assert_eq!(p_text(0.00001), "p < 0.001");
    }
}
