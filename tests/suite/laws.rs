//! Property tests of the algebraic laws of the exact core, on random
//! expressions and fields in 2–3 state coordinates (`x`, `y`, `z`), one
//! parameter (`a`) and time: ring laws and canonical form of the normal
//! form, trigonometric and exponential identities, derivations (product
//! rule of `pd`, commuting partial derivatives, the chain rule under a
//! linear change of coordinates, the Lie derivative as a derivation), the
//! Lie bracket (its action on functions, antisymmetry, Jacobi identity),
//! the fundamental theorem of calculus for time integrals, and the
//! print → parse round trip through a session for expressions and fields.
//!
//! The laws are standard identities of commutative algebra, calculus and
//! Lie algebras of vector fields (from memory); the bracket convention is
//! the one of DESIGN §2.3 and REFERENCES §0:
//! `[X, Y] = DY·X − DX·Y`, so `[X, Y](h) = X(Y(h)) − Y(X(h))`.
//!
//! This file knows only the public API of `ordex::core` and
//! `ordex::lang::Session`; it must not know how the core stores terms
//! beyond the public term list and key fields.

use std::collections::HashMap;
use std::fmt::Display;

use ordex::core::calc::Period;
use ordex::core::expr::{Key, TimeFactor, TrigFactor};
use ordex::core::sum::{Keep, SumBuilder};
use ordex::core::{Expr, Field, Sym, Q};
use ordex::lang::value::Value;
use ordex::lang::{Event, Session, Style};
use proptest::prelude::*;
use proptest::test_runner::{FileFailurePersistence, TestCaseError};

// ---------------------------------------------------------------------------
// Random expressions.

const STATE_NAMES: [&str; 3] = ["x", "y", "z"];
const PARAM_NAME: &str = "a";

/// Recipe for one random term
/// `(num/den) · x^e1 y^e2 z^e3 · a^p · {1|sin L|cos L} · {1|exp M} · t^n · {1|cos kt|sin kt}`.
#[derive(Clone, Debug)]
struct TermSpec {
    num: i64,
    den: i64,
    /// Exponents of the state coordinates, −1..=3.
    exps: [i64; 3],
    /// Exponent of the parameter, 0..=2.
    param_pow: i64,
    /// 0: no factor, 1: `sin(L)`, 2: `cos(L)`.
    wave: u8,
    /// Coefficients of `L` in halves (−4..=4 → −2..=2).
    wave_lin: [i64; 3],
    /// Whether an `exp(M)` factor is present.
    has_exp: bool,
    /// Coefficients of `M` in halves (−2..=2 → −1..=1).
    exp_lin: [i64; 3],
    /// Power of `t`, 0..=2.
    t_pow: i64,
    /// 0: no factor, 1: `cos(kt)`, 2: `sin(kt)`.
    beat: u8,
    /// Frequency `k` in halves (1..=4 → 1/2..=2).
    freq: i64,
}

fn term_spec() -> impl Strategy<Value = TermSpec> {
    (
        (-4i64..=4, 1i64..=3),
        prop::array::uniform3(-1i64..=3),
        0i64..=2,
        (
            prop_oneof![2 => Just(0u8), 1 => Just(1u8), 1 => Just(2u8)],
            prop::array::uniform3(-4i64..=4),
        ),
        (prop::bool::weighted(0.25), prop::array::uniform3(-2i64..=2)),
        (
            prop_oneof![3 => Just(0i64), 1 => Just(1i64), 1 => Just(2i64)],
            0u8..=2,
            1i64..=4,
        ),
    )
        .prop_map(
            |(
                (num, den),
                exps,
                param_pow,
                (wave, wave_lin),
                (has_exp, exp_lin),
                (t_pow, beat, freq),
            )| {
                TermSpec {
                    num,
                    den,
                    exps,
                    param_pow,
                    wave,
                    wave_lin,
                    has_exp,
                    exp_lin,
                    t_pow,
                    beat,
                    freq,
                }
            },
        )
}

/// A list of term recipes (an expression).
fn expr_spec(max_terms: usize) -> impl Strategy<Value = Vec<TermSpec>> {
    prop::collection::vec(term_spec(), 1..=max_terms)
}

/// Recipes for the three components of a field (the first `dim` are used).
fn field_spec(max_terms: usize) -> impl Strategy<Value = Vec<Vec<TermSpec>>> {
    prop::collection::vec(expr_spec(max_terms), 3)
}

fn dim_strategy() -> impl Strategy<Value = usize> {
    prop_oneof![Just(2usize), Just(3usize)]
}

fn q(n: i64, d: i64) -> Q {
    Q::ratio(n, d).unwrap_or(Q::ZERO)
}

fn states(dim: usize) -> Vec<Sym> {
    STATE_NAMES[..dim].iter().map(|n| Sym::new(n)).collect()
}

fn param() -> Sym {
    Sym::new(PARAM_NAME)
}

fn t() -> Expr {
    Expr::sym(Sym::T)
}

/// Turns a core error into a test failure naming the step.
trait OrFail<T> {
    fn or_fail(self, what: &str) -> Result<T, TestCaseError>;
}

impl<T, E: Display> OrFail<T> for Result<T, E> {
    fn or_fail(self, what: &str) -> Result<T, TestCaseError> {
        self.map_err(|e| TestCaseError::fail(format!("{what}: {e}")))
    }
}

/// The linear form `Σ (c_i/den) x_i` over the first `dim` coordinates.
fn linear_form(coeffs: &[i64; 3], den: i64, st: &[Sym]) -> Expr {
    st.iter().zip(coeffs).fold(Expr::zero(), |acc, (s, c)| {
        acc.add(&Expr::sym(*s).scale(&q(*c, den)))
    })
}

