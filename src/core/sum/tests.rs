use super::product::binomial;
use super::*;
use crate::core::error::{CoreError, LimitKind};
use crate::core::expr::Expr;
use crate::core::limits;
use crate::core::num::Q;
use crate::core::symbol::Sym;

fn t_times(k: i64) -> Expr {
    Expr::sym(Sym::T).scale(&Q::int(k))
}

/// A power whose size is known in advance (terms with affinely
/// independent exponents: the multinomial count) is refused before
/// any term product; one whose products share monomials is not.
#[test]
fn oversized_powers_are_refused_before_any_work() {
    let (q, p) = (Expr::sym(Sym::new("q")), Expr::sym(Sym::new("p")));
    let base = Expr::int(1).add(&q).add(&p);
    limits::set_limits(limits::Limits::default());
    limits::start_work();
    let refused = base.pow(550);
    assert!(
        matches!(
            refused,
            Err(CoreError::Limit {
                kind: LimitKind::Work,
                ..
            })
        ),
        "{refused:?}"
    );
    assert_eq!(limits::work_done(), Some(0));
    // (1 + q + p)^40 has C(42, 2) = 861 terms, as counted.
    assert_eq!(base.pow(40).map(|e| e.terms().len()).ok(), Some(861));
    // 1, q, q^2 are affinely dependent: no early refusal, and
    // (1 + q + q^2)^300 has 601 terms.
    let dependent = Expr::int(1).add(&q).add(&q.mul(&q).unwrap_or_default());
    assert!(!dependent.has_independent_exponents());
    assert_eq!(dependent.pow(300).map(|e| e.terms().len()).ok(), Some(601));
    assert_eq!(binomial(552, 2), 152_076);
    assert_eq!(binomial(5, 7), 0);
}

/// Keeping low frequencies, and the constant of the dropped sines, on
/// a product worked by hand: sin(3t)·(cos t + cos 3t) =
/// (sin 4t + sin 2t)/2 + (sin 6t)/2 (+ sin 0 = 0).
#[test]
fn kept_terms_and_sine_constants_of_a_product() {
    let states: [Sym; 0] = [];
    let a = Expr::sin_of(&t_times(3), &states).unwrap();
    let b = Expr::cos_of(&t_times(1), &states)
        .unwrap()
        .add(&Expr::cos_of(&t_times(3), &states).unwrap());
    let full = a.mul(&b).unwrap();
    let (pa, pb) = (a.into_by_frequency(), b.into_by_frequency());

    let mut acc = SumBuilder::new();
    acc.add_product_harmonics(&pa, &pb, false, Keep::All)
        .unwrap();
    assert_eq!(acc.finish(), full);

    // Up to frequency 2: only sin(2t)/2 is kept; the constants are
    // 1/2·(1/4) + 1/2·(1/6) = 5/24.
    let mut acc = SumBuilder::new();
    acc.add_product_harmonics(&pa, &pb, false, Keep::UpToWithSines(&Q::int(2)))
        .unwrap();
    let (kept, sines) = acc.finish_with_sines();
    assert_eq!(
        kept,
        Expr::sin_of(&t_times(2), &states).unwrap().scale(&Q::HALF)
    );
    assert_eq!(sines, Expr::num(Q::from_small(5, 24)));

    // The mean (cap 0): sine times cosine has none, and is not formed.
    limits::start_work();
    let mut acc = SumBuilder::new();
    acc.add_product_harmonics(&pa, &pb, false, Keep::UpTo(&Q::ZERO))
        .unwrap();
    assert!(acc.finish().is_zero());
    // Two pairs of parts tested (one unit each), no term product.
    assert_eq!(limits::work_done(), Some(2));
}

fn cos_t(k: i64) -> Expr {
    Expr::cos_of(&t_times(k), &[]).expect("linear argument")
}

fn sin_t(k: i64) -> Expr {
    Expr::sin_of(&t_times(k), &[]).expect("linear argument")
}

