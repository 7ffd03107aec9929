//! Phase portraits: one state against another, the start marked.

use plotters::prelude::*;

use super::axes::{finite_points, linear_chart, linear_range};
use super::legend::{draw_legend, legend_mark, Legend};
use super::svg::{palette, polyline, render, render_error, Frame, SQUARE};
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
        let frame = Frame {
            caption: Some((title, 22)),
            margin: 12,
            x_label_area: 45,
            tick_size: 14,
        };
        let mut chart = linear_chart(area, &frame, (x_name, y_name), &x_range, &y_range)?;
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
