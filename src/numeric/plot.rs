//! SVG plots of numerical results: state trajectories against time, the
//! true and averaged trajectories overlaid (a panel per state), phase
//! portraits, and errors against the small parameter on log–log axes.
//!
//! This module owns turning plain `f64` data into SVG text (drawn with
//! plotters' SVG backend); the language side writes it to a file. It guards every input
//! that could make the plotting library misbehave (no data, NaN, equal
//! values, ranges too wide for `f64`). It knows nothing about integrators,
//! sessions or where the data came from.

use std::fmt;
use std::ops::Range;
use std::panic::{catch_unwind, AssertUnwindSafe};

use plotters::coord::Shift;
use plotters::prelude::*;

/// Why a plot could not be made or saved.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) enum PlotError {
    /// No point had finite coordinates (and, on log axes, positive ones).
    NoData,
    /// Two inputs that must have equal lengths do not.
    LengthMismatch {
        /// Which input has the wrong length.
        what: String,
        /// The length it needed.
        expected: usize,
        /// The length it has.
        found: usize,
    },
    /// The data spans more than `f64` can lay out on an axis.
    RangeTooWide,
    /// The plotting library reported a failure (its message).
    Render(String),
}

impl fmt::Display for PlotError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            PlotError::NoData => write!(f, "nothing to plot: no usable data points"),
            PlotError::LengthMismatch {
                what,
                expected,
                found,
            } => write!(f, "{what} has {found} values, expected {expected}"),
            PlotError::RangeTooWide => write!(f, "the data span too wide a range to plot"),
            PlotError::Render(message) => write!(f, "could not draw the plot: {message}"),
        }
    }
}

impl std::error::Error for PlotError {}

/// Plot each state component against time, one line per component, with a
/// legend naming them; returns the SVG text.
///
/// `series[k]` holds component `k` at each of the `times` and is labelled
/// `names[k]`. Points whose time or value is not finite are left out of
/// the line. Constant data is drawn on a padded axis. An error is returned
/// when lengths disagree, no point is usable or the values overflow an
/// axis (such as `-f64::MAX` with `f64::MAX`).
pub(crate) fn time_series_svg(
    title: &str,
    names: &[String],
    times: &[f64],
    series: &[Vec<f64>],
) -> Result<String, PlotError> {
    check_len("the list of series", names.len(), series.len())?;
    let mut lines = Vec::with_capacity(series.len());
    for (name, values) in names.iter().zip(series) {
        check_len(&format!("series {name}"), times.len(), values.len())?;
        lines.push((name.clone(), finite_points(times, values)));
    }
    let all = || lines.iter().flat_map(|(_, points)| points.iter());
    let x_range = linear_range(all().map(|p| p.0))?;
    let y_range = linear_range(all().map(|p| p.1))?;
    let labels: Vec<&str> = names.iter().map(String::as_str).collect();
    let legend = Legend::new(&labels, (684.0, 400.0));
    let (corner, y_range) = legend.place(&x_range, y_range, all().copied());

    render(SIZE, |area| {
        let mut chart = ChartBuilder::on(area)
            .caption(clean_text(title), ("sans-serif", 24))
            .margin(12)
            .margin_right(24)
            .x_label_area_size(45)
            .y_label_area_size(80)
            .build_cartesian_2d(x_range.clone(), y_range.clone())
            .map_err(render_error)?;
        chart
            .configure_mesh()
            .x_desc("t")
            .y_desc("state")
            .x_label_formatter(&|v| tick_label(*v, x_range.end - x_range.start))
            .y_label_formatter(&|v| tick_label(*v, y_range.end - y_range.start))
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .draw()
            .map_err(render_error)?;
        for (idx, (name, points)) in lines.iter().enumerate() {
            let color = palette(idx);
            chart
                .draw_series(polyline(points, color, 2))
                .map_err(render_error)?
                .label(legend_label(name, points.is_empty()))
                .legend(move |(x, y)| legend_mark(x, y, color));
            if points.len() == 1 {
                // A lone point would be an invisible line: mark it.
                chart
                    .draw_series(points.iter().map(|&p| Circle::new(p, 3, color.filled())))
                    .map_err(render_error)?;
            }
        }
        draw_legend(&mut chart, corner)
    })
}

