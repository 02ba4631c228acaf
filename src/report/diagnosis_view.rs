//! Where a fit goes wrong, as the train card shows it (issue 15): the ROC curve with
//! Youden's J threshold and the reliability chart for two classes (several classes'
//! AUCs are a column of the confusion table, in `view.rs`), and predicted-against-actual and residual charts per regression target.
//! A value the held-out rows cannot give is a stated reason in its place.

use serde::Serialize;

use super::chart::{self, Axes, Dash, Series, Weight};
use super::format::number;
use crate::judge::diagnosis::{Diagnosis, Reliability, Roc, TargetFit};

/// Regression targets that get their own pair of charts; the rest are listed.
const CHARTED_TARGETS: usize = 4;

/// One chart and its caption.
#[derive(Serialize)]
pub(crate) struct Figure {
    pub svg: String,
    pub note: String,
}

/// The diagnosis charts and the lines said beside them.
#[derive(Serialize)]
pub(crate) struct DiagnosisView {
    pub figures: Vec<Figure>,
    pub notes: Vec<String>,
}

/// The view of `diagnosis`; `targets` names the target columns.
pub(crate) fn diagnosis_view(diagnosis: &Diagnosis, targets: &[String]) -> DiagnosisView {
    let mut view = DiagnosisView {
        figures: Vec::new(),
        notes: Vec::new(),
    };
    match diagnosis {
        Diagnosis::TwoClasses { roc, reliability } => {
            match roc {
                Ok(roc) => view.figures.push(roc_figure(roc)),
                Err(why) => view.notes.push(format!("No ROC curve: {why}.")),
            }
            match reliability {
                Ok(reliability) => view.figures.push(reliability_figure(reliability)),
                Err(why) => view.notes.push(format!("No reliability chart: {why}.")),
            }
        }
        // Each class's AUC is a column of the confusion table (view.rs).
        Diagnosis::SeveralClasses { .. } => {}
        Diagnosis::Regression { targets: fits } => match fits {
            Ok(fits) => regression_figures(&mut view, fits, targets),
            Err(why) => view.notes.push(format!("No fit plots: {why}.")),
        },
    }
    view
}

fn roc_figure(roc: &Roc) -> Figure {
    let curve: Vec<(f64, f64)> = roc
        .points
        .iter()
        .map(|p| (p.false_positive_rate, p.true_positive_rate))
        .collect();
    let marked = curve[roc.youden];
    let series = [
        Series::nth(
            0,
            format!("network, AUC {}", number(roc.auc)),
            chart::thin(curve),
        ),
        chance_line("chance"),
        Series {
            label: Some("Youden's J".into()),
            points: vec![marked],
            colour: 1,
            dash: Dash::Points,
            weight: Weight::Regular,
        },
    ];
    let threshold = roc.points[roc.youden]
        .threshold
        .map_or("above every score".into(), number);
    Figure {
        svg: chart::line_chart(
            &series,
            &rate_axes("false positive rate", "true positive rate"),
        ),
        note: format!(
            "ROC curve on the held-out rows; Youden's J (Youden, 1950) is largest at threshold {threshold}."
        ),
    }
}

fn reliability_figure(reliability: &Reliability) -> Figure {
    let bins = reliability
        .bins
        .iter()
        .map(|bin| (bin.mean_predicted, bin.observed))
        .collect();
    let series = [
        Series::nth(0, "network".into(), bins),
        chance_line("perfectly calibrated"),
    ];
    Figure {
        svg: chart::line_chart(
            &series,
            &rate_axes("mean predicted probability", "observed fraction"),
        ),
        note: format!(
            "Reliability on the held-out rows in 10 equal bins (empty bins left out); Brier score {}.",
            number(reliability.brier)
        ),
    }
}

/// The diagonal from (0, 0) to (1, 1), thin and dashed.
fn chance_line(label: &str) -> Series {
    Series {
        label: Some(label.into()),
        points: vec![(0.0, 0.0), (1.0, 1.0)],
        colour: 6,
        dash: Dash::Dashed,
        weight: Weight::Thin,
    }
}

fn rate_axes<'a>(x_label: &'a str, y_label: &'a str) -> Axes<'a> {
    Axes {
        x_label,
        y_label,
        log_x: false,
        log_y: false,
        skip_spike: false,
    }
}

fn regression_figures(view: &mut DiagnosisView, fits: &[TargetFit], targets: &[String]) {
    let name = |i: usize| {
        targets
            .get(i)
            .cloned()
            .unwrap_or_else(|| format!("target {}", i + 1))
    };
    for (i, fit) in fits.iter().enumerate().take(CHARTED_TARGETS) {
        view.figures.push(fit_figure(fit, &name(i)));
        view.figures.push(residual_figure(fit, &name(i)));
    }
    if fits.len() > CHARTED_TARGETS {
        let rest: Vec<String> = (CHARTED_TARGETS..fits.len()).map(name).collect();
        view.notes
            .push(format!("Not charted: {}.", rest.join(", ")));
    }
    if fits.len() > 1 {
        let each: Vec<String> = fits
            .iter()
            .enumerate()
            .map(|(i, fit)| format!("{} R² {}", name(i), number(fit.scores.headline().1)))
            .collect();
        view.notes.push(format!(
            "Held-out R² per target: {} (the table shows their mean).",
            each.join(", ")
        ));
    }
}

fn scatter(label: &str, points: Vec<(f64, f64)>) -> Series {
    Series {
        label: Some(label.into()),
        points,
        colour: 0,
        dash: Dash::Points,
        weight: Weight::Regular,
    }
}

fn fit_figure(fit: &TargetFit, target: &str) -> Figure {
    let low = fit
        .pairs
        .iter()
        .map(|p| p.0.min(p.1))
        .fold(f64::INFINITY, f64::min);
    let high = fit
        .pairs
        .iter()
        .map(|p| p.0.max(p.1))
        .fold(f64::NEG_INFINITY, f64::max);
    let identity = Series {
        label: Some("predicted = actual".into()),
        points: vec![(low, low), (high, high)],
        colour: 6,
        dash: Dash::Dashed,
        weight: Weight::Thin,
    };
    let series = [scatter("held-out row", fit.pairs.clone()), identity];
    Figure {
        svg: chart::line_chart(&series, &rate_axes("actual", "predicted")),
        note: format!("{target}: predicted against actual on the held-out rows."),
    }
}

fn residual_figure(fit: &TargetFit, target: &str) -> Figure {
    let residuals = fit
        .pairs
        .iter()
        .map(|&(actual, predicted)| (predicted, actual - predicted))
        .collect();
    Figure {
        svg: chart::line_chart(
            &[scatter("held-out row", residuals)],
            &rate_axes("predicted", "residual"),
        ),
        note: format!(
            "{target}: residual (actual − predicted) against predicted on the held-out rows."
        ),
    }
}
