//! The stroboscopic field computed two ways must agree exactly: through
//! the periodic near-identity transform (the fast route used by `average`)
//! and by its definition, the chronological logarithm of the period map
//! divided by the period (DESIGN §2.6: F = W_T / T).

use ordex::averaging::{stroboscopic, stroboscopic_by_logarithm};
use ordex::core::calc::common_period;
use ordex::core::{Field, Sym};
use ordex::lang::value::Value;
use ordex::lang::{Event, Session};

fn standard_form(script: &str, n: usize) -> (Vec<Field>, Vec<Sym>) {
    let mut session = Session::new();
    let status = session.run_text(script, None, &mut |e| {
        if let Event::Error(m) = e {
            panic!("{m}");
        }
    });
    assert_eq!(status.exit_code(), 0);
    let Some(Value::Field(f)) = session.get("S") else {
        panic!("S is not a field")
    };
    let eps = Sym::new("eps");
    let parts = (1..=n)
        .map(|j| {
            Field(
                f.field
                    .0
                    .iter()
                    .map(|c| c.coeff_of_power(eps, j as i32))
                    .collect(),
            )
        })
        .collect();
    (parts, session.states().to_vec())
}

fn agree(script: &str, n: usize) {
    let (standard, states) = standard_form(script, n);
    let freqs: Vec<_> = standard
        .iter()
        .flat_map(|f| f.0.iter().flat_map(|c| c.frequencies()))
        .collect();
    let period = common_period(&freqs).expect("periodic");
    let slow = stroboscopic_by_logarithm(&standard, &period, &states).expect("logarithm route");
    // Every truncation order: the transform route forms only the mean at
    // its last order, so each order is checked once as the last one.
    for m in 1..=n {
        let fast = stroboscopic(&standard[..m], &period, &states).expect("transform route");
        assert_eq!(
            fast[..],
            slow[..m],
            "the two routes differ to order {m} for\n{script}"
        );
    }
}

#[test]
fn planar_trigonometric_system_to_order_4() {
    agree(
        "state q, p\nparam eps\nS = eps*[p + sin(q)*cos(t), -sin(q) + p*cos(q)*sin(t)] + eps^2*[cos(q)*sin(t), -p/2 + sin(q)*cos(2*t)]\n",
        4,
    );
}

#[test]
fn quadratic_system_in_three_states_to_order_4() {
    agree(
        "state x, y, z\nparam eps, a\nS = eps*[-a*x + y*z*cos(t), -y + x*z*sin(t) + x^2*cos(2*t), x*z/3 - z*cos(t) + x*y*sin(2*t)]\n",
        4,
    );
}

#[test]
fn half_frequencies_and_secular_free_forcing() {
    agree(
        "state x, y\nparam eps\nS = eps*[y*cos(t/2) + x^2*sin(3*t/2), -x*sin(t/2) + cos(t)]\n",
        3,
    );
}

#[test]
fn three_mode_exchange_system_to_order_5() {
    // The system of benchmark case e (an invented three-mode exchange
    // model): the last-order and last-diagonal truncations of the transform
    // route are exercised at every order up to 5.
    agree(
        "state x, y, z\nparam eps\nS = eps*[y*z*cos(t) - 1/2*x, x*z*sin(t) + y^2*cos(2*t), x*y - z*sin(t)]\n",
        5,
    );
}

#[test]
fn grades_with_different_harmonics() {
    // W_1 oscillates at 2 only while the eps^2 part brings frequencies 1
    // and 3: the truncations keyed to W_1's harmonics must still be exact.
    agree(
        "state x, y\nparam eps\nS = eps*[y*cos(2*t), x - y^2*sin(2*t)] + eps^2*[x*sin(t), y*cos(3*t) + x^2]\n",
        4,
    );
}

#[test]
fn autonomous_first_grade() {
    // V_1 without time: W_1 = 0, and only the eps^2 part oscillates.
    agree(
        "state x, y\nparam eps\nS = eps*[y, -x + x*y] + eps^2*[x*cos(t), y^2*sin(2*t)]\n",
        4,
    );
}
