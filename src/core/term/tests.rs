//! Checks of the factors of a term against identities from outside the
//! project.

use smallvec::smallvec;

use super::time::{beat_mul, integrate_time_monomial};
use super::trig::{cos_wave, sin_wave, wave_mul};
use super::*;
use crate::core::num::Q;
use crate::core::symbol::Sym;

fn lin(pairs: &[(Sym, i64)]) -> LinearForm {
    LinearForm(pairs.iter().map(|(s, c)| (*s, Q::int(*c))).collect())
}

#[test]
fn monomials_multiply_by_adding_exponents() {
    // x^a·x^b = x^(a+b) (laws of exponents, from memory).
    let (x, y) = (Sym::new("x"), Sym::new("y"));
    let cases: &[(&[(Sym, i32)], &[(Sym, i32)], &[(Sym, i32)])] = &[
        (&[(x, 2), (y, 1)], &[(x, 1), (y, 3)], &[(x, 3), (y, 4)]),
        (&[(x, 1)], &[(x, -1)], &[]),
        (&[(x, 2)], &[(y, 5)], &[(x, 2), (y, 5)]),
        (&[], &[(y, 1)], &[(y, 1)]),
    ];
    for (a, b, want) in cases {
        let (a, b) = (
            Monomial(a.iter().copied().collect()),
            Monomial(b.iter().copied().collect()),
        );
        let got = a.mul(&b).expect("exponents fit");
        assert_eq!(got, Monomial(want.iter().copied().collect()), "{a:?}·{b:?}");
    }
}

#[test]
fn products_of_state_factors_follow_product_to_sum() {
    // 2 sin a sin b = cos(a−b) − cos(a+b), 2 cos a cos b = cos(a−b) +
    // cos(a+b), 2 sin a cos b = sin(a−b) + sin(a+b) (Abramowitz & Stegun,
    // Handbook of Mathematical Functions, 1964, 4.3.31–4.3.33; from memory),
    // with a = 2x + y, b = x: a − b = x + y, a + b = 3x + y.
    let (x, y) = (Sym::new("x"), Sym::new("y"));
    let (a, b) = (lin(&[(x, 2), (y, 1)]), lin(&[(x, 1)]));
    let (diff, sum) = (lin(&[(x, 1), (y, 1)]), lin(&[(x, 3), (y, 1)]));
    let half = Q::HALF;
    let cases = [
        (
            TrigFactor::Cos(a.clone()),
            TrigFactor::Cos(b.clone()),
            vec![
                (half.clone(), TrigFactor::Cos(diff.clone())),
                (half.clone(), TrigFactor::Cos(sum.clone())),
            ],
        ),
        (
            TrigFactor::Sin(a.clone()),
            TrigFactor::Sin(b.clone()),
            vec![
                (half.clone(), TrigFactor::Cos(diff.clone())),
                (half.neg(), TrigFactor::Cos(sum.clone())),
            ],
        ),
        (
            TrigFactor::Sin(a.clone()),
            TrigFactor::Cos(b.clone()),
            vec![
                (half.clone(), TrigFactor::Sin(diff.clone())),
                (half.clone(), TrigFactor::Sin(sum.clone())),
            ],
        ),
    ];
    for (p, q, mut want) in cases {
        let mut got: Vec<(Q, TrigFactor)> = wave_mul(&p, &q).into_iter().collect();
        got.sort_by(|l, r| l.1.cmp(&r.1));
        want.sort_by(|l, r| l.1.cmp(&r.1));
        assert_eq!(got, want, "{p:?}·{q:?}");
    }
}

