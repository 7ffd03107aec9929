//! Linear forms without constant (the arguments of `exp`, `cos`, `sin` in
//! the state) and their plain printing.

use std::sync::Arc;

use smallvec::SmallVec;

use crate::core::num::Q;
use crate::core::symbol::Sym;

/// A linear form without constant: sorted `(symbol, coefficient)` pairs with
/// nonzero coefficients. Shared (reference-counted): terms are copied far
/// more often than their arguments change, and a small key keeps products
/// and hashing cheap.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct LinearForm(pub(in crate::core) Arc<[(Sym, Q)]>);

impl LinearForm {
    /// The sorted `(symbol, coefficient)` pairs, coefficients nonzero.
    pub fn terms(&self) -> &[(Sym, Q)] {
        &self.0
    }

    /// The form `q·s` (zero when `q` is zero).
    pub fn single(s: Sym, q: Q) -> LinearForm {
        if q.is_zero() {
            return LinearForm::default();
        }
        LinearForm(Arc::from(vec![(s, q)]))
    }

    /// Coefficient of `s`.
    pub fn coeff(&self, s: Sym) -> Q {
        self.0
            .iter()
            .find(|(x, _)| *x == s)
            .map_or(Q::ZERO, |(_, c)| c.clone())
    }

    /// True if and only if the form is zero.
    pub fn is_zero(&self) -> bool {
        self.0.is_empty()
    }

    /// `self + sign·other`.
    pub fn add_signed(&self, other: &LinearForm, negate: bool) -> LinearForm {
        let mut out: SmallVec<[(Sym, Q); 2]> = SmallVec::new();
        let (a, b) = (&self.0, &other.0);
        let (mut i, mut j) = (0, 0);
        let sgn = |q: &Q| if negate { q.neg() } else { q.clone() };
        while i < a.len() && j < b.len() {
            if a[i].0 < b[j].0 {
                out.push(a[i].clone());
                i += 1;
            } else if b[j].0 < a[i].0 {
                out.push((b[j].0, sgn(&b[j].1)));
                j += 1;
            } else {
                let c = if negate {
                    a[i].1.sub(&b[j].1)
                } else {
                    a[i].1.add(&b[j].1)
                };
                if !c.is_zero() {
                    out.push((a[i].0, c));
                }
                i += 1;
                j += 1;
            }
        }
        out.extend(a[i..].iter().cloned());
        out.extend(b[j..].iter().map(|(s, q)| (*s, sgn(q))));
        LinearForm(out.into_iter().collect())
    }

    /// Negation.
    pub fn neg(&self) -> LinearForm {
        LinearForm(self.0.iter().map(|(s, q)| (*s, q.neg())).collect())
    }

    /// Multiplies every coefficient by `q`.
    pub fn scale(&self, q: &Q) -> LinearForm {
        if q.is_zero() {
            return LinearForm::default();
        }
        LinearForm(self.0.iter().map(|(s, c)| (*s, c.mul(q))).collect())
    }

    /// True if and only if the leading coefficient is negative.
    pub fn is_negative(&self) -> bool {
        self.0.first().is_some_and(|(_, q)| q.is_negative())
    }
}

pub(crate) fn fmt_lin(l: &LinearForm) -> String {
    let mut s = String::new();
    for (i, (sym, c)) in l.0.iter().enumerate() {
        let neg = c.is_negative();
        let a = c.abs();
        if i == 0 {
            if neg {
                s.push('-');
            }
        } else {
            s.push_str(if neg { " - " } else { " + " });
        }
        if !a.is_one() {
            s.push_str(&format!("{a}*"));
        }
        s.push_str(&sym.name());
    }
    s
}
