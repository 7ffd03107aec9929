//! Compiles exact expressions and fields into flat floating-point
//! evaluators: parameters and `pi` are substituted once, each term becomes
//! a coefficient, integer powers of state indices, and optional exponential
//! and trigonometric factors. No big rationals and no tree walks in the
//! integration loop.

use std::collections::HashMap;
use std::fmt;

use crate::core::expr::{TimeFactor, TrigFactor};
use crate::core::{Expr, Field, Sym, Q};

/// Why an expression cannot be compiled.
#[derive(Clone, Debug, PartialEq)]
pub enum CompileError {
    /// Symbols without a numerical value (parameters not given in `with`).
    Missing(Vec<String>),
    /// A value is not finite.
    NotFinite(String),
}

impl fmt::Display for CompileError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CompileError::Missing(names) => write!(
                f,
                "no value for {}: give {} with `with {}=…`",
                names
                    .iter()
                    .map(|n| format!("`{n}`"))
                    .collect::<Vec<_>>()
                    .join(", "),
                if names.len() == 1 { "it" } else { "them" },
                names.first().map_or("", String::as_str)
            ),
            CompileError::NotFinite(what) => {
                write!(f, "the value of {what} is not a finite number")
            }
        }
    }
}

#[derive(Clone, Debug)]
struct Term {
    coeff: f64,
    powers: Vec<(usize, i32)>,
    tpow: i32,
    exp: Vec<(usize, f64)>,
    wave: Option<(bool, Vec<(usize, f64)>)>,
    beat: Option<(bool, f64)>,
}

/// A compiled scalar expression of `(t, x)`.
#[derive(Clone, Debug)]
pub struct CompiledExpr {
    terms: Vec<Term>,
}

/// A compiled field.
#[derive(Clone, Debug)]
pub(crate) struct CompiledField {
    comps: Vec<CompiledExpr>,
}

fn lin(
    l: &crate::core::expr::LinearForm,
    index: &HashMap<Sym, usize>,
) -> Result<Vec<(usize, f64)>, Sym> {
    l.terms()
        .iter()
        .map(|(s, q)| index.get(s).map(|i| (*i, q.to_f64())).ok_or(*s))
        .collect()
}

impl CompiledExpr {
    /// Compiles `e` over the state `states` with numerical `values` for
    /// every other symbol (`pi` is known).
    pub fn new(
        e: &Expr,
        states: &[Sym],
        values: &HashMap<Sym, f64>,
    ) -> Result<CompiledExpr, CompileError> {
        let index: HashMap<Sym, usize> = states.iter().enumerate().map(|(i, s)| (*s, i)).collect();
        let mut missing: Vec<String> = Vec::new();
        let mut terms = Vec::with_capacity(e.len());
        for (k, c) in e.terms() {
            let mut coeff = c.to_f64();
            let mut powers = Vec::new();
            let mut tpow = 0;
            for (s, p) in k.mono.powers() {
                if let Some(i) = index.get(s) {
                    powers.push((*i, *p));
                } else if *s == Sym::T {
                    tpow = *p;
                } else if *s == Sym::PI {
                    coeff *= std::f64::consts::PI.powi(*p);
                } else if let Some(v) = values.get(s) {
                    coeff *= v.powi(*p);
                } else {
                    missing.push(s.name());
                }
            }
            let exp = lin(&k.exp, &index).unwrap_or_else(|s| {
                missing.push(s.name());
                Vec::new()
            });
            let wave = match &k.wave {
                TrigFactor::One => None,
                TrigFactor::Cos(l) | TrigFactor::Sin(l) => Some((
                    matches!(k.wave, TrigFactor::Sin(_)),
                    lin(l, &index).unwrap_or_else(|s| {
                        missing.push(s.name());
                        Vec::new()
                    }),
                )),
            };
            let beat = match &k.beat {
                TimeFactor::One => None,
                TimeFactor::Cos(w) => Some((false, w.to_f64())),
                TimeFactor::Sin(w) => Some((true, w.to_f64())),
            };
            if !coeff.is_finite() {
                return Err(CompileError::NotFinite(format!("a coefficient of `{e}`")));
            }
            terms.push(Term {
                coeff,
                powers,
                tpow,
                exp,
                wave,
                beat,
            });
        }
        if !missing.is_empty() {
            missing.sort();
            missing.dedup();
            return Err(CompileError::Missing(missing));
        }
        Ok(CompiledExpr { terms })
    }

