//! Tests of the SVG plots: structure, guards against unusable data, legend
//! placement.

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
        let text = time_series_svg("case", &one, &times, std::slice::from_ref(&values)).unwrap();
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
