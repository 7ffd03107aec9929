//! Unit checks of the normal form and field operations built directly
//! (without the parser).

use super::*;
use crate::core::calc::Period;

fn s(name: &str) -> Expr {
    Expr::sym(Sym::new(name))
}

fn n(v: i64) -> Expr {
    Expr::int(v)
}

#[test]
fn pythagoras_and_product_to_sum() {
    let st = [Sym::new("cx"), Sym::new("cy")];
    let x = s("cx");
    let y = s("cy");
    let arg = x.add(&y.scale(&Q::int(2)));
    let sn = Expr::sin_of(&arg, &st).unwrap();
    let cs = Expr::cos_of(&arg, &st).unwrap();
    let one = sn.pow(2).unwrap().add(&cs.pow(2).unwrap());
    assert_eq!(one, n(1));
    // sin(-x) = -sin(x), cos(-x) = cos(x)
    assert_eq!(
        Expr::sin_of(&x.neg(), &st).unwrap(),
        Expr::sin_of(&x, &st).unwrap().neg()
    );
    assert_eq!(
        Expr::cos_of(&x.neg(), &st).unwrap(),
        Expr::cos_of(&x, &st).unwrap()
    );
    // 2 sin x cos x = sin 2x
    let sx = Expr::sin_of(&x, &st).unwrap();
    let cx = Expr::cos_of(&x, &st).unwrap();
    let s2x = Expr::sin_of(&x.scale(&Q::int(2)), &st).unwrap();
    assert_eq!(sx.mul(&cx).unwrap().scale(&Q::int(2)), s2x);
    assert_eq!(format!("{}", s2x), "sin(2*cx)");
}

#[test]
fn phase_shifts_and_time_splitting() {
    let st = [Sym::new("q")];
    let q = s("q");
    let t = Expr::sym(Sym::T);
    let pi = Expr::sym(Sym::PI);
    let shifted = Expr::sin_of(&q.add(&pi.scale(&Q::ratio(1, 2).unwrap())), &st).unwrap();
    assert_eq!(shifted, Expr::cos_of(&q, &st).unwrap());
    // cos(t - q) = cos t cos q + sin t sin q
    let e = Expr::cos_of(&t.sub(&q), &st).unwrap();
    assert_eq!(e.to_string(), "cos(q)*cos(t) + sin(q)*sin(t)");
    assert!(Expr::sin_of(&pi.scale(&Q::ratio(1, 3).unwrap()), &st).is_err());
    assert_eq!(
        Expr::cos_of(&pi.scale(&Q::ratio(1, 3).unwrap()), &st).unwrap(),
        Expr::num(Q::ratio(1, 2).unwrap())
    );
    // a parameter in an argument is refused
    assert!(matches!(
        Expr::sin_of(&s("kk").mul(&q).unwrap(), &st),
        Err(CoreError::ParameterInArgument { .. })
    ));
}

#[test]
fn time_integrals() {
    let t = Expr::sym(Sym::T);
    let st: [Sym; 0] = [];
    let ct = Expr::cos_of(&t, &st).unwrap();
    // ∫_0^t τ cos τ dτ = t sin t + cos t - 1
    let e = t.mul(&ct).unwrap().integral_from_zero().unwrap();
    assert_eq!(e.to_string(), "-1 + cos(t) + t*sin(t)");
    // mean of cos^2 over 2pi is 1/2
    let m = ct.pow(2).unwrap().mean_over(&Period(Q::int(2))).unwrap();
    assert_eq!(m, Expr::num(Q::ratio(1, 2).unwrap()));
}

#[test]
fn bracket_of_linear_fields_matches_matrices() {
    let st = [Sym::new("la"), Sym::new("lb")];
    let (a, b) = (s("la"), s("lb"));
    // X = B x with B = {0,1;0,0}, Y = C x with C = {0,0;1,0}
    let x = Field(vec![b.clone(), n(0)]);
    let y = Field(vec![n(0), a.clone()]);
    // [Bx, Cx] = (CB - BC) x; CB = {0,0;0,1}, BC = {1,0;0,0}
    let br = x.bracket(&y, &st).unwrap();
    assert_eq!(br, Field(vec![a.neg(), b.clone()]));
}
