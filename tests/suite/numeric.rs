//! The numerical commands end to end: `compare` slopes against theory,
//! the plot files, `stability`, `simulate`, and their error messages.

use ordex::lang::{Event, Session};

fn run(text: &str) -> (String, i32) {
    let mut session = Session::new();
    session.show_timing = false;
    let mut out = String::new();
    let status = session.run_text(text, Some("test"), &mut |e| match e {
        Event::Report(r) => {
            for l in r.lines {
                out.push_str(&l.text);
                out.push('\n');
            }
        }
        Event::Error(m) => {
            out.push_str(&m);
            out.push('\n');
        }
    });
    (out, status.exit_code())
}

fn slopes(out: &str) -> Vec<f64> {
    out.lines()
        .filter_map(|l| l.strip_prefix("slope order "))
        .filter_map(|l| l.split(": ").nth(1))
        .filter_map(|v| v.split_whitespace().next())
        .filter_map(|v| v.parse().ok())
        .collect()
}

/// A system of our own in standard form, 2*pi-periodic. Over a fixed slow
/// horizon eps*t <= 2 the order-k averaged model (stroboscopic: same
/// coordinates at multiples of the period; classical: through its
/// transform) differs from the system by O(eps^k): the fitted slope of
/// log(error) against log(eps) should be k. The averaging theorem behind
/// this: Sanders, Verhulst & Murdock, "Averaging Methods in Nonlinear
/// Dynamical Systems", 2nd ed. (2007), §2.9 (from memory). The eps range
/// 0.2..0.025 keeps the error well above the integrator tolerance (1e-11
/// relative) and in the asymptotic regime.
const SYSTEM: &str = "state x, y\nparam eps\nS = eps*[-x/4 + y^2*cos(t) + x*y*sin(t)/2, -y/3 + x^2*cos(t) + x*y*sin(2*t)]\n";

#[test]
fn stroboscopic_errors_fall_with_the_order() {
    let svg = std::env::temp_dir().join(format!("ordex-compare-{}.svg", std::process::id()));
    let text = format!(
        "{SYSTEM}A = average S to 3 in eps\ncompare S with A from x=0.5, y=0.3 for 2 sweep eps=0.2,0.1,0.05,0.025 tol 1e-4 plot \"{}\"\n",
        svg.display()
    );
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    let s = slopes(&out);
    assert_eq!(s.len(), 3, "{out}");
    for (k, sl) in s.iter().enumerate() {
        let want = (k + 1) as f64;
        assert!(
            (sl - want).abs() <= 0.3,
            "order {}: slope {sl}, expected {want}\n{out}",
            k + 1
        );
    }
    assert!(
        out.contains("tol 1.000e-4: order 3 meets it up to eps = 0.1"),
        "{out}"
    );
    // The table states the norm, the horizon and the tolerance.
    assert!(out.contains("over eps*t <= 2"), "{out}");
    assert!(
        out.contains("largest Euclidean distance in (x, y)"),
        "{out}"
    );
    assert!(
        out.contains("tolerance 1e-11 (relative; absolute 1e-13)"),
        "{out}"
    );
    let plot = std::fs::read_to_string(&svg).expect("plot written");
    let _ = std::fs::remove_file(&svg);
    assert!(plot.trim_start().starts_with("<svg"), "not an SVG");
    for k in 1..=3 {
        assert!(
            plot.contains(&format!("order {k}")),
            "legend lacks order {k}"
        );
    }
}

#[test]
fn classical_errors_fall_with_the_order_through_the_transform() {
    let text = format!("{SYSTEM}C = average S to 3 in eps classic\ncompare S with C from x=0.5, y=0.3 for 2 sweep eps=0.2,0.1,0.05,0.025\n");
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    let s = slopes(&out);
    assert_eq!(s.len(), 3, "{out}");
    for (k, sl) in s.iter().enumerate() {
        assert!(
            (sl - (k + 1) as f64).abs() <= 0.3,
            "order {}: slope {sl}\n{out}",
            k + 1
        );
    }
}

