//! The SVG canvas: plot sizes, colours, the one function that runs the
//! plotting library (catching its panics), data lines and safe text.

use std::fmt;
use std::panic::{catch_unwind, AssertUnwindSafe};

use plotters::coord::Shift;
use plotters::prelude::*;

use super::PlotError;

/// The system's colour in a plot of paths.
pub(super) const SYSTEM_GREY: RGBColor = RGBColor(90, 90, 90);

/// Height of one panel of a plot of paths.
pub(super) const PANEL_HEIGHT: u32 = 300;

/// Size of a phase portrait.
pub(super) const SQUARE: (u32, u32) = (640, 600);

/// Width and height of every plot, in SVG user units.
pub(super) const SIZE: (u32, u32) = (800, 500);

pub(super) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Render a chart into an SVG string. A panic inside the plotting library
/// (which the range guards should already rule out) becomes an error.
pub(super) fn render<F>(size: (u32, u32), draw: F) -> Result<String, PlotError>
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

/// The line through `points`, or nothing when there are none (an empty
/// polyline would still be emitted as an element).
pub(super) fn polyline(
    points: &[(f64, f64)],
    color: RGBColor,
    width: u32,
) -> Option<PathElement<(f64, f64)>> {
    (!points.is_empty()).then(|| PathElement::new(points.to_vec(), color.stroke_width(width)))
}

/// Line colours, chosen to stay distinct on white.
pub(super) fn palette(idx: usize) -> RGBColor {
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

/// Text safe to place in XML: control characters become spaces (the SVG
/// backend escapes markup characters itself).
pub(super) fn clean_text(text: &str) -> String {
    text.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

/// A failure of the plotting library as a [`PlotError`].
pub(super) fn render_error<E: fmt::Display>(error: E) -> PlotError {
    PlotError::Render(error.to_string())
}
