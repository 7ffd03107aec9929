//! Calculus on normal forms, checked against textbook rules.

use std::collections::HashMap;

use super::Period;
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;

#[test]
fn derivatives_follow_the_product_and_chain_rules() {
    // d/dx (x^2 sin x) = 2x sin x + x^2 cos x; d/dx exp(2x) = 2 exp(2x);
    // d/dy (x y^3) = 3 x y^2 (product and chain rules, from memory).
    let (xs, ys) = (Sym::new("x"), Sym::new("y"));
    let st = [xs, ys];
    let (x, y) = (Expr::sym(xs), Expr::sym(ys));
    let sin_x = Expr::sin_of(&x, &st).expect("linear argument");
    let f = x.pow(2).expect("power").mul(&sin_x).expect("product");
    insta::assert_snapshot!(f.pd(xs).to_string(), @"2*x*sin(x) + x^2*cos(x)");
    let e = Expr::exp_of(&x.scale(&Q::int(2)), &st).expect("linear argument");
    insta::assert_snapshot!(e.pd(xs).to_string(), @"2*exp(2*x)");
    let g = x.mul(&y.pow(3).expect("power")).expect("product");
    insta::assert_snapshot!(g.pd(ys).to_string(), @"3*x*y^2");
    // A symbol that does not occur differentiates to zero.
    assert!(sin_x.pd(ys).is_zero());
}

#[test]
fn integrals_from_zero_and_means_over_a_period() {
    // ∫_0^t cos(3s) ds = sin(3t)/3, ∫_0^t s ds = t^2/2, the mean of sin^2 t
    // over 2·pi is 1/2 (from memory).
    let t = Expr::sym(Sym::T);
    let cos3 = Expr::cos_of(&t.scale(&Q::int(3)), &[]).expect("linear argument");
    insta::assert_snapshot!(cos3.integral_from_zero().expect("integral").to_string(), @"1/3*sin(3*t)");
    insta::assert_snapshot!(t.integral_from_zero().expect("integral").to_string(), @"1/2*t^2");
    let sin_t = Expr::sin_of(&t, &[]).expect("linear argument");
    let sq = sin_t.mul(&sin_t).expect("product");
    insta::assert_snapshot!(sq.mean_over(&Period(Q::int(2))).expect("mean").to_string(), @"1/2");
}

#[test]
fn substitution_and_values_at_time_zero() {
    // x^2 at x = y + 1 is y^2 + 2y + 1; cos t + t + sin 2t at t = 0 is 1
    // (from memory).
    let (xs, ys) = (Sym::new("x"), Sym::new("y"));
    let st = [xs, ys];
    let (x, y) = (Expr::sym(xs), Expr::sym(ys));
    let map: HashMap<Sym, Expr> = [(xs, y.add(&Expr::int(1)))].into_iter().collect();
    let sq = x
        .pow(2)
        .expect("power")
        .subst(&map, &st)
        .expect("substitution");
    insta::assert_snapshot!(sq.to_string(), @"1 + 2*y + y^2");
    let t = Expr::sym(Sym::T);
    let f = Expr::cos_of(&t, &st)
        .expect("linear argument")
        .add(&t)
        .add(&Expr::sin_of(&t.scale(&Q::int(2)), &st).expect("linear argument"));
    insta::assert_snapshot!(f.at_time_zero().to_string(), @"1");
}
