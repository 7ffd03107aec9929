//! Errors against the small parameter on log–log axes, one line with
//! markers per order, points at the integrator's floor as hollow rings.

use std::ops::Range;

use plotters::prelude::*;

use super::axes::{is_loggable, log_range, log_ticks, short_sci};
use super::legend::{draw_legend, legend_label, legend_mark, Legend};
use super::svg::{clean_text, palette, polyline, render, render_error, SIZE};
use super::{check_len, PlotError};

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
    let lines = usable_points(eps, per_order)?;
    let any_floor = lines
        .iter()
        .any(|(_, points)| points.iter().any(|(_, f)| *f));
    let all = || {
        lines
            .iter()
            .flat_map(|(_, points)| points.iter().map(|p| p.0))
    };
    let x_range = log_range(all().map(|p| p.0))?;
    let y_range = log_range(all().map(|p| p.1))?;
    let mut labels: Vec<&str> = per_order.iter().map(|l| l.0.as_str()).collect();
    if any_floor {
        labels.push(FLOOR_LABEL);
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
            draw_order(&mut chart, label, points, palette(idx))?;
        }
        if any_floor {
            // A legend entry for the rings, drawn off the data.
            chart
                .draw_series(std::iter::empty::<Circle<(f64, f64), i32>>())
                .map_err(render_error)?
                .label(FLOOR_LABEL)
                .legend(|(x, y)| Circle::new((x + 9, y), 5, BLACK.stroke_width(2)));
        }
        draw_legend(&mut chart, corner)
    })
}

/// The legend entry of the rings.
const FLOOR_LABEL: &str = "at the integrator's floor (left out of fits)";

/// One order's points: `((eps, error), at the floor)`.
type OrderPoints = Vec<((f64, f64), bool)>;

/// The usable points of each order (both coordinates loggable), with
/// their labels; an error when an order's errors and `eps` differ in
/// length.
fn usable_points(
    eps: &[f64],
    per_order: &[(String, Vec<f64>, Vec<bool>)],
) -> Result<Vec<(String, OrderPoints)>, PlotError> {
    let mut lines = Vec::with_capacity(per_order.len());
    for (label, errors, floor) in per_order {
        check_len(&format!("the errors of {label}"), eps.len(), errors.len())?;
        let points: OrderPoints = eps
            .iter()
            .zip(errors)
            .enumerate()
            .filter(|(_, (x, y))| is_loggable(**x) && is_loggable(**y))
            .map(|(i, (x, y))| ((*x, *y), floor.get(i).copied().unwrap_or(false)))
            .collect();
        lines.push((label.clone(), points));
    }
    Ok(lines)
}

/// One order: its line with a legend entry, filled markers, and hollow
/// rings for the points at the floor.
fn draw_order<'a, 'b, X, Y>(
    chart: &mut ChartContext<'a, SVGBackend<'b>, Cartesian2d<X, Y>>,
    label: &str,
    points: &[((f64, f64), bool)],
    color: RGBColor,
) -> Result<(), PlotError>
where
    'b: 'a,
    X: Ranged<ValueType = f64>,
    Y: Ranged<ValueType = f64>,
{
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
    Ok(())
}