/// One product under each [`Keep`]: (cos t + sin 3t)·(cos 2t + sin 2t).
/// By the product-to-sum formulas (Abramowitz & Stegun, Handbook of
/// Mathematical Functions, 1964, 4.3.31–33):
/// cos t cos 2t = (cos t + cos 3t)/2, cos t sin 2t = (sin 3t + sin t)/2,
/// sin 3t cos 2t = (sin t + sin 5t)/2, sin 3t sin 2t = (cos t − cos 5t)/2.
/// The sine constants of the dropped terms are Σ c/h (∫_0^t sin(h s) ds =
/// (1 − cos h t)/h, from memory).
#[test]
fn each_keep_on_one_product() {
    let a = cos_t(1).add(&sin_t(3));
    let b = cos_t(2).add(&sin_t(2));
    let full = a.mul(&b).expect("product");
    let (pa, pb) = (a.into_by_frequency(), b.into_by_frequency());
    let (one, three) = (Q::int(1), Q::int(3));
    // (keep, kept terms, sine constants)
    let cases: [(Keep, &str, &str); 4] = [
        (
            Keep::All,
            "cos(t) + 1/2*cos(3*t) - 1/2*cos(5*t) + sin(t) + 1/2*sin(3*t) + 1/2*sin(5*t)",
            "0",
        ),
        (Keep::UpTo(&Q::ZERO), "0", "0"),
        (Keep::UpTo(&one), "cos(t) + sin(t)", "0"),
        // Dropped: sin 3t/2 (1/6), sin 5t/2 (1/10); cos 3t, cos 5t give none.
        (
            Keep::UpToWithSines(&three),
            "cos(t) + 1/2*cos(3*t) + sin(t) + 1/2*sin(3*t)",
            "1/10",
        ),
    ];
    for (keep, kept, sines) in cases {
        let mut acc = SumBuilder::new();
        acc.add_product_harmonics(&pa, &pb, false, keep)
            .expect("within limits");
        let (got, got_sines) = acc.finish_with_sines();
        assert_eq!(got.to_string(), kept, "{keep:?}");
        assert_eq!(got_sines.to_string(), sines, "{keep:?}");
        // add_scaled of the full product keeps the same terms.
        let mut acc = SumBuilder::new();
        acc.add_scaled(&full, &Q::ONE, keep).expect("within limits");
        let (got2, sines2) = acc.finish_with_sines();
        assert_eq!((got2, sines2), (got, got_sines), "{keep:?}");
    }
    // Keep::All gives the product itself; negate subtracts it.
    let mut acc = SumBuilder::new();
    acc.add_product_harmonics(&pa, &pb, true, Keep::All)
        .expect("within limits");
    assert_eq!(acc.finish(), full.neg());
}

/// `add_product` and `add_parts` sum to what `mul` and `add` give:
/// (x + 1)(x − 1) + (x + 1)^2 = 2x^2 + 2x (from memory).
#[test]
fn sums_of_products_match_mul_and_add() {
    let x = Expr::sym(Sym::new("x"));
    let (a, b) = (x.add(&Expr::int(1)), x.sub(&Expr::int(1)));
    let mut acc = SumBuilder::with_capacity(8);
    acc.add_product(&a, &b, false).expect("within limits");
    acc.add_product(&a, &a, false).expect("within limits");
    insta::assert_snapshot!(acc.finish().to_string(), @"2*x + 2*x^2");
    let mut acc = SumBuilder::new();
    acc.add_parts(&a.clone().into_by_frequency(), &Q::int(2), Keep::All)
        .expect("within limits");
    acc.add_product(&a, &b, true).expect("within limits");
    assert_eq!(acc.finish(), a.scale(&Q::int(2)).sub(&a.mul(&b).unwrap()));
}

