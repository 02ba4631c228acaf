//! Charts as inline SVG in the report's own look, written directly rather than through a
//! plotting library, because the look is the point (issue 16): a `viewBox` without a
//! fixed size, so the chart scales to its card and its text stays at least 12 CSS px at
//! a 420 px phone width; legends below the plot, never over data; log axes labelled at
//! 1-2-5 steps; points on short lines; bars with their values and spread.

use std::fmt::Write;

use super::format::{escaped, number};

/// Width of every chart in SVG user units. The report shows a chart between about 370
/// (a 420 px phone) and 520 CSS px wide, so `FONT` renders between 12 and 17 px.
const WIDTH: f64 = 400.0;
/// Text size in user units.
const FONT: f64 = 13.0;
/// Height of the plotting frame with its axes, before any legend.
const FRAME_HEIGHT: f64 = 240.0;
/// Room around the plotting area: tick labels and the y title on the left, tick
/// labels and the x title below.
const LEFT: f64 = 62.0;
const RIGHT: f64 = 14.0;
const TOP: f64 = 12.0;
const BOTTOM: f64 = 46.0;
/// Height of one legend row.
const LEGEND_ROW: f64 = 20.0;
/// Lines with at most this many points also mark each point.
const MAX_MARKED_POINTS: usize = 30;

/// The palette of Okabe and Ito ("Color Universal Design", 2008): eight colours that
/// stay distinct under the common colour-vision deficiencies. Yellow comes last
/// because it is faint on white.
const PALETTE: [&str; 8] = [
    "#0072b2", "#d55e00", "#009e73", "#cc79a7", "#56b4e9", "#e69f00", "#000000", "#f0e442",
];
/// Ink for text, and the quiet greys of the frame and grid.
const INK: &str = "#2b3138";
const GRID: &str = "#e6e3dc";
const FRAME: &str = "#b9b4aa";

/// How a line is stroked: past eight series the colours repeat with another dash.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Dash {
    Solid,
    Dashed,
    Dotted,
    Alternating,
    /// No line: each point marked on its own (a scatter of held-out rows).
    Points,
}

impl Dash {
    const ALL: [Dash; 4] = [Dash::Solid, Dash::Dashed, Dash::Dotted, Dash::Alternating];

    fn pattern(self) -> Option<&'static str> {
        match self {
            Dash::Solid => None,
            Dash::Dashed => Some("7 4"),
            Dash::Dotted => Some("2 3"),
            Dash::Alternating => Some("9 3 2 3"),
            Dash::Points => None,
        }
    }
}

/// How heavy a line is: folds thin, their mean bold.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) enum Weight {
    Thin,
    Regular,
    Bold,
}

impl Weight {
    fn stroke(self) -> (f64, f64) {
        match self {
            Weight::Thin => (1.0, 0.45),
            Weight::Regular => (2.0, 1.0),
            Weight::Bold => (2.8, 1.0),
        }
    }
}

/// One line on a chart.
pub(crate) struct Series {
    /// Its legend entry; `None` for lines that share one (a fold beside its mean).
    pub label: Option<String>,
    /// (x, y) pairs; for loss charts (epoch, loss), epochs counted from 1.
    pub points: Vec<(f64, f64)>,
    pub colour: usize,
    pub dash: Dash,
    pub weight: Weight,
}

impl Series {
    /// The `n`th of several lines: its own colour, and past eight its own dash too.
    pub(crate) fn nth(n: usize, label: String, points: Vec<(f64, f64)>) -> Series {
        Series {
            label: Some(label),
            points,
            colour: n % PALETTE.len(),
            dash: Dash::ALL[(n / PALETTE.len()) % Dash::ALL.len()],
            weight: Weight::Regular,
        }
    }
}

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

/// Axis titles and scales of a line chart.
pub(crate) struct Axes<'a> {
    pub x_label: &'a str,
    pub y_label: &'a str,
    pub log_x: bool,
    pub log_y: bool,
    /// Leave the first twentieth of each line out of the y range, so the first epochs'
    /// spike does not flatten the rest (the spike runs off the top of the plot).
    pub skip_spike: bool,
}

impl Axes<'_> {
    /// Epochs against loss.
    pub(crate) fn loss(log_y: bool) -> Axes<'static> {
        Axes {
            x_label: "epoch",
            y_label: "loss",
            log_x: false,
            log_y,
            skip_spike: true,
        }
    }
}

/// A value-to-position map along one axis.
#[derive(Clone, Copy)]
struct Scale {
    lo: f64,
    hi: f64,
    log: bool,
    from: f64,
    to: f64,
}

impl Scale {
    fn at(&self, value: f64) -> f64 {
        let (v, lo, hi) = if self.log {
            (value.log10(), self.lo.log10(), self.hi.log10())
        } else {
            (value, self.lo, self.hi)
        };
        self.from + (v - lo) / (hi - lo) * (self.to - self.from)
    }

