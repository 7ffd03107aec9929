//! SVG plots of numerical results: state trajectories against time, the
//! true and averaged trajectories overlaid (a panel per state), phase
//! portraits, and errors against the small parameter on log–log axes.
//!
//! This module owns turning plain `f64` data into SVG text (drawn with
//! plotters' SVG backend); the language side writes it to a file. It guards every input
//! that could make the plotting library misbehave (no data, NaN, equal
//! values, ranges too wide for `f64`). It knows nothing about integrators,
//! sessions or where the data came from.
//!
//! The rooms: `series` (states against time, true and averaged paths),
//! `phase` (phase portraits), `errors` (errors against the small parameter
//! on log–log axes), `axes` (ranges and ticks that keep the plotting
//! library out of its failure modes), `legend` (where the legend goes and
//! how it looks), `svg` (the canvas, sizes, colours, lines, text).

use std::fmt;

mod axes;
mod errors;
mod legend;
mod phase;
mod series;
mod svg;

pub(crate) use errors::error_vs_eps_svg;
pub(crate) use phase::phase_svg;
pub(crate) use series::{paths_svg, time_series_svg};

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

pub(super) fn check_len(what: &str, expected: usize, found: usize) -> Result<(), PlotError> {
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

#[cfg(test)]
mod tests;
