//! Number and label formatting shared by the report views.

use crate::nn::StopReason;

/// Text made safe to place between tags or in a quoted attribute.
pub(crate) fn escaped(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            other => out.push(other),
        }
    }
    out
}

/// A number with four significant digits; non-finite values as a dash.
pub(crate) fn number(value: f64) -> String {
    if !value.is_finite() {
        return "—".into();
    }
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().log10().floor() as i32;
    if !(-4..6).contains(&magnitude) {
        return format!("{value:.3e}");
    }
    let decimals = (3 - magnitude).max(0) as usize;
    format!("{value:.decimals$}")
}

/// Mean ± standard deviation.
pub(crate) fn mean_sd(mean: f64, sd: f64) -> String {
    format!("{} ± {}", number(mean), number(sd))
}

/// Seconds for people: milliseconds under one second.
pub(crate) fn seconds(value: f64) -> String {
    if value < 1.0 {
        format!("{:.0} ms", value * 1000.0)
    } else {
        format!("{value:.2} s")
    }
}

/// The stop reason in words, as the report shows it.
pub(crate) fn stop_reason(reason: StopReason) -> &'static str {
    match reason {
        StopReason::TargetLoss => "target loss reached",
        StopReason::EpochLimit => "epoch limit",
        StopReason::NoImprovement => "no improvement",
        StopReason::Diverged => "diverged",
    }
}

/// The stop reason as the JSON summary names it.
pub(crate) fn stop_code(reason: StopReason) -> &'static str {
    crate::document::names::word(&reason)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_keep_four_significant_digits() {
        assert_eq!(number(0.031234), "0.03123");
        assert_eq!(number(12.3456), "12.35");
        assert_eq!(number(0.5), "0.5000");
        assert_eq!(number(f64::NAN), "—");
        assert_eq!(number(1.5e-7), "1.500e-7");
    }
}