#[test]
fn stability_of_the_averaged_inverted_pendulum() {
    // Upright boom: p' = (gam - bet^2/2)(th - pi); with gam = 12.26 and
    // bet = 6.1 the Jacobian is {0, 1; -6.345, 0}: a centre (DESIGN §5).
    let text = "state th, p\nparam eps, gam, bet\nS = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]\nA = average S to 1 in eps\nstability order(A, eps, 1) at th = pi, p = 0 with gam = 12.26, bet = 6.1\nstability order(A, eps, 1) at th = pi, p = 0\n";
    let (out, code) = run(text);
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("Jacobian {0, 1; -1269/200, 0}"), "{out}");
    assert!(out.contains("eigenvalues ±2.518928i"), "{out}");
    assert!(out.contains("a centre"), "{out}");
    assert!(
        out.contains("characteristic polynomial det(lambda*I - J) = -gam + 1/2*bet^2 + lambda^2"),
        "{out}"
    );
}

#[test]
fn simulate_matches_a_closed_form() {
    // x' = y, y' = -x from (1, 0): x(t) = cos t.
    let (out, code) = run("state x, y\nX = [y, -x]\nsimulate X from x=1, y=0 for 10\n");
    assert_eq!(code, 0, "{out}");
    let last = out
        .lines()
        .find(|l| l.trim_start().starts_with("10 "))
        .expect("row at t = 10");
    let x: f64 = last
        .split_whitespace()
        .nth(1)
        .and_then(|v| v.parse().ok())
        .expect("x value");
    assert!((x - 10f64.cos()).abs() < 1e-6, "{last}");
}

#[test]
fn missing_values_are_named() {
    let (out, code) = run("state x, y\nparam k\nX = [y, -k*x]\nsimulate X from x=1, y=0 for 1\n");
    assert_eq!(code, 2);
    assert!(out.contains("no value for `k`"), "{out}");
    let (out, code) = run("state x, y\nX = [y, -x]\nsimulate X from x=1 for 1\n");
    assert_eq!(code, 2);
    assert!(out.contains("missing: y"), "{out}");
    let (out, code) = run("state x, y\nparam eps\nX = eps*[y, -x]\ncompare X with X from x=1, y=0 for 1 sweep eps=0.1\n");
    assert_eq!(code, 2);
    assert!(out.contains("must be the result of `average`"), "{out}");
}

/// The committed SciPy reference (scripts/fixtures/gen_compare.py):
/// `(case, eps, order) -> (periods, max_error)`.
fn scipy_reference() -> Vec<(String, f64, usize, usize, f64)> {
    let text = include_str!("../fixtures/scipy/compare_planar_trig.csv");
    text.lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("case"))
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].to_string(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
                f[3].parse().unwrap(),
                f[4].parse().unwrap(),
            )
        })
        .collect()
}

/// Rows of a `table` CSV: `(eps, order, time, error, at_floor)`.
fn csv_rows(path: &std::path::Path) -> Vec<(f64, usize, f64, f64, bool)> {
    let text = std::fs::read_to_string(path).expect("table written");
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("eps,order,time,error,at_floor"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            assert_eq!(f.len(), 5, "{l}");
            (
                f[0].parse().unwrap(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
                f[3].parse().unwrap(),
                f[4].parse().unwrap(),
            )
        })
        .collect()
}

fn largest(rows: &[(f64, usize, f64, f64, bool)], eps: f64, order: usize) -> (f64, bool, usize) {
    let mine: Vec<_> = rows.iter().filter(|r| r.0 == eps && r.1 == order).collect();
    let max = mine.iter().map(|r| r.3).fold(0.0, f64::max);
    (max, mine.first().is_some_and(|r| r.4), mine.len())
}

fn temp(name: &str) -> std::path::PathBuf {
    std::env::temp_dir().join(format!("ordex-{}-{name}", std::process::id()))
}