    /// Where the axis puts its labels.
    fn ticks(&self) -> Vec<f64> {
        if self.log {
            log_ticks(self.lo, self.hi)
        } else {
            linear_ticks(self.lo, self.hi)
        }
    }
}

/// About five round ticks (1, 2 or 5 times a power of ten apart) within `lo..=hi`.
fn linear_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let step = nice_step((hi - lo) / 5.0);
    // A little room, so an end that is itself round (0.35 = 7 × 0.05) stays a tick.
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last).map(|i| i as f64 * step).collect()
}

/// The 1-, 2- or 5-times-a-power-of-ten step nearest above `rough`.
fn nice_step(rough: f64) -> f64 {
    let power = 10f64.powf(rough.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * power)
        .find(|&step| step >= rough)
        .unwrap_or(10.0 * power)
}

/// Ticks at 1, 2 and 5 times each power of ten within `lo..=hi`; only the powers when
/// that gives more than eight; round linear steps when it gives fewer than three (a
/// range inside one decade).
fn log_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let within = |multiples: &[f64]| -> Vec<f64> {
        let mut ticks = Vec::new();
        let mut power = 10f64.powf(lo.log10().floor());
        while power <= hi {
            for m in multiples {
                let tick = m * power;
                // Products like 5 × 0.001 carry rounding; compare with a little room.
                if tick >= lo * (1.0 - 1e-9) && tick <= hi * (1.0 + 1e-9) {
                    ticks.push(tick);
                }
            }
            power *= 10.0;
        }
        ticks
    };
    let one_two_five = within(&[1.0, 2.0, 5.0]);
    if one_two_five.len() > 8 {
        within(&[1.0])
    } else if one_two_five.len() >= 3 {
        one_two_five
    } else {
        linear_ticks(lo, hi)
    }
}

/// A tick's label: no more decimals than the ticks' spacing needs.
fn tick_text(value: f64, ticks: &[f64], log: bool) -> String {
    if value != 0.0 && (value.abs() < 1e-4 || value.abs() >= 1e6) {
        return format!("{value:.0e}");
    }
    if log {
        // Log ticks are round at their own scale: six significant digits, zeros dropped.
        let text = format!("{:.*}", decimals_for(value, 6), value);
        return if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        };
    }
    let decimals = {
        let spacing = ticks
            .windows(2)
            .map(|w| w[1] - w[0])
            .fold(f64::MAX, f64::min);
        if spacing < f64::MAX {
            (-(spacing.log10() + 1e-9).floor()).max(0.0) as usize
        } else {
            4
        }
    };
    format!("{value:.decimals$}")
}

/// Decimals that keep `significant` digits of `value`.
fn decimals_for(value: f64, significant: i32) -> usize {
    (significant - 1 - value.abs().log10().floor() as i32).max(0) as usize
}

/// The range of some values, with a little room on a linear axis; `fallback` when empty.
fn range_of(values: impl Iterator<Item = f64>, log: bool, fallback: (f64, f64)) -> (f64, f64) {
    let (lo, hi) = values.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
        (lo.min(v), hi.max(v))
    });
    if !lo.is_finite() || !hi.is_finite() {
        return fallback;
    }
    if log {
        if hi <= lo * 1.01 {
            (lo / 1.5, hi * 1.5)
        } else {
            (lo / 1.05, hi * 1.05)
        }
    } else if hi > lo {
        let pad = (hi - lo) * 0.05;
        (lo - pad, hi + pad)
    } else {
        let pad = lo.abs().max(1e-9) * 0.1;
        (lo - pad, hi + pad)
    }
}

/// A rough width of some text in user units (system sans-serif runs about 0.6 em a
/// character); used only to lay out legend entries and label margins.
fn text_width(text: &str) -> f64 {
    text.chars().count() as f64 * FONT * 0.62
}

/// An SVG being written.
#[derive(Default)]
struct Canvas {
    body: String,
}

impl Canvas {
    fn text(&mut self, x: f64, y: f64, anchor: &str, text: &str) {
        let _ = write!(
            self.body,
            r#"<text x="{x:.1}" y="{y:.1}" text-anchor="{anchor}">{}</text>"#,
            escaped(text)
        );
    }

    fn line(&mut self, (x1, y1): (f64, f64), (x2, y2): (f64, f64), stroke: &str, width: f64) {
        let _ = write!(
            self.body,
            r#"<line x1="{x1:.1}" y1="{y1:.1}" x2="{x2:.1}" y2="{y2:.1}" stroke="{stroke}" stroke-width="{width}"/>"#
        );
    }

    fn finish(self, height: f64, label: &str) -> String {
        format!(
            r#"<svg class="chart" viewBox="0 0 {WIDTH} {height:.0}" font-size="{FONT}" fill="{INK}" role="img" aria-label="{}">{}</svg>"#,
            escaped(label),
            self.body
        )
    }
}

