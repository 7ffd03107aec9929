//! Tests of the evaluation of Lyndon-basis polynomials on fields.

use super::*;
use crate::series::freelie::{self, Letter};

fn x() -> Expr {
    Expr::sym(Sym::new("x"))
}

fn y() -> Expr {
    Expr::sym(Sym::new("y"))
}

fn states() -> [Sym; 2] {
    [Sym::new("x"), Sym::new("y")]
}

fn pow(e: &Expr, k: i64) -> Expr {
    e.pow(k).expect("power")
}

fn mul(a: &Expr, b: &Expr) -> Expr {
    a.mul(b).expect("product")
}

/// The BCH series to degree `n` with number coefficients.
fn bch(n: u32) -> LiePoly<Expr> {
    let terms = freelie::bch(n, 1, &mut |_| true, &|| false).expect("bch");
    LiePoly::from_sorted_terms(
        terms
            .into_iter()
            .map(|(w, c)| (w, Expr::num(Q::from_big(c))))
            .collect(),
    )
}

/// The memoised evaluation of [`freelie::evaluate`] with one bracket per
/// Lyndon word and a running sum (the route this module replaced).
fn one_by_one(poly: &LiePoly<Expr>, letters: &[Field], states: &[Sym]) -> Field {
    freelie::evaluate(
        poly,
        |l: Letter| Ok::<Field, CoreError>(letters[usize::from(l)].clone()),
        |a, b| a.bracket(b, states),
        |acc, c, v| {
            let scaled = v.mul_expr(c)?;
            match acc {
                None => Ok(scaled),
                Some(a) => a.add(&scaled),
            }
        },
    )
    .map_err(|e: CoreError| e)
    .expect("evaluate")
    .unwrap_or_else(|| Field::zero(states.len()))
}

impl From<freelie::FreeLieError> for CoreError {
    fn from(e: freelie::FreeLieError) -> Self {
        CoreError::Refused {
            reason: e.to_string(),
        }
    }
}

/// Two plane polynomial fields (the pair of the worked BCH session).
fn plane_pair() -> [Field; 2] {
    [
        Field(vec![y(), pow(&x(), 3).scale(&Q::int(-1))]),
        Field(vec![mul(&x(), &y()), pow(&y(), 2).sub(&x())]),
    ]
}

#[test]
fn agrees_with_one_bracket_per_word_on_the_bch_series() {
    let st = states();
    let letters = plane_pair();
    for n in [1, 2, 5, 9] {
        let poly = bch(n);
        assert_eq!(
            evaluate_on_fields(&poly, &letters, &st).expect("fields"),
            one_by_one(&poly, &letters, &st),
            "degree {n}"
        );
    }
}

#[test]
fn agrees_with_one_bracket_per_word_with_time_coefficients() {
    // Coefficients that are not numbers (a power of t, a parameter), on
    // words kept as factors and on words that are not.
    let st = states();
    let letters = plane_pair();
    let t = Expr::sym(Sym::T);
    let a = Expr::sym(Sym::new("a"));
    let xy = |s: &str| -> Word { s.chars().map(|c| Letter::from(c == 'Y')).collect() };
    let poly = LiePoly::from_terms(
        vec![
            (xy("X"), t.clone()),
            (xy("XY"), Expr::int(3)),
            (xy("XXY"), pow(&t, 2)),
            (xy("XXXY"), a.clone()),
            (xy("XXYXY"), Expr::num(Q::ratio(1, 7).expect("1/7"))),
            (xy("XYY"), a.add(&t)),
        ],
        &freelie::Alphabet::uniform(2),
    )
    .expect("poly");
    assert_eq!(
        evaluate_on_fields(&poly, &letters, &st).expect("fields"),
        one_by_one(&poly, &letters, &st)
    );
}

#[test]
fn two_step_nilpotent_pair_ends_at_the_first_bracket() {
    // For X = ∂x and Y = x ∂y, [X, Y] = ∂y is central, so
    // log(e^X e^Y) = X + Y + [X, Y]/2 (the BCH formula of a two-step
    // nilpotent Lie algebra, from memory): (1, x + 1/2).
    let st = states();
    let letters = [
        Field(vec![Expr::int(1), Expr::zero()]),
        Field(vec![Expr::zero(), x()]),
    ];
    let got = evaluate_on_fields(&bch(8), &letters, &st).expect("fields");
    assert_eq!(
        got,
        Field(vec![Expr::int(1), x().add(&Expr::num(Q::ratio(1, 2).expect("1/2")))])
    );
}

#[test]
fn the_zero_polynomial_is_the_zero_field_and_bad_letters_are_refused() {
    let st = states();
    let letters = plane_pair();
    assert_eq!(
        evaluate_on_fields(&LiePoly::zero(), &letters, &st).expect("zero"),
        Field::zero(2)
    );
    let poly = bch(3);
    let err = evaluate_on_fields(&poly, &letters[..1], &st).unwrap_err();
    assert!(matches!(err, CoreError::Refused { .. }), "{err:?}");
    let three = [Field(vec![x()]), Field(vec![y()])];
    assert!(evaluate_on_fields(&poly, &three, &st).is_err());
}