/// The true and averaged trajectories overlaid, one panel per state
/// (stacked, sharing the time axis): the system as a thin line in grey,
/// each model as a thicker coloured line on top, so that both show where
/// the fast oscillation of the system fills a band. Returns the SVG text.
///
/// `system[k]` and each model's `values[k]` hold state `k` at the `times`.
pub(crate) fn paths_svg(
    title: &str,
    names: &[String],
    times: &[f64],
    system: &[Vec<f64>],
    models: &[(String, Vec<Vec<f64>>)],
) -> Result<String, PlotError> {
    check_len("the system's states", names.len(), system.len())?;
    if names.is_empty() {
        return Err(PlotError::NoData);
    }
    let mut panels = Vec::with_capacity(names.len());
    for (k, name) in names.iter().enumerate() {
        let mut lines = Vec::with_capacity(1 + models.len());
        check_len(
            &format!("the system's {name}"),
            times.len(),
            system[k].len(),
        )?;
        lines.push(("system".to_string(), finite_points(times, &system[k])));
        for (label, values) in models {
            check_len(&format!("the states of {label}"), names.len(), values.len())?;
            check_len(&format!("{name} of {label}"), times.len(), values[k].len())?;
            lines.push((label.clone(), finite_points(times, &values[k])));
        }
        let all = || lines.iter().flat_map(|(_, points)| points.iter());
        let x_range = linear_range(all().map(|p| p.0))?;
        let y_range = linear_range(all().map(|p| p.1))?;
        let labels: Vec<&str> = lines.iter().map(|l| l.0.as_str()).collect();
        let legend = Legend::new(&labels, (688.0, 244.0));
        let (corner, y_range) = legend.place(&x_range, y_range, all().copied());
        panels.push((name.clone(), lines, x_range, y_range, corner));
    }
    let height = (PANEL_HEIGHT * names.len() as u32 + 50).min(3000);
    render((SIZE.0, height), |area| {
        let area = area
            .titled(&clean_text(title), ("sans-serif", 22))
            .map_err(render_error)?;
        let parts = area.split_evenly((panels.len(), 1));
        for (part, (name, lines, x_range, y_range, corner)) in parts.iter().zip(&panels) {
            let mut chart = ChartBuilder::on(part)
                .margin(8)
                .margin_right(24)
                .x_label_area_size(40)
                .y_label_area_size(80)
                .build_cartesian_2d(x_range.clone(), y_range.clone())
                .map_err(render_error)?;
            chart
                .configure_mesh()
                .x_desc("t")
                .y_desc(clean_text(name))
                .x_label_formatter(&|v| tick_label(*v, x_range.end - x_range.start))
                .y_label_formatter(&|v| tick_label(*v, y_range.end - y_range.start))
                .label_style(("sans-serif", 13))
                .axis_desc_style(("sans-serif", 16))
                .draw()
                .map_err(render_error)?;
            for (idx, (label, points)) in lines.iter().enumerate() {
                let (color, width) = if idx == 0 {
                    (SYSTEM_GREY, 1)
                } else {
                    (palette(idx - 1), 2)
                };
                chart
                    .draw_series(polyline(points, color, width))
                    .map_err(render_error)?
                    .label(legend_label(label, points.is_empty()))
                    .legend(move |(x, y)| legend_mark(x, y, color));
            }
            draw_legend(&mut chart, corner.clone())?;
        }
        Ok(())
    })
}

/// A phase portrait: the curve `(xs[i], ys[i])` with its start marked,
/// axes named after the two states. Returns the SVG text.
pub(crate) fn phase_svg(
    title: &str,
    x_name: &str,
    y_name: &str,
    xs: &[f64],
    ys: &[f64],
) -> Result<String, PlotError> {
    check_len(&format!("the values of {y_name}"), xs.len(), ys.len())?;
    let points = finite_points(xs, ys);
    let x_range = linear_range(points.iter().map(|p| p.0))?;
    let y_range = linear_range(points.iter().map(|p| p.1))?;
    let legend = Legend::new(&["trajectory", "start"], (524.0, 500.0));
    let (corner, y_range) = legend.place(&x_range, y_range, points.iter().copied());
    let start = points.first().copied();
    render(SQUARE, |area| {
        let mut chart = ChartBuilder::on(area)
            .caption(clean_text(title), ("sans-serif", 22))
            .margin(12)
            .margin_right(24)
            .x_label_area_size(45)
            .y_label_area_size(80)
            .build_cartesian_2d(x_range.clone(), y_range.clone())
            .map_err(render_error)?;
        chart
            .configure_mesh()
            .x_desc(clean_text(x_name))
            .y_desc(clean_text(y_name))
            .x_label_formatter(&|v| tick_label(*v, x_range.end - x_range.start))
            .y_label_formatter(&|v| tick_label(*v, y_range.end - y_range.start))
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .draw()
            .map_err(render_error)?;
        let color = palette(0);
        chart
            .draw_series(polyline(&points, color, 2))
            .map_err(render_error)?
            .label("trajectory")
            .legend(move |(x, y)| legend_mark(x, y, color));
        if let Some(p) = start {
            let red = palette(1);
            chart
                .draw_series(std::iter::once(Circle::new(p, 5, red.filled())))
                .map_err(render_error)?
                .label("start")
                .legend(move |(x, y)| Circle::new((x + 9, y), 4, red.filled()));
        }
        draw_legend(&mut chart, corner)
    })
}