/// Builds a term with the core's own operations (products, powers,
/// `sin_of`, `cos_of`, `exp_of`), so the construction itself exercises them.
fn build_term(spec: &TermSpec, dim: usize) -> Result<Expr, TestCaseError> {
    let st = states(dim);
    let mut e = Expr::num(q(spec.num, spec.den));
    for (s, p) in st.iter().zip(&spec.exps) {
        e = e
            .mul(&Expr::sym(*s).pow(*p).or_fail("state power")?)
            .or_fail("product")?;
    }
    e = e
        .mul(
            &Expr::sym(param())
                .pow(spec.param_pow)
                .or_fail("parameter power")?,
        )
        .or_fail("product")?;
    if spec.wave != 0 {
        let l = linear_form(&spec.wave_lin, 2, &st);
        let w = if spec.wave == 1 {
            Expr::sin_of(&l, &st)
        } else {
            Expr::cos_of(&l, &st)
        };
        e = e
            .mul(&w.or_fail("trigonometric factor")?)
            .or_fail("product")?;
    }
    if spec.has_exp {
        let m = linear_form(&spec.exp_lin, 2, &st);
        e = e
            .mul(&Expr::exp_of(&m, &st).or_fail("exponential factor")?)
            .or_fail("product")?;
    }
    e = e
        .mul(&t().pow(spec.t_pow).or_fail("power of t")?)
        .or_fail("product")?;
    if spec.beat != 0 {
        let kt = t().scale(&q(spec.freq, 2));
        let b = if spec.beat == 1 {
            Expr::cos_of(&kt, &st)
        } else {
            Expr::sin_of(&kt, &st)
        };
        e = e.mul(&b.or_fail("time factor")?).or_fail("product")?;
    }
    Ok(e)
}

fn build_expr(specs: &[TermSpec], dim: usize) -> Result<Expr, TestCaseError> {
    let mut e = Expr::zero();
    for s in specs {
        e = e.add(&build_term(s, dim)?);
    }
    Ok(e)
}

fn build_field(specs: &[Vec<TermSpec>], dim: usize) -> Result<Field, TestCaseError> {
    Ok(Field(
        specs[..dim]
            .iter()
            .map(|s| build_expr(s, dim))
            .collect::<Result<_, _>>()?,
    ))
}

/// Keeps only non-negative state exponents (for substitutions by sums,
/// which are defined on polynomials only).
fn polynomial_specs(specs: &[TermSpec]) -> Vec<TermSpec> {
    specs
        .iter()
        .map(|s| TermSpec {
            exps: s.exps.map(|e| e.max(0)),
            ..s.clone()
        })
        .collect()
}

/// Plain polynomial terms in the states, parameter and time with integer
/// time frequencies (no state-trigonometric or exponential factor): the
/// terms that products multiply in packed form.
fn plain_specs(specs: &[TermSpec]) -> Vec<TermSpec> {
    specs
        .iter()
        .map(|s| TermSpec {
            exps: s.exps.map(|e| e.max(0)),
            wave: 0,
            has_exp: false,
            freq: 2 * (1 + s.freq % 2),
            ..s.clone()
        })
        .collect()
}

/// Polynomial terms times a state-trigonometric factor with integer
/// coefficients (from −2 to 2), integer time frequencies and no
/// exponential factor: the terms that products multiply packed, grouped by
/// trigonometric factor.
fn trig_specs(specs: &[TermSpec]) -> Vec<TermSpec> {
    specs
        .iter()
        .map(|s| TermSpec {
            wave_lin: s.wave_lin.map(|c| c - c % 2),
            wave: s.wave,
            ..plain_specs(std::slice::from_ref(s))[0].clone()
        })
        .collect()
}

/// Case count (`PROPTEST_CASES` overrides it for longer runs); failing
/// cases are recorded for replay under `proptest-regressions/`.
fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases: std::env::var("PROPTEST_CASES")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or(cases),
        max_shrink_iters: 256,
        failure_persistence: Some(Box::new(FileFailurePersistence::Direct(
            "proptest-regressions/laws.txt",
        ))),
        ..ProptestConfig::default()
    }
}

// ---------------------------------------------------------------------------
// Sessions.

/// Runs `text` in `session`; returns the printed lines, or the error or
/// failed check as a message.
fn run(session: &mut Session, text: &str) -> Result<Vec<String>, String> {
    let mut lines = Vec::new();
    let mut error = None;
    let status = session.run_text(text, Some("laws"), &mut |ev| match ev {
        Event::Report(r) => {
            lines.extend(r.lines.iter().map(|l| (l.style, l.text.clone())));
        }
        Event::Error(msg) => error = Some(msg),
    });
    if let Some(msg) = error {
        return Err(format!("error running `{text}`: {msg}"));
    }
    if status.check_failed {
        let all: Vec<String> = lines.iter().map(|(_, l)| l.clone()).collect();
        return Err(format!("check failed in `{text}`:\n{}", all.join("\n")));
    }
    Ok(lines
        .into_iter()
        .filter(|(s, _)| *s == Style::Result)
        .map(|(_, l)| l)
        .collect())
}

fn session_for(dim: usize) -> Result<Session, TestCaseError> {
    let mut s = Session::new();
    let decl = format!(
        "state {}\nparam {PARAM_NAME}",
        STATE_NAMES[..dim].join(", ")
    );
    run(&mut s, &decl).map_err(TestCaseError::fail)?;
    Ok(s)
}

fn field_text(f: &Field) -> String {
    let parts: Vec<String> = f.0.iter().map(|e| e.to_string()).collect();
    format!("[{}]", parts.join(", "))
}

