//! Cross-checks of the exact core and of the chronological series against
//! references computed outside them: nalgebra (brackets of linear fields,
//! the matrix exponential), a fourth-order Runge–Kutta integration of the
//! fundamental matrix written here, the Magnus terms Ω1..Ω3 and the
//! Peano–Baker terms assembled here from scalar iterated integrals, and
//! nonlinear systems whose solutions are known in closed form.
//!
//! This file knows the public API of `ordex::core`, `ordex::series::chrono`
//! and `ordex::lang::Session`; it must not know how the series are computed
//! inside (free Lie algebra, recursions).

// Index loops below mirror the matrix formulas entry by entry.
#![allow(clippy::needless_range_loop)]

use std::collections::HashMap;
use std::fmt::Display;

use nalgebra::{Matrix3, Vector3};
use ordex::core::calc::Period;
use ordex::core::expr::{LinearForm, TimeFactor, TrigFactor};
use ordex::core::{Expr, Field, Sym, Q};
use ordex::lang::value::Value;
use ordex::lang::Session;
use ordex::series::chrono::{at_time, field_at_period, flow_terms, magnus_generator, Graded};
use proptest::prelude::*;
use proptest::test_runner::{FileFailurePersistence, TestCaseError};

use crate::util::{field_text, run_in};

// ---------------------------------------------------------------------------
// Helpers: exact 3×3 matrices, fields, evaluation in f64, sessions.

/// An exact 3×3 matrix of rationals, by rows.
type QMat = [[Q; 3]; 3];

/// A 3×3 matrix of expressions (functions of `t`), by rows.
type EMat = [[Expr; 3]; 3];

const NAMES: [&str; 3] = ["x", "y", "z"];

fn q(n: i64, d: i64) -> Q {
    Q::ratio(n, d).unwrap_or(Q::ZERO)
}

fn st() -> Vec<Sym> {
    NAMES.iter().map(|n| Sym::new(n)).collect()
}

fn t() -> Expr {
    Expr::sym(Sym::T)
}

fn qmat(rows: [[(i64, i64); 3]; 3]) -> QMat {
    rows.map(|r| r.map(|(n, d)| q(n, d)))
}

fn qidentity() -> QMat {
    std::array::from_fn(|i| std::array::from_fn(|j| if i == j { Q::ONE } else { Q::ZERO }))
}

fn qmul(a: &QMat, b: &QMat) -> QMat {
    std::array::from_fn(|i| {
        std::array::from_fn(|j| (0..3).fold(Q::ZERO, |acc, k| acc.add(&a[i][k].mul(&b[k][j]))))
    })
}

fn qsub(a: &QMat, b: &QMat) -> QMat {
    std::array::from_fn(|i| std::array::from_fn(|j| a[i][j].sub(&b[i][j])))
}

fn qadd(a: &QMat, b: &QMat) -> QMat {
    std::array::from_fn(|i| std::array::from_fn(|j| a[i][j].add(&b[i][j])))
}

/// The matrix commutator `[A, B] = AB − BA` (REFERENCES §1, matrix form).
fn comm(a: &QMat, b: &QMat) -> QMat {
    qsub(&qmul(a, b), &qmul(b, a))
}

fn to_na(a: &QMat) -> Matrix3<f64> {
    Matrix3::from_fn(|i, j| a[i][j].to_f64())
}

fn ezero() -> EMat {
    std::array::from_fn(|_| std::array::from_fn(|_| Expr::zero()))
}

/// `out += f(t) · s · M`.
fn accumulate(out: &mut EMat, f: &Expr, s: &Q, m: &QMat) {
    for i in 0..3 {
        for j in 0..3 {
            out[i][j] = out[i][j].add_scaled(f, &s.mul(&m[i][j]));
        }
    }
}

/// The linear field `A x` of a matrix of expressions.
fn linear_field(a: &EMat) -> Result<Field, String> {
    let xs: Vec<Expr> = st().into_iter().map(Expr::sym).collect();
    let mut out = Vec::new();
    for row in a {
        let mut acc = Expr::zero();
        for (aij, xj) in row.iter().zip(&xs) {
            acc = acc.add(&aij.mul(xj).map_err(|e| e.to_string())?);
        }
        out.push(acc);
    }
    Ok(Field(out))
}

fn const_emat(a: &QMat) -> EMat {
    a.clone().map(|r| r.map(Expr::num))
}

/// `A(t) = Σ_i c_i(t) M_i`.
fn combine(c: &[Expr], m: &[QMat]) -> EMat {
    let mut out = ezero();
    for (ci, mi) in c.iter().zip(m) {
        accumulate(&mut out, ci, &Q::ONE, mi);
    }
    out
}

/// Turns an error into a test failure naming the step.
trait OrFail<T> {
    fn or_fail(self, what: &str) -> Result<T, TestCaseError>;
}