    /// Evaluates at time `t` and state `x`.
    pub fn eval(&self, t: f64, x: &[f64]) -> f64 {
        let mut acc = 0.0;
        for term in &self.terms {
            let mut v = term.coeff;
            for (i, p) in &term.powers {
                v *= x[*i].powi(*p);
            }
            if term.tpow != 0 {
                v *= t.powi(term.tpow);
            }
            if !term.exp.is_empty() {
                v *= term.exp.iter().map(|(i, c)| c * x[*i]).sum::<f64>().exp();
            }
            if let Some((is_sin, l)) = &term.wave {
                let a: f64 = l.iter().map(|(i, c)| c * x[*i]).sum();
                v *= if *is_sin { a.sin() } else { a.cos() };
            }
            if let Some((is_sin, k)) = term.beat {
                v *= if is_sin { (k * t).sin() } else { (k * t).cos() };
            }
            acc += v;
        }
        acc
    }
}

impl CompiledField {
    /// Compiles every component.
    pub(crate) fn new(
        f: &Field,
        states: &[Sym],
        values: &HashMap<Sym, f64>,
    ) -> Result<CompiledField, CompileError> {
        let mut comps = Vec::with_capacity(f.dim());
        let mut missing = Vec::new();
        for c in &f.0 {
            match CompiledExpr::new(c, states, values) {
                Ok(ce) => comps.push(ce),
                Err(CompileError::Missing(m)) => missing.extend(m),
                Err(e) => return Err(e),
            }
        }
        if !missing.is_empty() {
            missing.sort();
            missing.dedup();
            return Err(CompileError::Missing(missing));
        }
        Ok(CompiledField { comps })
    }

    /// Evaluates into `out`.
    pub(crate) fn eval(&self, t: f64, x: &[f64], out: &mut [f64]) {
        for (o, c) in out.iter_mut().zip(&self.comps) {
            *o = c.eval(t, x);
        }
    }

    /// Dimension.
    pub(crate) fn dim(&self) -> usize {
        self.comps.len()
    }
}

/// Converts exact parameter values to doubles.
pub(crate) fn float_values(values: &HashMap<Sym, Q>) -> HashMap<Sym, f64> {
    values.iter().map(|(s, q)| (*s, q.to_f64())).collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn evaluates_trig_time_and_parameters() {
        let x = Sym::new("cq");
        let k = Sym::new("ck");
        let st = [x];
        let t = Expr::sym(Sym::T);
        // k * x^2 * sin(2x) * cos(3t) + pi
        let e = Expr::sym(k)
            .mul(&Expr::sym(x).pow(2).unwrap())
            .unwrap()
            .mul(&Expr::sin_of(&Expr::sym(x).scale(&Q::int(2)), &st).unwrap())
            .unwrap()
            .mul(&Expr::cos_of(&t.scale(&Q::int(3)), &st).unwrap())
            .unwrap()
            .add(&Expr::sym(Sym::PI));
        let mut vals = HashMap::new();
        assert!(matches!(
            CompiledExpr::new(&e, &st, &vals),
            Err(CompileError::Missing(_))
        ));
        vals.insert(k, 1.5);
        let c = CompiledExpr::new(&e, &st, &vals).unwrap();
        let (tv, xv) = (0.7_f64, 0.3_f64);
        let want = 1.5 * xv * xv * (2.0 * xv).sin() * (3.0 * tv).cos() + std::f64::consts::PI;
        assert!((c.eval(tv, &[xv]) - want).abs() < 1e-12);
    }
}
