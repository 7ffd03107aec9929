//! Rendering checked against the output conventions of the design
//! (DESIGN.md §3.4 "Output" and §2.7a for unspecified functions): results
//! in the input syntax, LaTeX with `\frac`, Greek names, products ordered
//! number, parameters, states, functions, and averaged results as an
//! `aligned` block grouped by powers of the small parameter. The plain
//! form orders factors by symbol number (states first, as declared, then
//! names in order of first use), the LaTeX form as the design asks.

use insta::assert_snapshot;

use super::testing::Fixture;
use crate::core::Field;

#[test]
fn signs_lead_with_a_minus_and_join_with_spaced_operators() {
    let fx = Fixture::new(&["q", "p"]);
    let e = fx.sym("p").sub(&fx.sym("q").scale(&crate::core::Q::int(2)));
    assert_snapshot!(fx.show(&e.neg()), @r"
    plain  2*q - p
    latex  2 q - p
    ");
    assert_snapshot!(fx.show(&e), @r"
    plain  -2*q + p
    latex  -2 q + p
    ");
}

#[test]
fn trigonometric_factors_keep_the_canonical_sign_of_their_argument() {
    // cos(-L) = cos L and sin(-L) = -sin L (DESIGN §2.2).
    let fx = Fixture::new(&["q", "p"]);
    let l = fx.sym("p").sub(&fx.sym("q"));
    assert_snapshot!(fx.show(&fx.cos(&l)), @r"
    plain  cos(q - p)
    latex  \cos\left(q - p\right)
    ");
    assert_snapshot!(fx.show(&fx.sin(&l)), @r"
    plain  -sin(q - p)
    latex  -\sin\left(q - p\right)
    ");
}

#[test]
fn simple_arguments_drop_the_parentheses_in_latex() {
    let fx = Fixture::new(&["q"]);
    let two_q = fx.sym("q").scale(&crate::core::Q::int(2));
    assert_snapshot!(fx.show(&fx.sin(&two_q)), @r"
    plain  sin(2*q)
    latex  \sin 2q
    ");
    let half_t = fx.mul(&fx.q(1, 2), &fx.sym("t"));
    assert_snapshot!(fx.show(&fx.cos(&half_t)), @r"
    plain  cos(1/2*t)
    latex  \cos\left(\frac{1}{2}t\right)
    ");
}

#[test]
fn fractions_put_negative_powers_of_parameters_under_the_bar() {
    let fx = Fixture::new(&["q"]);
    let (a, b, q) = (fx.sym("a"), fx.sym("b"), fx.sym("q"));
    let e = fx.mul(&fx.mul(&fx.q(-3, 4), &q), &q);
    assert_snapshot!(fx.show(&e), @r"
    plain  -3/4*q^2
    latex  -\frac{3}{4} q^{2}
    ");
    let ratio = a
        .div(&b.scale(&crate::core::Q::int(2)))
        .expect("b is not zero");
    assert_snapshot!(fx.show(&fx.mul(&ratio, &q)), @r"
    plain  1/2*q*a*b^-1
    latex  \frac{a}{2 b} q
    ");
}

#[test]
fn products_order_number_parameters_states_functions_with_greek_names() {
    let fx = Fixture::new(&["q"]);
    let q = fx.sym("q");
    let v = fx.func("V", &["s"], &[0], std::slice::from_ref(&q));
    let e = fx.mul(&fx.mul(&fx.mul(&fx.q(3, 1), &v), &q), &fx.sym("alp"));
    let e = fx.mul(&fx.mul(&e, &fx.cos(&q)), &fx.sym("eps"));
    assert_snapshot!(fx.show(&e), @r"
    plain  3*q*V(q)*alp*eps*cos(q)
    latex  3 \alpha \varepsilon q V(q) \cos q
    ");
}

#[test]
fn unspecified_functions_show_primes_orders_and_subscripts() {
    // DESIGN §2.7a: `V(q)`, `V'(q)`, `V^{(4)}(q)`, `J_{a}(x, y)`, `J_{ab}(x, y)`.
    let fx = Fixture::new(&["x", "y"]);
    let (x, y) = (fx.sym("x"), fx.sym("y"));
    let one = std::slice::from_ref(&x);
    let shown: Vec<String> = [
        fx.func("V", &["s"], &[0], one),
        fx.func("V", &["s"], &[1], one),
        fx.func("V", &["s"], &[4], one),
        fx.func("J", &["a", "b"], &[1, 0], &[x.clone(), y.clone()]),
        fx.func("J", &["a", "b"], &[1, 1], &[x.clone(), y.clone()]),
        fx.func("V", &["s"], &[0], &[x.add(&fx.sym("pi"))]),
        fx.func("V", &["s"], &[0], &[fx.q(1, 2)]),
    ]
    .iter()
    .map(|e| fx.show(e))
    .collect();
    assert_snapshot!(shown.join("\n"), @r"
    plain  V(x)
    latex  V(x)
    plain  V'(x)
    latex  V'(x)
    plain  V''''(x)
    latex  V^{(4)}(x)
    plain  pd(J, a)(x, y)
    latex  J_{a}(x, y)
    plain  pd(J, a, b)(x, y)
    latex  J_{ab}(x, y)
    plain  V(x + pi)
    latex  V(x + \pi)
    plain  V(1/2)
    latex  V(\frac{1}{2})
    ");
}

#[test]
fn averaged_fields_group_rows_by_powers_of_the_small_parameter() {
    let fx = Fixture::new(&["q", "p"]);
    let (q, p, eps) = (fx.sym("q"), fx.sym("p"), fx.sym("eps"));
    let eps2 = fx.mul(&eps, &eps);
    let f = Field(vec![
        fx.mul(&eps, &p),
        fx.mul(&eps, &q.neg())
            .add(&fx.mul(&eps2, &fx.mul(&fx.q(1, 2), &fx.sin(&q))))
            .add(&fx.mul(&eps2, &p)),
    ]);
    assert_snapshot!(fx.show_field(&f, "eps"), @r"
    plain  [p*eps, -q*eps + p*eps^2 + 1/2*eps^2*sin(q)]
    latex  \begin{pmatrix} \varepsilon p \\ -\varepsilon q + \varepsilon^{2} p + \frac{1}{2} \varepsilon^{2} \sin q \end{pmatrix}
    \begin{aligned}
    \dot{q} &= \varepsilon p \\
    \dot{p} &= -\varepsilon q + \varepsilon^{2}\left(\frac{1}{2} \sin q + p\right)
    \end{aligned}
    ");
}
