//! Products of expressions: `mul`, powers, reciprocals and quotients.

use super::builder::*;
use crate::core::error::{CoreError, CoreResult, LimitKind};
use crate::core::expr::coeff_words;
use crate::core::expr::Expr;
use crate::core::limits;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::exp_overflow;
use crate::core::term::{Key, Monomial, TimeFactor, TrigFactor};

/// log2 of the larger of |numerator| and denominator (0 for 1 and -1).
pub(crate) fn log2_size(c: &Q) -> f64 {
    match c.as_small() {
        Some((n, d)) => (n.unsigned_abs() as f64)
            .log2()
            .max((d as f64).log2())
            .max(0.0),
        None => c.bits() as f64,
    }
}

impl Expr {
    /// Product, reduced to normal form; checks the term budget and the
    /// coefficient size.
    pub fn mul(&self, other: &Expr) -> CoreResult<Expr> {
        if self.is_zero() || other.is_zero() {
            return Ok(Expr::zero());
        }
        // Fast paths: multiplication by a number.
        if let Some(q) = self.as_number() {
            return other.scale_checked(&q);
        }
        if let Some(q) = other.as_number() {
            return self.scale_checked(&q);
        }
        let mut acc = SumBuilder::with_capacity(
            (2 * (self.len() + other.len())).min(self.len() * other.len()),
        );
        if self.len().saturating_mul(other.len()) >= PACKED_PRODUCT {
            // Large products split both sides by time factor, so that plain
            // polynomial parts multiply packed (the rest term by term).
            let (a, b) = (
                self.clone().into_by_frequency(),
                other.clone().into_by_frequency(),
            );
            acc.add_product_harmonics(&a, &b, false, Keep::All)?;
        } else {
            acc.add_product(self, other, false)?;
        }
        Ok(acc.finish())
    }

    /// Multiplies by a number within the limits (one unit of work per
    /// term, so that many small products count too): a large number adds its
    /// size to every term, which the term budget must allow before anything
    /// is built; the integer-size limit is checked on the result (at most
    /// twice the limit when both factors are within it), so that repeated
    /// products of huge numbers stop.
    pub(crate) fn scale_checked(&self, q: &Q) -> CoreResult<Expr> {
        limits::add_work(self.len() as u64)?;
        let q_words = coeff_words(q);
        if q_words > 0 {
            limits::check_terms(
                self.size()
                    .saturating_add(self.len().saturating_mul(q_words)),
            )?;
        }
        let r = self.scale(q);
        limits::check_bits(r.max_coeff_bits())?;
        Ok(r)
    }

    /// Integer power. Negative powers only for monomials (single terms
    /// without trigonometric factors).
    pub fn pow(&self, e: i64) -> CoreResult<Expr> {
        if e == 0 {
            return Ok(Expr::int(1));
        }
        if self.is_zero() {
            return if e > 0 {
                Ok(Expr::zero())
            } else {
                Err(CoreError::DivisionByZero)
            };
        }
        if e < 0 {
            let inv = self.recip()?;
            return inv.pow(-e);
        }
        if let [(k, c)] = self.terms() {
            if k.wave == TrigFactor::One && k.beat == TimeFactor::One {
                let e32 = i32::try_from(e).map_err(|_| exp_overflow())?;
                let mut mono = Monomial::one();
                for (s, x) in &k.mono.0 {
                    mono.0.push((*s, x.checked_mul(e32).ok_or(exp_overflow())?));
                }
                // The coefficient's size grows as e*log2|c| bits (a unit
                // coefficient stays 1 or -1: `x^1000000000` is cheap).
                let bits = (e as f64 * log2_size(c)).ceil();
                limits::check_bits(if bits < u64::MAX as f64 {
                    bits as u64
                } else {
                    u64::MAX
                })?;
                let coeff = c.pow(e).ok_or(CoreError::DivisionByZero)?;
                let exp = k.exp.scale(&Q::int(e));
                return Ok(Expr::term(
                    Key {
                        mono,
                        exp,
                        wave: TrigFactor::One,
                        beat: TimeFactor::One,
                    },
                    coeff,
                ));
            }
        }
        // A sum (or a trigonometric term): the result has at least e+1 terms
        // unless cancellations happen; refuse absurd exponents up front.
        if e as u64 > limits::limits().max_terms as u64 {
            return Err(CoreError::Limit {
                kind: LimitKind::Terms,
                limit: limits::limits().max_terms as u64,
            });
        }
        self.refuse_oversized_power(e)?;
        // Repeated multiplication by the base: every step multiplies by a
        // short factor with small coefficients, far less work than squaring
        // long powers with long coefficients ((x+y+z+w)^60: 2.4 million term
        // products instead of 35 million), and every step checks the budget,
        // so an oversized power stops at the first step that outgrows it.
        let mut acc = self.clone();
        for _ in 1..e {
            acc = acc.mul(self)?;
        }
        Ok(acc)
    }

