//! Integrals in time, periods and means over a period.

use crate::core::error::{CoreError, CoreResult};
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::integrate_time_monomial;
use crate::core::term::{Key, Monomial, TimeFactor};

/// A period written as a rational multiple of pi.
#[derive(Clone, PartialEq, Eq, Debug)]
pub struct Period(pub Q);

impl Period {
    /// The period as an exact expression `c*pi`.
    pub fn to_expr(&self) -> Expr {
        Expr::sym(Sym::PI).scale(&self.0)
    }
}

impl std::fmt::Display for Period {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}", self.to_expr())
    }
}

impl Expr {
    /// Fails with `NotPeriodic` naming the first term with a power of `t`.
    pub fn check_periodic(&self) -> CoreResult<()> {
        for (k, c) in self.terms() {
            if k.mono.power_of(Sym::T) != 0 {
                return Err(CoreError::NotPeriodic {
                    term: Expr::term(k.clone(), c.clone()).to_string(),
                });
            }
        }
        Ok(())
    }

    /// Antiderivative in `t` (the one without constant term in the
    /// polynomial-times-oscillation basis).
    pub fn antiderivative_t(&self) -> CoreResult<Expr> {
        let mut out: Vec<(Key, Q)> = Vec::new();
        for (k, c) in self.terms() {
            let n = k.mono.power_of(Sym::T);
            if n < 0 {
                return Err(CoreError::Refused {
                    reason: "cannot integrate a negative power of t".to_string(),
                });
            }
            let mut base = k.clone();
            base.mono.0.retain(|(s, _)| *s != Sym::T);
            base.beat = TimeFactor::One;
            for (p, beat, q) in integrate_time_monomial(n, &k.beat)? {
                let mut key = base.clone();
                if p != 0 {
                    key.mono = key.mono.mul(&Monomial(smallvec::smallvec![(Sym::T, p)]))?;
                }
                key.beat = beat;
                out.push((key, c.mul(&q)));
            }
            crate::core::limits::check_terms(out.len())?;
        }
        Ok(Expr::from_terms(out))
    }

    /// `∫_0^t self dτ` (as a function of `t`).
    pub fn integral_from_zero(&self) -> CoreResult<Expr> {
        if let Some(f) = self.integral_from_zero_of_harmonics() {
            return Ok(f);
        }
        let f = self.antiderivative_t()?;
        let f0 = f.at_time_zero();
        Ok(f.sub(&f0))
    }

    /// `∫_0^t self dτ` term by term when no term has a power of `t`:
    /// `1 → t`, `cos(h t) → sin(h t)/h`, `sin(h t) → (1 − cos(h t))/h`
    /// (the same result as the general route, without building the
    /// antiderivative and its value at 0 apart). `None` otherwise.
    pub(crate) fn integral_from_zero_of_harmonics(&self) -> Option<Expr> {
        let mut out: Vec<(Key, Q)> = Vec::with_capacity(self.len() + self.len() / 2);
        for (k, c) in self.terms() {
            if k.mono.power_of(Sym::T) != 0 {
                return None;
            }
            match &k.beat {
                TimeFactor::One => {
                    let mut key = k.clone();
                    key.mono = key
                        .mono
                        .mul(&Monomial(smallvec::smallvec![(Sym::T, 1)]))
                        .ok()?;
                    out.push((key, c.clone()));
                }
                TimeFactor::Cos(h) => {
                    let mut key = k.clone();
                    key.beat = TimeFactor::Sin(h.clone());
                    out.push((key, c.div(h)?));
                }
                TimeFactor::Sin(h) => {
                    let v = c.div(h)?;
                    let mut key = k.clone();
                    key.beat = TimeFactor::Cos(h.clone());
                    out.push((key, v.neg()));
                    let mut key = k.clone();
                    key.beat = TimeFactor::One;
                    out.push((key, v));
                }
            }
        }
        Some(Expr::from_terms(out))
    }

    /// The mean over `period` when no term has a power of `t` and every
    /// frequency `h` completes whole cycles in it (`h·T/(2π)` an integer):
    /// the terms without time factor. `None` otherwise.
    pub(crate) fn mean_of_harmonics(&self, period: &Period) -> Option<Expr> {
        let half = period.0.half();
        for (k, _) in self.terms() {
            if k.mono.power_of(Sym::T) != 0 {
                return None;
            }
            if let TimeFactor::Cos(h) | TimeFactor::Sin(h) = &k.beat {
                if !h.mul(&half).is_integer() {
                    return None;
                }
            }
        }
        Some(self.filter(|k, _| k.beat == TimeFactor::One))
    }

    /// `∫_0^T self dt` for `T = c·pi`.
    pub fn integral_over(&self, period: &Period) -> CoreResult<Expr> {
        let f = self.antiderivative_t()?;
        Ok(f.at_time_pi_multiple(&period.0)?.sub(&f.at_time_zero()))
    }

    /// Mean over the period: `(1/T) ∫_0^T self dt`.
    pub fn mean_over(&self, period: &Period) -> CoreResult<Expr> {
        if let Some(m) = self.mean_of_harmonics(period) {
            return Ok(m);
        }
        let integral = self.integral_over(period)?;
        integral.div(&period.to_expr())
    }

    /// The zero-mean antiderivative in `t` of a periodic expression whose
    /// mean is zero (the oscillating part of `∫ self dt`).
    pub fn zero_mean_antiderivative(&self, period: &Period) -> CoreResult<Expr> {
        let f = self.antiderivative_t()?;
        let m = f.mean_over(period)?;
        Ok(f.sub(&m))
    }
}

/// The common period of the given frequencies, as a multiple of pi:
/// `T = 2·pi / gcd(k)`. `None` when there are no frequencies.
pub fn common_period(freqs: &[Q]) -> Option<Period> {
    let mut g: Option<Q> = None;
    for k in freqs {
        g = Some(match g {
            None => k.abs(),
            Some(g) => g.gcd(k),
        });
    }
    let g = g?;
    Some(Period(Q::int(2).div(&g)?))
}