// The numbers of a `compare` table against an independent integrator:
// SciPy's solve_ivp (DOP853, rtol 1e-13) on the same system and its
// stroboscopic model (fields derived by SymPy), committed as a fixture.
// Every (eps, order) that is not at the integrator's floor agrees to 1e-4
// relative, and the CSV has one row per sample time m*2*pi <= L/eps^p (the
// fixture's period counts, for `for 2` and for `for 1/eps^2`).
#[test]
fn compare_table_matches_scipy() {
    let reference = scipy_reference();
    for (case, horizon, sweep) in [
        ("slow", "2", "0.2, 0.1, 0.05, 0.025, 0.0125, 0.00625"),
        ("slow2", "1/eps^2", "0.2, 0.1, 0.05"),
    ] {
        let csv = temp(&format!("{case}.csv"));
        let text = format!(
            "{SYSTEM}A = average S to 3 in eps\nset tolerance 1e-12\ncompare S with A from x=0.5, y=0.3 for {horizon} sweep eps = {sweep} table \"{}\"\n",
            csv.display()
        );
        let (out, code) = run(&text);
        assert_eq!(code, 0, "{out}");
        if case == "slow2" {
            assert!(out.contains("over eps^2*t <= 1"), "{out}");
        }
        let rows = csv_rows(&csv);
        let _ = std::fs::remove_file(&csv);
        let mine: Vec<_> = reference.iter().filter(|r| r.0 == case).collect();
        let expected_rows: usize = mine.iter().map(|r| r.3).sum();
        assert_eq!(rows.len(), expected_rows, "{case}: one row per sample");
        for (_, eps, order, periods, want) in mine {
            let (got, floor, n) = largest(&rows, *eps, *order);
            assert_eq!(n, *periods, "{case} eps {eps} order {order}");
            if !floor {
                let rel = (got - want).abs() / want;
                assert!(
                    rel < 1e-4,
                    "{case} eps {eps} order {order}: {got} vs SciPy {want}\n{out}"
                );
            }
        }
    }
}

// Known asymptotic order: over eps*t <= L the order-k averaged model is
// O(eps^k) close to the system (Sanders, Verhulst & Murdock, "Averaging
// Methods in Nonlinear Dynamical Systems", 2nd ed. 2007, §2.9, from
// memory). The SciPy errors themselves give the same slopes.
#[test]
fn fitted_slopes_are_the_orders_and_name_their_eps() {
    let text = format!(
        "{SYSTEM}A = average S to 3 in eps\ncompare S with A from x=0.5, y=0.3 for 2 sweep eps = 0.2, 0.1, 0.05, 0.025, 0.0125\n"
    );
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    let s = slopes(&out);
    let reference = scipy_reference();
    for k in 1..=3 {
        let pts: Vec<(f64, f64)> = reference
            .iter()
            .filter(|r| r.0 == "slow" && r.2 == k && r.1 >= 0.0125)
            .map(|r| (r.1, r.4))
            .collect();
        let xs: Vec<f64> = pts.iter().map(|p| p.0).collect();
        let ys: Vec<f64> = pts.iter().map(|p| p.1).collect();
        let theirs = ordex::numeric::fit::loglog_slope(&xs, &ys).unwrap();
        assert!(
            (s[k - 1] - k as f64).abs() < 0.15,
            "order {k}: {}\n{out}",
            s[k - 1]
        );
        assert!(
            (s[k - 1] - theirs).abs() < 0.02,
            "order {k}: {} vs SciPy {theirs}",
            s[k - 1]
        );
    }
    assert!(
        out.contains("slope order 3: 3.07 (fit over eps = 0.2, 0.1, 0.05, 0.025, 0.0125: local slopes settled)"),
        "{out}"
    );
    // Local slopes between consecutive eps.
    assert_eq!(
        out.lines()
            .filter(|l| l.trim_start().starts_with("slope  "))
            .count(),
        4,
        "{out}"
    );
}

