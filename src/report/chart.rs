//! Loss charts as inline SVG, drawn with plotters' SVG backend (no system fonts needed).

use plotters::prelude::*;

/// One line on a chart.
pub(crate) struct Series {
    pub label: String,
    /// (epoch, value) pairs, epochs counted from 1.
    pub points: Vec<(f64, f64)>,
    pub dashed: bool,
}

/// The palette: the report's accent first, then quiet companions.
const COLOURS: [RGBColor; 6] = [
    RGBColor(0x1f, 0x5f, 0x8b),
    RGBColor(0xc0, 0x5a, 0x1a),
    RGBColor(0x3b, 0x8a, 0x4a),
    RGBColor(0x8a, 0x3b, 0x7a),
    RGBColor(0x6b, 0x6b, 0x6b),
    RGBColor(0xa8, 0x8a, 0x1c),
];

/// Most points a line keeps; longer histories are thinned evenly (the last point kept).
const MAX_POINTS: usize = 240;

/// Thins a history to at most `MAX_POINTS` points, keeping the first and last.
pub(crate) fn thin(points: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
    if points.len() <= MAX_POINTS {
        return points;
    }
    let step = points.len().div_ceil(MAX_POINTS);
    let last = *points.last().expect("non-empty");
    let mut kept: Vec<(f64, f64)> = points.into_iter().step_by(step).collect();
    if kept.last() != Some(&last) {
        kept.push(last);
    }
    kept
}

/// Axis labels and scales of a line chart.
pub(crate) struct Axes<'a> {
    pub x_label: &'a str,
    pub y_label: &'a str,
    /// Logarithmic x axis: values are plotted as log10 and labelled as themselves.
    pub log_x: bool,
    pub log_y: bool,
}

impl Axes<'_> {
    /// Epochs against loss.
    pub(crate) fn loss(log_y: bool) -> Axes<'static> {
        Axes {
            x_label: "epoch",
            y_label: "loss",
            log_x: false,
            log_y,
        }
    }
}

/// Draws the series; non-finite values (a diverged run), and values that a log axis
/// cannot show, are left out of the lines.
pub(crate) fn line_chart(series: &[Series], axes: &Axes<'_>) -> String {
    let log_y = axes.log_y;
    let finite = |&(x, y): &(f64, f64)| {
        y.is_finite() && x.is_finite() && (!log_y || y > 0.0) && (!axes.log_x || x > 0.0)
    };
    let transform = |(x, y): (f64, f64)| if axes.log_x { (x.log10(), y) } else { (x, y) };
    let lines: Vec<Series> = series
        .iter()
        .map(|line| Series {
            label: line.label.clone(),
            points: line
                .points
                .iter()
                .copied()
                .filter(finite)
                .map(transform)
                .collect(),
            dashed: line.dashed,
        })
        .collect();
    let points = || lines.iter().flat_map(|line| line.points.iter().copied());
    let (x_lo, x_hi) = padded(points().map(|p| p.0), false, (1.0, 2.0));
    let (y_lo, y_hi) = padded(points().map(|p| p.1), log_y, (1e-3, 1.0));
    let x_format = |x: &f64| {
        if axes.log_x {
            format_tick(10f64.powf(*x))
        } else {
            format_tick(*x)
        }
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (560, 300)).into_drawing_area();
        let drawn = if log_y {
            draw(
                &root,
                &lines,
                axes,
                (x_lo..x_hi, (y_lo..y_hi).log_scale()),
                &x_format,
            )
        } else {
            draw(&root, &lines, axes, (x_lo..x_hi, y_lo..y_hi), &x_format)
        };
        drawn.expect("drawing to a string cannot fail");
        root.present().expect("drawing to a string cannot fail");
    }
    svg
}

/// The range of some values with a little room around it; `fallback` when empty.
fn padded(values: impl Iterator<Item = f64>, log: bool, fallback: (f64, f64)) -> (f64, f64) {
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
        (lo.min(v), hi.max(v))
    });
    if !lo.is_finite() {
        return fallback;
    }
    if log {
        if hi <= lo {
            (lo / 1.5, hi * 1.5)
        } else {
            (lo, hi)
        }
    } else {
        let pad = if hi > lo {
            (hi - lo) * 0.05
        } else {
            lo.abs().max(1e-9) * 0.1
        };
        (lo - pad, hi + pad)
    }
}

