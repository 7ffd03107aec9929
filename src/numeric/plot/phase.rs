//! Phase portraits: one state against another, the start marked.

use plotters::prelude::*;

use super::axes::{finite_points, linear_range, tick_label};
use super::legend::{draw_legend, legend_mark, Legend};
use super::svg::{clean_text, palette, polyline, render, render_error, SQUARE};
use super::{check_len, PlotError};

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