// With a loose integration tolerance the smallest errors reach the
// integrator's floor: they are marked, left out of the fits, and the line
// says so. Every point not marked still agrees with SciPy to 20% (the
// floor rule leaves at most about a tenth of integration error).
#[test]
fn floor_points_are_marked_and_left_out() {
    let csv = temp("floor.csv");
    let text = format!(
        "{SYSTEM}A = average S to 3 in eps\nset tolerance 1e-7\ncompare S with A from x=0.5, y=0.3 for 2 sweep eps = 0.2, 0.1, 0.05, 0.025, 0.0125, 0.00625 table \"{}\"\n",
        csv.display()
    );
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("integration tolerance 1e-7"), "{out}");
    assert!(
        out.contains("tolerance 1e-7 (relative; absolute 1e-9)"),
        "{out}"
    );
    let rows = csv_rows(&csv);
    let _ = std::fs::remove_file(&csv);
    let reference = scipy_reference();
    let mut marked = 0;
    for (_, eps, order, _, want) in reference.iter().filter(|r| r.0 == "slow") {
        let (got, floor, _) = largest(&rows, *eps, *order);
        if floor {
            marked += 1;
            assert!(out.contains("*"), "{out}");
        } else {
            assert!(
                (got - want).abs() < 0.2 * want,
                "eps {eps} order {order}: {got} vs {want}\n{out}"
            );
        }
    }
    assert!(marked >= 1, "{out}");
    let line = out
        .lines()
        .find(|l| l.starts_with("slope order 3:"))
        .unwrap();
    assert!(
        line.contains("at the integrator's floor, left out: eps = "),
        "{line}"
    );
    assert!(out.contains("* at the integrator's floor"), "{out}");
    let s = slopes(&out);
    assert!((s[2] - 3.0).abs() < 0.15, "{out}");
    // A tolerance outside the range is refused.
    let (out, code) = run("set tolerance 1e-20\n");
    assert_eq!(code, 2);
    assert!(out.contains("must be a number from"), "{out}");
}

#[test]
fn horizons_must_be_powers_of_eps() {
    let (out, code) = run(&format!(
        "{SYSTEM}A = average S to 1 in eps\ncompare S with A from x=0.5, y=0.3 for eps sweep eps = 0.1\n"
    ));
    assert_eq!(code, 2);
    assert!(
        out.contains("the horizon must be `L` (meaning eps*t <= L) or `L/eps^k`"),
        "{out}"
    );
}

// The inverted position of a boom on a vibrating pivot, averaged: stable
// (a centre of the averaged model) when bet^2 > 2*gam, a saddle when
// bet^2 < 2*gam (Landau & Lifshitz, Mechanics, 3rd ed. 1976, §30,
// REFERENCES §6).
#[test]
fn equilibria_finds_the_inverted_boom() {
    let base = "state th, p\nparam eps, gam, bet, alp\nS = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]\nA = average S to 1 in eps\nF = order(A, eps, 1)\n";
    let (out, code) = run(&format!(
        "{base}equilibria F near th = 3, p = 0.1 with gam = 1, bet = 2\n"
    ));
    assert_eq!(code, 0, "{out}");
    assert!(
        out.contains("equilibrium th = 3.141592654, p = 0 (residual |F| = "),
        "{out}"
    );
    assert!(
        out.contains("exactly th = pi, p = 0: the field vanishes there"),
        "{out}"
    );
    assert!(
        out.contains("Jacobian {0, 1; 1, 0}") || out.contains("Jacobian {0, 1; -1, 0}"),
        "{out}"
    );
    assert!(out.contains("a centre"), "{out}");
    let (out, code) = run(&format!(
        "{base}equilibria F near th = 3, p = 0 with gam = 3, bet = 2\n"
    ));
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("a saddle"), "{out}");
    // An equilibrium off the multiples of pi: cos(th) = -2*gam/bet^2.
    let (out, code) = run(&format!(
        "{base}equilibria F near th = 2, p = 0 with gam = 1, bet = 2\n"
    ));
    assert_eq!(code, 0, "{out}");
    let want = (-0.5f64).acos();
    assert!(
        out.contains(&format!("equilibrium th = {want:.9}")),
        "{want}\n{out}"
    );
    assert!(out.contains("Jacobian (decimals)"), "{out}");
    // No equilibrium: a clear message.
    let (out, code) = run("state x, y\nX = [x^2 + 1, y]\nequilibria X near x = 0.5, y = 0\n");
    assert_eq!(code, 2);
    assert!(
        out.contains("did not converge") || out.contains("singular"),
        "{out}"
    );
}