    /// Refuses `self^e` before any work when its size is known in advance
    /// to break the budget. A polynomial whose m terms have affinely
    /// independent exponent vectors (`1 + q + p`) has exactly
    /// `C(i+m−1, m−1)` terms in its i-th power (the multinomial count: no
    /// two products of terms share a monomial), so the repeated
    /// multiplication of [`Expr::pow`] does `m·(C(e+m−1, m) − 1)` term
    /// products at least; `(1+q+p)^550` needs 83 million and is refused
    /// at once instead of after many seconds of large coefficients.
    pub(crate) fn refuse_oversized_power(&self, e: i64) -> CoreResult<()> {
        let m = self.terms().len() as u64;
        if m < 2 || !self.has_independent_exponents() {
            return Ok(());
        }
        let e = e.unsigned_abs();
        let max = limits::limits().max_terms as u64;
        if binomial(e + m - 1, m - 1) > u128::from(max) {
            return Err(CoreError::Limit {
                kind: LimitKind::Terms,
                limit: max,
            });
        }
        let products = binomial(e + m - 1, m)
            .saturating_sub(1)
            .saturating_mul(u128::from(m));
        if products > u128::from(max.saturating_mul(limits::WORK_PER_TERM)) {
            return Err(CoreError::Limit {
                kind: LimitKind::Work,
                limit: max,
            });
        }
        Ok(())
    }

    /// True when every term is a plain monomial (no `exp`, no trigonometric
    /// factor) and the exponent vectors are affinely independent.
    pub(crate) fn has_independent_exponents(&self) -> bool {
        let plain =
            |k: &Key| k.exp.is_zero() && k.wave == TrigFactor::One && k.beat == TimeFactor::One;
        if !self.terms().iter().all(|(k, _)| plain(k)) {
            return false;
        }
        let mut syms: Vec<Sym> = self
            .terms()
            .iter()
            .flat_map(|(k, _)| k.mono.0.iter().map(|(s, _)| *s))
            .collect();
        syms.sort();
        syms.dedup();
        let m = self.terms().len();
        if m - 1 > syms.len() {
            return false;
        }
        let vector = |k: &Key| -> Vec<i128> {
            syms.iter()
                .map(|s| i128::from(k.mono.power_of(*s)))
                .collect()
        };
        let Some((first, rest)) = self.terms().split_first() else {
            return false;
        };
        let origin = vector(&first.0);
        let rows: Vec<Vec<i128>> = rest
            .iter()
            .map(|(k, _)| vector(k).iter().zip(&origin).map(|(a, b)| a - b).collect())
            .collect();
        full_row_rank(rows)
    }

    /// Exact reciprocal of a number or monomial (times `exp(M)`).
    pub fn recip(&self) -> CoreResult<Expr> {
        match self.terms() {
            [] => Err(CoreError::DivisionByZero),
            [(k, c)] if k.wave == TrigFactor::One && k.beat == TimeFactor::One => {
                let mut mono = Monomial::one();
                for (s, x) in &k.mono.0 {
                    if *s == Sym::T {
                        return Err(CoreError::DivisionBySum {
                            divisor: self.to_string(),
                        });
                    }
                    mono.0.push((*s, x.checked_neg().ok_or(exp_overflow())?));
                }
                let coeff = c.recip().ok_or(CoreError::DivisionByZero)?;
                Ok(Expr::term(
                    Key {
                        mono,
                        exp: k.exp.neg(),
                        wave: TrigFactor::One,
                        beat: TimeFactor::One,
                    },
                    coeff,
                ))
            }
            _ => Err(CoreError::DivisionBySum {
                divisor: self.to_string(),
            }),
        }
    }

    /// Quotient by a number or monomial.
    pub fn div(&self, other: &Expr) -> CoreResult<Expr> {
        if let Some(q) = other.as_number() {
            let r = q.recip().ok_or(CoreError::DivisionByZero)?;
            return Ok(self.scale(&r));
        }
        self.mul(&other.recip()?)
    }
}

/// `C(n, k)`, saturating at `u128::MAX`.
pub(crate) fn binomial(n: u64, k: u64) -> u128 {
    if k > n {
        return 0;
    }
    let k = k.min(n - k);
    let mut r: u128 = 1;
    for j in 1..=u128::from(k) {
        let factor = u128::from(n - k) + j;
        match r.checked_mul(factor) {
            Some(p) => r = p / j,
            None => return u128::MAX,
        }
    }
    r
}

/// True when the integer rows are linearly independent (fraction-free
/// elimination; an overflow counts as "not known", false).
pub(crate) fn full_row_rank(mut rows: Vec<Vec<i128>>) -> bool {
    let n_rows = rows.len();
    let n_cols = rows.first().map_or(0, Vec::len);
    let mut rank = 0;
    for col in 0..n_cols {
        let Some(pivot) = (rank..n_rows).find(|&r| rows[r][col] != 0) else {
            continue;
        };
        rows.swap(rank, pivot);
        let p = rows[rank][col];
        for r in rank + 1..n_rows {
            let f = rows[r][col];
            if f == 0 {
                continue;
            }
            for c in 0..n_cols {
                let Some(v) = rows[r][c]
                    .checked_mul(p)
                    .and_then(|a| rows[rank][c].checked_mul(f).and_then(|b| a.checked_sub(b)))
                else {
                    return false;
                };
                rows[r][c] = v;
            }
            // Keep the entries small: divide the row by its gcd.
            let g = rows[r].iter().fold(0i128, |g, &v| gcd_i128(g, v));
            if g > 1 {
                for v in &mut rows[r] {
                    *v /= g;
                }
            }
        }
        rank += 1;
        if rank == n_rows {
            break;
        }
    }
    rank == n_rows
}

pub(crate) fn gcd_i128(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.unsigned_abs(), b.unsigned_abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    i128::try_from(a).unwrap_or(i128::MAX)
}