/// The frame of a chart: grid lines and tick labels on both axes, axis titles.
fn frame(canvas: &mut Canvas, x: &Scale, y: &Scale, axes: &Axes<'_>, x_ticks: &[(f64, String)]) {
    let (left, right) = (x.from, x.to);
    let (bottom, top) = (y.from, y.to);
    let y_ticks = y.ticks();
    for &tick in &y_ticks {
        let at = y.at(tick);
        canvas.line((left, at), (right, at), GRID, 1.0);
        canvas.text(
            left - 6.0,
            at + FONT * 0.35,
            "end",
            &tick_text(tick, &y_ticks, y.log),
        );
    }
    for (tick, text) in x_ticks {
        let at = x.at(*tick);
        canvas.line((at, top), (at, bottom), GRID, 1.0);
        canvas.text(at, bottom + FONT + 4.0, "middle", text);
    }
    canvas.line((left, bottom), (right, bottom), FRAME, 1.0);
    canvas.line((left, top), (left, bottom), FRAME, 1.0);
    canvas.text(
        (left + right) / 2.0,
        bottom + 2.0 * FONT + 10.0,
        "middle",
        axes.x_label,
    );
    let middle = (top + bottom) / 2.0;
    let _ = write!(
        canvas.body,
        r#"<text x="{FONT:.1}" y="{middle:.1}" text-anchor="middle" transform="rotate(-90 {FONT:.1} {middle:.1})">{}</text>"#,
        escaped(axes.y_label)
    );
}

/// Numeric ticks with their labels.
fn numeric_ticks(scale: &Scale) -> Vec<(f64, String)> {
    let ticks = scale.ticks();
    ticks
        .iter()
        .map(|&t| (t, tick_text(t, &ticks, scale.log)))
        .collect()
}

/// The legend below the plot: entries in rows, wrapped at the chart's width. Returns
/// the height it took.
fn legend(canvas: &mut Canvas, series: &[Series], top: f64) -> f64 {
    let mut x = LEFT;
    let mut y = top + LEGEND_ROW / 2.0;
    let mut rows = 0;
    for line in series {
        let Some(label) = &line.label else {
            continue;
        };
        let width = 26.0 + text_width(label) + 14.0;
        if rows == 0 {
            rows = 1;
        } else if x + width > WIDTH - RIGHT {
            x = LEFT;
            y += LEGEND_ROW;
            rows += 1;
        }
        let look = stroke_attributes(line);
        let _ = write!(
            canvas.body,
            r#"<line x1="{x:.1}" y1="{y:.1}" x2="{:.1}" y2="{y:.1}" {look}/>"#,
            x + 22.0
        );
        canvas.text(x + 26.0, y + FONT * 0.35, "start", label);
        x += width;
    }
    rows as f64 * LEGEND_ROW
}

