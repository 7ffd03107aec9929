//! Calculus on normal forms: partial derivatives, substitution, and the
//! time calculus (antiderivatives in `t`, definite integrals, periods and
//! means, separation into time coefficients × autonomous parts).
//!
//! Pure functions of expressions; no I/O, no session.

use std::collections::HashMap;

use super::error::{CoreError, CoreResult};
use super::expr::{Expr, Key, LinearForm, Monomial, TimeFactor, TrigFactor};
use super::num::Q;
use super::symbol::Sym;

impl Expr {
    /// Partial derivative with respect to `s` (a state, a parameter or `t`).
    pub fn pd(&self, s: Sym) -> Expr {
        let mut out: Vec<(Key, Q)> = Vec::new();
        let atoms = super::func::any();
        let mut chain = Vec::new();
        for (k, c) in self.terms() {
            // Monomial factor.
            let e = k.mono.power_of(s);
            if e != 0 {
                let mut key = k.clone();
                for (x, ex) in key.mono.0.iter_mut() {
                    if *x == s {
                        *ex -= 1;
                    }
                }
                key.mono.0.retain(|(_, ex)| *ex != 0);
                out.push((key, c.mul(&Q::int(e as i64))));
            }
            // Unspecified functions: the chain rule.
            if atoms {
                chain.clear();
                super::func::chain_rule(&k.mono, s, &mut chain);
                for (m, f) in chain.drain(..) {
                    let key = Key {
                        mono: m,
                        ..k.clone()
                    };
                    out.push((key, c.mul(&f)));
                }
            }
            // Exponential factor.
            let m = k.exp.coeff(s);
            if !m.is_zero() {
                out.push((k.clone(), c.mul(&m)));
            }
            // Trigonometric factor in the state.
            match &k.wave {
                TrigFactor::One => {}
                TrigFactor::Cos(l) => {
                    let a = l.coeff(s);
                    if !a.is_zero() {
                        let key = Key {
                            wave: TrigFactor::Sin(l.clone()),
                            ..k.clone()
                        };
                        out.push((key, c.mul(&a).neg()));
                    }
                }
                TrigFactor::Sin(l) => {
                    let a = l.coeff(s);
                    if !a.is_zero() {
                        let key = Key {
                            wave: TrigFactor::Cos(l.clone()),
                            ..k.clone()
                        };
                        out.push((key, c.mul(&a)));
                    }
                }
            }
            // Trigonometric factor in time.
            if s == Sym::T {
                match &k.beat {
                    TimeFactor::One => {}
                    TimeFactor::Cos(w) => out.push((
                        Key {
                            beat: TimeFactor::Sin(w.clone()),
                            ..k.clone()
                        },
                        c.mul(w).neg(),
                    )),
                    TimeFactor::Sin(w) => out.push((
                        Key {
                            beat: TimeFactor::Cos(w.clone()),
                            ..k.clone()
                        },
                        c.mul(w),
                    )),
                }
            }
        }
        Expr::from_terms(out)
    }

