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
        .filter_map(|v| v.trim().parse().ok())
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