fn stroke_attributes(line: &Series) -> String {
    let (width, opacity) = line.weight.stroke();
    let mut attributes = format!(
        r#"stroke="{}" stroke-width="{width}" stroke-opacity="{opacity}" fill="none""#,
        PALETTE[line.colour % PALETTE.len()]
    );
    if let Some(pattern) = line.dash.pattern() {
        let _ = write!(attributes, r#" stroke-dasharray="{pattern}""#);
    }
    attributes
}

/// Draws the series against numeric axes; non-finite values (a diverged run), and
/// values that a log axis cannot show, are left out of the lines.
pub(crate) fn line_chart(series: &[Series], axes: &Axes<'_>) -> String {
    let shown = |&(x, y): &(f64, f64)| {
        y.is_finite() && x.is_finite() && (!axes.log_y || y > 0.0) && (!axes.log_x || x > 0.0)
    };
    let lines: Vec<Vec<(f64, f64)>> = series
        .iter()
        .map(|line| line.points.iter().copied().filter(shown).collect())
        .collect();
    let all = || lines.iter().flatten().copied();
    let (x_lo, x_hi) = range_of(all().map(|p| p.0), axes.log_x, (1.0, 2.0));
    let y_values = lines.iter().flat_map(|line| {
        let skip = if axes.skip_spike { line.len() / 20 } else { 0 };
        line.iter().skip(skip).map(|p| p.1)
    });
    let (y_lo, y_hi) = range_of(y_values, axes.log_y, (1e-3, 1.0));
    let bottom = FRAME_HEIGHT - BOTTOM;
    let x = Scale {
        lo: x_lo,
        hi: x_hi,
        log: axes.log_x,
        from: LEFT,
        to: WIDTH - RIGHT,
    };
    let y = Scale {
        lo: y_lo,
        hi: y_hi,
        log: axes.log_y,
        from: bottom,
        to: TOP,
    };
    let mut canvas = Canvas::default();
    frame(&mut canvas, &x, &y, axes, &numeric_ticks(&x));
    // A nested svg clips what it holds to its box (a spike above the range), without
    // the ids a clip path would need to keep unique across the page.
    let (width, height) = (WIDTH - RIGHT - LEFT, bottom - TOP);
    let _ = write!(
        canvas.body,
        r#"<svg x="{LEFT}" y="{TOP}" width="{width}" height="{height}" viewBox="{LEFT} {TOP} {width} {height}">"#
    );
    for (line, points) in series.iter().zip(&lines) {
        draw_line(&mut canvas, line, points, &x, &y);
    }
    canvas.body.push_str("</svg>");
    let legend_height = legend(&mut canvas, series, FRAME_HEIGHT);
    canvas.finish(
        FRAME_HEIGHT + legend_height + 4.0,
        &format!("{} against {}", axes.y_label, axes.x_label),
    )
}

fn draw_line(canvas: &mut Canvas, line: &Series, points: &[(f64, f64)], x: &Scale, y: &Scale) {
    if points.is_empty() {
        return;
    }
    if line.dash == Dash::Points {
        mark_points(canvas, line, points, x, y);
        return;
    }
    let mut path = String::new();
    for (i, &(px, py)) in points.iter().enumerate() {
        let command = if i == 0 { 'M' } else { 'L' };
        let _ = write!(path, "{command}{:.1},{:.1}", x.at(px), y.at(py));
    }
    let _ = write!(
        canvas.body,
        r#"<path d="{path}" {} stroke-linejoin="round"/>"#,
        stroke_attributes(line)
    );
    if points.len() <= MAX_MARKED_POINTS {
        mark_points(canvas, line, points, x, y);
    }
}

fn mark_points(canvas: &mut Canvas, line: &Series, points: &[(f64, f64)], x: &Scale, y: &Scale) {
    let colour = PALETTE[line.colour % PALETTE.len()];
    for &(px, py) in points {
        let _ = write!(
            canvas.body,
            r#"<circle cx="{:.1}" cy="{:.1}" r="3" fill="{colour}"/>"#,
            x.at(px),
            y.at(py)
        );
    }
}

/// A bar of a bar chart: its label, value and spread (the sd over runs, if any).
pub(crate) struct Bar {
    pub label: String,
    pub value: f64,
    pub spread: Option<f64>,
}

/// Bars share this much of the value range at least before the axis leaves out zero.
const NARROW_BAND: f64 = 0.2;

/// Horizontal bars, one per label (so long labels fit), each drawn from zero with its
/// value printed and its spread as an error bar. A negative value extends left of the
/// zero line, and when any value is negative every label carries its sign. When every
/// bar sits in a narrow band away from zero the axis starts near the band, and its
/// title says so.
pub(crate) fn bar_chart(bars: &[Bar], value_label: &str) -> String {
    let finite: Vec<&Bar> = bars.iter().filter(|b| b.value.is_finite()).collect();
    let signed = finite.iter().any(|b| b.value < 0.0);
    let value_text = |value: f64| signed_number(value, signed);
    let high = |b: &&Bar| b.value + b.spread.unwrap_or(0.0);
    let low = |b: &&Bar| b.value - b.spread.unwrap_or(0.0);
    let top = finite.iter().map(high).fold(f64::NEG_INFINITY, f64::max);
    let bottom = finite.iter().map(low).fold(f64::INFINITY, f64::min);
    let (mut lo, mut hi) = if finite.is_empty() {
        (0.0, 1.0)
    } else {
        (bottom.min(0.0), top.max(0.0))
    };
    let narrow = bottom > 0.0 && (top - bottom) < NARROW_BAND * top;
    if narrow {
        let step = nice_step((top - bottom).max(top * 1e-3) / 2.0);
        lo = ((bottom - step) / step).floor() * step;
        hi = top;
    }
    if hi <= lo {
        // Every bar is zero with no spread: an axis from 0 to 1 rather than no width.
        hi = lo + 1.0;
    }
    let title = if narrow {
        format!("{value_label} (axis starts at {})", number(lo))
    } else {
        value_label.to_string()
    };
    let label_room = bars
        .iter()
        .map(|b| text_width(&b.label))
        .fold(0.0, f64::max)
        .clamp(40.0, WIDTH * 0.4);
    let (from, to) = (label_room + 10.0, WIDTH - RIGHT);
    // Room beyond each end for the widest value label printed there.
    let label_need = |negative: bool| {
        finite
            .iter()
            .filter(|b| (b.value < 0.0) == negative)
            .map(|b| text_width(&value_text(b.value)) + 8.0)
            .fold(0.0, f64::max)
    };
    let (left_need, right_need) = (label_need(true), label_need(false));
    let widened = (hi - lo) / (1.0 - ((left_need + right_need) / (to - from)).min(0.8));
    lo -= widened * left_need / (to - from);
    hi += widened * right_need / (to - from);
    let row = 26.0;
    let plot_top = TOP;
    let plot_bottom = plot_top + row * bars.len() as f64;
    let x = Scale {
        lo,
        hi,
        log: false,
        from,
        to,
    };
    let mut canvas = Canvas::default();
    let ticks = linear_ticks(lo, hi);
    for &tick in &ticks {
        let at = x.at(tick);
        canvas.line((at, plot_top), (at, plot_bottom), GRID, 1.0);
        canvas.text(
            at,
            plot_bottom + FONT + 4.0,
            "middle",
            &tick_text(tick, &ticks, false),
        );
    }
    canvas.line((x.from, plot_top), (x.from, plot_bottom), FRAME, 1.0);
    // Bars grow from zero, or from the axis's start when it leaves zero out.
    let base = if narrow { lo } else { 0.0 };
    if base > lo {
        canvas.line((x.at(base), plot_top), (x.at(base), plot_bottom), INK, 1.0);
    }
    for (i, bar) in bars.iter().enumerate() {
        let middle = plot_top + row * (i as f64 + 0.5);
        let shown: String = truncated(&bar.label, label_room);
        canvas.text(label_room + 4.0, middle + FONT * 0.35, "end", &shown);
        if !bar.value.is_finite() {
            canvas.text(x.from + 6.0, middle + FONT * 0.35, "start", "—");
            continue;
        }
        let (start, end) = (x.at(base), x.at(bar.value));
        let _ = write!(
            canvas.body,
            r#"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="{}"/>"#,
            start.min(end),
            middle - row * 0.32,
            (end - start).abs(),
            row * 0.64,
            PALETTE[0]
        );
        let (mut left, mut right) = (start.min(end), start.max(end));
        if let Some(sd) = bar.spread {
            let (a, b) = (x.at(bar.value - sd), x.at(bar.value + sd));
            canvas.line((a, middle), (b, middle), INK, 1.2);
            canvas.line((a, middle - 5.0), (a, middle + 5.0), INK, 1.2);
            canvas.line((b, middle - 5.0), (b, middle + 5.0), INK, 1.2);
            (left, right) = (left.min(a), right.max(b));
        }
        let text = value_text(bar.value);
        if bar.value < 0.0 {
            canvas.text(left - 4.0, middle + FONT * 0.35, "end", &text);
        } else {
            canvas.text(right + 4.0, middle + FONT * 0.35, "start", &text);
        }
    }
    canvas.text(
        (x.from + x.to) / 2.0,
        plot_bottom + 2.0 * FONT + 10.0,
        "middle",
        &title,
    );
    canvas.finish(plot_bottom + BOTTOM, &title)
}

/// A value with a true minus sign, and with a plus sign too when `signed` (some value
/// in the chart is negative, so the sign carries meaning).
fn signed_number(value: f64, signed: bool) -> String {
    if value < 0.0 {
        format!("−{}", number(-value))
    } else if signed && value > 0.0 {
        format!("+{}", number(value))
    } else {
        number(value)
    }
}

/// A metric over a grid of two settings' values.
pub(crate) struct HeatMap<'a> {
    pub x_name: &'a str,
    pub x_labels: Vec<String>,
    pub y_name: &'a str,
    pub y_labels: Vec<String>,
    /// `cells[row][column]`, rows along y; NaN where no combination has a value.
    pub cells: Vec<Vec<f64>>,
    /// (row, column) of the best cell.
    pub best: Option<(usize, usize)>,
    pub higher_is_better: bool,
}

