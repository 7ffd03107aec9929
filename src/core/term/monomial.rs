//! Monomials: sorted `(symbol, exponent)` pairs with nonzero exponents, and
//! their product.

use smallvec::SmallVec;

use crate::core::error::{CoreError, CoreResult, LimitKind};
use crate::core::symbol::Sym;

/// Symbols that fit a packed monomial (those numbered below this; see
/// [`crate::core::packed`]).
pub const SLOTS: u32 = 16;

/// A monomial: sorted `(symbol, exponent)` pairs with nonzero exponents.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct Monomial(pub(in crate::core) SmallVec<[(Sym, i32); 4]>);

impl Monomial {
    /// The constant monomial 1.
    pub fn one() -> Monomial {
        Monomial(SmallVec::new())
    }

    /// The sorted `(symbol, exponent)` pairs, exponents nonzero.
    pub fn powers(&self) -> &[(Sym, i32)] {
        &self.0
    }

    /// The monomial of `(symbol, exponent)` pairs in any order (exponents
    /// of a repeated symbol add; zero exponents are dropped); fails on
    /// exponent overflow.
    pub fn from_powers(pairs: impl IntoIterator<Item = (Sym, i32)>) -> CoreResult<Monomial> {
        let mut v: SmallVec<[(Sym, i32); 4]> = pairs.into_iter().collect();
        v.sort_by_key(|(s, _)| *s);
        let mut out: SmallVec<[(Sym, i32); 4]> = SmallVec::with_capacity(v.len());
        for (s, e) in v {
            match out.last_mut() {
                Some((l, x)) if *l == s => *x = x.checked_add(e).ok_or(exp_overflow())?,
                _ => out.push((s, e)),
            }
        }
        out.retain(|(_, e)| *e != 0);
        Ok(Monomial(out))
    }

    /// Keeps the `(symbol, exponent)` factors that satisfy `keep`.
    pub fn retain(&mut self, mut keep: impl FnMut(&(Sym, i32)) -> bool) {
        self.0.retain(|p| keep(p));
    }

    /// Exponent of `s`.
    pub fn power_of(&self, s: Sym) -> i32 {
        self.0.iter().find(|(x, _)| *x == s).map_or(0, |(_, e)| *e)
    }

    /// Product (exponents add); fails on exponent overflow.
    pub fn mul(&self, other: &Monomial) -> CoreResult<Monomial> {
        let mut out: SmallVec<[(Sym, i32); 4]> = SmallVec::new();
        let (a, b) = (&self.0, &other.0);
        let (mut i, mut j) = (0, 0);
        while i < a.len() && j < b.len() {
            let (sa, ea) = a[i];
            let (sb, eb) = b[j];
            if sa < sb {
                out.push((sa, ea));
                i += 1;
            } else if sb < sa {
                out.push((sb, eb));
                j += 1;
            } else {
                let e = ea.checked_add(eb).ok_or(exp_overflow())?;
                if e != 0 {
                    out.push((sa, e));
                }
                i += 1;
                j += 1;
            }
        }
        out.extend_from_slice(&a[i..]);
        out.extend_from_slice(&b[j..]);
        Ok(Monomial(out))
    }

    /// Total degree in the given symbols.
    pub fn degree_in(&self, syms: &[Sym]) -> i64 {
        self.0
            .iter()
            .filter(|(s, _)| syms.contains(s))
            .map(|(_, e)| *e as i64)
            .sum()
    }
}

pub(crate) fn exp_overflow() -> CoreError {
    CoreError::Limit {
        kind: LimitKind::Exponent,
        limit: i32::MAX as u64,
    }
}