/// Plot error against the small parameter on log–log axes, one line with
/// markers per order, with a legend of the labels; returns the SVG text.
///
/// Each entry of `per_order` is a label (such as "order 1"), the errors at
/// each of the `eps` values, and which of them are at the integrator's
/// floor (drawn as hollow rings, listed in the legend once). Points where
/// eps or the error is not a number in `1e-300..=1e300` are skipped; an
/// order with no usable point is still listed in the legend, marked as
/// having no data. An error is returned when lengths disagree, no point at
/// all is usable, or the usable values span more than 280 decades.
pub(crate) fn error_vs_eps_svg(
    title: &str,
    y_desc: &str,
    eps: &[f64],
    per_order: &[(String, Vec<f64>, Vec<bool>)],
) -> Result<String, PlotError> {
    let mut lines = Vec::with_capacity(per_order.len());
    let mut any_floor = false;
    for (label, errors, floor) in per_order {
        check_len(&format!("the errors of {label}"), eps.len(), errors.len())?;
        let points: Vec<((f64, f64), bool)> = eps
            .iter()
            .zip(errors)
            .enumerate()
            .filter(|(_, (x, y))| is_loggable(**x) && is_loggable(**y))
            .map(|(i, (x, y))| ((*x, *y), floor.get(i).copied().unwrap_or(false)))
            .collect();
        any_floor |= points.iter().any(|(_, f)| *f);
        lines.push((label.clone(), points));
    }
    let all = || {
        lines
            .iter()
            .flat_map(|(_, points)| points.iter().map(|p| p.0))
    };
    let x_range = log_range(all().map(|p| p.0))?;
    let y_range = log_range(all().map(|p| p.1))?;
    let mut labels: Vec<&str> = per_order.iter().map(|l| l.0.as_str()).collect();
    if any_floor {
        labels.push("at the integrator's floor (left out of fits)");
    }
    let legend = Legend::new(&labels, (684.0, 400.0));
    let logs = |r: &Range<f64>| r.start.log10()..r.end.log10();
    let (corner, log_y) = legend.place(
        &logs(&x_range),
        logs(&y_range),
        all().map(|(x, y)| (x.log10(), y.log10())),
    );
    let y_range = y_range.start..10f64.powf(log_y.end);

    render(SIZE, |area| {
        let mut chart = ChartBuilder::on(area)
            .caption(clean_text(title), ("sans-serif", 22))
            .margin(12)
            .margin_right(24)
            .x_label_area_size(45)
            .y_label_area_size(80)
            .build_cartesian_2d(
                x_range
                    .clone()
                    .log_scale()
                    .with_key_points(log_ticks(&x_range)),
                y_range
                    .clone()
                    .log_scale()
                    .with_key_points(log_ticks(&y_range)),
            )
            .map_err(render_error)?;
        chart
            .configure_mesh()
            .x_desc("eps (log scale)")
            .y_desc(clean_text(y_desc))
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .x_label_formatter(&|v| short_sci(*v))
            .y_label_formatter(&|v| short_sci(*v))
            .draw()
            .map_err(render_error)?;
        for (idx, (label, points)) in lines.iter().enumerate() {
            let color = palette(idx);
            let xy: Vec<(f64, f64)> = points.iter().map(|p| p.0).collect();
            chart
                .draw_series(polyline(&xy, color, 2))
                .map_err(render_error)?
                .label(legend_label(label, points.is_empty()))
                .legend(move |(x, y)| legend_mark(x, y, color));
            chart
                .draw_series(
                    points
                        .iter()
                        .filter(|p| !p.1)
                        .map(|p| Circle::new(p.0, 3, color.filled())),
                )
                .map_err(render_error)?;
            chart
                .draw_series(
                    points
                        .iter()
                        .filter(|p| p.1)
                        .map(|p| Circle::new(p.0, 6, color.stroke_width(2))),
                )
                .map_err(render_error)?;
        }
        if any_floor {
            // A legend entry for the rings, drawn off the data.
            chart
                .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
                .map_err(render_error)?
                .label("at the integrator's floor (left out of fits)")
                .legend(|(x, y)| Circle::new((x + 9, y), 5, BLACK.stroke_width(2)));
        }
        draw_legend(&mut chart, corner)
    })
}