/// A bar per label, for a metric across runs.
pub(crate) fn bar_chart(bars: &[(String, f64)], y_label: &str) -> String {
    let values: Vec<f64> = bars.iter().map(|b| b.1).filter(|v| v.is_finite()).collect();
    let top = values.iter().fold(0.0f64, |a, &b| a.max(b));
    let bottom = values.iter().fold(0.0f64, |a, &b| a.min(b));
    let (lo, hi) = (bottom * 1.1, if top > 0.0 { top * 1.1 } else { 1.0 });
    let labels: Vec<String> = bars.iter().map(|b| b.0.clone()).collect();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (560, 300)).into_drawing_area();
        let drawn = (|| -> Result<(), Box<dyn std::error::Error + '_>> {
            let mut chart = ChartBuilder::on(&root)
                .margin(10)
                .x_label_area_size(34)
                .y_label_area_size(62)
                .build_cartesian_2d(-0.5..(bars.len() as f64 - 0.5), lo..hi)?;
            chart
                .configure_mesh()
                .disable_x_mesh()
                .max_light_lines(2)
                .light_line_style(RGBColor(0xee, 0xee, 0xee))
                .bold_line_style(RGBColor(0xcc, 0xcc, 0xcc))
                .x_labels(bars.len().max(1))
                .x_label_formatter(&|x| {
                    let i = x.round();
                    if (x - i).abs() < 1e-6 && i >= 0.0 {
                        labels.get(i as usize).cloned().unwrap_or_default()
                    } else {
                        String::new()
                    }
                })
                .y_desc(y_label)
                .y_label_formatter(&|y| format_tick(*y))
                .label_style(("sans-serif", 12))
                .draw()?;
            chart.draw_series(
                bars.iter()
                    .enumerate()
                    .filter(|(_, b)| b.1.is_finite())
                    .map(|(i, b)| {
                        let x = i as f64;
                        Rectangle::new([(x - 0.35, 0.0), (x + 0.35, b.1)], COLOURS[0].filled())
                    }),
            )?;
            Ok(())
        })();
        drawn.expect("drawing to a string cannot fail");
        root.present().expect("drawing to a string cannot fail");
    }
    svg
}

type Area<'a> = DrawingArea<SVGBackend<'a>, plotters::coord::Shift>;

fn draw<'a, Y>(
    root: &Area<'a>,
    series: &[Series],
    axes: &Axes<'_>,
    ranges: (std::ops::Range<f64>, Y),
    x_format: &dyn Fn(&f64) -> String,
) -> Result<(), Box<dyn std::error::Error + 'a>>
where
    Y: plotters::coord::ranged1d::AsRangedCoord<Value = f64>,
    Y::CoordDescType: plotters::coord::ranged1d::ValueFormatter<f64>,
{
    let mut chart = ChartBuilder::on(root)
        .margin(10)
        .x_label_area_size(34)
        .y_label_area_size(62)
        .build_cartesian_2d(ranges.0, ranges.1)?;
    chart
        .configure_mesh()
        .max_light_lines(2)
        .light_line_style(RGBColor(0xee, 0xee, 0xee))
        .bold_line_style(RGBColor(0xcc, 0xcc, 0xcc))
        .x_desc(axes.x_label)
        .y_desc(axes.y_label)
        .x_label_formatter(x_format)
        .y_label_formatter(&|y| format_tick(*y))
        .label_style(("sans-serif", 12))
        .draw()?;
    for (i, line) in series.iter().enumerate() {
        let colour = COLOURS[i % COLOURS.len()];
        let style = ShapeStyle::from(colour).stroke_width(2);
        let points = line.points.clone();
        let legend_style = style;
        if line.dashed {
            chart
                .draw_series(DashedLineSeries::new(points, 6, 4, style))?
                .label(line.label.clone())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], legend_style));
        } else {
            chart
                .draw_series(LineSeries::new(points, style))?
                .label(line.label.clone())
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], legend_style));
        }
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(RGBColor(0xcc, 0xcc, 0xcc))
        .label_font(("sans-serif", 12))
        .position(SeriesLabelPosition::UpperRight)
        .draw()?;
    Ok(())
}

fn format_tick(value: f64) -> String {
    if value != 0.0 && (value.abs() < 1e-3 || value.abs() >= 1e4) {
        format!("{value:.0e}")
    } else {
        let text = format!("{value:.4}");
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_chart_is_an_svg_with_its_labels() {
        let series = [Series {
            label: "training".into(),
            points: (1..=50).map(|e| (e as f64, 1.0 / e as f64)).collect(),
            dashed: false,
        }];
        let svg = line_chart(&series, &Axes::loss(true));
        assert!(svg.starts_with("<svg"), "{}", &svg[..60]);
        assert!(svg.contains("training") && svg.contains("epoch"));
    }

    #[test]
    fn a_diverged_history_still_draws() {
        let series = [Series {
            label: "training".into(),
            points: vec![(1.0, 0.5), (2.0, f64::INFINITY), (3.0, f64::NAN)],
            dashed: false,
        }];
        assert!(line_chart(&series, &Axes::loss(true)).contains("<svg"));
    }

    #[test]
    fn thinning_keeps_the_last_point() {
        let points: Vec<(f64, f64)> = (1..=1001).map(|e| (e as f64, 1.0)).collect();
        let thinned = thin(points);
        assert!(thinned.len() <= MAX_POINTS + 1);
        assert_eq!(thinned.last().unwrap().0, 1001.0);
    }
}