impl<T, E: Display> OrFail<T> for Result<T, E> {
    fn or_fail(self, what: &str) -> Result<T, TestCaseError> {
        self.map_err(|e| TestCaseError::fail(format!("{what}: {e}")))
    }
}

/// Unwraps in plain `#[test]` functions, naming the step on failure.
fn ok<T, E: Display>(r: Result<T, E>, what: &str) -> T {
    match r {
        Ok(v) => v,
        Err(e) => panic!("{what}: {e}"),
    }
}

/// Evaluates an expression in floating point (`t`, `pi` and the states
/// from `vals`), term by term from the public term list.
fn eval_f64(e: &Expr, vals: &HashMap<Sym, f64>) -> f64 {
    let val = |s: &Sym| -> f64 {
        if *s == Sym::PI {
            std::f64::consts::PI
        } else {
            vals.get(s).copied().unwrap_or(f64::NAN)
        }
    };
    let lin = |l: &LinearForm| -> f64 { l.terms().iter().map(|(s, c)| c.to_f64() * val(s)).sum() };
    let tv = val(&Sym::T);
    e.terms()
        .iter()
        .map(|(k, c)| {
            let mut v = c.to_f64();
            for (s, p) in k.mono.powers() {
                v *= val(s).powi(*p);
            }
            if !k.exp.is_zero() {
                v *= lin(&k.exp).exp();
            }
            match &k.wave {
                TrigFactor::One => {}
                TrigFactor::Cos(l) => v *= lin(l).cos(),
                TrigFactor::Sin(l) => v *= lin(l).sin(),
            }
            match &k.beat {
                TimeFactor::One => {}
                TimeFactor::Cos(w) => v *= (w.to_f64() * tv).cos(),
                TimeFactor::Sin(w) => v *= (w.to_f64() * tv).sin(),
            }
            v
        })
        .sum()
}

/// Runs `text` in `session`; fails on an error or a failed check.
fn run(session: &mut Session, text: &str) -> Result<(), String> {
    let ran = run_in(session, text, Some("crosscheck"));
    match ran.last_error() {
        Some(msg) => Err(format!("error running `{text}`: {msg}")),
        None if ran.status.check_failed => Err(format!("check failed in `{text}`")),
        None => Ok(()),
    }
}

fn session_field(s: &Session, name: &str) -> Field {
    match s.get(name) {
        Some(Value::Field(f)) => f.field.clone(),
        other => panic!("`{name}` is not a field: {other:?}"),
    }
}

fn session_scalar(s: &Session, name: &str) -> Expr {
    match s.get(name) {
        Some(Value::Scalar(e)) => e.clone(),
        other => panic!("`{name}` is not a scalar: {other:?}"),
    }
}

/// Case count; failing cases are recorded for replay under
/// `proptest-regressions/`.
fn config(cases: u32) -> ProptestConfig {
    ProptestConfig {
        cases,
        failure_persistence: Some(Box::new(FileFailurePersistence::Direct(
            "proptest-regressions/linear_crosscheck.txt",
        ))),
        ..ProptestConfig::default()
    }
}

// ---------------------------------------------------------------------------
// 1. Brackets of linear fields.

fn small_rational() -> impl Strategy<Value = (i64, i64)> {
    (-4i64..=4, 1i64..=3)
}

fn qmat_strategy() -> impl Strategy<Value = QMat> {
    prop::array::uniform3(prop::array::uniform3(small_rational())).prop_map(qmat)
}

proptest! {
    #![proptest_config(config(64))]

    /// REFERENCES §0 (the project's bracket convention, DESIGN §2.3):
    /// `[Bx, Cx] = (CB − BC)x`. The bracket is computed by the
    /// core; `CB − BC` by nalgebra in f64 (tolerance 1e-9 for the rational
    /// entries) and exactly with rationals here.
    #[test]
    fn bracket_of_linear_fields_is_the_reversed_commutator(b in qmat_strategy(), c in qmat_strategy()) {
        let states = st();
        let bx = linear_field(&const_emat(&b)).or_fail("Bx")?;
        let cx = linear_field(&const_emat(&c)).or_fail("Cx")?;
        let br = bx.bracket(&cx, &states).or_fail("[Bx, Cx]")?;
        let jac = br.jacobian(&states).or_fail("jacobian")?;
        let reference = to_na(&c) * to_na(&b) - to_na(&b) * to_na(&c);
        let exact = qsub(&qmul(&c, &b), &qmul(&b, &c));
        for i in 0..3 {
            for j in 0..3 {
                let entry = jac.get(i, j).as_number();
                prop_assert!(entry.is_some(), "entry ({}, {}) of the Jacobian is not constant", i, j);
                let entry = entry.unwrap_or(Q::ZERO);
                prop_assert!((entry.to_f64() - reference[(i, j)]).abs() < 1e-9,
                    "entry ({}, {}): {} vs nalgebra {}", i, j, entry, reference[(i, j)]);
                prop_assert_eq!(&entry, &exact[i][j]);
            }
        }
        // The bracket is itself the linear field of its Jacobian.
        prop_assert_eq!(br, linear_field(&const_emat(&exact)).or_fail("(CB - BC)x")?);
    }
}

