//! Building expressions: numbers, symbols, single terms and the normal form
//! of a list of terms.

use rustc_hash::FxHashMap;

use super::Expr;
use crate::core::num::Q;
use crate::core::packed;
use crate::core::symbol::Sym;
use crate::core::term::Key;

impl Expr {
    /// Zero.
    pub fn zero() -> Expr {
        Expr { terms: Vec::new() }
    }

    /// A rational number.
    pub fn num(q: Q) -> Expr {
        if q.is_zero() {
            Expr::zero()
        } else {
            Expr {
                terms: vec![(Key::one(), q)],
            }
        }
    }

    /// The integer `n`.
    pub fn int(n: i64) -> Expr {
        Expr::num(Q::int(n))
    }

    /// A symbol to the first power (state, parameter, `t` or `pi`).
    pub fn sym(s: Sym) -> Expr {
        let mut key = Key::one();
        key.mono.0.push((s, 1));
        Expr {
            terms: vec![(key, Q::ONE)],
        }
    }

    /// A single term.
    pub fn term(key: Key, coeff: Q) -> Expr {
        if coeff.is_zero() {
            Expr::zero()
        } else {
            Expr {
                terms: vec![(key, coeff)],
            }
        }
    }

    /// Builds from unsorted terms with possible repeats (merged) and zeros (dropped).
    pub fn from_terms(mut terms: Vec<(Key, Q)>) -> Expr {
        packed::sort_terms(&mut terms);
        let mut out: Vec<(Key, Q)> = Vec::with_capacity(terms.len());
        for (k, c) in terms {
            match out.last_mut() {
                Some((lk, lc)) if *lk == k => *lc = lc.add(&c),
                _ => {
                    if let Some((_, lc)) = out.last() {
                        if lc.is_zero() {
                            out.pop();
                        }
                    }
                    out.push((k, c));
                }
            }
        }
        if out.last().is_some_and(|(_, c)| c.is_zero()) {
            out.pop();
        }
        Expr { terms: out }
    }

    /// The expression of terms already in key order, with distinct keys
    /// and nonzero coefficients (the packed forms sort on their own, much
    /// more cheaply than keys compare).
    pub(crate) fn from_sorted_terms(terms: Vec<(Key, Q)>) -> Expr {
        debug_assert!(terms.windows(2).all(|w| w[0].0 < w[1].0));
        debug_assert!(terms.iter().all(|(_, c)| !c.is_zero()));
        Expr { terms }
    }

    pub(crate) fn from_map(map: FxHashMap<Key, Q>) -> Expr {
        let mut terms: Vec<(Key, Q)> = map.into_iter().filter(|(_, c)| !c.is_zero()).collect();
        packed::sort_terms(&mut terms);
        Expr { terms }
    }
}