// ---------------------------------------------------------------------------
// Laws.

proptest! {
    #![proptest_config(config(128))]

    /// Associativity, commutativity, distributivity, neutral elements and
    /// additive inverse (commutative ring laws, from memory).
    #[test]
    fn ring_laws(dim in dim_strategy(), sa in expr_spec(4), sb in expr_spec(4), sc in expr_spec(3)) {
        let a = build_expr(&sa, dim)?;
        let b = build_expr(&sb, dim)?;
        let c = build_expr(&sc, dim)?;
        prop_assert_eq!(a.add(&b).add(&c), a.add(&b.add(&c)), "associativity of +");
        prop_assert_eq!(a.add(&b), b.add(&a), "commutativity of +");
        prop_assert_eq!(a.add(&a.neg()), Expr::zero(), "additive inverse");
        prop_assert_eq!(a.sub(&a), Expr::zero(), "a - a");
        prop_assert_eq!(a.add(&Expr::zero()), a.clone(), "neutral 0");
        let ab = a.mul(&b).or_fail("a*b")?;
        let ba = b.mul(&a).or_fail("b*a")?;
        prop_assert_eq!(&ab, &ba, "commutativity of *");
        let ab_c = ab.mul(&c).or_fail("(ab)c")?;
        let a_bc = a.mul(&b.mul(&c).or_fail("bc")?).or_fail("a(bc)")?;
        prop_assert_eq!(ab_c, a_bc, "associativity of *");
        let left = a.mul(&b.add(&c)).or_fail("a(b+c)")?;
        let right = ab.add(&a.mul(&c).or_fail("ac")?);
        prop_assert_eq!(left, right, "distributivity");
        prop_assert_eq!(a.mul(&Expr::int(1)).or_fail("a*1")?, a.clone(), "neutral 1");
        prop_assert_eq!(a.mul(&Expr::zero()).or_fail("a*0")?, Expr::zero(), "absorbing 0");
        prop_assert_eq!(a.neg().mul(&b).or_fail("(-a)b")?, ab.neg(), "(-a)b = -(ab)");
        prop_assert_eq!(a.pow(2).or_fail("a^2")?, a.mul(&a).or_fail("a*a")?, "a^2 = a*a");
        // (a + b)(a − b) = a² − b²: heavy cancellation between products.
        let lhs = a.add(&b).mul(&a.sub(&b)).or_fail("(a+b)(a-b)")?;
        let rhs = a.pow(2).or_fail("a^2")?.sub(&b.pow(2).or_fail("b^2")?);
        prop_assert_eq!(lhs, rhs, "difference of squares");
    }

    /// The normal form is canonical: rebuilding from its own terms (in any
    /// order), going round through a product and a quotient, or scaling
    /// there and back gives the identical form; terms are strictly sorted,
    /// with nonzero coefficients and canonical signs of trigonometric
    /// arguments (DESIGN §2.2).
    #[test]
    fn normal_form_is_idempotent(dim in dim_strategy(), sa in expr_spec(5), sm in prop::array::uniform3(-2i64..=2)) {
        let a = build_expr(&sa, dim)?;
        let st = states(dim);
        // Invariants of the term list.
        for w in a.terms().windows(2) {
            prop_assert!(w[0].0 < w[1].0, "terms not strictly sorted in {}", a);
        }
        for (k, c) in a.terms() {
            prop_assert!(!c.is_zero(), "zero coefficient in {}", a);
            if let TrigFactor::Cos(l) | TrigFactor::Sin(l) = &k.wave {
                prop_assert!(!l.is_zero() && !l.is_negative(), "non-canonical argument in {}", a);
            }
            if let TimeFactor::Cos(f) | TimeFactor::Sin(f) = &k.beat {
                prop_assert!(!f.is_zero() && !f.is_negative(), "non-canonical frequency in {}", a);
            }
        }
        // Rebuilding from the terms, forwards and backwards.
        prop_assert_eq!(Expr::from_terms(a.terms().to_vec()), a.clone());
        let mut rev = a.terms().to_vec();
        rev.reverse();
        prop_assert_eq!(Expr::from_terms(rev), a.clone());
        let summed = a.terms().iter().rev().fold(Expr::zero(), |acc, (k, c)| {
            acc.add(&Expr::term(k.clone(), c.clone()))
        });
        prop_assert_eq!(summed, a.clone());
        // Through genuine products: a(1 + x) − ax, a·x·x⁻¹, a·exp(M)·exp(−M).
        let x = Expr::sym(st[0]);
        let one_plus_x = Expr::int(1).add(&x);
        let back = a.mul(&one_plus_x).or_fail("a(1+x)")?.sub(&a.mul(&x).or_fail("ax")?);
        prop_assert_eq!(back, a.clone(), "a(1+x) - ax");
        let inv = x.pow(-1).or_fail("x^-1")?;
        prop_assert_eq!(a.mul(&x).or_fail("ax")?.mul(&inv).or_fail("ax/x")?, a.clone(), "a x x^-1");
        prop_assert_eq!(a.mul(&x).or_fail("ax")?.div(&x).or_fail("ax/x")?, a.clone(), "(a x)/x");
        let m = linear_form(&sm, 2, &st);
        let em = Expr::exp_of(&m, &st).or_fail("exp(M)")?;
        let emn = Expr::exp_of(&m.neg(), &st).or_fail("exp(-M)")?;
        prop_assert_eq!(a.mul(&em).or_fail("a exp M")?.mul(&emn).or_fail("a exp M exp -M")?, a.clone());
        let three = q(3, 7);
        prop_assert_eq!(a.scale(&three).scale(&q(7, 3)), a.clone(), "scale there and back");
    }

    /// Trigonometric and exponential identities on random linear arguments
    /// (state part with integer or half-integer coefficients, optionally
    /// plus a time frequency): Pythagoras, double angle, addition formulas,
    /// parity, and exp(L1) exp(L2) = exp(L1 + L2) (from memory).
    #[test]
    fn trig_and_exp_identities(
        dim in dim_strategy(),
        l1 in prop::array::uniform3(-4i64..=4),
        l2 in prop::array::uniform3(-4i64..=4),
        k1 in -3i64..=3,
        k2 in -3i64..=3,
    ) {
        let st = states(dim);
        let arg1 = linear_form(&l1, 2, &st).add(&t().scale(&q(k1, 2)));
        let arg2 = linear_form(&l2, 2, &st).add(&t().scale(&q(k2, 2)));
        let s1 = Expr::sin_of(&arg1, &st).or_fail("sin L1")?;
        let c1 = Expr::cos_of(&arg1, &st).or_fail("cos L1")?;
        let s2 = Expr::sin_of(&arg2, &st).or_fail("sin L2")?;
        let c2 = Expr::cos_of(&arg2, &st).or_fail("cos L2")?;
        let sq = s1.pow(2).or_fail("sin^2")?.add(&c1.pow(2).or_fail("cos^2")?);
        prop_assert_eq!(sq, Expr::int(1), "sin^2 + cos^2 for L = {}", arg1);
        let two = arg1.scale(&Q::int(2));
        let s2l = Expr::sin_of(&two, &st).or_fail("sin 2L")?;
        let c2l = Expr::cos_of(&two, &st).or_fail("cos 2L")?;
        prop_assert_eq!(s2l, s1.mul(&c1).or_fail("sin cos")?.scale(&Q::int(2)), "sin 2L");
        prop_assert_eq!(c2l, c1.pow(2).or_fail("c^2")?.sub(&s1.pow(2).or_fail("s^2")?), "cos 2L");
        let sum = arg1.add(&arg2);
        let s_sum = Expr::sin_of(&sum, &st).or_fail("sin(L1+L2)")?;
        let c_sum = Expr::cos_of(&sum, &st).or_fail("cos(L1+L2)")?;
        let s_rhs = s1.mul(&c2).or_fail("s1 c2")?.add(&c1.mul(&s2).or_fail("c1 s2")?);
        let c_rhs = c1.mul(&c2).or_fail("c1 c2")?.sub(&s1.mul(&s2).or_fail("s1 s2")?);
        prop_assert_eq!(s_sum, s_rhs, "sin(L1 + L2)");
        prop_assert_eq!(c_sum, c_rhs, "cos(L1 + L2)");
        prop_assert_eq!(Expr::sin_of(&arg1.neg(), &st).or_fail("sin -L")?, s1.neg(), "sin(-L)");
        prop_assert_eq!(Expr::cos_of(&arg1.neg(), &st).or_fail("cos -L")?, c1.clone(), "cos(-L)");
        // exp of the state parts only (time is not allowed in exp).
        let m1 = linear_form(&l1, 2, &st);
        let m2 = linear_form(&l2, 2, &st);
        let e1 = Expr::exp_of(&m1, &st).or_fail("exp M1")?;
        let e2 = Expr::exp_of(&m2, &st).or_fail("exp M2")?;
        let e12 = Expr::exp_of(&m1.add(&m2), &st).or_fail("exp(M1+M2)")?;
        prop_assert_eq!(e1.mul(&e2).or_fail("exp exp")?, e12, "exp(M1) exp(M2)");
    }

    /// Product rule of `pd` for every symbol (states, parameter, time), and
    /// `pd` commutes for every pair of symbols (from memory).
    #[test]
    fn partial_derivatives(dim in dim_strategy(), sa in expr_spec(4), sb in expr_spec(3)) {
        let a = build_expr(&sa, dim)?;
        let b = build_expr(&sb, dim)?;
        let mut syms = states(dim);
        syms.push(param());
        syms.push(Sym::T);
        let ab = a.mul(&b).or_fail("ab")?;
        for s in &syms {
            let lhs = ab.pd(*s);
            let rhs = a.pd(*s).mul(&b).or_fail("a' b")?.add(&a.mul(&b.pd(*s)).or_fail("a b'")?);
            prop_assert_eq!(lhs, rhs, "product rule in {}", s.name());
        }
        for s in &syms {
            for r in &syms {
                prop_assert_eq!(a.pd(*s).pd(*r), a.pd(*r).pd(*s), "pd in {} and {}", s.name(), r.name());
            }
        }
    }

    /// A linear change of coordinates `x ↦ x + c·y` is a ring homomorphism
    /// and obeys the chain rule
    /// `∂_y (e∘φ) = c·(∂_x e)∘φ + (∂_y e)∘φ` (from memory).
    #[test]
    fn linear_substitution(dim in dim_strategy(), sa in expr_spec(3), sb in expr_spec(3), c in -4i64..=4) {
        let a = build_expr(&polynomial_specs(&sa), dim)?;
        let b = build_expr(&polynomial_specs(&sb), dim)?;
        let st = states(dim);
        let (x, y) = (st[0], st[1]);
        let cq = q(c, 2);
        let mut map = HashMap::new();
        map.insert(x, Expr::sym(x).add(&Expr::sym(y).scale(&cq)));
        let phi = |e: &Expr| e.subst(&map, &st);
        let ab = a.mul(&b).or_fail("ab")?;
        let lhs = phi(&ab).or_fail("phi(ab)")?;
        let rhs = phi(&a).or_fail("phi(a)")?.mul(&phi(&b).or_fail("phi(b)")?).or_fail("phi(a)phi(b)")?;
        prop_assert_eq!(lhs, rhs, "substitution is multiplicative");
        let lhs = phi(&a).or_fail("phi(a)")?.pd(y);
        let rhs = phi(&a.pd(x)).or_fail("phi(a_x)")?.scale(&cq).add(&phi(&a.pd(y)).or_fail("phi(a_y)")?);
        prop_assert_eq!(lhs, rhs, "chain rule");
    }

    /// `d/dt ∫_0^t e = e`, the antiderivative differentiates back, and
    /// `∫_0^t e` vanishes at t = 0 (fundamental theorem of calculus).
    #[test]
    fn time_integrals(dim in dim_strategy(), sa in expr_spec(4)) {
        let e = build_expr(&sa, dim)?;
        prop_assume!(e.is_time_varying());
        let big = e.integral_from_zero().or_fail("integral")?;
        prop_assert_eq!(big.pd(Sym::T), e.clone(), "d/dt of the integral of {}", e);
        prop_assert_eq!(big.at_time_zero(), Expr::zero(), "integral at t = 0");
        let anti = e.antiderivative_t().or_fail("antiderivative")?;
        prop_assert_eq!(anti.pd(Sym::T), e.clone(), "d/dt of the antiderivative");
    }

    /// The short routes for time integrals of trigonometric polynomials
    /// (no power of t) agree with the general one through the
    /// antiderivative: `∫_0^t e = F(t) − F(0)` and the mean over a period
    /// `(F(T) − F(0))/T`, for periods that hold whole cycles of every
    /// frequency or not.
    #[test]
    fn short_time_integrals_agree_with_the_antiderivative(
        dim in dim_strategy(),
        sa in expr_spec(5),
        no_t in any::<bool>(),
        period in 1i64..=4,
    ) {
        let specs: Vec<TermSpec> = if no_t {
            sa.iter().map(|s| TermSpec { t_pow: 0, ..s.clone() }).collect()
        } else {
            sa
        };
        let e = build_expr(&specs, dim)?;
        let anti = e.antiderivative_t().or_fail("antiderivative")?;
        prop_assert_eq!(
            e.integral_from_zero().or_fail("integral")?,
            anti.sub(&anti.at_time_zero()),
            "integral from 0 of {}", e
        );
        let per = Period(Q::int(period));
        let general = e
            .integral_over(&per)
            .or_fail("integral over the period")?
            .div(&per.to_expr())
            .or_fail("division by the period")?;
        prop_assert_eq!(e.mean_over(&per).or_fail("mean")?, general, "mean of {}", e);
    }

    /// Sums of an expression and products of expressions split by time
    /// factor (the inner loop of brackets, packed for polynomial parts
    /// with integer frequencies and integer state-trigonometric factors)
    /// equal the sum of the product; keeping frequencies up to a cap
    /// keeps exactly the product's terms up to it, with `Σ c/h` over the
    /// dropped `c·sin(h t)` apart (`∫_0^t sin(h s) ds = (1 − cos(h t))/h`).
    #[test]
    fn split_products_agree_with_the_product(
        dim in dim_strategy(),
        sa in expr_spec(5),
        sb in expr_spec(5),
        sc in expr_spec(3),
        kinds in 0u8..27,
        cap in 0i64..=8,
    ) {
        // Each of a, b, c: general (0), plain polynomial (1) or polynomial
        // times integer state-trigonometric factors (2); the last two are
        // packed.
        let kind = |i: u32| kinds / 3u8.pow(i) % 3;
        let pick = |specs: &[TermSpec], i: u32| match kind(i) {
            1 => plain_specs(specs),
            2 => trig_specs(specs),
            _ => specs.to_vec(),
        };
        let a = build_expr(&pick(&sa, 0), dim)?;
        let b = build_expr(&pick(&sb, 1), dim)?;
        let c = build_expr(&pick(&sc, 2), dim)?;
        for (i, e) in [&a, &b, &c].into_iter().enumerate() {
            if kind(i as u32) != 0 {
                prop_assert!(
                    e.clone().into_by_frequency().iter().all(|p| p.is_packed()),
                    "{} is packed", e
                );
            }
        }
        // c/3 + a·b − b·c + (2^50 + 1)a·c, as one scaled expression and
        // three sums of products into one accumulator (the last with
        // numerators whose products need two words).
        let third = q(1, 3);
        let big = a.scale(&Q::int((1i64 << 50) + 1));
        let full = c
            .scale(&third)
            .add(&a.mul(&b).or_fail("ab")?)
            .sub(&b.mul(&c).or_fail("bc")?)
            .add(&big.mul(&c).or_fail("big c")?);
        let (pa, pb, pc, pbig) = (
            a.into_by_frequency(),
            b.into_by_frequency(),
            c.clone().into_by_frequency(),
            big.into_by_frequency(),
        );
        let sum = |keep: Keep| -> Result<(Expr, Expr), TestCaseError> {
            let mut acc = SumBuilder::new();
            acc.add_scaled(&c, &third, keep).or_fail("c/3")?;
            acc.add_product_harmonics(&pa, &pb, false, keep).or_fail("ab")?;
            acc.add_product_harmonics(&pb, &pc, true, keep).or_fail("bc")?;
            acc.add_product_harmonics(&pbig, &pc, false, keep).or_fail("big c")?;
            Ok(acc.finish_with_sines())
        };
        prop_assert_eq!(sum(Keep::All)?.0, full.clone(), "whole product");
        let capq = q(cap, 2);
        let kept = full.filter(|k, _| k.beat.frequency() <= capq);
        let sines = full.map_terms(|k, c| match &k.beat {
            TimeFactor::Sin(h) if *h > capq => Some((
                Key { beat: TimeFactor::One, ..k.clone() },
                c.div(h).unwrap_or(Q::ZERO),
            )),
            _ => None,
        });
        let (k1, s1) = sum(Keep::UpTo(&capq))?;
        prop_assert_eq!(k1, kept.clone(), "kept up to {}", capq);
        prop_assert!(s1.is_zero());
        let (k2, s2) = sum(Keep::UpToWithSines(&capq))?;
        prop_assert_eq!(k2, kept, "kept up to {} with sines", capq);
        prop_assert_eq!(s2, sines, "sine constants above {}", capq);
    }

    /// The Lie derivative is a derivation: `X(fg) = X(f) g + f X(g)`.
    #[test]
    fn lie_derivative_is_a_derivation(dim in dim_strategy(), sx in field_spec(2), sf in expr_spec(3), sg in expr_spec(3)) {
        let st = states(dim);
        let x = build_field(&sx, dim)?;
        let f = build_expr(&sf, dim)?;
        let g = build_expr(&sg, dim)?;
        let lhs = x.lie_derivative(&f.mul(&g).or_fail("fg")?, &st).or_fail("X(fg)")?;
        let xf = x.lie_derivative(&f, &st).or_fail("X(f)")?;
        let xg = x.lie_derivative(&g, &st).or_fail("X(g)")?;
        let rhs = xf.mul(&g).or_fail("X(f)g")?.add(&f.mul(&xg).or_fail("fX(g)")?);
        prop_assert_eq!(lhs, rhs);
        // On a coordinate the Lie derivative is the component (DESIGN §2.3).
        for (i, s) in st.iter().enumerate() {
            prop_assert_eq!(x.lie_derivative(&Expr::sym(*s), &st).or_fail("X(x_i)")?, x.0[i].clone());
        }
    }

    /// `[X, Y](h) = X(Y(h)) − Y(X(h))` (REFERENCES §0), and the bracket
    /// is antisymmetric with `[X, X] = 0`.
    #[test]
    fn bracket_is_the_commutator(dim in dim_strategy(), sx in field_spec(2), sy in field_spec(2), sh in expr_spec(3)) {
        let st = states(dim);
        let x = build_field(&sx, dim)?;
        let y = build_field(&sy, dim)?;
        let h = build_expr(&sh, dim)?;
        let xy = x.bracket(&y, &st).or_fail("[X,Y]")?;
        let lhs = xy.lie_derivative(&h, &st).or_fail("[X,Y](h)")?;
        let xyh = x.lie_derivative(&y.lie_derivative(&h, &st).or_fail("Y(h)")?, &st).or_fail("X(Y(h))")?;
        let yxh = y.lie_derivative(&x.lie_derivative(&h, &st).or_fail("X(h)")?, &st).or_fail("Y(X(h))")?;
        prop_assert_eq!(lhs, xyh.sub(&yxh), "[X,Y](h)");
        let yx = y.bracket(&x, &st).or_fail("[Y,X]")?;
        prop_assert_eq!(xy, yx.scale(&Q::int(-1)), "antisymmetry");
        prop_assert!(x.bracket(&x, &st).or_fail("[X,X]")?.is_zero(), "[X,X] = 0");
    }

    /// Jacobi identity `[X,[Y,Z]] + [Y,[Z,X]] + [Z,[X,Y]] = 0`.
    #[test]
    fn jacobi_identity(dim in dim_strategy(), sx in field_spec(2), sy in field_spec(2), sz in field_spec(1)) {
        let st = states(dim);
        let x = build_field(&sx, dim)?;
        let y = build_field(&sy, dim)?;
        let z = build_field(&sz, dim)?;
        let br = |a: &Field, b: &Field| a.bracket(b, &st);
        let j1 = br(&x, &br(&y, &z).or_fail("[Y,Z]")?).or_fail("[X,[Y,Z]]")?;
        let j2 = br(&y, &br(&z, &x).or_fail("[Z,X]")?).or_fail("[Y,[Z,X]]")?;
        let j3 = br(&z, &br(&x, &y).or_fail("[X,Y]")?).or_fail("[Z,[X,Y]]")?;
        let sum = j1.add(&j2).or_fail("sum")?.add(&j3).or_fail("sum")?;
        prop_assert!(sum.is_zero(), "Jacobi sum is {:?}", sum);
    }
}

