//! Laws of the iterated integrals of inputs (DESIGN §2.4, §3.3):
//! the Chen–Fliess series with concrete inputs plugged in is the flow of the
//! concrete system, and the shuffle reduction of a product agrees with the
//! product of the concrete values (Ree 1958, after Chen 1957; from memory).

use ordex::lang::{Event, Session};
use proptest::prelude::*;

fn holds(text: &str) -> Result<(), String> {
    let mut s = Session::new();
    s.show_timing = false;
    let mut log = String::new();
    let status = s.run_text(text, None, &mut |e| match e {
        Event::Report(r) => {
            for l in r.lines {
                log.push_str(&l.text);
                log.push('\n');
            }
        }
        Event::Error(m) => log.push_str(&m),
    });
    if status.error || status.check_failed {
        Err(format!("{text}\n---\n{log}"))
    } else {
        Ok(())
    }
}

/// Small polynomial components in x, y.
fn component() -> impl Strategy<Value = String> {
    let monos = prop::sample::select(vec!["1", "x", "y", "x*y", "x^2", "y^2"]);
    let coeffs = prop::sample::select(vec!["1", "-1", "2", "1/2", "-3"]);
    prop::collection::vec((coeffs, monos), 0..3).prop_map(|ts| {
        if ts.is_empty() {
            "0".to_string()
        } else {
            ts.iter()
                .map(|(c, m)| format!("{c}*{m}"))
                .collect::<Vec<_>>()
                .join(" + ")
        }
    })
}

/// Concrete inputs: functions of time with parameter eps.
fn input_fn() -> impl Strategy<Value = &'static str> {
    prop::sample::select(vec![
        "eps*cos(t)",
        "eps*cos(2*t)",
        "eps*sin(t)",
        "eps",
        "eps*(1 + sin(3*t))",
        "eps*t",
    ])
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]

    #[test]
    fn plugged_chen_fliess_series_is_the_concrete_flow(
        a in component(), b in component(), c in component(), d in component(),
        drift in prop::sample::select(vec!["0", "1", "y", "-x"]),
        f1 in input_fn(), f2 in input_fn(),
    ) {
        // With a drift [drift, 0], the letter 1 of the series.
        let text = format!(
            "state x, y\nparam eps\ninput u1, u2\nV = [{drift}, 0] + u1*[{a}, {b}] + u2*[{c}, {d}]\n\
             F = flow V to 3\nG = flow plug(V, u1 = {f1}, u2 = {f2}) to 3\n\
             check plug(F, u1 = {f1}, u2 = {f2}) == G\n"
        );
        holds(&text).map_err(TestCaseError::fail)?;
    }

    #[test]
    fn shuffled_products_agree_with_products_of_values(
        w1 in prop::collection::vec(prop::sample::select(vec!["u1", "u2", "1"]), 1..3),
        w2 in prop::collection::vec(prop::sample::select(vec!["u1", "u2", "1"]), 1..3),
        f1 in input_fn(), f2 in input_fn(),
    ) {
        let (i1, i2) = (w1.join(", "), w2.join(", "));
        let text = format!(
            "state x\nparam eps\ninput u1, u2\nP = iint({i1})*iint({i2})\n\
             check plug(P, u1 = {f1}, u2 = {f2}) == \
             plug(iint({i1}), u1 = {f1}, u2 = {f2})*plug(iint({i2}), u1 = {f1}, u2 = {f2})\n"
        );
        holds(&text).map_err(TestCaseError::fail)?;
    }
}