/// Tick marks on a log axis: the powers of ten in the range, with 2 and 5
/// times them when there are few decades, and every digit when the range
/// is within a decade or two; at most about a dozen.
fn log_ticks(range: &Range<f64>) -> Vec<f64> {
    let (lo, hi) = (range.start, range.end);
    let first = lo.log10().floor() as i32;
    let last = hi.log10().ceil() as i32;
    let within = |v: f64| v >= lo * (1.0 - 1e-9) && v <= hi * (1.0 + 1e-9);
    for mantissas in [&[1.0, 2.0, 3.0, 5.0][..], &[1.0, 2.0, 5.0], &[1.0]] {
        let ticks: Vec<f64> = (first..=last)
            .flat_map(|k| mantissas.iter().map(move |m| m * 10f64.powi(k)))
            .filter(|v| within(*v))
            .collect();
        if ticks.len() <= 12 && ticks.len() >= 2 || mantissas.len() == 1 {
            if ticks.len() <= 12 {
                return ticks;
            }
            let step = ticks.len().div_ceil(12);
            return ticks.into_iter().step_by(step).collect();
        }
    }
    Vec::new()
}

/// A tick label on a linear axis spanning `span`: zero (also a rounded
/// `-0`) as `0`, otherwise the value rounded to 12 significant digits in
/// its shortest form.
fn tick_label(v: f64, span: f64) -> String {
    if v.abs() <= 1e-12 * span.abs() {
        return "0".to_string();
    }
    let rounded: f64 = format!("{v:.11e}").parse().unwrap_or(v);
    let plain = format!("{rounded}");
    if plain.len() > 12 {
        short_sci(rounded)
    } else {
        plain
    }
}

/// Tick labels on a log axis: `1e-3`, `2.5e-2`.
fn short_sci(v: f64) -> String {
    let s = format!("{v:.1e}");
    match s.split_once('e') {
        Some((m, e)) => format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.')),
        None => s,
    }
}

fn finite_points(xs: &[f64], ys: &[f64]) -> Vec<(f64, f64)> {
    xs.iter()
        .zip(ys)
        .filter(|(t, v)| t.is_finite() && v.is_finite())
        .map(|(t, v)| (*t, *v))
        .collect()
}

/// Where a legend goes: the corner of the plotting area with the fewest
/// data points under the legend box; when every corner has some, the
/// vertical axis grows at the top to make room and the legend goes there,
/// so that it never hides data.
struct Legend {
    /// The box as fractions of the plotting area.
    width: f64,
    height: f64,
}

impl Legend {
    /// A legend of `labels` on a plotting area of about `area` pixels.
    fn new(labels: &[&str], area: (f64, f64)) -> Legend {
        let chars = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0) as f64;
        let width = (40.0 + 7.5 * chars) / area.0;
        let height = (12.0 + 19.0 * labels.len() as f64) / area.1;
        Legend {
            width: width.min(0.9),
            height: height.min(0.6),
        }
    }

    /// The corner and the (possibly grown) vertical range.
    fn place(
        &self,
        x: &Range<f64>,
        y: Range<f64>,
        points: impl Iterator<Item = (f64, f64)>,
    ) -> (SeriesLabelPosition, Range<f64>) {
        let (xs, ys) = (x.end - x.start, y.end - y.start);
        let mut counts = [0usize; 4];
        for (px, py) in points {
            let fx = (px - x.start) / xs;
            let fy = (py - y.start) / ys;
            // A margin of a few per cent around the box.
            let right = fx >= 1.0 - self.width - 0.03;
            let left = fx <= self.width + 0.03;
            let top = fy >= 1.0 - self.height - 0.04;
            let bottom = fy <= self.height + 0.04;
            counts[0] += usize::from(right && top);
            counts[1] += usize::from(left && top);
            counts[2] += usize::from(right && bottom);
            counts[3] += usize::from(left && bottom);
        }
        let corners = [
            SeriesLabelPosition::UpperRight,
            SeriesLabelPosition::UpperLeft,
            SeriesLabelPosition::LowerRight,
            SeriesLabelPosition::LowerLeft,
        ];
        match (0..4).find(|&i| counts[i] == 0) {
            Some(i) => (corners[i].clone(), y),
            None => {
                let grow = ys * (self.height + 0.05) / (1.0 - self.height - 0.05);
                let end = y.end + grow;
                let y = if end.is_finite() { y.start..end } else { y };
                (SeriesLabelPosition::UpperRight, y)
            }
        }
    }
}

/// The system's colour in a plot of paths.
const SYSTEM_GREY: RGBColor = RGBColor(90, 90, 90);

/// Height of one panel of a plot of paths.
const PANEL_HEIGHT: u32 = 300;

/// Size of a phase portrait.
const SQUARE: (u32, u32) = (640, 600);