proptest! {
    #![proptest_config(config(64))]

    /// The printed form of an expression, read back by a session, is the
    /// same normal form; the session's arithmetic on printed operands agrees
    /// with the core's; a bare line prints the same text again.
    #[test]
    fn expression_round_trip(dim in dim_strategy(), sa in expr_spec(5), sb in expr_spec(3)) {
        let a = build_expr(&sa, dim)?;
        let b = build_expr(&sb, dim)?;
        let mut s = session_for(dim)?;
        run(&mut s, &format!("E = {a}")).map_err(TestCaseError::fail)?;
        match s.get("E") {
            Some(Value::Scalar(e)) => prop_assert_eq!(e, &a, "printed: {}", a),
            other => return Err(TestCaseError::fail(format!("E is {other:?}"))),
        }
        let printed = run(&mut s, "E").map_err(TestCaseError::fail)?;
        prop_assert_eq!(printed, vec![a.to_string()]);
        let sum = a.add(&b);
        let prod = a.mul(&b).or_fail("ab")?;
        run(&mut s, &format!("check ({a}) + ({b}) == {sum}")).map_err(TestCaseError::fail)?;
        run(&mut s, &format!("check ({a})*({b}) == {prod}")).map_err(TestCaseError::fail)?;
        let st = states(dim);
        let dx = a.pd(st[0]);
        run(&mut s, &format!("check pd({a}, {}) == {dx}", STATE_NAMES[0])).map_err(TestCaseError::fail)?;
    }

    /// The printed form of a field, read back by a session, is the same
    /// field; the session's bracket and Lie derivative of printed fields
    /// agree with the core's.
    #[test]
    fn field_round_trip(dim in dim_strategy(), sx in field_spec(2), sy in field_spec(2), sh in expr_spec(2)) {
        let st = states(dim);
        let x = build_field(&sx, dim)?;
        let y = build_field(&sy, dim)?;
        let h = build_expr(&sh, dim)?;
        let mut s = session_for(dim)?;
        run(&mut s, &format!("F = {}\nG = {}", field_text(&x), field_text(&y))).map_err(TestCaseError::fail)?;
        match s.get("F") {
            Some(Value::Field(f)) => prop_assert_eq!(&f.field, &x, "printed: {}", field_text(&x)),
            other => return Err(TestCaseError::fail(format!("F is {other:?}"))),
        }
        let printed = run(&mut s, "F").map_err(TestCaseError::fail)?;
        prop_assert_eq!(printed, vec![field_text(&x)]);
        let xy = x.bracket(&y, &st).or_fail("[X,Y]")?;
        run(&mut s, &format!("check [F, G] == {}", field_text(&xy))).map_err(TestCaseError::fail)?;
        let xh = x.lie_derivative(&h, &st).or_fail("X(h)")?;
        run(&mut s, &format!("check F({h}) == {xh}")).map_err(TestCaseError::fail)?;
    }
}

