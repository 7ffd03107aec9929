//! A catalogue of bad inputs: each must give a clear message with a caret
//! under the right place, never a panic, and leave the session usable.
//! The whole catalogue is one snapshot, so a changed message is reviewed.

use ordex::lang::{Event, Session};

/// A common preamble, then one bad line per case.
const PREAMBLE: &str = "state q, p\nparam eps, k\ninput u\nX = [p, -q]\nY = [q^2, p]\nM = {1, 2; 3, 4}\nh = q^2 + p^2\n";

const CASES: &[&str] = &[
    // syntax
    "x = q +",
    "flow X to",
    "state t",
    "Z = sin(q",
    "Z = [1, 2",
    "Z = 2q",
    "Z = ",
    "check q = p",
    "average X to 3",
    "q + p p",
    ")",
    "set budget 99999999999999999999999",
    "Z = 3.",
    "show X as",
    "flow X on q to 2 2",
    // names
    "Z = qq + 1",
    "Z = X(hh)",
    "forget nothing",
    "Z = foo(q)",
    "q = 3",
    "sin = 2",
    // kinds and dimensions
    "Z = X * Y",
    "Z = X + h",
    "Z = [1, 2, 3]",
    "Z = M * [1, 2, 3]",
    "Z = det(X)",
    "Z = {1, 2; 3}",
    "Z = h(q)",
    "check X == h",
    "Z = X ^ 2",
    // algebra
    "Z = 1/(q + p)",
    "Z = (q + p)^-1",
    "Z = sin(q^2)",
    "Z = sin(k*q)",
    "Z = cos(q + 1)",
    "Z = sin(q + pi/3)",
    "Z = exp(t)",
    "Z = flow cos(k*t)*[p, q] to 2",
    "Z = q/0",
    "Z = q^(1/2)",
    "Z = pd(h, 2)",
    "Z = plug(h, r = 1)",
    // commands
    "state a, b",
    "average X to 0 in eps",
    "average eps*t*X to 2 in eps",
    "average [p^2, q] + eps*Y to 2 in eps",
    "average cos(t)*X + sin(t)*Y + eps*X to 2 in eps",
    "average [p, -2*q] + eps*Y to 1 in eps",
    "average eps*X to 2 in k strobo with transform",
    "magnus X to 2",
    "average eps*X to 2 in q",
    "flow X to 100",
    "carleman [sin(q), p] degree 2",
    "stability X at q = 0",
    "simulate X from q = 1, p = 0 for -1",
    "run /nonexistent/file.ordex",
    "show X as brackets",
    "show X as html",
];

fn run_one(line: &str) -> (String, i32, bool) {
    let mut session = Session::new();
    session.show_timing = false;
    let mut out = String::new();
    let text = format!("{PREAMBLE}{line}\n");
    let status = session.run_text(&text, Some("bad.ordex"), &mut |e| {
        if let Event::Error(m) = e {
            out.push_str(&m);
            out.push('\n');
        }
    });
    // The session survives: a later good line still runs.
    let mut later = false;
    session.run_text("h\n", None, &mut |e| {
        if let Event::Report(r) = e {
            later |= r.lines.iter().any(|l| l.text == "q^2 + p^2");
        }
    });
    (out, status.exit_code(), later)
}

#[test]
fn bad_inputs_give_clear_messages() {
    assert!(CASES.len() >= 30);
    let mut all = String::new();
    for case in CASES {
        let (out, code, later) = run_one(case);
        assert_eq!(code, 2, "`{case}` should be an error, got:\n{out}");
        assert!(
            out.contains("bad.ordex:8:"),
            "`{case}`: error not located on line 8:\n{out}"
        );
        assert!(out.contains('^'), "`{case}`: no caret:\n{out}");
        assert!(later, "`{case}`: the session did not survive");
        all.push_str(&format!("## {case}\n{out}\n"));
    }
    insta::assert_snapshot!("bad_inputs", all);
}

#[test]
fn an_unclosed_bracket_is_reported_at_the_bracket() {
    let mut session = Session::new();
    let mut out = String::new();
    let status = session.run_text(
        "state q, p\nX = [p,\n  -q\nY = 1\n",
        Some("open.ordex"),
        &mut |e| {
            if let Event::Error(m) = e {
                out.push_str(&m);
            }
        },
    );
    assert_eq!(status.exit_code(), 2);
    assert!(out.starts_with("open.ordex:2:5:"), "{out}");
}

/// Bad uses of unspecified functions (`func`): each is an error located on
/// its line with a caret, and the session is unchanged by it (the same
/// `names` listing and the same value of a definition afterwards).
#[test]
fn bad_uses_of_unspecified_functions_change_nothing() {
    const FUNC_PREAMBLE: &str =
        "state q, p\nparam eps, gam\nfunc V(s), J(a, b)\nX = [p, -V'(q)]\nh = V(q) + J(q, p)\n";
    const FUNC_CASES: &[&str] = &[
        "Z = V(q + gam)",
        "Z = V(t)",
        "Z = V(q*p)",
        "Z = V(sin(q))",
        "Z = V(q, p)",
        "Z = J(q)",
        "Z = J'(q, p)",
        "Z = pd(J, c)(q, p)",
        "Z = pd(J)(q, p)",
        "Z = pd(V, q)",
        "Z = V",
        "Z = W'(q)",
        "Z = sin(V(q))",
        "Z = V(q) + 1/(V(q) + 1)",
        "func q(s)",
        "func gam(s)",
        "func V(r)",
        "func F(s, s)",
        "func G",
        "Z = plug(h, V(s) = p*s)",
        "Z = plug(h, V(s) = cos(t)*s)",
        "Z = plug(h, V(s, r) = s)",
        "Z = plug(h, gam(s) = s)",
        "Z = plug(h, q = q^2)",
        "Z = plug(h, q = gam)",
        "Z = plug(V(q), V(s) = cos(s), q = 1/2)",
        "carleman X degree 2",
        "simulate X from q = 1, p = 0 for 1",
        "stability X at q = 0, p = 0",
        "average [p, -q] + eps*[0, -V'(q)] to 1 in eps",
        "Z = V'",
    ];
    let listing = |s: &mut Session| {
        let mut out = String::new();
        s.run_text("names\nX\nh\n", Some("after.ordex"), &mut |e| {
            if let Event::Report(r) = e {
                for l in r.lines {
                    out.push_str(&l.text);
                    out.push('\n');
                }
            }
        });
        out
    };
    let mut clean = Session::new();
    clean.show_timing = false;
    clean.run_text(FUNC_PREAMBLE, Some("pre.ordex"), &mut |_| {});
    let before = listing(&mut clean);
    let mut all = String::new();
    for case in FUNC_CASES {
        let mut session = Session::new();
        session.show_timing = false;
        session.run_text(FUNC_PREAMBLE, Some("pre.ordex"), &mut |_| {});
        let mut out = String::new();
        let status = session.run_text(&format!("{case}\n"), Some("bad.ordex"), &mut |e| {
            if let Event::Error(m) = e {
                out.push_str(&m);
                out.push('\n');
            }
        });
        assert_eq!(
            status.exit_code(),
            2,
            "`{case}` should be an error, got:\n{out}"
        );
        assert!(
            out.contains("bad.ordex:1:"),
            "`{case}`: not located:\n{out}"
        );
        assert!(out.contains('^'), "`{case}`: no caret:\n{out}");
        assert_eq!(
            listing(&mut session),
            before,
            "`{case}` changed the session"
        );
        all.push_str(&format!("## {case}\n{out}\n"));
    }
    insta::assert_snapshot!("bad_uses_of_functions", all);
}
