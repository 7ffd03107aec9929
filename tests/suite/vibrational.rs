//! Fast-oscillation (vibrational) averaging end to end: the classical
//! result with its transform tracks the true system, the bracket form
//! evaluates to the concrete averaged field, and the symbolic frequency
//! `in 1/w` refuses what it cannot take.

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

/// A pendulum on an elliptically driven pivot (our own scenario).
const PIVOT: &str = "state th, p\nparam eps, gam, bet, alp\n\
    F0 = [p, -gam*sin(th)]\nG1 = [0, bet*sin(th)]\nG2 = [0, alp*cos(th)]\n\
    S = eps*F0 + cos(t)*G1 + sin(t)*G2\n";

fn table(out: &str) -> Vec<Vec<f64>> {
    out.lines()
        .filter(|l| l.trim_start().starts_with("0."))
        .map(|l| {
            l.split_whitespace()
                .skip(1)
                .filter_map(|v| v.parse().ok())
                .collect()
        })
        .collect()
}

/// The classical fast-oscillation result through its full transform
/// `x = exp(Y(t))(y + W(t, y))` (zero-mean base: exp(Y(0)) is not the
/// identity) follows the true system with an error O(eps^k) at order k
/// over eps*t <= 1 (averaging theorem: Sanders, Verhulst & Murdock,
/// "Averaging Methods in Nonlinear Dynamical Systems", 2nd ed. (2007),
/// §2.9, from memory). Without the outer map exp(Y(0)) the error would be
/// O(1): the drive sin(t) gives Y(0) = -[0, alp*cos(th)].
#[test]
fn classical_fast_oscillation_tracks_the_system() {
    let text = format!(
        "{PIVOT}C, W = average S to 3 in eps classic with transform\n\
         compare S with C from th = 2.8, p = 0.1 for 1 with gam = 1, bet = 2, alp = 1 \
         sweep eps = 0.1, 0.05, 0.025, 0.0125\n"
    );
    let (out, code) = run(&text);
    assert_eq!(code, 0, "{out}");
    let rows = table(&out);
    assert_eq!(rows.len(), 4, "{out}");
    // Smallest eps: every order tracks the system, higher orders better.
    let last = &rows[3];
    assert!(last[0] < 2e-2 && last[1] < 1e-4 && last[2] < 1e-5, "{out}");
    // Halving eps divides the order-k error by about 2^k (local ratios
    // over the last two eps values).
    for k in 0..3 {
        let ratio = rows[2][k] / rows[3][k];
        let want = 2f64.powi(k as i32 + 1);
        assert!(
            ratio > want * 0.7 && ratio < want * 1.5,
            "order {}: ratio {ratio}, expected about {want}\n{out}",
            k + 1
        );
    }
}

/// `show A as brackets` of a fast-oscillation result is a Lie polynomial
/// in the names; pasted back, it must equal the concrete averaged field.
#[test]
fn bracket_form_evaluates_to_the_averaged_field() {
    let systems = [
        PIVOT.to_string(),
        // two drives on one field, frequencies 1 and 2, an eps^2 part
        "state x, y, z\nparam eps, a\nF = [y - a*z, -x*z, x*y - z]\nH = [0, z, 0]\n\
         G1 = [0, 0, x]\nG2 = [0, x^2, 0]\n\
         S = eps*F + eps^2*cos(t)*H + (sin(t) + cos(2*t))*G1 + sin(2*t)*G2\n"
            .to_string(),
    ];
    for sys in &systems {
        for cmd in [
            "A = average S to 1 in eps",
            "A = average S to 3 in eps strobo",
            "A = average S to 1 in eps classic",
            "A = average S to 2 in eps classic",
        ] {
            let (out, code) = run(&format!("{sys}{cmd}\nshow A as brackets\n"));
            assert_eq!(code, 0, "{cmd}\n{out}");
            let poly = out.lines().last().unwrap_or_default().to_string();
            assert!(poly.contains('['), "{cmd}: no brackets in {poly}\n{out}");
            let (out2, code2) = run(&format!("{sys}{cmd}\ncheck A == {poly}\n"));
            assert_eq!(code2, 0, "{cmd}: the bracket form differs\n{out2}");
            assert!(out2.trim_end().ends_with("holds"), "{out2}");
        }
    }
}

/// The first-order bracket form is the published vibrational formula
/// f0 + Σ mean(U_i)[g_i, f0] + 1/2 Σ mean(U_i U_j)[g_i, [g_j, f0]]
/// (Bullo, SIAM J. Control Optim. 41 (2002) 542-562; REFERENCES §5, from
/// memory): zero-mean U for classical, U = ∫_0^t u for stroboscopic.
#[test]
fn first_order_brackets_are_the_vibrational_formula() {
    let (out, code) = run(&format!(
        "{PIVOT}C = average S to 1 in eps classic\nshow C as brackets\n"
    ));
    assert_eq!(code, 0, "{out}");
    assert!(
        out.trim_end()
            .ends_with("eps*F0 + 1/4*eps*[G1, [G1, F0]] + 1/4*eps*[G2, [G2, F0]]"),
        "{out}"
    );
    let (out, code) = run(&format!(
        "{PIVOT}A = average S to 1 in eps\nshow A as brackets\n"
    ));
    assert_eq!(code, 0, "{out}");
    assert!(
        out.trim_end()
            .ends_with("eps*F0 + eps*[G2, F0] + 1/4*eps*[G1, [G1, F0]] + 3/4*eps*[G2, [G2, F0]]"),
        "{out}"
    );
}

#[test]
fn symbolic_frequency_refusals() {
    let head = "state th, p\nparam g, l, a, b, w, v\n";
    let cases = [
        (
            "average [p, -g/l*sin(th)] + a*w^2/l*cos(w*t)*[0, sin(th)] to 2 in 1/w",
            "grows like w^1 after rescaling",
            "plug(S, a = b/w)",
        ),
        (
            "average [p, 0] + cos(w*t)*[0, sin(th)] + cos(v*t)*[0, 1] to 2 in 1/w",
            "independent symbolic frequencies",
            "`w*t` and `v*t`",
        ),
        (
            "average [p, 0] + cos(w*t)*[0, sin(th)] + cos(t)*[0, 1] to 2 in 1/w",
            "depends on t other than through w*t",
            "`cos(t)`",
        ),
        (
            "flow cos(w*t)*[0, sin(th)] to 2",
            "symbolic frequency `w*t`",
            "average … in 1/w",
        ),
        (
            "average eps*cos(w*t)*[0, sin(th)] to 2 in w",
            "symbolic frequency `w*t`",
            "plug(…, w = 30)",
        ),
        ("mean(cos(w*t))", "symbolic frequency", "mean"),
    ];
    for (line, want1, want2) in cases {
        let (out, code) = run(&format!("{head}param eps\n{line}\n"));
        assert_eq!(code, 2, "{line}\n{out}");
        assert!(out.contains(want1) && out.contains(want2), "{line}\n{out}");
    }
    // plug of a number turns the phase into an ordinary frequency
    let (out, code) = run(&format!(
        "{head}check plug(cos(w*t)*sin(th), w = 3) == cos(3*t)*sin(th)\n\
         check plug(cos(2*w*t), w = 3*v) == cos(6*v*t)\n"
    ));
    assert_eq!(code, 0, "{out}");
}