/// Splitting by time factor: the parts come by increasing frequency,
/// cosines before sines, and sum to the expression.
#[test]
fn time_parts_split_by_frequency_and_sum_back() {
    let x = Expr::sym(Sym::new("x"));
    let e = x
        .mul(&sin_t(2))
        .unwrap()
        .add(&cos_t(2).scale(&Q::int(3)))
        .add(&x)
        .add(&sin_t(1).scale(&Q::HALF))
        .add(&Expr::sym(Sym::T).mul(&cos_t(1)).unwrap());
    let parts = e.clone().into_by_frequency();
    let shape: Vec<(String, bool, usize)> = parts
        .iter()
        .map(|p| (p.freq.to_string(), p.odd, p.len()))
        .collect();
    let want: Vec<(String, bool, usize)> = vec![
        ("0".into(), false, 1),
        ("1".into(), false, 1),
        ("1".into(), true, 1),
        ("2".into(), false, 1),
        ("2".into(), true, 1),
    ];
    assert_eq!(shape, want);
    let back = parts.iter().fold(Expr::zero(), |s, p| s.add(p.expr()));
    assert_eq!(back, e);
    // Only the t·cos t part has a power of t.
    let with_t: Vec<bool> = parts.iter().map(TimePart::has_time_power).collect();
    assert_eq!(with_t, [false, true, false, false, false]);
    // ∂/∂x keeps the time factor; the part without x vanishes.
    let xs = Sym::new("x");
    assert!(parts[1].derivative(xs).is_none());
    let d = parts[4].derivative(xs).expect("x·sin 2t");
    assert_eq!(d.expr(), &sin_t(2));
    assert!(d.odd);
    // ∫_0^t cos 2t = sin(2t)/2 (from memory), as parts.
    let integral = parts[3].integral_from_zero().expect("integral");
    let sum = integral.iter().fold(Expr::zero(), |s, p| s.add(p.expr()));
    assert_eq!(sum, sin_t(2).scale(&Q::from_small(3, 2)));
    // The builder's parts equal the split of its sum.
    let mut acc = SumBuilder::new();
    acc.add_scaled(&e, &Q::ONE, Keep::All).unwrap();
    let from_builder = acc.finish_parts();
    let sum = from_builder
        .iter()
        .fold(Expr::zero(), |s, p| s.add(p.expr()));
    assert_eq!(sum, e);
}

/// Products, powers and quotients against the binomial theorem and the
/// exponent rules (from memory).
#[test]
fn mul_pow_recip_div() {
    let (xs, ys) = (Sym::new("x"), Sym::new("y"));
    let (x, y) = (Expr::sym(xs), Expr::sym(ys));
    let st = [xs, ys];
    let cases: [(Expr, &str); 5] = [
        // (x + y)^3 = x^3 + 3x^2y + 3xy^2 + y^3.
        (x.add(&y).pow(3).unwrap(), "3*x*y^2 + 3*x^2*y + x^3 + y^3"),
        // (x − 1)^0 = 1.
        (x.sub(&Expr::int(1)).pow(0).unwrap(), "1"),
        // (2 x^2 y)^-1 = x^-2 y^-1 / 2.
        (
            x.pow(2)
                .unwrap()
                .mul(&y)
                .unwrap()
                .scale(&Q::int(2))
                .recip()
                .unwrap(),
            "1/2*x^-2*y^-1",
        ),
        // (x^3 + x y) / (x y) = x^2 y^-1 + 1.
        (
            x.pow(3)
                .unwrap()
                .add(&x.mul(&y).unwrap())
                .div(&x.mul(&y).unwrap())
                .unwrap(),
            "1 + x^2*y^-1",
        ),
        // exp(x) exp(-x) = 1; below, 1/exp(2y) = exp(-2y).
        (
            Expr::exp_of(&x, &st)
                .unwrap()
                .mul(&Expr::exp_of(&x.neg(), &st).unwrap())
                .unwrap(),
            "1",
        ),
    ];
    let got: Vec<String> = cases.iter().map(|(e, _)| e.to_string()).collect();
    let want: Vec<&str> = cases.iter().map(|(_, w)| *w).collect();
    assert_eq!(got, want);
    let e2y = Expr::exp_of(&y.scale(&Q::int(2)), &st).unwrap();
    assert_eq!(
        e2y.recip().unwrap(),
        Expr::exp_of(&y.scale(&Q::int(-2)), &st).unwrap()
    );
    // x^-2 · x^5 = x^3; (x/3) / (1/3) = x.
    assert_eq!(
        x.pow(-2).unwrap().mul(&x.pow(5).unwrap()).unwrap(),
        x.pow(3).unwrap()
    );
    assert_eq!(
        x.scale(&Q::from_small(1, 3))
            .div(&Expr::num(Q::from_small(1, 3)))
            .unwrap(),
        x
    );
    // Refused: division by zero, by a sum, by a power of t.
    assert!(matches!(
        x.div(&Expr::zero()),
        Err(CoreError::DivisionByZero)
    ));
    assert!(matches!(
        x.div(&x.add(&y)),
        Err(CoreError::DivisionBySum { .. })
    ));
    assert!(matches!(
        Expr::sym(Sym::T).recip(),
        Err(CoreError::DivisionBySum { .. })
    ));
}
