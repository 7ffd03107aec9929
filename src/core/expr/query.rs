//! What an expression holds: its terms, symbols, numbers, powers and size.

use super::Expr;
use crate::core::limits;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, TimeFactor, TrigFactor};

/// What a coefficient adds to the term budget beyond its term (see
/// [`limits::coefficient_terms`]); nothing when it fits machine words.
pub(crate) fn coeff_words(c: &Q) -> usize {
    if c.is_small() {
        0
    } else {
        limits::coefficient_terms(c.bits())
    }
}

impl Expr {
    /// The terms, sorted by key.
    pub fn terms(&self) -> &[(Key, Q)] {
        &self.terms
    }

    /// The terms, sorted by key, taken out.
    pub fn into_terms(self) -> Vec<(Key, Q)> {
        self.terms
    }

    /// Number of terms.
    #[allow(clippy::len_without_is_empty)] // `is_zero` is the emptiness test
    pub fn len(&self) -> usize {
        self.terms.len()
    }

    /// True if and only if the expression is zero.
    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    /// The value when the expression is a plain rational number.
    pub fn as_number(&self) -> Option<Q> {
        match self.terms.as_slice() {
            [] => Some(Q::ZERO),
            [(k, c)] if k.is_one() => Some(c.clone()),
            _ => None,
        }
    }

    /// True if and only if some term mentions `s` (in a monomial, an
    /// argument, or time factors for `Sym::T`).
    pub fn mentions(&self, s: Sym) -> bool {
        let atoms = crate::core::term::any();
        self.terms.iter().any(|(k, _)| {
            k.mono.power_of(s) != 0
                || (atoms
                    && k.mono
                        .0
                        .iter()
                        .any(|(a, _)| crate::core::term::atom(*a).is_some_and(|a| a.mentions(s))))
                || !k.exp.coeff(s).is_zero()
                || match &k.wave {
                    TrigFactor::One => false,
                    TrigFactor::Cos(l) | TrigFactor::Sin(l) => !l.coeff(s).is_zero(),
                }
                || (s == Sym::T && k.beat != TimeFactor::One)
        })
    }

    /// All symbols mentioned, sorted (with those of the arguments of
    /// unspecified functions, see [`crate::core::func`]).
    pub fn symbols(&self) -> Vec<Sym> {
        let mut out = Vec::new();
        let atoms = crate::core::term::any();
        for (k, _) in &self.terms {
            out.extend(k.mono.0.iter().map(|(s, _)| *s));
            if atoms {
                for (s, _) in &k.mono.0 {
                    if let Some(a) = crate::core::term::atom(*s) {
                        out.extend(a.arg_syms());
                    }
                }
            }
            out.extend(k.exp.0.iter().map(|(s, _)| *s));
            if let TrigFactor::Cos(l) | TrigFactor::Sin(l) = &k.wave {
                out.extend(l.0.iter().map(|(s, _)| *s));
            }
            if k.beat != TimeFactor::One {
                out.push(Sym::T);
            }
        }
        out.sort();
        out.dedup();
        out
    }

    /// True if and only if the expression depends on time.
    pub fn is_time_varying(&self) -> bool {
        self.mentions(Sym::T)
    }

    /// The coefficient of `s^k` (other powers of `s` dropped).
    pub fn coeff_of_power(&self, s: Sym, k: i32) -> Expr {
        self.map_terms(|key, c| {
            if key.mono.power_of(s) != k {
                return None;
            }
            let mut key = key.clone();
            key.mono.0.retain(|(x, _)| *x != s);
            Some((key, c.clone()))
        })
    }

    /// The range of powers of `s` present (min, max); `None` for zero.
    pub fn power_range(&self, s: Sym) -> Option<(i32, i32)> {
        let mut it = self.terms.iter().map(|(k, _)| k.mono.power_of(s));
        let first = it.next()?;
        Some(it.fold((first, first), |(lo, hi), e| (lo.min(e), hi.max(e))))
    }

    /// Size measure for the budget: number of terms plus the size (in terms)
    /// of large coefficients.
    pub fn size(&self) -> usize {
        self.terms.iter().fold(self.terms.len(), |acc, (_, c)| {
            acc.saturating_add(coeff_words(c))
        })
    }

    /// Bits of the largest coefficient (numerator or denominator).
    pub fn max_coeff_bits(&self) -> u64 {
        self.terms.iter().map(|(_, c)| c.bits()).max().unwrap_or(0)
    }
}
