//! Loss charts as inline SVG, drawn with plotters' SVG backend (no system fonts needed).

use plotters::prelude::*;

/// One line on a chart.
pub struct Series {
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
pub fn thin(points: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
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

/// Draws the series against epochs; `log_scale` puts the values on a log axis.
/// Non-finite values (a diverged run) are left out of the line.
pub fn line_chart(series: &[Series], y_label: &str, log_scale: bool) -> String {
    let finite = |&(_, y): &(f64, f64)| y.is_finite() && (!log_scale || y > 0.0);
    let values: Vec<f64> = series
        .iter()
        .flat_map(|s| s.points.iter().filter(|p| finite(p)).map(|p| p.1))
        .collect();
    let x_max = series
        .iter()
        .flat_map(|s| s.points.last().map(|p| p.0))
        .fold(1.0f64, f64::max);
    let (mut lo, mut hi) = values
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        (lo, hi) = (1e-3, 1.0);
    }
    if hi <= lo {
        hi = lo * 1.5 + 1e-9;
        lo = if log_scale { lo / 1.5 } else { lo - 1e-9 };
    }
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (560, 300)).into_drawing_area();
        let drawn = if log_scale {
            draw(
                &root,
                series,
                y_label,
                (1.0..x_max.max(2.0), (lo..hi).log_scale()),
                &finite,
            )
        } else {
            let pad = (hi - lo) * 0.05;
            draw(
                &root,
                series,
                y_label,
                (1.0..x_max.max(2.0), lo - pad..hi + pad),
                &finite,
            )
        };
        drawn.expect("drawing to a string cannot fail");
        root.present().expect("drawing to a string cannot fail");
    }
    svg
}

type Area<'a> = DrawingArea<SVGBackend<'a>, plotters::coord::Shift>;

fn draw<'a, Y>(
    root: &Area<'a>,
    series: &[Series],
    y_label: &str,
    ranges: (std::ops::Range<f64>, Y),
    finite: &dyn Fn(&(f64, f64)) -> bool,
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
        .x_desc("epoch")
        .y_desc(y_label)
        .x_label_formatter(&|x| format!("{x:.0}"))
        .y_label_formatter(&|y| format_tick(*y))
        .label_style(("sans-serif", 12))
        .draw()?;
    for (i, line) in series.iter().enumerate() {
        let colour = COLOURS[i % COLOURS.len()];
        let style = ShapeStyle::from(colour).stroke_width(2);
        let points: Vec<(f64, f64)> = line.points.iter().copied().filter(|p| finite(p)).collect();
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
        let svg = line_chart(&series, "loss", true);
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
        assert!(line_chart(&series, "loss", true).contains("<svg"));
    }

    #[test]
    fn thinning_keeps_the_last_point() {
        let points: Vec<(f64, f64)> = (1..=1001).map(|e| (e as f64, 1.0)).collect();
        let thinned = thin(points);
        assert!(thinned.len() <= MAX_POINTS + 1);
        assert_eq!(thinned.last().unwrap().0, 1001.0);
    }
}