/// A sequential ramp (viridis's end points and three between), dark for the worst
/// value and light for the best; it reads in grey and to colour-blind readers too.
const RAMP: [(u8, u8, u8); 5] = [
    (0x44, 0x01, 0x54),
    (0x3b, 0x52, 0x8b),
    (0x21, 0x91, 0x8c),
    (0x5e, 0xc9, 0x62),
    (0xfd, 0xe7, 0x25),
];

/// The ramp's colour at `t` in 0..=1, and whether dark text reads on it.
fn ramp(t: f64) -> (String, bool) {
    let scaled = t.clamp(0.0, 1.0) * (RAMP.len() - 1) as f64;
    let i = (scaled.floor() as usize).min(RAMP.len() - 2);
    let f = scaled - i as f64;
    let mix = |a: u8, b: u8| (a as f64 + (b as f64 - a as f64) * f).round() as u8;
    let (a, b) = (RAMP[i], RAMP[i + 1]);
    let (r, g, bl) = (mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2));
    let luminance = 0.2126 * r as f64 + 0.7152 * g as f64 + 0.0722 * bl as f64;
    (format!("#{r:02x}{g:02x}{bl:02x}"), luminance > 140.0)
}

/// A number in three significant digits, to fit a heat map's cell.
fn short_number(value: f64) -> String {
    if !value.is_finite() {
        return "—".into();
    }
    if value == 0.0 || value.abs() >= 1000.0 || value.abs() < 1e-3 {
        return number(value);
    }
    format!("{value:.*}", decimals_for(value, 3))
}