// ---------------------------------------------------------------------------
// 2. Constant A: the flow is the matrix-exponential series.

/// Matrices of our own choosing (a rotation-like block with damping, a
/// non-normal shear, real distinct eigenvalues).
fn constant_matrices() -> Vec<QMat> {
    vec![
        qmat([
            [(0, 1), (1, 1), (0, 1)],
            [(-1, 1), (-1, 5), (1, 2)],
            [(1, 3), (0, 1), (-1, 2)],
        ]),
        qmat([
            [(1, 2), (2, 1), (-1, 1)],
            [(0, 1), (1, 2), (3, 2)],
            [(0, 1), (0, 1), (1, 2)],
        ]),
        qmat([
            [(-1, 1), (1, 4), (0, 1)],
            [(1, 4), (1, 1), (1, 3)],
            [(1, 2), (-1, 3), (2, 3)],
        ]),
    ]
}

/// DESIGN §2.4: for an autonomous linear field the chronological series on
/// the coordinates is the Lie series, i.e. the exponential series
/// `Σ_k (tA)^k/k! x` (from memory); checked exactly term by term, then
/// summed at t = 3/10 and compared with nalgebra's matrix exponential:
/// the error falls with the order and is below 1e-8 at order 10.
#[test]
fn constant_matrix_flow_is_the_exponential_series() {
    let states = st();
    let t_val = q(3, 10);
    let point = [q(1, 2), q(-1, 1), q(3, 4)];
    let n_max = 10;
    for a in constant_matrices() {
        let v = ok(linear_field(&const_emat(&a)), "Ax");
        let terms: Vec<Vec<Expr>> = states
            .iter()
            .map(|s| ok(flow_terms(&v, &Expr::sym(*s), n_max, &states), "flow terms"))
            .collect();
        // Exact: term k of coordinate i is t^k/k! (A^k x)_i.
        let mut power = qidentity();
        let mut fact = Q::ONE;
        for k in 1..=n_max {
            power = qmul(&power, &a);
            fact = fact.mul(&Q::int(k as i64));
            let tk = ok(t().pow(k as i64), "t^k").scale(&ok(fact.recip().ok_or("zero"), "1/k!"));
            let expected = ok(linear_field(&const_emat(&power)), "A^k x");
            for i in 0..3 {
                let e = ok(expected.0[i].mul(&tk), "t^k/k! (A^k x)_i");
                assert_eq!(
                    terms[i][k - 1],
                    e,
                    "matrix {a:?}: term {k} of coordinate {i}"
                );
            }
        }
        // Numerically at t = 3/10 and the point.
        let mut map = HashMap::new();
        map.insert(Sym::T, Expr::num(t_val.clone()));
        for (s, p) in states.iter().zip(&point) {
            map.insert(*s, Expr::num(p.clone()));
        }
        let values: Vec<Vec<f64>> = terms
            .iter()
            .map(|ts| {
                ts.iter()
                    .map(|e| {
                        let v = ok(e.subst(&map, &states), "evaluation");
                        ok(v.as_number().ok_or("not a number"), "evaluation").to_f64()
                    })
                    .collect()
            })
            .collect();
        let p = Vector3::new(point[0].to_f64(), point[1].to_f64(), point[2].to_f64());
        let reference = (to_na(&a) * t_val.to_f64()).exp() * p;
        let error_at = |n: usize| -> f64 {
            (0..3)
                .map(|i| {
                    let sum: f64 = p[i] + values[i][..n].iter().sum::<f64>();
                    (sum - reference[i]).abs()
                })
                .fold(0.0, f64::max)
        };
        let errors: Vec<f64> = [2, 4, 6, 8].iter().map(|n| error_at(*n)).collect();
        for w in errors.windows(2) {
            assert!(
                w[1] < w[0],
                "matrix {a:?}: errors do not fall with the order: {errors:?}"
            );
        }
        let e10 = error_at(10);
        assert!(
            e10 < 1e-8,
            "matrix {a:?}: error {e10} at order 10 (errors {errors:?})"
        );
    }
}

