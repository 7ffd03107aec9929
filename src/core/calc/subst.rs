//! Substitution of expressions and renaming of symbols.

use std::collections::HashMap;

use crate::core::error::{CoreError, CoreResult};
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, LinearForm, TimeFactor, TrigFactor};

impl Expr {
    /// Simultaneous substitution of symbols by expressions. `states` lists
    /// the state coordinates, which alone may stand inside `sin`, `cos` and
    /// `exp`; a substitution that would put anything else there, or a sum
    /// under a negative power, is an error.
    pub fn subst(&self, map: &HashMap<Sym, Expr>, states: &[Sym]) -> CoreResult<Expr> {
        if map.is_empty() {
            return Ok(self.clone());
        }
        let mut pow_cache: HashMap<(Sym, i32), Expr> = HashMap::new();
        let atoms = crate::core::func::any();
        // Atoms with their arguments evaluated (`None`: untouched).
        let mut atom_cache: HashMap<Sym, Option<Expr>> = HashMap::new();
        // Collect the terms of every substituted term and normalise once:
        // merging into a running sum would be quadratic in the size.
        let mut out: Vec<(Key, Q)> = Vec::new();
        let max_terms = crate::core::limits::limits().max_terms;
        for (k, c) in self.terms() {
            crate::core::limits::poll()?;
            // Unaffected part of the key.
            let mut rest = Key::one();
            let mut factor = Expr::int(1);
            for (s, e) in &k.mono.0 {
                if atoms && !map.contains_key(s) && !atom_cache.contains_key(s) {
                    let v = match crate::core::func::atom(*s) {
                        Some(a) => crate::core::func::subst_args(&a, map, states)?,
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
                crate::core::limits::check_terms(merged.len())?;
                out = merged.terms().to_vec();
            }
        }
        let out = Expr::from_terms(out);
        crate::core::limits::check_terms(out.len())?;
        Ok(out)
    }

    /// Renames symbols (a substitution by symbols, which never fails for
    /// state-to-state renaming).
    pub fn rename(&self, map: &HashMap<Sym, Sym>, states: &[Sym]) -> CoreResult<Expr> {
        let m: HashMap<Sym, Expr> = map.iter().map(|(a, b)| (*a, Expr::sym(*b))).collect();
        self.subst(&m, states)
    }
}

pub(crate) fn lin_value(l: &LinearForm, map: &HashMap<Sym, Expr>) -> Expr {
    let mut acc = Expr::zero();
    for (s, c) in l.0.iter() {
        let v = map.get(s).cloned().unwrap_or_else(|| Expr::sym(*s));
        acc = acc.add_scaled(&v, c);
    }
    acc
}
