//! The linear-centre form `x' = A x + Σ eps^j f_j(t, x)`: exact `exp(A t)`
//! for a constant matrix `A` that is diagonalisable with eigenvalues `±i k`
//! (`k` rational, zero allowed), and the pull-back to rotating coordinates
//! `z' = Σ eps^j exp(−A t) f_j(t, exp(A t) z)`.

use std::collections::HashMap;

use num_bigint::BigInt;
use num_integer::Integer;
use num_traits::{Signed, ToPrimitive, Zero};

use super::Form;
use crate::core::expr::{Key, TimeFactor};
use crate::core::{CoreError, CoreResult, Expr, Field, Matrix, Sym, Q};

fn refuse(reason: String) -> CoreError {
    CoreError::Refused { reason }
}

/// Reads `f_0` as `A x` with a constant rational matrix.
fn linear_matrix(f0: &Field, states: &[Sym]) -> CoreResult<Matrix> {
    let n = states.len();
    let mut data = Vec::with_capacity(n * n);
    for comp in &f0.0 {
        for s in states {
            let c = comp.pd(*s);
            if c.as_number().is_none() {
                return Err(refuse(format!(
                    "the eps^0 part `{}` is autonomous but not linear with constant coefficients \
                     (averaging needs it to be zero, a fast oscillation Σ u_i(t) g_i, \
                     or a linear centre A*x)",
                    comp
                )));
            }
            data.push(c);
        }
    }
    let a = Matrix {
        rows: n,
        cols: n,
        data,
    };
    let ax = a.apply(&Field(states.iter().map(|s| Expr::sym(*s)).collect()))?;
    if ax != *f0 {
        return Err(refuse(format!(
            "the eps^0 part {} is not linear in the state (A*x with a constant matrix)",
            super::show_field(f0)
        )));
    }
    Ok(a)
}

fn num(m: &Matrix, i: usize, j: usize) -> Q {
    m.get(i, j).as_number().unwrap_or(Q::ZERO)
}

/// Exact square root of a non-negative rational, when it is rational.
fn rational_sqrt(q: &Q) -> Option<Q> {
    if q.is_negative() {
        return None;
    }
    let n = q.numer();
    let d = q.denom();
    let rn = n.sqrt();
    let rd = d.sqrt();
    if &rn * &rn == n && &rd * &rd == d {
        Some(Q::from_big(num_rational::BigRational::new(rn, rd)))
    } else {
        None
    }
}

/// Rational roots (with multiplicity) of a polynomial with rational
/// coefficients `c[0] + c[1] x + …`.
fn rational_roots(coeffs: &[Q]) -> Vec<Q> {
    // Clear denominators.
    let lcm = coeffs
        .iter()
        .fold(BigInt::from(1), |acc, c| acc.lcm(&c.denom()));
    let mut ints: Vec<BigInt> = coeffs
        .iter()
        .map(|c| c.numer() * (&lcm / c.denom()))
        .collect();
    while ints.last().is_some_and(|c| c.is_zero()) {
        ints.pop();
    }
    let mut roots = Vec::new();
    // Zero roots.
    while ints.len() > 1 && ints[0].is_zero() {
        ints.remove(0);
        roots.push(Q::ZERO);
    }
    if ints.len() <= 1 {
        return roots;
    }
    let divisors = |v: &BigInt| -> Vec<BigInt> {
        let v = v.abs();
        let mut out = Vec::new();
        let Some(small) = v.to_u64() else { return out };
        if small > 1_000_000_000_000 {
            return out;
        }
        let mut i = 1u64;
        while i * i <= small {
            if small % i == 0 {
                out.push(BigInt::from(i));
                out.push(BigInt::from(small / i));
            }
            i += 1;
        }
        out
    };
    let ps = divisors(&ints[0]);
    let qs = divisors(ints.last().unwrap_or(&BigInt::from(1)));
    let mut candidates: Vec<Q> = Vec::new();
    for p in &ps {
        for q in &qs {
            let r = Q::from_big(num_rational::BigRational::new(p.clone(), q.clone()));
            candidates.push(r.clone());
            candidates.push(r.neg());
        }
    }
    candidates.sort();
    candidates.dedup();
    let mut poly: Vec<Q> = ints
        .iter()
        .map(|c| Q::from_big(num_rational::BigRational::from_integer(c.clone())))
        .collect();
    for r in candidates {
        loop {
            if poly.len() <= 1 {
                break;
            }
            // Synthetic division by (x - r).
            let deg = poly.len() - 1;
            let mut quot = vec![Q::ZERO; deg];
            let mut acc = Q::ZERO;
            for i in (0..=deg).rev() {
                acc = acc.mul(&r).add(&poly[i]);
                if i > 0 {
                    quot[i - 1] = acc.clone();
                }
            }
            if acc.is_zero() {
                roots.push(r.clone());
                poly = quot;
            } else {
                break;
            }
        }
    }
    roots
}