/// The same series through the command language: a matrix literal times
/// the coordinate field, `flow V to 10`, equals x plus the core's terms.
#[test]
fn constant_matrix_flow_through_a_session() {
    let states = st();
    let a = constant_matrices().remove(0);
    let v = ok(linear_field(&const_emat(&a)), "Ax");
    let mut s = Session::new();
    let rows: Vec<String> = a
        .iter()
        .map(|r| {
            r.iter()
                .map(|c| c.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect();
    let script = format!(
        "state x, y, z\nV = {{{}}}*[x, y, z]\ncheck V == {}\nY = flow V to 6",
        rows.join("; "),
        field_text(&v)
    );
    ok(run(&mut s, &script), "session");
    let y = session_field(&s, "Y");
    for (i, si) in states.iter().enumerate() {
        let terms = ok(flow_terms(&v, &Expr::sym(*si), 6, &states), "flow terms");
        let total = terms.iter().fold(Expr::sym(*si), |acc, e| acc.add(e));
        assert_eq!(y.0[i], total, "coordinate {i}");
    }
}

// ---------------------------------------------------------------------------
// 3. Time-varying linear fields: Magnus terms and Peano–Baker terms.

/// Iterated integrals `I_i = ∫c_i`, `I_ij = ∫_{t2<t1} c_i(t1) c_j(t2)`,
/// `I_ijk = ∫_{t3<t2<t1} c_i(t1) c_j(t2) c_k(t3)` over `[0, t]`, as
/// functions of `t`.
struct Iterated {
    one: Vec<Expr>,
    two: Vec<Vec<Expr>>,
    three: Vec<Vec<Vec<Expr>>>,
}

fn iterated(c: &[Expr]) -> Result<Iterated, String> {
    let s = |e: ordex::core::CoreError| e.to_string();
    let one: Vec<Expr> = c
        .iter()
        .map(|ci| ci.integral_from_zero().map_err(s))
        .collect::<Result<_, _>>()?;
    let mut two = Vec::new();
    for ci in c {
        let mut row = Vec::new();
        for oj in &one {
            row.push(ci.mul(oj).map_err(s)?.integral_from_zero().map_err(s)?);
        }
        two.push(row);
    }
    let mut three = Vec::new();
    for ci in c {
        let mut plane = Vec::new();
        for row in &two {
            let mut line = Vec::new();
            for tjk in row {
                line.push(ci.mul(tjk).map_err(s)?.integral_from_zero().map_err(s)?);
            }
            plane.push(line);
        }
        three.push(plane);
    }
    Ok(Iterated { one, two, three })
}

/// Blanes, Casas, Oteo & Ros, "The Magnus expansion and some of its
/// applications", Phys. Rep. 470 (2009) 151–238, §2 (CONFIRMED;
/// REFERENCES §1): for `Y' = A(t)Y`, `[A,B] = AB − BA`, `t3 < t2 < t1`,
/// `Ω1 = ∫A`, `Ω2 = ½∫∫[A1, A2]`,
/// `Ω3 = (1/6)∫∫∫([A1,[A2,A3]] + [A3,[A2,A1]])`; with `A = Σ c_i M_i` the
/// integrals separate into the scalar iterated integrals above.
fn magnus_terms(c: &[Expr], m: &[QMat]) -> Result<[EMat; 3], String> {
    let it = iterated(c)?;
    let n = c.len();
    let mut o1 = ezero();
    let mut o2 = ezero();
    let mut o3 = ezero();
    for i in 0..n {
        accumulate(&mut o1, &it.one[i], &Q::ONE, &m[i]);
        for j in 0..n {
            accumulate(&mut o2, &it.two[i][j], &q(1, 2), &comm(&m[i], &m[j]));
            for k in 0..n {
                let nested = qadd(
                    &comm(&m[i], &comm(&m[j], &m[k])),
                    &comm(&m[k], &comm(&m[j], &m[i])),
                );
                accumulate(&mut o3, &it.three[i][j][k], &q(1, 6), &nested);
            }
        }
    }
    Ok([o1, o2, o3])
}

/// The Peano–Baker terms `P_k = ∫_{tk<…<t1} A(t1)…A(tk)` (later times to
/// the left) for k = 1..3 (from memory; DESIGN §2.4).
fn peano_baker_terms(c: &[Expr], m: &[QMat]) -> Result<[EMat; 3], String> {
    let it = iterated(c)?;
    let n = c.len();
    let mut p1 = ezero();
    let mut p2 = ezero();
    let mut p3 = ezero();
    for i in 0..n {
        accumulate(&mut p1, &it.one[i], &Q::ONE, &m[i]);
        for j in 0..n {
            let mij = qmul(&m[i], &m[j]);
            accumulate(&mut p2, &it.two[i][j], &Q::ONE, &mij);
            for k in 0..n {
                accumulate(&mut p3, &it.three[i][j][k], &Q::ONE, &qmul(&mij, &m[k]));
            }
        }
    }
    Ok([p1, p2, p3])
}

/// Time functions of the random linear fields: 1, cos t, sin t, t.
fn time_functions() -> Vec<Expr> {
    let states = st();
    vec![
        Expr::int(1),
        ok(Expr::cos_of(&t(), &states), "cos t"),
        ok(Expr::sin_of(&t(), &states), "sin t"),
        t(),
    ]
}

fn small_qmat() -> impl Strategy<Value = QMat> {
    prop::array::uniform3(prop::array::uniform3((-2i64..=2, 1i64..=2))).prop_map(qmat)
}

proptest! {
    #![proptest_config(config(12))]

    /// The chronological logarithm of `A(t)x` equals `Ω(t)x` order by order,
    /// exactly, as functions of t (REFERENCES §1: for linear fields no extra
    /// sign appears), and so also at T = 2π; the Jacobian of each order is
    /// the matrix Ω_k. The chronological exponential on the coordinates is
    /// the Peano–Baker series.
    #[test]
    fn magnus_of_a_linear_field_is_the_matrix_magnus(m in prop::array::uniform4(small_qmat())) {
        let states = st();
        let c = time_functions();
        let v = linear_field(&combine(&c, &m)).or_fail("A(t)x")?;
        let omega = magnus_terms(&c, &m).or_fail("Ω")?;
        let w = magnus_generator(&Graded::single(v.clone()), 3, &states).or_fail("magnus")?;
        let period = Period(Q::int(2));
        for k in 0..3 {
            let expected = linear_field(&omega[k]).or_fail("Ω_k x")?;
            prop_assert_eq!(&w[k], &expected, "order {}", k + 1);
            let jac = w[k].jacobian(&states).or_fail("jacobian")?;
            for i in 0..3 {
                for j in 0..3 {
                    prop_assert_eq!(jac.get(i, j), &omega[k][i][j], "order {} entry ({}, {})", k + 1, i, j);
                }
            }
            let at_end = field_at_period(&w[k], &period).or_fail("W_k(2π)")?;
            let mut omega_end = ezero();
            for i in 0..3 {
                for j in 0..3 {
                    omega_end[i][j] = omega[k][i][j].at_time_pi_multiple(&Q::int(2)).or_fail("Ω_k(2π)")?;
                }
            }
            prop_assert_eq!(at_end, linear_field(&omega_end).or_fail("Ω_k(2π) x")?, "order {} at 2π", k + 1);
        }
        let pb = peano_baker_terms(&c, &m).or_fail("Peano–Baker")?;
        for (i, s) in states.iter().enumerate() {
            let terms = flow_terms(&v, &Expr::sym(*s), 3, &states).or_fail("flow")?;
            for k in 0..3 {
                let expected = linear_field(&pb[k]).or_fail("P_k x")?;
                prop_assert_eq!(&terms[k], &expected.0[i], "flow term {} of coordinate {}", k + 1, i);
            }
        }
    }
}

/// Matrices of our own choosing for a polynomial-in-t linear field.
fn polynomial_system() -> (Vec<Expr>, Vec<QMat>) {
    let c = vec![Expr::int(1), t(), ok(t().pow(2), "t^2")];
    let m = vec![
        qmat([
            [(0, 1), (1, 1), (0, 1)],
            [(-1, 1), (0, 1), (1, 2)],
            [(0, 1), (-1, 2), (0, 1)],
        ]),
        qmat([
            [(1, 2), (0, 1), (1, 1)],
            [(0, 1), (-1, 1), (0, 1)],
            [(2, 1), (0, 1), (1, 3)],
        ]),
        qmat([
            [(0, 1), (0, 1), (-1, 3)],
            [(1, 4), (0, 1), (0, 1)],
            [(0, 1), (3, 2), (-1, 2)],
        ]),
    ];
    (c, m)
}

/// The `magnus … over T` command, order by order through `order(W, eps,
/// k)`, equals Ω_k(T)x (Blanes, Casas, Oteo & Ros 2009, §2, CONFIRMED), for
/// a polynomial A(t) at T = 1 and for a trigonometric A(t) at T = 2π.
#[test]
fn magnus_command_matches_matrix_magnus() {
    let states = st();
    let trig_m = vec![
        qmat([
            [(0, 1), (1, 1), (0, 1)],
            [(-1, 1), (0, 1), (0, 1)],
            [(0, 1), (0, 1), (-1, 2)],
        ]),
        qmat([
            [(1, 1), (0, 1), (1, 2)],
            [(0, 1), (0, 1), (1, 1)],
            [(0, 1), (-1, 1), (0, 1)],
        ]),
        qmat([
            [(0, 1), (1, 2), (0, 1)],
            [(0, 1), (1, 1), (0, 1)],
            [(-1, 1), (0, 1), (0, 1)],
        ]),
        qmat([
            [(0, 1), (0, 1), (0, 1)],
            [(1, 3), (0, 1), (0, 1)],
            [(0, 1), (1, 1), (0, 1)],
        ]),
    ];
    let (pc, pm) = polynomial_system();
    type AtEnd = Box<dyn Fn(&Expr) -> Expr>;
    let cases: Vec<(Vec<Expr>, Vec<QMat>, &str, AtEnd)> = vec![
        (
            pc,
            pm,
            "1",
            Box::new(|e: &Expr| ok(at_time(e, &Expr::int(1), &st()), "at T = 1")),
        ),
        (
            time_functions(),
            trig_m,
            "2*pi",
            Box::new(|e: &Expr| ok(e.at_time_pi_multiple(&Q::int(2)), "at T = 2π")),
        ),
    ];
    for (c, m, horizon, at_end) in cases {
        let v = ok(linear_field(&combine(&c, &m)), "A(t)x");
        let omega = ok(magnus_terms(&c, &m), "Ω");
        let mut s = Session::new();
        let script = format!(
            "state x, y, z\nparam eps\nV = {}\nW = magnus eps*V to 3 over {horizon}\n\
             W1 = order(W, eps, 1)\nW2 = order(W, eps, 2)\nW3 = order(W, eps, 3)",
            field_text(&v)
        );
        ok(run(&mut s, &script), "session");
        for k in 0..3 {
            let end: EMat = omega[k].clone().map(|r| r.map(|e| at_end(&e)));
            let expected = ok(linear_field(&end), "Ω_k(T) x");
            let got = session_field(&s, &format!("W{}", k + 1));
            assert_eq!(got, expected, "order {} over {horizon}", k + 1);
            let jac = ok(got.jacobian(&states), "jacobian");
            for i in 0..3 {
                for j in 0..3 {
                    assert_eq!(
                        jac.get(i, j),
                        &end[i][j],
                        "order {} entry ({i}, {j})",
                        k + 1
                    );
                }
            }
        }
    }
}

/// RK4 for `x' = A(t) x` with a fixed step (common practice).
fn rk4(
    a: &dyn Fn(f64) -> Matrix3<f64>,
    x0: Vector3<f64>,
    t_end: f64,
    steps: usize,
) -> Vector3<f64> {
    let h = t_end / steps as f64;
    let mut x = x0;
    for n in 0..steps {
        let s = n as f64 * h;
        let k1 = a(s) * x;
        let k2 = a(s + h / 2.0) * (x + k1 * (h / 2.0));
        let k3 = a(s + h / 2.0) * (x + k2 * (h / 2.0));
        let k4 = a(s + h) * (x + k3 * h);
        x += (k1 + k2 * 2.0 + k3 * 2.0 + k4) * (h / 6.0);
    }
    x
}

/// The truncated chronological series of a time-varying linear field,
/// evaluated at t = 1/2, converges to the numerically integrated solution
/// (fourth-order Runge–Kutta, 20000 steps): the error falls from order 2
/// to 4 to 6 and stays below the Peano–Baker remainder bound
/// `(α t)^{N+1}/(N+1)! · e^{α t} · |x|` with `α ≥ sup ‖A(s)‖_∞`
/// (from memory; the RK4 error, about 1e-15 here, is far below).
#[test]
fn time_varying_flow_converges_to_the_fundamental_matrix() {
    let states = st();
    let c = time_functions();
    let m = vec![
        qmat([
            [(0, 1), (1, 1), (0, 1)],
            [(-1, 1), (0, 1), (1, 2)],
            [(0, 1), (0, 1), (-1, 2)],
        ]),
        qmat([
            [(1, 2), (0, 1), (0, 1)],
            [(0, 1), (0, 1), (1, 1)],
            [(1, 1), (0, 1), (0, 1)],
        ]),
        qmat([
            [(0, 1), (0, 1), (1, 1)],
            [(1, 2), (0, 1), (0, 1)],
            [(0, 1), (-1, 1), (0, 1)],
        ]),
        qmat([
            [(0, 1), (1, 1), (0, 1)],
            [(0, 1), (-1, 1), (0, 1)],
            [(1, 3), (0, 1), (0, 1)],
        ]),
    ];
    let v = ok(linear_field(&combine(&c, &m)), "A(t)x");
    let t_end = 0.5;
    let p = Vector3::new(1.0, -0.5, 0.25);
    let mut vals = HashMap::new();
    vals.insert(Sym::T, t_end);
    for (s, x) in states.iter().zip(p.iter()) {
        vals.insert(*s, *x);
    }
    let n_max = 6;
    let values: Vec<Vec<f64>> = states
        .iter()
        .map(|s| {
            ok(flow_terms(&v, &Expr::sym(*s), n_max, &states), "flow terms")
                .iter()
                .map(|e| eval_f64(e, &vals))
                .collect()
        })
        .collect();
    let na: Vec<Matrix3<f64>> = m.iter().map(to_na).collect();
    let a_of = |s: f64| na[0] + na[1] * s.cos() + na[2] * s.sin() + na[3] * s;
    let reference = rk4(&a_of, p, t_end, 20_000);
    // The reference is converged: halving the steps changes it by far less
    // than the smallest series error checked below.
    let coarse = rk4(&a_of, p, t_end, 10_000);
    assert!(
        (coarse - reference).abs().max() < 1e-11,
        "RK4 reference not converged"
    );
    let error_at = |n: usize| -> f64 {
        (0..3)
            .map(|i| (p[i] + values[i][..n].iter().sum::<f64>() - reference[i]).abs())
            .fold(0.0, f64::max)
    };
    // α: Σ_i sup|c_i| ‖M_i‖_∞ over [0, 1/2] (sup|t| = 1/2).
    let sups = [1.0, 1.0, 1.0, t_end];
    let alpha: f64 = na
        .iter()
        .zip(sups)
        .map(|(mi, sup)| sup * (0..3).map(|r| mi.row(r).abs().sum()).fold(0.0, f64::max))
        .sum();
    let x_norm = p.abs().max();
    let bound = |n: usize| -> f64 {
        let f: f64 = (1..=n + 1).map(|k| k as f64).product();
        (alpha * t_end).powi(n as i32 + 1) / f * (alpha * t_end).exp() * x_norm
    };
    let errors: Vec<f64> = [2, 4, 6].iter().map(|n| error_at(*n)).collect();
    for w in errors.windows(2) {
        assert!(w[1] < w[0], "errors do not fall with the order: {errors:?}");
    }
    for (n, e) in [2, 4, 6].iter().zip(&errors) {
        assert!(
            *e <= bound(*n),
            "order {n}: error {e} above the bound {}",
            bound(*n)
        );
    }
}

// ---------------------------------------------------------------------------
// 4. Flow terms against exact solutions (DESIGN §2.4).

/// Checks that `(xs, ys)` solves `x' = f, y' = g` with `x(0) = x`,
/// `y(0) = y`, exactly.
fn assert_solution(xs: &Expr, ys: &Expr, f: &Expr, g: &Expr) {
    let (x, y) = (Expr::sym(Sym::new("x")), Expr::sym(Sym::new("y")));
    let mut map = HashMap::new();
    map.insert(Sym::new("x"), xs.clone());
    map.insert(Sym::new("y"), ys.clone());
    let states = [Sym::new("x"), Sym::new("y")];
    assert_eq!(
        xs.pd(Sym::T),
        ok(f.subst(&map, &states), "f at the solution"),
        "x' = f"
    );
    assert_eq!(
        ys.pd(Sym::T),
        ok(g.subst(&map, &states), "g at the solution"),
        "y' = g"
    );
    assert_eq!(xs.at_time_zero(), x, "x(0)");
    assert_eq!(ys.at_time_zero(), y, "y(0)");
}

/// DESIGN §2.4: the k-th flow term of `V = eps·V0` is the eps^k coefficient
/// of `h(x(t))`. Two systems of our own that are triangular (y does not
/// depend on x, and x' depends on y and t only), so they integrate in closed
/// form with polynomials and cos/sin of t; `h(x(t))` is then a polynomial in
/// eps and every flow term beyond its degree vanishes:
/// - `x' = eps·y, y' = eps·cos t`: `y(t) = y + eps sin t`,
///   `x(t) = x + eps t y + eps² (1 − cos t)`;
/// - `x' = eps·y², y' = eps·cos t`: `y(t) = y + eps sin t`,
///   `x(t) = x + eps (y² t + 2 eps y (1 − cos t) + eps² (t/2 − sin(2t)/4))`.
///
/// Each closed form is verified exactly here before use. Output
/// `h = x² + x·y`.
#[test]
fn flow_terms_are_eps_coefficients_of_exact_solutions() {
    let ExactSetting {
        states,
        eps_sym,
        eps,
        x,
        y,
        cos_t,
        sin_t,
        sin_2t,
    } = exact_setting();
    let m = |a: &Expr, b: &Expr| ok(a.mul(b), "product");
    let one_minus_cos = Expr::int(1).sub(&cos_t);
    let eps2 = m(&eps, &eps);
    let eps3 = m(&eps2, &eps);
    let h = m(&x, &x).add(&m(&x, &y));

    let ys = y.add(&m(&eps, &sin_t));
    let xs1 = x.add(&m(&eps, &m(&t(), &y))).add(&m(&eps2, &one_minus_cos));
    let xs2 = x
        .add(&m(&eps, &m(&m(&y, &y), &t())))
        .add(&m(&eps2, &m(&y, &one_minus_cos)).scale(&Q::int(2)))
        .add(&m(&eps3, &t().scale(&q(1, 2)).sub(&sin_2t.scale(&q(1, 4)))));
    let systems = [
        (
            "[eps*y, eps*cos(t)]",
            Field(vec![m(&eps, &y), m(&eps, &cos_t)]),
            xs1,
            4usize,
        ),
        (
            "[eps*y^2, eps*cos(t)]",
            Field(vec![m(&eps, &m(&y, &y)), m(&eps, &cos_t)]),
            xs2,
            6usize,
        ),
    ];
    for (text, v, xs, degree) in systems {
        assert_solution(&xs, &ys, &v.0[0], &v.0[1]);
        let mut map = HashMap::new();
        map.insert(states[0], xs.clone());
        map.insert(states[1], ys.clone());
        let h_of_solution = ok(h.subst(&map, &states), "h(x(t))");
        assert_eq!(
            h_of_solution.power_range(eps_sym).map(|r| r.1),
            Some(degree as i32),
            "{text}"
        );
        let n = degree + 2;
        let terms = ok(flow_terms(&v, &h, n, &states), "flow terms");
        for k in 1..=n {
            let coeff = h_of_solution.coeff_of_power(eps_sym, k as i32);
            let expected = m(&ok(eps.pow(k as i64), "eps^k"), &coeff);
            assert_eq!(terms[k - 1], expected, "{text}: flow term {k}");
            if k > degree {
                assert!(terms[k - 1].is_zero(), "{text}: term {k} beyond the degree");
            }
        }
        // Through the command language: `order(flow …, eps, k)`.
        let mut s = Session::new();
        let mut script =
            format!("state x, y\nparam eps\nV = {text}\nY = flow V on x^2 + x*y to {n}");
        for k in 1..=n {
            script.push_str(&format!("\nY{k} = order(Y, eps, {k})"));
        }
        ok(run(&mut s, &script), "session");
        for k in 1..=n {
            let got = session_scalar(&s, &format!("Y{k}"));
            assert_eq!(
                got,
                h_of_solution.coeff_of_power(eps_sym, k as i32),
                "{text}: order {k} in a session"
            );
        }
    }
}

/// The setting of the exact-solution tests of the flow: states `x, y`, the
/// parameter `eps` and the time factors the solutions use.
struct ExactSetting {
    states: [Sym; 2],
    eps_sym: Sym,
    eps: Expr,
    x: Expr,
    y: Expr,
    cos_t: Expr,
    sin_t: Expr,
    sin_2t: Expr,
}

fn exact_setting() -> ExactSetting {
    let states = [Sym::new("x"), Sym::new("y")];
    let eps_sym = Sym::new("eps");
    ExactSetting {
        states,
        eps_sym,
        eps: Expr::sym(eps_sym),
        x: Expr::sym(states[0]),
        y: Expr::sym(states[1]),
        cos_t: ok(Expr::cos_of(&t(), &states), "cos t"),
        sin_t: ok(Expr::sin_of(&t(), &states), "sin t"),
        sin_2t: ok(Expr::sin_of(&t().scale(&Q::int(2)), &states), "sin 2t"),
    }
}

/// An output that depends on time is read as `h(t, x(t))`: its flow terms
/// are the eps-coefficients of `h` at the exact solution, with the time
/// factors of `h` left as they are. The system `x' = eps·y, y' = eps·cos t`
/// has `y(t) = y + eps sin t`, `x(t) = x + eps t y + eps² (1 − cos t)`
/// (checked exactly here before use); output `h = x·cos t + y²·sin 2t + t·x`.
#[test]
fn flow_of_a_time_varying_output_is_the_output_along_the_solution() {
    let e = exact_setting();
    let (states, eps) = (e.states, &e.eps);
    let (x, y) = (&e.x, &e.y);
    let m = |a: &Expr, b: &Expr| ok(a.mul(b), "product");
    let ys = y.add(&m(eps, &e.sin_t));
    let xs = x
        .add(&m(eps, &m(&t(), y)))
        .add(&m(&m(eps, eps), &Expr::int(1).sub(&e.cos_t)));
    let v = Field(vec![m(eps, y), m(eps, &e.cos_t)]);
    assert_solution(&xs, &ys, &v.0[0], &v.0[1]);
    let h = m(x, &e.cos_t).add(&m(&m(y, y), &e.sin_2t)).add(&m(&t(), x));
    let mut map = HashMap::new();
    map.insert(states[0], xs);
    map.insert(states[1], ys);
    let along = ok(h.subst(&map, &states), "h(t, x(t))");
    let n = 4;
    let terms = ok(flow_terms(&v, &h, n, &states), "flow terms");
    for k in 1..=n {
        let expected = m(
            &ok(eps.pow(k as i64), "eps^k"),
            &along.coeff_of_power(e.eps_sym, k as i32),
        );
        assert_eq!(terms[k - 1], expected, "flow term {k}");
    }
    assert!(!terms[1].is_zero());
}