// ---------------------------------------------------------------------------
// Unspecified functions (DESIGN §2.7a): atoms `V^(k)(L + c)`, `∂^α J(L1, L2)`.

mod functions {
    use super::*;
    use ordex::core::func::Signature;
    use std::sync::Arc;

    fn sig_v() -> Arc<Signature> {
        Arc::new(Signature {
            name: "V".into(),
            params: vec!["s".into()],
        })
    }

    fn sig_j() -> Arc<Signature> {
        Arc::new(Signature {
            name: "J".into(),
            params: vec!["u".into(), "w".into()],
        })
    }

    /// A random argument: a linear form with small integer coefficients in
    /// the states plus a constant 0, 1/2 or pi.
    #[derive(Clone, Debug)]
    pub struct ArgSpec {
        lin: [i64; 3],
        constant: u8,
    }

    fn arg_spec() -> impl Strategy<Value = ArgSpec> {
        (prop::array::uniform3(-2i64..=2), 0u8..3)
            .prop_map(|(lin, constant)| ArgSpec { lin, constant })
    }

    fn arg_of(a: &ArgSpec, dim: usize) -> Expr {
        let st = states(dim);
        let l = linear_form(&a.lin, 1, &st);
        match a.constant {
            0 => l,
            1 => l.add(&Expr::num(q(1, 2))),
            _ => l.add(&Expr::sym(Sym::PI)),
        }
    }