/// Cells coloured from worst (dark) to best (light), each with its value printed and
/// the best one outlined.
pub(crate) fn heat_map(map: &HeatMap<'_>) -> String {
    let values = || {
        map.cells
            .iter()
            .flatten()
            .copied()
            .filter(|v| v.is_finite())
    };
    let lo = values().fold(f64::INFINITY, f64::min);
    let hi = values().fold(f64::NEG_INFINITY, f64::max);
    let label_room = map
        .y_labels
        .iter()
        .map(|l| text_width(l))
        .fold(0.0, f64::max)
        .clamp(24.0, WIDTH * 0.3);
    let left = FONT * 2.0 + label_room + 8.0;
    let columns = map.x_labels.len().max(1) as f64;
    let cell_width = (WIDTH - RIGHT - left) / columns;
    let cell_height = 26.0;
    let top = TOP + FONT * 2.0 + 8.0;
    let mut canvas = Canvas::default();
    canvas.text(
        (left + WIDTH - RIGHT) / 2.0,
        TOP + FONT,
        "middle",
        map.x_name,
    );
    for (j, label) in map.x_labels.iter().enumerate() {
        let x = left + cell_width * (j as f64 + 0.5);
        canvas.text(x, top - 6.0, "middle", &truncated(label, cell_width));
    }
    for (i, row) in map.cells.iter().enumerate() {
        let y = top + cell_height * i as f64;
        let label = map.y_labels.get(i).map_or("", String::as_str);
        canvas.text(
            left - 6.0,
            y + cell_height / 2.0 + FONT * 0.35,
            "end",
            &truncated(label, label_room),
        );
        for (j, &value) in row.iter().enumerate() {
            let x = left + cell_width * j as f64;
            let t = if hi > lo {
                (value - lo) / (hi - lo)
            } else {
                1.0
            };
            let t = if map.higher_is_better { t } else { 1.0 - t };
            let (fill, dark_text) = if value.is_finite() {
                ramp(t)
            } else {
                ("#f2f0eb".to_string(), true)
            };
            let _ = write!(
                canvas.body,
                r##"<rect x="{x:.1}" y="{y:.1}" width="{:.1}" height="{:.1}" fill="{fill}" stroke="#ffffff"/>"##,
                cell_width, cell_height
            );
            let ink = if dark_text { INK } else { "#ffffff" };
            let _ = write!(
                canvas.body,
                r#"<text x="{:.1}" y="{:.1}" text-anchor="middle" fill="{ink}">{}</text>"#,
                x + cell_width / 2.0,
                y + cell_height / 2.0 + FONT * 0.35,
                short_number(value)
            );
        }
    }
    if let Some((i, j)) = map.best {
        let _ = write!(
            canvas.body,
            r#"<rect x="{:.1}" y="{:.1}" width="{:.1}" height="{:.1}" fill="none" stroke="{INK}" stroke-width="3"/>"#,
            left + cell_width * j as f64 + 1.5,
            top + cell_height * i as f64 + 1.5,
            cell_width - 3.0,
            cell_height - 3.0
        );
    }
    let bottom = top + cell_height * map.cells.len() as f64;
    let middle = (top + bottom) / 2.0;
    let _ = write!(
        canvas.body,
        r#"<text x="{FONT:.1}" y="{middle:.1}" text-anchor="middle" transform="rotate(-90 {FONT:.1} {middle:.1})">{}</text>"#,
        escaped(map.y_name)
    );
    canvas.finish(
        bottom + 8.0,
        &format!("{} against {}", map.y_name, map.x_name),
    )
}

/// Where a marginal plot's points sit along x: at numbers, or at categories in order.
pub(crate) enum Positions {
    Numbers { values: Vec<f64>, log: bool },
    Categories(Vec<String>),
}

/// A metric's mean ± sd at each value of one setting: points with error bars.
pub(crate) fn marginal_chart(
    positions: &Positions,
    means: &[(f64, f64)],
    x_label: &str,
    y_label: &str,
) -> String {
    let spread_ends = means
        .iter()
        .flat_map(|&(mean, sd)| [mean - sd, mean + sd])
        .filter(|v| v.is_finite());
    let (y_lo, y_hi) = range_of(spread_ends, false, (0.0, 1.0));
    let bottom = FRAME_HEIGHT - BOTTOM;
    let (x, x_values, ticks) = match positions {
        Positions::Numbers { values, log } => {
            let (lo, hi) = range_of(values.iter().copied(), *log, (0.0, 1.0));
            let scale = Scale {
                lo,
                hi,
                log: *log,
                from: LEFT,
                to: WIDTH - RIGHT,
            };
            let ticks = numeric_ticks(&scale);
            (scale, values.clone(), ticks)
        }
        Positions::Categories(labels) => {
            let scale = Scale {
                lo: -0.5,
                hi: labels.len() as f64 - 0.5,
                log: false,
                from: LEFT,
                to: WIDTH - RIGHT,
            };
            let room = (WIDTH - RIGHT - LEFT) / labels.len().max(1) as f64;
            let ticks = labels
                .iter()
                .enumerate()
                .map(|(i, l)| (i as f64, truncated(l, room)))
                .collect();
            (scale, (0..labels.len()).map(|i| i as f64).collect(), ticks)
        }
    };
    let y = Scale {
        lo: y_lo,
        hi: y_hi,
        log: false,
        from: bottom,
        to: TOP,
    };
    let axes = Axes {
        x_label,
        y_label,
        log_x: x.log,
        log_y: false,
        skip_spike: false,
    };
    let mut canvas = Canvas::default();
    frame(&mut canvas, &x, &y, &axes, &ticks);
    for (&at, &(mean, sd)) in x_values.iter().zip(means) {
        if !mean.is_finite() {
            continue;
        }
        let (px, py) = (x.at(at), y.at(mean));
        if sd > 0.0 {
            let (a, b) = (y.at(mean - sd), y.at(mean + sd));
            canvas.line((px, a), (px, b), PALETTE[0], 1.5);
            canvas.line((px - 4.0, a), (px + 4.0, a), PALETTE[0], 1.5);
            canvas.line((px - 4.0, b), (px + 4.0, b), PALETTE[0], 1.5);
        }
        let _ = write!(
            canvas.body,
            r#"<circle cx="{px:.1}" cy="{py:.1}" r="4" fill="{}"/>"#,
            PALETTE[0]
        );
    }
    canvas.finish(FRAME_HEIGHT, &format!("{y_label} against {x_label}"))
}