#[test]
fn time_factors_follow_product_to_sum() {
    // cos(3t)·cos(t) = (cos 2t + cos 4t)/2 and sin(t)·sin(t) = (1 − cos 2t)/2
    // (Abramowitz & Stegun 1964, 4.3.31–4.3.32; from memory).
    let c = |k: i64| TimeFactor::Cos(Q::int(k));
    let s = |k: i64| TimeFactor::Sin(Q::int(k));
    let mut got: Vec<(Q, TimeFactor)> = beat_mul(&c(3), &c(1)).into_iter().collect();
    got.sort_by(|l, r| l.1.cmp(&r.1));
    assert_eq!(got, vec![(Q::HALF, c(2)), (Q::HALF, c(4))]);
    let mut got: Vec<(Q, TimeFactor)> = beat_mul(&s(1), &s(1)).into_iter().collect();
    got.sort_by(|l, r| l.1.cmp(&r.1));
    assert_eq!(got, vec![(Q::HALF, TimeFactor::One), (Q::HALF.neg(), c(2))]);
}

#[test]
fn trigonometric_factors_take_the_canonical_sign() {
    // cos(−L) = cos L, sin(−L) = −sin L, cos 0 = 1, sin 0 = 0 (from memory).
    let x = Sym::new("x");
    let l = lin(&[(x, 1)]);
    assert_eq!(cos_wave(l.neg()), TrigFactor::Cos(l.clone()));
    assert_eq!(sin_wave(l.neg()), Some((true, TrigFactor::Sin(l.clone()))));
    assert_eq!(
        sin_wave(l.clone()),
        Some((false, TrigFactor::Sin(l.clone())))
    );
    assert_eq!(cos_wave(LinearForm::default()), TrigFactor::One);
    assert_eq!(sin_wave(LinearForm::default()), None);
}

#[test]
fn powers_of_time_integrate_by_parts() {
    // ∫ t^n dt = t^(n+1)/(n+1); ∫ sin(3t) dt = −cos(3t)/3; ∫ t·cos(2t) dt =
    // t·sin(2t)/2 + cos(2t)/4 (integration by parts, from memory).
    type Case = (i32, TimeFactor, Vec<(i32, TimeFactor, Q)>);
    let q = |n: i64, d: i64| Q::ratio(n, d).expect("nonzero denominator");
    let cases: Vec<Case> = vec![
        (2, TimeFactor::One, vec![(3, TimeFactor::One, q(1, 3))]),
        (
            0,
            TimeFactor::Sin(Q::int(3)),
            vec![(0, TimeFactor::Cos(Q::int(3)), q(-1, 3))],
        ),
        (
            1,
            TimeFactor::Cos(Q::int(2)),
            vec![
                (1, TimeFactor::Sin(Q::int(2)), q(1, 2)),
                (0, TimeFactor::Cos(Q::int(2)), q(1, 4)),
            ],
        ),
    ];
    for (n, beat, want) in cases {
        let got = integrate_time_monomial(n, &beat).expect("within limits");
        assert_eq!(got, want, "∫ t^{n}·{beat:?} dt");
    }
}

#[test]
fn key_factors_print_in_the_input_syntax() {
    let (x, y) = (Sym::new("x"), Sym::new("y"));
    let key = Key {
        mono: Monomial(smallvec![(x, 2), (y, 1)]),
        exp: lin(&[(y, -1)]),
        wave: TrigFactor::Sin(lin(&[(x, 1), (y, -2)])),
        beat: TimeFactor::Cos(Q::int(3)),
    };
    insta::assert_snapshot!(key.factors().join("*"), @"x^2*y*exp(-y)*sin(x - 2*y)*cos(3*t)");
    assert!(Key::one().factors().is_empty());
}

#[test]
fn a_single_linear_form_is_canonical() {
    // The accessors keep the invariant of the type: sorted pairs with
    // nonzero coefficients (so 0·x is the zero form).
    let (x, y) = (Sym::new("x"), Sym::new("y"));
    let two_x = LinearForm::single(x, Q::int(2));
    assert_eq!(two_x.terms(), &[(x, Q::int(2))][..]);
    assert_eq!(two_x, lin(&[(x, 2)]));
    assert_eq!(two_x.coeff(x), Q::int(2));
    assert_eq!(two_x.coeff(y), Q::ZERO);
    assert!(LinearForm::single(y, Q::ZERO).is_zero());
    assert!(LinearForm::single(y, Q::ZERO).terms().is_empty());
}
