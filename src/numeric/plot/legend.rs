//! The legend: where it goes (a corner free of data, or room made at the
//! top), how it is drawn, and its swatches and labels.

use std::ops::Range;

use plotters::prelude::*;

use super::svg::{clean_text, render_error};
use super::PlotError;

/// Where a legend goes: the corner of the plotting area with the fewest
/// data points under the legend box; when every corner has some, the
/// vertical axis grows at the top to make room and the legend goes there,
/// so that it never hides data.
pub(super) struct Legend {
    /// The box as fractions of the plotting area.
    width: f64,
    height: f64,
}

impl Legend {
    /// A legend of `labels` on a plotting area of about `area` pixels.
    pub(super) fn new(labels: &[&str], area: (f64, f64)) -> Legend {
        let chars = labels.iter().map(|l| l.chars().count()).max().unwrap_or(0) as f64;
        let width = (40.0 + 7.5 * chars) / area.0;
        let height = (12.0 + 19.0 * labels.len() as f64) / area.1;
        Legend {
            width: width.min(0.9),
            height: height.min(0.6),
        }
    }

    /// The corner and the (possibly grown) vertical range.
    pub(super) fn place(
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

/// Draws the legend of `chart` at `position`, on a pale box.
pub(super) fn draw_legend<'a, 'b, X, Y>(
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

/// The legend swatch: a filled bar, so that the only polylines in the file
/// are the data lines.
pub(super) fn legend_mark(x: i32, y: i32, color: RGBColor) -> Rectangle<(i32, i32)> {
    Rectangle::new([(x, y - 3), (x + 18, y + 3)], color.filled())
}

/// A legend label: clean text, marked when its line has no point.
pub(super) fn legend_label(label: &str, no_data: bool) -> String {
    let label = clean_text(label);
    if no_data {
        format!("{label} (no data)")
    } else {
        label
    }
}