    /// A random atom: `V^(k)(L)` (k ≤ 2) or `∂^α J(L1, L2)` (|α| ≤ 2).
    #[derive(Clone, Debug)]
    pub struct AtomSpec {
        two: bool,
        deriv: [u32; 2],
        a: ArgSpec,
        b: ArgSpec,
    }

    fn atom_spec() -> impl Strategy<Value = AtomSpec> {
        (
            any::<bool>(),
            prop::array::uniform2(0u32..=1),
            arg_spec(),
            arg_spec(),
        )
            .prop_map(|(two, deriv, a, b)| AtomSpec { two, deriv, a, b })
    }

    fn atom_of(s: &AtomSpec, dim: usize) -> Result<Expr, TestCaseError> {
        let st = states(dim);
        if s.two {
            Expr::apply_function(
                &sig_j(),
                &s.deriv,
                &[arg_of(&s.a, dim), arg_of(&s.b, dim)],
                &st,
            )
            .or_fail("J")
        } else {
            Expr::apply_function(
                &sig_v(),
                &[s.deriv[0] + s.deriv[1]],
                &[arg_of(&s.a, dim)],
                &st,
            )
            .or_fail("V")
        }
    }

    /// `Σ e_i · A_i^{k_i}` with `e_i` random expressions of the core laws
    /// and `k_i` in −1..=2.
    fn with_atoms(
        parts: &[(Vec<TermSpec>, AtomSpec, i64)],
        dim: usize,
    ) -> Result<Expr, TestCaseError> {
        let mut out = Expr::zero();
        for (e, a, k) in parts {
            let base = build_expr(e, dim)?;
            let atom = atom_of(a, dim)?.pow(*k).or_fail("A^k")?;
            out = out.add(&base.mul(&atom).or_fail("e*A")?);
        }
        Ok(out)
    }

