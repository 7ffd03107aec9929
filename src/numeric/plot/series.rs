//! Plots against time: each state component as a line, and the true and
//! averaged trajectories overlaid with a panel per state.

use plotters::prelude::*;

use super::axes::{finite_points, linear_range, tick_label};
use super::legend::{draw_legend, legend_label, legend_mark, Legend};
use super::svg::{
    clean_text, palette, polyline, render, render_error, PANEL_HEIGHT, SIZE, SYSTEM_GREY,
};
use super::{check_len, PlotError};

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
