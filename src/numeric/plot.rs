//! SVG plots of numerical results: state trajectories against time, and
//! errors against the small parameter on log–log axes.
//!
//! This module owns turning plain `f64` data into an SVG file (drawn with
//! plotters' SVG backend) and writing it atomically. It guards every input
//! that could make the plotting library misbehave (no data, NaN, equal
//! values, ranges too wide for `f64`). It knows nothing about integrators,
//! sessions or where the data came from.

use std::fmt;
use std::ops::Range;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

use plotters::coord::Shift;
use plotters::prelude::*;

/// Why a plot could not be made or saved.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum PlotError {
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
    /// The file could not be written.
    Io {
        /// The file that was being written.
        path: PathBuf,
        /// The operating system's message.
        message: String,
    },
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
            PlotError::Io { path, message } => {
                write!(f, "cannot write {}: {message}", path.display())
            }
        }
    }
}

impl std::error::Error for PlotError {}

/// Plot each state component against time, one line per component, with a
/// legend naming them, and write the SVG to `path`.
///
/// `series[k]` holds component `k` at each of the `times` and is labelled
/// `names[k]`. Points whose time or value is not finite are left out of
/// the line. Constant data is drawn on a padded axis. An error is returned
/// when lengths disagree, no point is usable or the values overflow an
/// axis (such as `-f64::MAX` with `f64::MAX`); the file is then untouched.
pub fn time_series_svg(
    path: &Path,
    title: &str,
    names: &[String],
    times: &[f64],
    series: &[Vec<f64>],
) -> Result<(), PlotError> {
    check_len("the list of series", names.len(), series.len())?;
    let mut lines = Vec::with_capacity(series.len());
    for (name, values) in names.iter().zip(series) {
        check_len(&format!("series {name}"), times.len(), values.len())?;
        let points: Vec<(f64, f64)> = times
            .iter()
            .zip(values)
            .filter(|(t, v)| t.is_finite() && v.is_finite())
            .map(|(t, v)| (*t, *v))
            .collect();
        lines.push((name.clone(), points));
    }
    let all = || lines.iter().flat_map(|(_, points)| points.iter());
    let x_range = linear_range(all().map(|p| p.0))?;
    let y_range = linear_range(all().map(|p| p.1))?;

    let svg = render(|area| {
        let mut chart = ChartBuilder::on(area)
            .caption(clean_text(title), ("sans-serif", 24))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(x_range.clone(), y_range.clone())
            .map_err(render_error)?;
        chart
            .configure_mesh()
            .x_desc("t")
            .y_desc("state")
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .draw()
            .map_err(render_error)?;
        for (idx, (name, points)) in lines.iter().enumerate() {
            let color = palette(idx);
            chart
                .draw_series(polyline(points, color))
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
        draw_legend(&mut chart)
    })?;
    write_atomically(path, &svg)
}

/// Plot error against the small parameter on log–log axes, one line with
/// markers per order, with a legend of the labels, and write the SVG to
/// `path`.
///
/// Each entry of `per_order` is a label (such as "order 1") and the errors
/// at each of the `eps` values. Points where eps or the error is not a
/// number in `1e-300..=1e300` are skipped; an order with no usable point is
/// still listed in the legend, marked as having no data. An error is
/// returned when lengths disagree, no point at all is usable, or the
/// usable values span more than 280 decades.
pub fn error_vs_eps_svg(
    path: &Path,
    title: &str,
    eps: &[f64],
    per_order: &[(String, Vec<f64>)],
) -> Result<(), PlotError> {
    let mut lines = Vec::with_capacity(per_order.len());
    for (label, errors) in per_order {
        check_len(&format!("the errors of {label}"), eps.len(), errors.len())?;
        let points: Vec<(f64, f64)> = eps
            .iter()
            .zip(errors)
            .filter(|(x, y)| is_loggable(**x) && is_loggable(**y))
            .map(|(x, y)| (*x, *y))
            .collect();
        lines.push((label.clone(), points));
    }
    let all = || lines.iter().flat_map(|(_, points)| points.iter());
    let x_range = log_range(all().map(|p| p.0))?;
    let y_range = log_range(all().map(|p| p.1))?;

    let svg = render(|area| {
        let mut chart = ChartBuilder::on(area)
            .caption(clean_text(title), ("sans-serif", 24))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(70)
            .build_cartesian_2d(x_range.clone().log_scale(), y_range.clone().log_scale())
            .map_err(render_error)?;
        chart
            .configure_mesh()
            .x_desc("eps")
            .y_desc("error")
            .label_style(("sans-serif", 14))
            .axis_desc_style(("sans-serif", 16))
            .x_label_formatter(&|v| format!("{v:.1e}"))
            .y_label_formatter(&|v| format!("{v:.1e}"))
            .draw()
            .map_err(render_error)?;
        for (idx, (label, points)) in lines.iter().enumerate() {
            let color = palette(idx);
            chart
                .draw_series(polyline(points, color))
                .map_err(render_error)?
                .label(legend_label(label, points.is_empty()))
                .legend(move |(x, y)| legend_mark(x, y, color));
            chart
                .draw_series(points.iter().map(|&p| Circle::new(p, 3, color.filled())))
                .map_err(render_error)?;
        }
        draw_legend(&mut chart)
    })?;
    write_atomically(path, &svg)
}

/// Width and height of every plot, in SVG user units.
const SIZE: (u32, u32) = (800, 500);

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

/// Render a chart into an SVG string. A panic inside the plotting library
/// (which the range guards should already rule out) becomes an error.
fn render<F>(draw: F) -> Result<String, PlotError>
where
    F: FnOnce(&Area<'_>) -> Result<(), PlotError>,
{
    let mut svg = String::new();
    let outcome = catch_unwind(AssertUnwindSafe(|| {
        let area = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
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
) -> Result<(), PlotError>
where
    'b: 'a,
    X: Ranged,
    Y: Ranged,
{
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 14))
        .draw()
        .map_err(render_error)
}

/// The line through `points`, or nothing when there are none (an empty
/// polyline would still be emitted as an element).
fn polyline(points: &[(f64, f64)], color: RGBColor) -> Option<PathElement<(f64, f64)>> {
    (!points.is_empty()).then(|| PathElement::new(points.to_vec(), color.stroke_width(2)))
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
/// values are equal), extended down to a power of ten so that the axis
/// always carries a labelled tick.
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
    let lo = 10f64.powf((lo_log - pad).min(lo_log.floor()).max(-305.0));
    let hi = 10f64.powf((hi_log + pad).min(305.0));
    if lo.is_normal() && hi.is_normal() && hi > lo {
        Ok(lo..hi)
    } else {
        Err(PlotError::RangeTooWide)
    }
}

/// Write `text` to `path` through the one safe writer of the crate
/// (`lang::files::write_file`, a leaf module of std calls only): atomic,
/// through symbolic links, keeping permissions, refusing devices,
/// directories and `.ordex` scripts.
fn write_atomically(path: &Path, text: &str) -> Result<(), PlotError> {
    crate::lang::files::write_file(path, text.as_bytes(), crate::lang::files::FileKind::Plot)
        .map_err(|message| PlotError::Io {
            path: path.to_path_buf(),
            message,
        })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use std::fs;

    /// A fresh directory under the system temporary directory.
    struct TempDir(PathBuf);

    impl TempDir {
        fn new(tag: &str) -> TempDir {
            let dir =
                std::env::temp_dir().join(format!("ordex-plot-test-{}-{tag}", std::process::id()));
            let _ = fs::remove_dir_all(&dir);
            fs::create_dir_all(&dir).unwrap();
            TempDir(dir)
        }

        fn file(&self, name: &str) -> PathBuf {
            self.0.join(name)
        }

        fn entries(&self) -> Vec<String> {
            let mut names: Vec<String> = fs::read_dir(&self.0)
                .unwrap()
                .map(|entry| entry.unwrap().file_name().to_string_lossy().into_owned())
                .collect();
            names.sort();
            names
        }
    }

    impl Drop for TempDir {
        fn drop(&mut self) {
            let _ = fs::remove_dir_all(&self.0);
        }
    }

    /// Structural checks every written plot must pass; returns the text.
    fn check_svg(path: &Path, n_lines: usize, labels: &[&str]) -> String {
        let text = fs::read_to_string(path).unwrap();
        assert!(text.starts_with("<svg"), "{}", &text[..text.len().min(80)]);
        assert!(text.trim_end().ends_with("</svg>"));
        assert_eq!(text.matches("<svg").count(), 1);
        // Every element is either self-closing or closed.
        for tag in ["text", "svg"] {
            assert_eq!(
                text.matches(&format!("<{tag}")).count(),
                text.matches(&format!("</{tag}>")).count(),
                "unbalanced <{tag}>"
            );
        }
        // Data lines are drawn 2 units wide; axes and ticks 1 unit wide.
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
        text
    }

    fn names(list: &[&str]) -> Vec<String> {
        list.iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn time_series_has_one_line_per_component() {
        let dir = TempDir::new("series");
        let times: Vec<f64> = (0..200).map(|i| i as f64 * 0.1).collect();
        let q: Vec<f64> = times.iter().map(|t| t.cos()).collect();
        let p: Vec<f64> = times.iter().map(|t| -t.sin()).collect();
        let path = dir.file("boom.svg");
        time_series_svg(&path, "swinging boom", &names(&["q", "p"]), &times, &[q, p]).unwrap();
        check_svg(&path, 2, &["swinging boom", "q", "p", "t", "state"]);
        assert_eq!(dir.entries(), vec!["boom.svg".to_string()]);
    }

    #[test]
    fn error_plot_has_one_line_per_order_and_a_legend() {
        let dir = TempDir::new("errors");
        let eps = [0.2, 0.1, 0.05, 0.025];
        let per_order = vec![
            ("order 1".to_string(), vec![4e-2, 1e-2, 2.5e-3, 6.25e-4]),
            ("order 2".to_string(), vec![8e-3, 1e-3, f64::NAN, 1.25e-4]),
            (
                "order 3".to_string(),
                vec![0.0, -1.0, f64::NAN, f64::INFINITY],
            ),
        ];
        let path = dir.file("errors.svg");
        error_vs_eps_svg(&path, "error against eps", &eps, &per_order).unwrap();
        let text = check_svg(
            &path,
            2,
            &["order 1", "order 2", "order 3 (no data)", "eps"],
        );
        // One marker per usable point: 4 + 3.
        assert_eq!(text.matches("<circle").count(), 7);
    }

    #[test]
    fn markup_in_titles_and_labels_is_escaped() {
        let dir = TempDir::new("escape");
        let path = dir.file("escape.svg");
        let labels = names(&["a<b", "x & \"y\"\u{0}"]);
        time_series_svg(
            &path,
            "<title>",
            &labels,
            &[0.0, 1.0],
            &[vec![1.0, 2.0], vec![2.0, 1.0]],
        )
        .unwrap();
        let text = check_svg(
            &path,
            2,
            &["&lt;title&gt;", "a&lt;b", "x &amp; &quot;y&quot; "],
        );
        assert!(!text.contains("<title>") && !text.contains('\u{0}'));
    }

    #[test]
    fn degenerate_but_drawable_data_gives_valid_plots() {
        let dir = TempDir::new("degenerate");
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
        for (idx, (times, values)) in cases.into_iter().enumerate() {
            let path = dir.file(&format!("case{idx}.svg"));
            time_series_svg(&path, "case", &one, &times, &[values]).unwrap();
            check_svg(&path, 1, &["x"]);
        }
        let eps_cases: Vec<(Vec<f64>, Vec<f64>)> = vec![
            (vec![0.1, 0.1], vec![1e-3, 1e-3]),
            (vec![0.1], vec![1e-3]),
            (vec![1e-300, 1e-30], vec![1e-300, 1e-30]),
            (vec![0.1, 0.2], vec![1e-310, 1e-300]),
            (vec![0.02, 0.08], vec![2e-3, 8e-3]),
            (vec![0.1, 0.2], vec![1.0, 1.0 + 1e-15]),
        ];
        for (idx, (eps, errors)) in eps_cases.into_iter().enumerate() {
            let path = dir.file(&format!("eps{idx}.svg"));
            let per_order = vec![("order 1".to_string(), errors)];
            error_vs_eps_svg(&path, "case", &eps, &per_order).unwrap();
            check_svg(&path, 1, &["order 1"]);
        }
    }

    #[test]
    fn unusable_data_is_an_error_and_writes_nothing() {
        let dir = TempDir::new("errors-out");
        let path = dir.file("never.svg");
        let one = names(&["x"]);
        let nan = f64::NAN;
        assert_eq!(
            time_series_svg(&path, "t", &one, &[], &[vec![]]),
            Err(PlotError::NoData)
        );
        assert_eq!(
            time_series_svg(&path, "t", &[], &[1.0], &[]),
            Err(PlotError::NoData)
        );
        assert_eq!(
            time_series_svg(&path, "t", &one, &[1.0, nan], &[vec![nan, 1.0]]),
            Err(PlotError::NoData)
        );
        assert!(matches!(
            time_series_svg(&path, "t", &one, &[1.0, 2.0], &[vec![1.0]]),
            Err(PlotError::LengthMismatch {
                expected: 2,
                found: 1,
                ..
            })
        ));
        assert!(matches!(
            time_series_svg(&path, "t", &one, &[1.0], &[vec![1.0], vec![2.0]]),
            Err(PlotError::LengthMismatch {
                expected: 1,
                found: 2,
                ..
            })
        ));
        assert_eq!(
            time_series_svg(&path, "t", &one, &[0.0, 1.0], &[vec![-f64::MAX, f64::MAX]]),
            Err(PlotError::RangeTooWide)
        );
        let zeros = vec![("order 1".to_string(), vec![0.0, -1.0])];
        assert_eq!(
            error_vs_eps_svg(&path, "e", &[0.1, 0.2], &zeros),
            Err(PlotError::NoData)
        );
        assert_eq!(
            error_vs_eps_svg(&path, "e", &[0.1, 0.2], &[]),
            Err(PlotError::NoData)
        );
        assert!(matches!(
            error_vs_eps_svg(&path, "e", &[0.1], &zeros),
            Err(PlotError::LengthMismatch { .. })
        ));
        let subnormal = vec![("order 1".to_string(), vec![1e-310, 1e-320])];
        assert_eq!(
            error_vs_eps_svg(&path, "e", &[0.1, 0.2], &subnormal),
            Err(PlotError::NoData)
        );
        let wide = vec![("order 1".to_string(), vec![1e-300, 1e300])];
        assert_eq!(
            error_vs_eps_svg(&path, "e", &[0.1, 0.2], &wide),
            Err(PlotError::RangeTooWide)
        );
        assert!(dir.entries().is_empty());
    }

    #[test]
    fn unwritable_paths_are_io_errors() {
        let dir = TempDir::new("io");
        let one = names(&["x"]);
        let missing = dir.file("no/such/dir/plot.svg");
        let res = time_series_svg(&missing, "t", &one, &[0.0, 1.0], &[vec![0.0, 1.0]]);
        assert!(matches!(res, Err(PlotError::Io { .. })), "{res:?}");
        let res = time_series_svg(Path::new("/"), "t", &one, &[0.0, 1.0], &[vec![0.0, 1.0]]);
        assert!(matches!(res, Err(PlotError::Io { .. })), "{res:?}");
        // A directory in the way of the rename leaves no temporary file.
        let blocked = dir.file("taken.svg");
        fs::create_dir(&blocked).unwrap();
        let res = time_series_svg(&blocked, "t", &one, &[0.0, 1.0], &[vec![0.0, 1.0]]);
        assert!(matches!(res, Err(PlotError::Io { .. })), "{res:?}");
        assert_eq!(dir.entries(), vec!["taken.svg".to_string()]);
    }

    #[test]
    fn existing_files_are_replaced() {
        let dir = TempDir::new("replace");
        let path = dir.file("plot.svg");
        fs::write(&path, "old contents").unwrap();
        time_series_svg(&path, "t", &names(&["x"]), &[0.0, 1.0], &[vec![0.0, 1.0]]).unwrap();
        check_svg(&path, 1, &["x"]);
        assert_eq!(dir.entries(), vec!["plot.svg".to_string()]);
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
            PlotError::Io {
                path: PathBuf::from("a.svg"),
                message: "denied".to_string(),
            },
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
        // input that makes it panic, and a success writes a valid file.
        #[test]
        fn wild_data_never_breaks_the_plots(
            times in proptest::collection::vec(wild_value(), 0..6),
            values in proptest::collection::vec(wild_value(), 12),
        ) {
            let dir = TempDir::new("wild");
            let n = times.len();
            let series = vec![values[..n].to_vec(), values[6..6 + n].to_vec()];
            let path = dir.file("series.svg");
            match time_series_svg(&path, "wild", &names(&["a", "b"]), &times, &series) {
                Ok(()) => {
                    let text = fs::read_to_string(&path).unwrap();
                    prop_assert!(text.starts_with("<svg"));
                }
                Err(PlotError::Render(message)) => prop_assert!(false, "render failed: {}", message),
                Err(_) => prop_assert!(!path.exists()),
            }
            let per_order = vec![
                ("order 1".to_string(), values[..n].to_vec()),
                ("order 2".to_string(), values[6..6 + n].to_vec()),
            ];
            let path = dir.file("errors.svg");
            match error_vs_eps_svg(&path, "wild", &times, &per_order) {
                Ok(()) => {
                    let text = fs::read_to_string(&path).unwrap();
                    prop_assert!(text.starts_with("<svg"));
                }
                Err(PlotError::Render(message)) => prop_assert!(false, "render failed: {}", message),
                Err(_) => prop_assert!(!path.exists()),
            }
        }
    }
}