    /// Simultaneous substitution of symbols by expressions. `states` lists
    /// the state coordinates, which alone may stand inside `sin`, `cos` and
    /// `exp`; a substitution that would put anything else there, or a sum
    /// under a negative power, is an error.
    pub fn subst(&self, map: &HashMap<Sym, Expr>, states: &[Sym]) -> CoreResult<Expr> {
        if map.is_empty() {
            return Ok(self.clone());
        }
        let mut pow_cache: HashMap<(Sym, i32), Expr> = HashMap::new();
        let atoms = super::func::any();
        // Atoms with their arguments evaluated (`None`: untouched).
        let mut atom_cache: HashMap<Sym, Option<Expr>> = HashMap::new();
        // Collect the terms of every substituted term and normalise once:
        // merging into a running sum would be quadratic in the size.
        let mut out: Vec<(Key, Q)> = Vec::new();
        let max_terms = super::limits::limits().max_terms;
        for (k, c) in self.terms() {
            super::limits::poll()?;
            // Unaffected part of the key.
            let mut rest = Key::one();
            let mut factor = Expr::int(1);
            for (s, e) in &k.mono.0 {
                if atoms && !map.contains_key(s) && !atom_cache.contains_key(s) {
                    let v = match super::func::atom(*s) {
                        Some(a) => super::func::subst_args(&a, map, states)?,
                        None => None,
                    };
                    atom_cache.insert(*s, v);
                }
                let moved = map
                    .get(s)
                    .or_else(|| atom_cache.get(s).and_then(Option::as_ref));
                match moved {
                    None => rest.mono.0.push((*s, *e)),
                    Some(v) => {
                        let p = match pow_cache.get(&(*s, *e)) {
                            Some(p) => p.clone(),
                            None => {
                                let p = v.pow(*e as i64).map_err(|err| match err {
                                    CoreError::DivisionBySum { .. } => CoreError::OutsideAlgebra {
                                        what: format!(
                                            "`{}^{}` with {} = {}",
                                            s.name(),
                                            e,
                                            s.name(),
                                            v
                                        ),
                                    },
                                    other => other,
                                })?;
                                pow_cache.insert((*s, *e), p.clone());
                                p
                            }
                        };
                        factor = factor.mul(&p)?;
                    }
                }
            }
            let lin_touched = |l: &LinearForm| l.0.iter().any(|(s, _)| map.contains_key(s));
            if lin_touched(&k.exp) {
                factor = factor.mul(&Expr::exp_of(&lin_value(&k.exp, map), states)?)?;
            } else {
                rest.exp = k.exp.clone();
            }
            match &k.wave {
                TrigFactor::One => {}
                TrigFactor::Cos(l) | TrigFactor::Sin(l) if lin_touched(l) => {
                    let arg = lin_value(l, map);
                    let w = if matches!(k.wave, TrigFactor::Cos(_)) {
                        Expr::cos_of(&arg, states)?
                    } else {
                        Expr::sin_of(&arg, states)?
                    };
                    factor = factor.mul(&w)?;
                }
                w => rest.wave = w.clone(),
            }
            match (&k.beat, map.get(&Sym::T)) {
                (TimeFactor::One, _) => {}
                (b, None) => rest.beat = b.clone(),
                (TimeFactor::Cos(w), Some(v)) => {
                    factor = factor.mul(&Expr::cos_of(&v.scale(w), states)?)?;
                }
                (TimeFactor::Sin(w), Some(v)) => {
                    factor = factor.mul(&Expr::sin_of(&v.scale(w), states)?)?;
                }
            }
            let term = Expr::term(rest, c.clone()).mul(&factor)?;
            out.extend(term.terms().iter().cloned());
            if out.len() > max_terms.saturating_mul(4) {
                // Possibly with repeats: merge, then judge.
                let merged = Expr::from_terms(std::mem::take(&mut out));
                super::limits::check_terms(merged.len())?;
                out = merged.terms().to_vec();
            }
        }
        let out = Expr::from_terms(out);
        super::limits::check_terms(out.len())?;
        Ok(out)
    }

    /// Renames symbols (a substitution by symbols, which never fails for
    /// state-to-state renaming).
    pub fn rename(&self, map: &HashMap<Sym, Sym>, states: &[Sym]) -> CoreResult<Expr> {
        let m: HashMap<Sym, Expr> = map.iter().map(|(a, b)| (*a, Expr::sym(*b))).collect();
        self.subst(&m, states)
    }
}

fn lin_value(l: &LinearForm, map: &HashMap<Sym, Expr>) -> Expr {
    let mut acc = Expr::zero();
    for (s, c) in l.0.iter() {
        let v = map.get(s).cloned().unwrap_or_else(|| Expr::sym(*s));
        acc = acc.add_scaled(&v, c);
    }
    acc
}

// ---------------------------------------------------------------------------
// Time calculus.

/// The time part of a term: `t^n · beat`.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub struct TimeKey {
    /// Power of `t`.
    pub tpow: i32,
    /// Oscillating factor.
    pub beat: TimeFactor,
}

