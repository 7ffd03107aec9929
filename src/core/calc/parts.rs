//! An expression split by time factor into coefficient expressions, and its
//! frequencies.

use std::collections::HashMap;

use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, TimeFactor};

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
}