/// A label cut with an ellipsis to fit `room` user units.
fn truncated(label: &str, room: f64) -> String {
    // A unit of room, so a label measured to fit its own width is never cut.
    let fits = ((room + 1.0) / (FONT * 0.62)).floor() as usize;
    if label.chars().count() <= fits {
        return label.to_string();
    }
    let kept: String = label.chars().take(fits.saturating_sub(1)).collect();
    format!("{kept}…")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(label: &str, points: Vec<(f64, f64)>) -> Series {
        Series::nth(0, label.into(), points)
    }

    #[test]
    fn a_chart_is_a_scalable_svg_with_its_labels() {
        let series = [line(
            "training",
            (1..=50).map(|e| (e as f64, 1.0 / e as f64)).collect(),
        )];
        let svg = line_chart(&series, &Axes::loss(true));
        assert!(
            svg.starts_with("<svg class=\"chart\" viewBox=\"0 0 400 "),
            "{svg}"
        );
        assert!(!svg.contains(" width=\"400\""), "no fixed size");
        assert!(svg.contains(">training</text>") && svg.contains(">epoch</text>"));
    }

    #[test]
    fn a_diverged_history_still_draws() {
        let series = [line(
            "training",
            vec![(1.0, 0.5), (2.0, f64::INFINITY), (3.0, f64::NAN)],
        )];
        assert!(line_chart(&series, &Axes::loss(true)).contains("<path"));
    }

    #[test]
    fn thinning_keeps_the_last_point() {
        let points: Vec<(f64, f64)> = (1..=1001).map(|e| (e as f64, 1.0)).collect();
        let thinned = thin(points);
        assert!(thinned.len() <= MAX_POINTS + 1);
        assert_eq!(thinned.last().unwrap().0, 1001.0);
    }

    #[test]
    fn log_axes_are_labelled_at_one_two_five_steps() {
        let ticks = log_ticks(0.004, 0.6);
        let texts: Vec<String> = ticks.iter().map(|&t| tick_text(t, &ticks, true)).collect();
        assert_eq!(
            texts,
            ["0.005", "0.01", "0.02", "0.05", "0.1", "0.2", "0.5"]
        );
    }

    #[test]
    fn a_log_axis_within_one_decade_still_gets_three_labels() {
        let ticks = log_ticks(0.25, 0.75);
        let texts: Vec<String> = ticks.iter().map(|&t| tick_text(t, &ticks, true)).collect();
        assert_eq!(texts, ["0.3", "0.4", "0.5", "0.6", "0.7"]);
    }

    #[test]
    fn log_ticks_inside_one_decade_have_distinct_labels() {
        let ticks = log_ticks(0.15, 0.35);
        let texts: Vec<String> = ticks.iter().map(|&t| tick_text(t, &ticks, true)).collect();
        assert_eq!(texts, ["0.15", "0.2", "0.25", "0.3", "0.35"]);
    }

    #[test]
    fn short_lines_mark_their_points_and_long_ones_do_not() {
        let short = line("short", (1..=30).map(|e| (e as f64, 1.0)).collect());
        let long = line("long", (1..=31).map(|e| (e as f64, 1.0)).collect());
        let count = |s: Series| {
            line_chart(&[s], &Axes::loss(false))
                .matches("<circle")
                .count()
        };
        assert_eq!(count(short), 30);
        assert_eq!(count(long), 0);
    }

    #[test]
    fn past_eight_series_the_colours_repeat_with_another_dash() {
        let first = Series::nth(0, "a".into(), vec![]);
        let ninth = Series::nth(8, "i".into(), vec![]);
        assert_eq!(first.colour, ninth.colour);
        assert_ne!(first.dash, ninth.dash);
    }

    #[test]
    fn the_legend_sits_below_the_plotting_area() {
        let svg = line_chart(
            &[line("training", vec![(1.0, 1.0), (2.0, 0.5)])],
            &Axes::loss(false),
        );
        let legend_text = svg.split(">training</text>").next().unwrap();
        let y: f64 = legend_text
            .rsplit("y=\"")
            .next()
            .unwrap()
            .split('"')
            .next()
            .unwrap()
            .parse()
            .unwrap();
        assert!(y > FRAME_HEIGHT - BOTTOM + 2.0 * FONT, "legend at y = {y}");
    }

    #[test]
    fn a_heat_map_prints_every_value_and_outlines_the_best() {
        let map = HeatMap {
            x_name: "momentum",
            x_labels: vec!["0.5".into(), "0.9".into()],
            y_name: "learning_rate",
            y_labels: vec!["0.01".into(), "0.1".into()],
            cells: vec![vec![0.81, 0.84], vec![0.9, f64::NAN]],
            best: Some((1, 0)),
            higher_is_better: true,
        };
        let svg = heat_map(&map);
        for value in [">0.810<", ">0.840<", ">0.900<", ">—<"] {
            assert!(svg.contains(value), "{value} missing: {svg}");
        }
        assert_eq!(svg.matches(r#"stroke-width="3""#).count(), 1);
        // The best cell (highest accuracy) is the lightest colour of the ramp.
        assert!(svg.contains(r##"fill="#fde725""##));
    }

    #[test]
    fn a_marginal_plot_draws_a_point_and_an_error_bar_per_value() {
        let svg = marginal_chart(
            &Positions::Categories(vec!["relu".into(), "tanh".into()]),
            &[(0.8, 0.05), (0.85, 0.0)],
            "activation",
            "accuracy",
        );
        assert_eq!(svg.matches("<circle").count(), 2);
        assert!(svg.contains(">relu</text>") && svg.contains(">tanh</text>"));
        // One error bar: a stem and two caps.
        assert_eq!(
            svg.matches(r##"stroke="#0072b2" stroke-width="1.5""##)
                .count(),
            3
        );
    }

    #[test]
    fn bars_in_a_narrow_band_leave_out_zero_and_say_so() {
        let bars: Vec<Bar> = [0.91, 0.93, 0.95]
            .iter()
            .enumerate()
            .map(|(i, &value)| Bar {
                label: format!("run{i}"),
                value,
                spread: Some(0.01),
            })
            .collect();
        let svg = bar_chart(&bars, "accuracy");
        assert!(svg.contains("accuracy (axis starts at 0.8"), "{svg}");
        assert!(svg.contains(">0.9300</text>"), "value labels: {svg}");
    }

    /// The x of each `<rect>` and its width, in drawing order.
    fn rects(svg: &str) -> Vec<(f64, f64)> {
        svg.split("<rect ")
            .skip(1)
            .map(|rect| {
                let attribute = |name: &str| -> f64 {
                    rect.split(&format!(r#"{name}=""#))
                        .nth(1)
                        .and_then(|rest| rest.split('"').next())
                        .and_then(|value| value.parse().ok())
                        .unwrap()
                };
                (attribute("x"), attribute("width"))
            })
            .collect()
    }

    #[test]
    fn a_negative_bar_extends_left_of_the_zero_line_with_its_sign() {
        // A shuffle that helped the held-out score a little: a negative importance.
        let bars = vec![
            Bar {
                label: "x1".into(),
                value: 0.4,
                spread: Some(0.05),
            },
            Bar {
                label: "x3".into(),
                value: -0.03,
                spread: Some(0.02),
            },
        ];
        let svg = bar_chart(&bars, "fall in held-out R²");
        let [(positive_x, positive_width), (negative_x, negative_width)] = rects(&svg)[..] else {
            panic!("two bars: {svg}");
        };
        assert!(negative_width > 1.0, "zero-width negative bar: {svg}");
        // Both bars meet at the zero line: the negative one ends where the positive starts.
        assert!(
            (negative_x + negative_width - positive_x).abs() < 0.11,
            "{svg}"
        );
        assert!(positive_width > 5.0 * negative_width);
        assert!(svg.contains(">−0.03000</text>"), "signed label: {svg}");
        assert!(svg.contains(">+0.4000</text>"), "signed label: {svg}");
        // The axis reaches past the negative bar's spread (to −0.05, two thirds of its
        // width further left), which starts right of the labels (at least 40 + 10 units).
        assert!(negative_x - negative_width * 2.0 / 3.0 > 50.0, "{svg}");
    }

    #[test]
    fn bars_that_are_all_zero_still_get_an_axis() {
        // Shuffling a single held-out row changes nothing: every importance is 0 ± 0.
        let bars = vec![Bar {
            label: "x".into(),
            value: 0.0,
            spread: Some(0.0),
        }];
        let svg = bar_chart(&bars, "fall in held-out accuracy");
        assert!(!svg.contains("NaN"), "{svg}");
    }
}