impl TimeKey {
    /// The time function as an expression.
    pub fn to_expr(&self) -> Expr {
        let mut key = Key::one();
        if self.tpow != 0 {
            key.mono.0.push((Sym::T, self.tpow));
        }
        key.beat = self.beat.clone();
        Expr::term(key, Q::ONE)
    }
}

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
    /// Splits into `Σ c_k(t) g_k`: pairs (time part, autonomous expression),
    /// sorted by time part.
    pub fn split_time(&self) -> Vec<(TimeKey, Expr)> {
        let mut groups: HashMap<TimeKey, Vec<(Key, Q)>> = HashMap::new();
        for (k, c) in self.terms() {
            let tk = TimeKey {
                tpow: k.mono.power_of(Sym::T),
                beat: k.beat.clone(),
            };
            let mut rest = k.clone();
            rest.mono.0.retain(|(s, _)| *s != Sym::T);
            rest.beat = TimeFactor::One;
            groups.entry(tk).or_default().push((rest, c.clone()));
        }
        let mut out: Vec<(TimeKey, Expr)> = groups
            .into_iter()
            .map(|(tk, terms)| (tk, Expr::from_terms(terms)))
            .collect();
        out.sort_by(|a, b| a.0.cmp(&b.0));
        out
    }

    /// The frequencies `k` of the `cos(k t)`/`sin(k t)` factors present.
    pub fn frequencies(&self) -> Vec<Q> {
        let mut out: Vec<Q> = self
            .terms()
            .iter()
            .filter_map(|(k, _)| match &k.beat {
                TimeFactor::One => None,
                TimeFactor::Cos(w) | TimeFactor::Sin(w) => Some(w.clone()),
            })
            .collect();
        out.sort();
        out.dedup();
        out
    }

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
            super::limits::check_terms(out.len())?;
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
    fn integral_from_zero_of_harmonics(&self) -> Option<Expr> {
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
    fn mean_of_harmonics(&self, period: &Period) -> Option<Expr> {
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
                super::limits::check_bits(c.bits().saturating_mul(n.unsigned_abs() as u64))?;
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

/// Exact cos/sin at `c·pi` when rational.
fn trig_value(is_sin: bool, c: &Q) -> Option<Q> {
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

/// `∫ t^n · beat dt` as a list of `(power, beat, coefficient)`.
pub(crate) fn integrate_time_monomial(
    n: i32,
    beat: &TimeFactor,
) -> CoreResult<Vec<(i32, TimeFactor, Q)>> {
    match beat {
        TimeFactor::One => Ok(vec![(
            n.checked_add(1).ok_or(CoreError::Limit {
                kind: super::error::LimitKind::Exponent,
                limit: i32::MAX as u64,
            })?,
            TimeFactor::One,
            Q::ratio(1, n as i64 + 1).unwrap_or(Q::ZERO),
        )]),
        TimeFactor::Cos(k) | TimeFactor::Sin(k) => {
            // I_c(n) = t^n sin/k - (n/k) I_s(n-1); I_s(n) = -t^n cos/k + (n/k) I_c(n-1).
            // That is n + 1 terms with coefficients up to n!/k^n: ask the
            // limits before building them (`t^1000000000*cos(t)`).
            super::limits::check_terms(usize::try_from(n).unwrap_or(0).saturating_add(1))?;
            let mut out = Vec::new();
            let mut size = 0usize;
            let mut is_sin = matches!(beat, TimeFactor::Sin(_));
            let mut factor = Q::ONE;
            let mut p = n;
            let inv_k = k.recip().unwrap_or(Q::ZERO);
            loop {
                if is_sin {
                    out.push((p, TimeFactor::Cos(k.clone()), factor.mul(&inv_k).neg()));
                    factor = factor.mul(&Q::int(p as i64)).mul(&inv_k);
                } else {
                    out.push((p, TimeFactor::Sin(k.clone()), factor.mul(&inv_k)));
                    factor = factor.mul(&Q::int(p as i64)).mul(&inv_k).neg();
                }
                if p == 0 {
                    break;
                }
                // The budget counts the coefficients' size too: n!/k^n has
                // many digits long before n reaches the budget in terms.
                size = size.saturating_add(1 + super::limits::coefficient_terms(factor.bits()));
                if p % 64 == 0 {
                    super::limits::poll()?;
                    super::limits::check_bits(factor.bits())?;
                    super::limits::check_terms(size)?;
                }
                p -= 1;
                is_sin = !is_sin;
            }
            Ok(out)
        }
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