/// The exact `exp(A t)` and `exp(−A t)`.
fn rotation(a: &Matrix) -> CoreResult<(Matrix, Matrix)> {
    let n = a.rows;
    let a2 = a.mul(a)?;
    let cp: Vec<Q> = a2
        .charpoly()?
        .iter()
        .map(|c| c.as_number().unwrap_or(Q::ZERO))
        .collect();
    let roots = rational_roots(&cp);
    if roots.len() != n {
        return Err(refuse(format!(
            "the linear part {} does not have eigenvalues ±i*k with rational k",
            show_matrix(a)
        )));
    }
    let mut mus = roots.clone();
    mus.sort();
    mus.dedup();
    let mut ks = Vec::new();
    for mu in &mus {
        let k = rational_sqrt(&mu.neg()).ok_or_else(|| {
            refuse(format!(
                "the linear part {} has an eigenvalue that is not ±i*k with rational k \
                 (A^2 has eigenvalue {mu})",
                show_matrix(a)
            ))
        })?;
        ks.push(k);
    }
    if ks.iter().all(Q::is_zero) {
        return Err(refuse(format!(
            "the linear part {} has no oscillating mode (all eigenvalues are zero)",
            show_matrix(a)
        )));
    }
    // Diagonalisable: the minimal polynomial divides x Π (x^2 + k^2), simple roots.
    let ident = Matrix::identity(n);
    let mut check = if ks.iter().any(Q::is_zero) {
        a.clone()
    } else {
        ident.clone()
    };
    for (mu, k) in mus.iter().zip(&ks) {
        if !k.is_zero() {
            check = check.mul(&a2.add_scaled(&ident, &mu.neg())?)?;
        }
    }
    if !check.is_zero() {
        return Err(refuse(format!(
            "the linear part {} is not diagonalisable (a resonant Jordan block)",
            show_matrix(a)
        )));
    }
    // Spectral projectors of A^2.
    let mut plus = Matrix {
        rows: n,
        cols: n,
        data: vec![Expr::zero(); n * n],
    };
    let mut minus = plus.clone();
    for (j, (muj, kj)) in mus.iter().zip(&ks).enumerate() {
        let mut proj = ident.clone();
        for (l, mul) in mus.iter().enumerate() {
            if l == j {
                continue;
            }
            let denom = muj.sub(mul);
            let factor = a2.add_scaled(&ident, &mul.neg())?;
            proj = proj.mul(&factor)?;
            proj = Matrix {
                rows: n,
                cols: n,
                data: proj
                    .data
                    .iter()
                    .map(|e| e.scale(&denom.recip().unwrap_or(Q::ZERO)))
                    .collect(),
            };
        }
        if kj.is_zero() {
            plus = plus.add(&proj)?;
            minus = minus.add(&proj)?;
            continue;
        }
        let cos = Expr::term(
            Key {
                beat: TimeFactor::Cos(kj.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let sin = Expr::term(
            Key {
                beat: TimeFactor::Sin(kj.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let ap = a.mul(&proj)?;
        let kinv = kj.recip().unwrap_or(Q::ZERO);
        let c_part = proj.mul_expr(&cos)?;
        let s_part = ap.mul_expr(&sin.scale(&kinv))?;
        plus = plus.add(&c_part)?.add(&s_part)?;
        minus = minus.add(&c_part)?.add_scaled(&s_part, &Q::int(-1))?;
    }
    Ok((plus, minus))
}

fn show_matrix(m: &Matrix) -> String {
    let rows: Vec<String> = (0..m.rows)
        .map(|i| {
            (0..m.cols)
                .map(|j| num(m, i, j).to_string())
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect();
    format!("{{{}}}", rows.join("; "))
}

/// Recognises a linear centre and pulls the higher orders back.
pub(super) fn linear_centre(
    f0: &Field,
    higher: &[Field],
    states: &[Sym],
) -> CoreResult<(Form, Vec<Field>)> {
    let a = linear_matrix(f0, states)?;
    let (rot, inv) = rotation(&a)?;
    let z = Field(states.iter().map(|s| Expr::sym(*s)).collect());
    let xz = rot.apply(&z)?;
    let map: HashMap<Sym, Expr> = states.iter().copied().zip(xz.0).collect();
    let mut standard = Vec::with_capacity(higher.len());
    for f in higher {
        let moved = f.map(|e| {
            e.subst(&map, states).map_err(|err| match err {
                CoreError::NonlinearArgument { .. } => refuse(format!(
                    "rotating coordinates put time-varying combinations inside a function of \
                     `{e}`: the linear-centre form needs f_j polynomial in the state"
                )),
                CoreError::FunctionArgument { call, .. } => refuse(format!(
                    "rotating coordinates turn `{e}` into `{call}`, an argument that depends on \
                     time: the linear-centre form needs f_j free of unspecified functions of the \
                     rotating coordinates (plug a definition first)"
                )),
                other => other,
            })
        })?;
        standard.push(inv.apply(&moved)?);
    }
    Ok((Form::LinearCentre { a, rotation: rot }, standard))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_rational_roots_with_multiplicity() {
        // (x + 1)^2 (x + 1/4) x = x^4 + 9/4 x^3 + 3/2 x^2 + 1/4 x
        let c = vec![
            Q::ZERO,
            Q::ratio(1, 4).unwrap(),
            Q::ratio(3, 2).unwrap(),
            Q::ratio(9, 4).unwrap(),
            Q::ONE,
        ];
        let mut r = rational_roots(&c);
        r.sort();
        assert_eq!(
            r,
            vec![Q::int(-1), Q::int(-1), Q::ratio(-1, 4).unwrap(), Q::ZERO]
        );
    }
}