    fn atom_expr_spec() -> impl Strategy<Value = Vec<(Vec<TermSpec>, AtomSpec, i64)>> {
        prop::collection::vec((expr_spec(2), atom_spec(), -1i64..=2), 1..=3)
    }

    proptest! {
        #![proptest_config(config(64))]

        /// The chain rule on one atom, the product rule and commuting
        /// partial derivatives on sums of products with atoms (standard
        /// calculus, from memory).
        #[test]
        fn calculus_with_atoms(dim in dim_strategy(), sa in atom_spec(), ea in atom_expr_spec(), eb in atom_expr_spec()) {
            let st = states(dim);
            let x = st[0];
            let atom = atom_of(&sa, dim)?;
            // ∂_x f^(α)(L1, …) = Σ_j (∂L_j/∂x) f^(α+e_j)(L1, …).
            let expected = if sa.two {
                let (l1, l2) = (arg_of(&sa.a, dim).pd(x), arg_of(&sa.b, dim).pd(x));
                let args = [arg_of(&sa.a, dim), arg_of(&sa.b, dim)];
                let d1 = Expr::apply_function(&sig_j(), &[sa.deriv[0] + 1, sa.deriv[1]], &args, &st).or_fail("J_a")?;
                let d2 = Expr::apply_function(&sig_j(), &[sa.deriv[0], sa.deriv[1] + 1], &args, &st).or_fail("J_b")?;
                l1.mul(&d1).or_fail("l1 d1")?.add(&l2.mul(&d2).or_fail("l2 d2")?)
            } else {
                let k = sa.deriv[0] + sa.deriv[1];
                let d = Expr::apply_function(&sig_v(), &[k + 1], &[arg_of(&sa.a, dim)], &st).or_fail("V'")?;
                arg_of(&sa.a, dim).pd(x).mul(&d).or_fail("l d")?
            };
            prop_assert_eq!(atom.pd(x), expected);
            let a = with_atoms(&ea, dim)?;
            let b = with_atoms(&eb, dim)?;
            let ab = a.mul(&b).or_fail("ab")?;
            let rule = a.pd(x).mul(&b).or_fail("a'b")?.add(&a.mul(&b.pd(x)).or_fail("ab'")?);
            prop_assert_eq!(ab.pd(x), rule);
            let y = st[dim - 1];
            prop_assert_eq!(a.pd(x).pd(y), a.pd(y).pd(x));
        }

        /// The printed form of an expression with atoms reads back to the
        /// same normal form in a session that declares the functions.
        #[test]
        fn round_trip_with_atoms(dim in dim_strategy(), ea in atom_expr_spec()) {
            let a = with_atoms(&ea, dim)?;
            let mut s = session_for(dim)?;
            run(&mut s, &format!("func V(s), J(u, w)\nE = {a}")).map_err(TestCaseError::fail)?;
            match s.get("E") {
                Some(Value::Scalar(e)) => prop_assert_eq!(e, &a, "printed: {}", a),
                other => return Err(TestCaseError::fail(format!("E is {other:?}"))),
            }
            let printed = run(&mut s, "E").map_err(TestCaseError::fail)?;
            prop_assert_eq!(printed, vec![a.to_string()]);
        }
    }