#[test]
fn stability_accepts_parameters_and_decimals() {
    let base = "state th, p\nparam eps, gam, bet, alp\nS = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]\nA = average S to 1 in eps\nF = order(A, eps, 1)\n";
    let (out, code) = run(&format!(
        "{base}stability F at th = pi, p = alp with gam = 12.26, bet = 6.1, alp = 0\nstability F at th = 3.14159265358979, p = 0 with gam = 12.26, bet = 6.1\n"
    ));
    assert_eq!(code, 0, "{out}");
    assert!(out.contains("Jacobian {0, 1; -1269/200, 0}"), "{out}");
    assert!(
        out.contains("Jacobian (decimals) {0, 1; -6.345, 0}"),
        "{out}"
    );
    assert!(
        out.contains("an equilibrium to the accuracy of the given values"),
        "{out}"
    );
    assert!(!out.contains("not an equilibrium"), "{out}");
    assert!(
        out.lines()
            .all(|l| !l.chars().collect::<String>().contains("0000000000")),
        "{out}"
    );
    let (out, _) = run(&format!(
        "{base}stability F at th = 3, p = 0 with gam = 12.26, bet = 6.1\n"
    ));
    assert!(out.contains("warning: not an equilibrium"), "{out}");
}

/// Renders an SVG to pixels with resvg and counts, in each horizontal
/// band of the image, the pixels that are neither white nor grey (the data
/// lines are coloured; axes, grid and text are grey or black).
fn coloured_pixels_per_band(svg: &str, bands: usize) -> Vec<usize> {
    use resvg::{tiny_skia, usvg};
    let tree = usvg::Tree::from_str(svg, &usvg::Options::default()).expect("well-formed SVG");
    let size = tree.size().to_int_size();
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height()).unwrap();
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    let (w, h) = (size.width() as usize, size.height() as usize);
    let mut counts = vec![0; bands];
    for (i, px) in pixmap.pixels().iter().enumerate() {
        let (r, g, b) = (px.red() as i32, px.green() as i32, px.blue() as i32);
        let spread = r.max(g).max(b) - r.min(g).min(b);
        if spread > 60 {
            let row = i / w;
            counts[(row * bands / h).min(bands - 1)] += 1;
        }
    }
    counts
}

// Every plot is well-formed SVG that renders with coloured data in each
// panel: the error plot, the paths (one panel per state), the phase
// portrait and the time series.
#[test]
fn plots_render_with_data_in_every_panel() {
    let (err, paths, phase, series) = (
        temp("err.svg"),
        temp("paths.svg"),
        temp("phase.svg"),
        temp("ts.svg"),
    );
    let text = format!(
        "{SYSTEM}A = average S to 2 in eps\ncompare S with A from x=0.5, y=0.3 for 2 sweep eps = 0.2, 0.1, 0.05 plot \"{}\" plot paths \"{}\"\nsimulate order(A, eps, 1) from x=0.5, y=0.3 for 20 plot x, y \"{}\" plot \"{}\"\n",
        err.display(),
        paths.display(),
        phase.display(),
        series.display()
    );
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    for (path, bands) in [(&err, 1), (&paths, 2), (&phase, 1), (&series, 1)] {
        let svg = std::fs::read_to_string(path).expect("plot written");
        let _ = std::fs::remove_file(path);
        let counts = coloured_pixels_per_band(&svg, bands);
        for (k, c) in counts.iter().enumerate() {
            assert!(
                *c > 300,
                "{}: panel {k} has {c} coloured pixels",
                path.display()
            );
        }
    }
}
