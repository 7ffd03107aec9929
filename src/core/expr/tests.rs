//! Canonical printing of expressions, checked against identities from
//! outside the project.

use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;

/// `x` and `y` as states (interned in this order, so `x` sorts first).
fn xy() -> (Expr, Expr, Vec<Sym>) {
    let (x, y) = (Sym::new("x"), Sym::new("y"));
    (Expr::sym(x), Expr::sym(y), vec![x, y])
}

#[test]
fn binomial_square_in_normal_form() {
    // (x + y)^2 = x^2 + 2xy + y^2 (binomial theorem, from memory); terms sort
    // by monomial, x·y before x^2.
    let (x, y, _) = xy();
    let square = x.add(&y).pow(2).expect("small power");
    insta::assert_snapshot!(square.to_string(), @"2*x*y + x^2 + y^2");
    // The difference of the two sides is the zero expression.
    let expanded = x
        .mul(&x)
        .expect("product")
        .add(&x.mul(&y).expect("product").scale(&Q::int(2)));
    let expanded = expanded.add(&y.mul(&y).expect("product"));
    assert!(square.sub(&expanded).is_zero());
    insta::assert_snapshot!(square.sub(&expanded).to_string(), @"0");
}

#[test]
fn products_of_cosines_reduce_to_sums() {
    // cos x cos y = (cos(x − y) + cos(x + y))/2, sin^2 x = (1 − cos 2x)/2
    // (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964,
    // 4.3.32 and 4.3.31; from memory).
    let (x, y, st) = xy();
    let cx = Expr::cos_of(&x, &st).expect("linear argument");
    let cy = Expr::cos_of(&y, &st).expect("linear argument");
    let sx = Expr::sin_of(&x, &st).expect("linear argument");
    insta::assert_snapshot!(cx.mul(&cy).expect("product").to_string(), @"1/2*cos(x - y) + 1/2*cos(x + y)");
    insta::assert_snapshot!(sx.mul(&sx).expect("product").to_string(), @"1/2 - 1/2*cos(2*x)");
    // cos^2 x + sin^2 x = 1 (Pythagorean identity, from memory).
    let one = cx
        .mul(&cx)
        .expect("product")
        .add(&sx.mul(&sx).expect("product"));
    assert_eq!(one, Expr::int(1));
}

#[test]
fn exponentials_and_arguments_take_canonical_forms() {
    // exp(x)·exp(−x) = 1; sin(−x) = −sin x; cos(x + pi) = −cos x (from
    // memory).
    let (x, _, st) = xy();
    let e = Expr::exp_of(&x, &st).expect("linear argument");
    let e_neg = Expr::exp_of(&x.neg(), &st).expect("linear argument");
    insta::assert_snapshot!(e.mul(&e_neg).expect("product").to_string(), @"1");
    insta::assert_snapshot!(Expr::sin_of(&x.neg(), &st).expect("linear argument").to_string(), @"-sin(x)");
    let shifted = x.add(&Expr::sym(Sym::PI));
    insta::assert_snapshot!(Expr::cos_of(&shifted, &st).expect("linear argument").to_string(), @"-cos(x)");
}

#[test]
fn time_factors_print_apart_from_the_state() {
    // cos(x)·cos(t) keeps one factor in the state and one in time; sin(2t)
    // at any x has no state factor.
    let (x, _, st) = xy();
    let t = Expr::sym(Sym::T);
    let cx = Expr::cos_of(&x, &st).expect("linear argument");
    let ct = Expr::cos_of(&t, &st).expect("linear argument");
    let s2t = Expr::sin_of(&t.scale(&Q::int(2)), &st).expect("linear argument");
    insta::assert_snapshot!(cx.mul(&ct).expect("product").add(&s2t).to_string(), @"sin(2*t) + cos(x)*cos(t)");
}
