//! Expressions at a time value: `t = 0` and rational multiples of pi.

use crate::core::error::{CoreError, CoreResult};
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, Monomial, TimeFactor};

impl Expr {
    /// The value at `t = 0`.
    pub fn at_time_zero(&self) -> Expr {
        self.map_terms(|k, c| {
            if k.mono.power_of(Sym::T) > 0 {
                return None;
            }
            match &k.beat {
                TimeFactor::Sin(_) => None,
                _ => {
                    let mut key = k.clone();
                    key.beat = TimeFactor::One;
                    Some((key, c.clone()))
                }
            }
        })
    }

    /// The value at `t = c·pi` (exact when every `cos`/`sin` of time lands on a
    /// multiple of pi/6 with a rational value).
    pub fn at_time_pi_multiple(&self, c: &Q) -> CoreResult<Expr> {
        let mut out: Vec<(Key, Q)> = Vec::new();
        for (k, coeff) in self.terms() {
            let n = k.mono.power_of(Sym::T);
            let mut key = k.clone();
            key.mono.0.retain(|(s, _)| *s != Sym::T);
            let mut q = coeff.clone();
            if n != 0 {
                // c^n for a power of t as high as `t^1000000000`: check its size first.
                crate::core::limits::check_bits(c.bits().saturating_mul(n.unsigned_abs() as u64))?;
                q = q.mul(&c.pow(n as i64).ok_or(CoreError::DivisionByZero)?);
                key.mono = key.mono.mul(&Monomial(smallvec::smallvec![(Sym::PI, n)]))?;
            }
            match &k.beat {
                TimeFactor::One => {}
                TimeFactor::Cos(w) | TimeFactor::Sin(w) => {
                    let is_sin = matches!(k.beat, TimeFactor::Sin(_));
                    let arg = w.mul(c);
                    let v = trig_value(is_sin, &arg).ok_or_else(|| CoreError::Irrational {
                        what: format!("{}({}*pi)", if is_sin { "sin" } else { "cos" }, arg),
                    })?;
                    q = q.mul(&v);
                    key.beat = TimeFactor::One;
                }
            }
            out.push((key, q));
        }
        Ok(Expr::from_terms(out))
    }
}

/// Exact cos/sin at `c·pi` when rational.
pub(crate) fn trig_value(is_sin: bool, c: &Q) -> Option<Q> {
    let six = c.mul(&Q::int(6));
    let n = six.to_i64()?.rem_euclid(12);
    const COS2: [i64; 12] = [2, 99, 1, 0, -1, 99, -2, 99, -1, 0, 1, 99];
    let idx = if is_sin { (n + 9) % 12 } else { n };
    let v = COS2[idx as usize];
    if v == 99 {
        None
    } else {
        Q::ratio(v, 2)
    }
}