/// Width and height of every plot, in SVG user units.
const SIZE: (u32, u32) = (800, 500);

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Render a chart into an SVG string. A panic inside the plotting library
/// (which the range guards should already rule out) becomes an error.
fn render<F>(size: (u32, u32), draw: F) -> Result<String, PlotError>
where
    F: FnOnce(&Area<'_>) -> Result<(), PlotError>,
{
    let mut svg = String::new();
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        let area = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        area.fill(&WHITE).map_err(render_error)?;
        draw(&area)?;
        area.present().map_err(render_error)
    }));
    match outcome {
        Ok(Ok(())) => Ok(svg),
        Ok(Err(error)) => Err(error),
        Err(_) => Err(PlotError::Render(
            "the plotting library failed on this data".to_string(),
        )),
    }
}

fn draw_legend<'a, 'b, X, Y>(
    chart: &mut ChartContext<'a, SVGBackend<'b>, Cartesian2d<X, Y>>,
    position: SeriesLabelPosition,
) -> Result<(), PlotError>
where
    'b: 'a,
    X: Ranged,
    Y: Ranged,
{
    chart
        .configure_series_labels()
        .position(position)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 14))
        .draw()
        .map_err(render_error)
}

/// The line through `points`, or nothing when there are none (an empty
/// polyline would still be emitted as an element).
fn polyline(points: &[(f64, f64)], color: RGBColor, width: u32) -> Option<PathElement<(f64, f64)>> {
    (!points.is_empty()).then(|| PathElement::new(points.to_vec(), color.stroke_width(width)))
}

/// The legend swatch: a filled bar, so that the only polylines in the file
/// are the data lines.
fn legend_mark(x: i32, y: i32, color: RGBColor) -> Rectangle<(i32, i32)> {
    Rectangle::new([(x, y - 3), (x + 18, y + 3)], color.filled())
}

fn legend_label(label: &str, no_data: bool) -> String {
    let label = clean_text(label);
    if no_data {
        format!("{label} (no data)")
    } else {
        label
    }
}

