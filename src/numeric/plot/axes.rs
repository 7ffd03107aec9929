//! Axis ranges and tick marks. The plotting library loops forever or
//! panics on some ranges (too narrow, too wide, non-finite); every range it
//! sees comes from here, and these functions refuse or widen such ranges.

use std::ops::Range;

use super::PlotError;

/// A linear axis range around the values with a 5% margin.
///
/// The plotting library picks tick marks by refining a step until enough
/// fit; it loops forever when the range is so narrow (relative to its
/// position, or in absolute terms near the subnormal numbers) that the
/// step underflows. So a spread below `1e-9` of the magnitude is widened to
/// 10% of the magnitude, and values all below `1e-250` in size are shown on
/// the axis `-1..1`.
pub(super) fn linear_range(values: impl Iterator<Item = f64>) -> Result<Range<f64>, PlotError> {
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
pub(super) const MAX_DECADES: f64 = 280.0;

/// A logarithmic axis range around values that pass [`is_loggable`], with
/// a margin of 5% of the decades spanned (a factor 1.5 each way when all
/// values are equal), extended down to a power of ten when that is needed
/// for the axis to carry two labelled ticks.
pub(super) fn log_range(values: impl Iterator<Item = f64>) -> Result<Range<f64>, PlotError> {
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

/// Whether a value can sit on a log axis: positive and within
/// `1e-300..=1e300`, beyond which numbers stop behaving (as errors, values
/// that small are zero for all practical purposes).
pub(super) fn is_loggable(value: f64) -> bool {
    (1e-300..=1e300).contains(&value)
}

/// Tick marks on a log axis: the powers of ten in the range, with 2 and 5
/// times them when there are few decades, and every digit when the range
/// is within a decade or two; at most about a dozen.
pub(super) fn log_ticks(range: &Range<f64>) -> Vec<f64> {
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
pub(super) fn tick_label(v: f64, span: f64) -> String {
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
pub(super) fn short_sci(v: f64) -> String {
    let s = format!("{v:.1e}");
    match s.split_once('e') {
        Some((m, e)) => format!("{}e{e}", m.trim_end_matches('0').trim_end_matches('.')),
        None => s,
    }
}

/// The points whose coordinates are both finite.
pub(super) fn finite_points(xs: &[f64], ys: &[f64]) -> Vec<(f64, f64)> {
    xs.iter()
        .zip(ys)
        .filter(|(t, v)| t.is_finite() && v.is_finite())
        .map(|(t, v)| (*t, *v))
        .collect()
}
