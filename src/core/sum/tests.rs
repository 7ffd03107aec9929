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