/// Text safe to place in XML: control characters become spaces (the SVG
/// backend escapes markup characters itself).
fn clean_text(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

fn render_error<E: fmt::Display>(error: E) -> PlotError {
    PlotError::Render(error.to_string())
}

fn check_len(what: &str, expected: usize, found: usize) -> Result<(), PlotError> {
    if expected == found {
        Ok(())
    } else {
        Err(PlotError::LengthMismatch {
            what: what.to_string(),
            expected,
            found,
        })
    }
}

/// Whether a value can sit on a log axis: positive and within
/// `1e-300..=1e300`, beyond which numbers stop behaving (as errors, values
/// that small are zero for all practical purposes).
fn is_loggable(value: f64) -> bool {
    (1e-300..=1e300).contains(&value)
}

/// Line colours, chosen to stay distinct on white.
fn palette(idx: usize) -> RGBColor {
    const COLORS: [RGBColor; 8] = [
        RGBColor(31, 119, 180),
        RGBColor(214, 39, 40),
        RGBColor(44, 160, 44),
        RGBColor(148, 103, 189),
        RGBColor(255, 127, 14),
        RGBColor(23, 190, 207),
        RGBColor(140, 86, 75),
        RGBColor(227, 119, 194),
    ];
    COLORS[idx % COLORS.len()]
}

/// Smallest and largest of finite values, or `NoData`.
fn extent(values: impl Iterator<Item = f64>) -> Result<(f64, f64), PlotError> {
    let mut extent: Option<(f64, f64)> = None;
    for value in values.filter(|v| v.is_finite()) {
        extent = Some(match extent {
            None => (value, value),
            Some((lo, hi)) => (lo.min(value), hi.max(value)),
        });
    }
    extent.ok_or(PlotError::NoData)
}

/// A linear axis range around the values with a 5% margin.
///
/// The plotting library picks tick marks by refining a step until enough
/// fit; it loops forever when the range is so narrow (relative to its
/// position, or in absolute terms near the subnormal numbers) that the
/// step underflows. So a spread below `1e-9` of the magnitude is widened to
/// 10% of the magnitude, and values all below `1e-250` in size are shown on
/// the axis `-1..1`.
fn linear_range(values: impl Iterator<Item = f64>) -> Result<Range<f64>, PlotError> {
    let (lo, hi) = extent(values)?;
    let magnitude = lo.abs().max(hi.abs());
    let span = hi - lo;
    let (lo, hi) = if magnitude < 1e-250 {
        (-1.0, 1.0)
    } else if span <= 1e-9 * magnitude {
        (lo - 0.1 * magnitude, hi + 0.1 * magnitude)
    } else {
        (lo - 0.05 * span, hi + 0.05 * span)
    };
    if lo.is_finite() && hi.is_finite() && (hi - lo).is_finite() && hi > lo {
        Ok(lo..hi)
    } else {
        Err(PlotError::RangeTooWide)
    }
}

/// Most decades a log axis may span: the plotting library divides the
/// ends of the range and loops forever if the ratio overflows.
const MAX_DECADES: f64 = 280.0;

/// A logarithmic axis range around values that pass [`is_loggable`], with
/// a margin of 5% of the decades spanned (a factor 1.5 each way when all
/// values are equal), extended down to a power of ten when that is needed
/// for the axis to carry two labelled ticks.
fn log_range(values: impl Iterator<Item = f64>) -> Result<Range<f64>, PlotError> {
    let (lo, hi) = extent(values.filter(|v| is_loggable(*v)))?;
    let (lo_log, hi_log) = (lo.log10(), hi.log10());
    let decades = hi_log - lo_log;
    if decades > MAX_DECADES {
        return Err(PlotError::RangeTooWide);
    }
    let pad = if decades > 1e-9 {
        0.05 * decades
    } else {
        1.5f64.log10()
    };
    let hi = 10f64.powf((hi_log + pad).min(305.0));
    let mut lo = 10f64.powf((lo_log - pad).max(-305.0));
    if log_ticks(&(lo..hi)).len() < 2 {
        lo = 10f64.powf((lo_log - pad).min(lo_log.floor()).max(-305.0));
    }
    if lo.is_normal() && hi.is_normal() && hi > lo {
        Ok(lo..hi)
    } else {
        Err(PlotError::RangeTooWide)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// Structural checks every plot must pass; returns the text.
    fn check_svg(text: &str, n_lines: usize, labels: &[&str]) {
        assert!(text.starts_with("<svg"), "{}", &text[..text.len().min(80)]);
        assert!(text.trim_end().ends_with("</svg>"));
        assert_eq!(text.matches("<svg").count(), 1);
        for tag in ["text", "svg"] {
            assert_eq!(
                text.matches(&format!("<{tag}")).count(),
                text.matches(&format!("</{tag}>")).count(),
                "unbalanced <{tag}>"
            );
        }
        // Data lines are drawn 1 or 2 units wide with a colour; the mesh
        // lines are 1 unit wide too but come before any data.
        let data_lines = text
            .lines()
            .filter(|line| line.starts_with("<polyline") && line.contains("stroke-width=\"2\""))
            .count();
        assert_eq!(data_lines, n_lines);
        assert!(!text.contains("NaN") && !text.contains("inf"));
        for label in labels {
            assert!(
                text.contains(&format!("\n{label}\n")),
                "label {label} missing"
            );
        }
    }

    fn names(list: &[&str]) -> Vec<String> {
        list.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn time_series_has_one_line_per_component() {
        let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.1).collect();
        let q: Vec<f64> = times.iter().map(|t| t.cos()).collect();
        let p: Vec<f64> = times.iter().map(|t| -t.sin()).collect();
        let text = time_series_svg("swinging boom", &names(&["q", "p"]), &times, &[q, p]).unwrap();
        check_svg(&text, 2, &["swinging boom", "q", "p", "t", "state"]);
    }

    #[test]
    fn paths_have_a_panel_per_state_with_every_line() {
        let times: Vec<f64> = (0..300).map(|i| i as f64 * 0.1).collect();
        let sys = vec![
            times
                .iter()
                .map(|t| (0.05 * t).cos() + 0.05 * (t * 7.0).sin())
                .collect(),
            times.iter().map(|t| -(0.05 * t).sin()).collect(),
        ];
        let model: Vec<Vec<f64>> = vec![
            times.iter().map(|t| (0.05 * t).cos()).collect(),
            times.iter().map(|t| -(0.05 * t).sin()).collect(),
        ];
        let models = vec![
            ("order 1".to_string(), model.clone()),
            ("order 2".to_string(), model),
        ];
        let text = paths_svg("paths", &names(&["x", "y"]), &times, &sys, &models).unwrap();
        // Two models per panel drawn 2 wide; the system 1 wide in grey.
        check_svg(
            &text,
            4,
            &["paths", "x", "y", "system", "order 1", "order 2"],
        );
        assert!(text.matches("stroke=\"#5A5A5A\"").count() >= 2);
    }

    #[test]
    fn phase_portrait_marks_the_start() {
        let s: Vec<f64> = (0..100).map(|i| i as f64 * 0.1).collect();
        let q: Vec<f64> = s.iter().map(|t| t.cos()).collect();
        let p: Vec<f64> = s.iter().map(|t| -t.sin()).collect();
        let text = phase_svg("phase", "q", "p", &q, &p).unwrap();
        check_svg(&text, 1, &["q", "p", "trajectory", "start"]);
    }

    #[test]
    fn error_plot_has_one_line_per_order_and_a_legend() {
        let eps = [0.2, 0.1, 0.05, 0.025];
        let per_order = vec![
            (
                "order 1".to_string(),
                vec![4e-2, 1e-2, 2.5e-3, 6.25e-4],
                vec![false; 4],
            ),
            (
                "order 2".to_string(),
                vec![8e-3, 1e-3, f64::NAN, 1.25e-4],
                vec![false, false, false, true],
            ),
            (
                "order 3".to_string(),
                vec![0.0, -1.0, f64::NAN, f64::INFINITY],
                vec![false; 4],
            ),
        ];
        let text = error_vs_eps_svg("error against eps", "error", &eps, &per_order).unwrap();
        check_svg(
            &text,
            2,
            &[
                "order 1",
                "order 2",
                "order 3 (no data)",
                "eps (log scale)",
                "at the integrator&apos;s floor (left out of fits)",
            ],
        );
        // One marker per usable point: 4 + 3, one of them a ring, and the
        // ring in the legend.
        assert_eq!(text.matches("<circle").count(), 8);
    }

    #[test]
    fn markup_in_titles_and_labels_is_escaped() {
        let labels = names(&["a<b", "x & \"y\"\u{0}"]);
        let text = time_series_svg(
            "<title>",
            &labels,
            &[0.0, 1.0],
            &[vec![1.0, 2.0], vec![2.0, 1.0]],
        )
        .unwrap();
        check_svg(
            &text,
            2,
            &["&lt;title&gt;", "a&lt;b", "x &amp; &quot;y&quot; "],
        );
        assert!(!text.contains("<title>") && !text.contains('\u{0}'));
    }

    #[test]
    fn degenerate_but_drawable_data_gives_valid_plots() {
        let one = names(&["x"]);
        let cases: Vec<(Vec<f64>, Vec<f64>)> = vec![
            (vec![0.0, 1.0, 2.0], vec![3.0, 3.0, 3.0]),
            (vec![0.0, 1.0, 2.0], vec![0.0, 0.0, 0.0]),
            (vec![5.0, 5.0], vec![1.0, 2.0]),
            (vec![1.0, 2.0], vec![1.0, 1.0 + f64::EPSILON]),
            (vec![1.0, 2.0, 3.0], vec![1.0, f64::NAN, f64::INFINITY]),
            (vec![0.0, 1.0], vec![1e300, -1e300]),
            (vec![0.0, 1.0], vec![1e-320, 0.0]),
            (vec![0.0, 1.0], vec![1e-300, 3e-300]),
            (vec![0.0, 1.0], vec![1e300, 1e300 * (1.0 + 1e-12)]),
            (vec![0.0, 1.0], vec![1e300, 1e300 * (1.0 + 2e-9)]),
            (vec![1.0, 1.0 + 4e-9], vec![1.0, 2.0]),
            (vec![0.0, 1e-200], vec![1.0, 2.0]),
        ];
        for (times, values) in cases {
            let text =
                time_series_svg("case", &one, &times, std::slice::from_ref(&values)).unwrap();
            check_svg(&text, 1, &["x"]);
            let text = phase_svg("case", "x", "y", &times, &values).unwrap();
            check_svg(&text, 1, &["x", "y"]);
        }
        let eps_cases: Vec<(Vec<f64>, Vec<f64>)> = vec![
            (vec![0.1, 0.1], vec![1e-3, 1e-3]),
            (vec![0.1], vec![1e-3]),
            (vec![1e-300, 1e-30], vec![1e-300, 1e-30]),
            (vec![0.1, 0.2], vec![1e-310, 1e-300]),
            (vec![0.02, 0.08], vec![2e-3, 8e-3]),
            (vec![0.1, 0.2], vec![1.0, 1.0 + 1e-15]),
        ];
        for (eps, errors) in eps_cases {
            let n = errors.len();
            let per_order = vec![("order 1".to_string(), errors, vec![false; n])];
            let text = error_vs_eps_svg("case", "error", &eps, &per_order).unwrap();
            check_svg(&text, 1, &["order 1"]);
        }
    }

    #[test]
    fn unusable_data_is_an_error() {
        let one = names(&["x"]);
        let nan = f64::NAN;
        assert_eq!(
            time_series_svg("t", &one, &[], &[vec![]]),
            Err(PlotError::NoData)
        );
        assert_eq!(
            time_series_svg("t", &[], &[1.0], &[]),
            Err(PlotError::NoData)
        );
        assert_eq!(
            time_series_svg("t", &one, &[1.0, nan], &[vec![nan, 1.0]]),
            Err(PlotError::NoData)
        );
        assert!(matches!(
            time_series_svg("t", &one, &[1.0, 2.0], &[vec![1.0]]),
            Err(PlotError::LengthMismatch {
                expected: 2,
                found: 1,
                ..
            })
        ));
        assert!(matches!(
            time_series_svg("t", &one, &[1.0], &[vec![1.0], vec![2.0]]),
            Err(PlotError::LengthMismatch {
                expected: 1,
                found: 2,
                ..
            })
        ));
        assert_eq!(
            time_series_svg("t", &one, &[0.0, 1.0], &[vec![-f64::MAX, f64::MAX]]),
            Err(PlotError::RangeTooWide)
        );
        assert_eq!(
            paths_svg("t", &[], &[1.0], &[], &[]),
            Err(PlotError::NoData)
        );
        assert!(matches!(
            paths_svg(
                "t",
                &one,
                &[1.0],
                &[vec![1.0]],
                &[("m".to_string(), vec![])]
            ),
            Err(PlotError::LengthMismatch { .. })
        ));
        assert_eq!(
            phase_svg("t", "x", "y", &[nan], &[1.0]),
            Err(PlotError::NoData)
        );
        let zeros = vec![("order 1".to_string(), vec![0.0, -1.0], vec![false; 2])];
        assert_eq!(
            error_vs_eps_svg("e", "error", &[0.1, 0.2], &zeros),
            Err(PlotError::NoData)
        );
        assert_eq!(
            error_vs_eps_svg("e", "error", &[0.1, 0.2], &[]),
            Err(PlotError::NoData)
        );
        assert!(matches!(
            error_vs_eps_svg("e", "error", &[0.1], &zeros),
            Err(PlotError::LengthMismatch { .. })
        ));
        let subnormal = vec![("order 1".to_string(), vec![1e-310, 1e-320], vec![false; 2])];
        assert_eq!(
            error_vs_eps_svg("e", "error", &[0.1, 0.2], &subnormal),
            Err(PlotError::NoData)
        );
        let wide = vec![("order 1".to_string(), vec![1e-300, 1e300], vec![false; 2])];
        assert_eq!(
            error_vs_eps_svg("e", "error", &[0.1, 0.2], &wide),
            Err(PlotError::RangeTooWide)
        );
    }

    #[test]
    fn messages_are_lowercase_without_full_stop() {
        let errors = [
            PlotError::NoData,
            PlotError::LengthMismatch {
                what: "series x".to_string(),
                expected: 2,
                found: 1,
            },
            PlotError::RangeTooWide,
            PlotError::Render("boom".to_string()),
        ];
        for error in errors {
            let text = error.to_string();
            assert!(text.starts_with(|c: char| c.is_lowercase()), "{text}");
            assert!(!text.ends_with('.'), "{text}");
        }
    }

    fn wild_value() -> impl Strategy<Value = f64> {
        prop_oneof![
            4 => -10.0f64..10.0,
            1 => Just(f64::NAN),
            1 => Just(f64::INFINITY),
            1 => Just(0.0),
            1 => Just(1e-320),
            1 => Just(1e300),
            1 => Just(-1e300),
            1 => Just(f64::MAX),
            1 => proptest::num::f64::ANY,
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(48))]

        // Whatever the data, the plotting library is never reached with
        // input that makes it panic.
        #[test]
        fn wild_data_never_breaks_the_plots(
            times in proptest::collection::vec(wild_value(), 0..6),
            values in proptest::collection::vec(wild_value(), 12),
        ) {
            let n = times.len();
            let series = vec![values[..n].to_vec(), values[6..6 + n].to_vec()];
            let ok = |r: Result<String, PlotError>| match r {
                Ok(text) => text.starts_with("<svg"),
                Err(PlotError::Render(_)) => false,
                Err(_) => true,
            };
            prop_assert!(ok(time_series_svg("wild", &names(&["a", "b"]), &times, &series)));
            prop_assert!(ok(phase_svg("wild", "a", "b", &series[0], &series[1])));
            let models = vec![("m".to_string(), series.clone())];
            prop_assert!(ok(paths_svg("wild", &names(&["a", "b"]), &times, &series, &models)));
            let per_order = vec![
                ("order 1".to_string(), values[..n].to_vec(), vec![false; n]),
                ("order 2".to_string(), values[6..6 + n].to_vec(), vec![true; n]),
            ];
            prop_assert!(ok(error_vs_eps_svg("wild", "error", &times, &per_order)));
        }
    }
}