    /// One random right-hand side of the averaging law: a few terms
    /// `c · q^i p^j · atom · {1, cos t, sin t, cos 2t}`.
    fn rhs_text(terms: &[(i64, u8, u8, u8)], fast: bool) -> String {
        // With the fast oscillation `cos(t)*[0, a*V(q)]` the atoms depend
        // on q alone, so that the ad-series ends (a mechanical system).
        const ATOMS: [&str; 4] = ["V(q)", "V'(q)", "V(q + pi)", "V'(p - q)"];
        let n_atoms = if fast { 3 } else { 4 };
        const MONOS: [&str; 3] = ["1", "q", "p"];
        const BEATS: [&str; 4] = ["1", "cos(t)", "sin(t)", "cos(2*t)"];
        let parts: Vec<String> = terms
            .iter()
            .map(|(c, m, a, b)| {
                format!(
                    "({c})*{}*{}*{}",
                    MONOS[*m as usize % 3],
                    ATOMS[*a as usize % n_atoms],
                    BEATS[*b as usize % 4]
                )
            })
            .collect();
        parts.join(" + ")
    }

    fn rhs_spec() -> impl Strategy<Value = Vec<(i64, u8, u8, u8)>> {
        prop::collection::vec(
            (prop_oneof![-3i64..=-1, 1i64..=3], 0u8..3, 0u8..4, 0u8..4),
            1..=3,
        )
    }

    proptest! {
        #![proptest_config(config(48))]

        /// Averaging commutes with plugging a definition: averaging with V
        /// unspecified, then plugging a concrete V, gives the averaged
        /// concrete system, at every order, for stroboscopic and classical
        /// averaging, in the standard and the fast-oscillation form (the
        /// averaged field is built from brackets, means and integrals,
        /// each of which commutes with the substitution).
        #[test]
        fn averaging_commutes_with_plugging_a_definition(
            f1 in rhs_spec(),
            f2 in rhs_spec(),
            fast in any::<bool>(),
            classic in any::<bool>(),
            order in 1usize..=3,
            def in 0u8..3,
            c in prop::array::uniform3(1i64..=2),
        ) {
            let mut s = Session::new();
            let base = if fast { " + cos(t)*[0, a*V(q)]" } else { "" };
            let definition = match def {
                0 => format!("V(s) = ({})*s + ({})*s^2 + ({})*s^3", c[0], c[1], c[2]),
                1 => format!("V(s) = ({})*cos(s) + ({})*sin(2*s)", c[0], c[1]),
                _ => format!("V(s) = ({}) + ({})*s*cos(s)", c[0], c[1]),
            };
            let method = if classic { "classic" } else { "strobo" };
            let text = format!(
                "state q, p\nparam eps, a\nfunc V(s)\n\
                 S = eps*[p + {}, {}]{base}\n\
                 A = average S to {order} in eps {method}\n\
                 Sc = plug(S, {definition})\n\
                 Ac = average Sc to {order} in eps {method}\n\
                 check plug(A, {definition}) == Ac",
                rhs_text(&f1, fast),
                rhs_text(&f2, fast)
            );
            run(&mut s, &text).map_err(TestCaseError::fail)?;
            for k in 1..=order {
                run(&mut s, &format!("check plug(order(A, eps, {k}), {definition}) == order(Ac, eps, {k})"))
                    .map_err(TestCaseError::fail)?;
            }
        }
    }
}
