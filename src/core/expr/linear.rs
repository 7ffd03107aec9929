//! The linear operations on expressions: sums, differences, negation,
//! scaling and filters of terms.

use super::Expr;
use crate::core::num::Q;
use crate::core::term::Key;

impl Expr {
    /// Sum.
    pub fn add(&self, other: &Expr) -> Expr {
        self.add_scaled(other, &Q::ONE)
    }

    /// `self + q·other`, merging sorted term lists.
    pub fn add_scaled(&self, other: &Expr, q: &Q) -> Expr {
        if q.is_zero() || other.is_zero() {
            return self.clone();
        }
        let (a, b) = (&self.terms, &other.terms);
        let mut out = Vec::with_capacity(a.len() + b.len());
        let (mut i, mut j) = (0, 0);
        let scaled = |c: &Q| if q.is_one() { c.clone() } else { c.mul(q) };
        while i < a.len() && j < b.len() {
            match a[i].0.cmp(&b[j].0) {
                std::cmp::Ordering::Less => {
                    out.push(a[i].clone());
                    i += 1;
                }
                std::cmp::Ordering::Greater => {
                    out.push((b[j].0.clone(), scaled(&b[j].1)));
                    j += 1;
                }
                std::cmp::Ordering::Equal => {
                    let c = a[i].1.add(&scaled(&b[j].1));
                    if !c.is_zero() {
                        out.push((a[i].0.clone(), c));
                    }
                    i += 1;
                    j += 1;
                }
            }
        }
        out.extend(a[i..].iter().cloned());
        out.extend(b[j..].iter().map(|(k, c)| (k.clone(), scaled(c))));
        Expr { terms: out }
    }

    /// Difference.
    pub fn sub(&self, other: &Expr) -> Expr {
        self.add_scaled(other, &Q::int(-1))
    }

    /// Negation.
    pub fn neg(&self) -> Expr {
        self.scale(&Q::int(-1))
    }

    /// Multiplies by a rational.
    pub fn scale(&self, q: &Q) -> Expr {
        if q.is_zero() {
            return Expr::zero();
        }
        if q.is_one() {
            return self.clone();
        }
        Expr {
            terms: self
                .terms
                .iter()
                .map(|(k, c)| (k.clone(), c.mul(q)))
                .collect(),
        }
    }

    /// Keeps the terms satisfying `pred`.
    pub fn filter(&self, mut pred: impl FnMut(&Key, &Q) -> bool) -> Expr {
        Expr {
            terms: self
                .terms
                .iter()
                .filter(|(k, c)| pred(k, c))
                .cloned()
                .collect(),
        }
    }

    /// Maps each term to a new (key, coefficient); the keys need not stay
    /// sorted or distinct.
    pub fn map_terms(&self, mut f: impl FnMut(&Key, &Q) -> Option<(Key, Q)>) -> Expr {
        Expr::from_terms(self.terms.iter().filter_map(|(k, c)| f(k, c)).collect())
    }
}
