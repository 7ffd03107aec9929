//! Expressions in the canonical normal form.
//!
//! An expression is a finite sum of terms
//! `coeff · monomial · exp(M) · {1 | cos(L) | sin(L)} · {1 | cos(k t) | sin(k t)}`
//! where the monomial has integer exponents over parameters, state
//! coordinates, `t` (non-negative powers) and `pi`; `L`, `M` are linear forms
//! with rational coefficients in the state coordinates; `k > 0` is rational.
//! Products of trigonometric factors are reduced with the product-to-sum
//! identities and the argument of every `cos`/`sin` has a positive leading
//! coefficient, so two expressions are equal if and only if their term lists
//! are identical. Time is kept in its own factor (`t^n`, `cos(k t)`,
//! `sin(k t)`), which makes a time-varying expression separate as
//! `Σ c_k(t) g_k(x)`.
//!
//! This module knows nothing of parsing, sessions or printing styles beyond
//! the plain input syntax used by `Display`.
//!
//! Rooms: [`build`] (constructors and the normal form of a term list),
//! [`query`] (what an expression holds), [`linear`] (sums, scaling,
//! filters), [`display`] (plain printing). Products live in
//! [`crate::core::sum`], calculus in [`crate::core::calc`], elementary functions in
//! [`crate::core::func`].

mod build;
mod display;
mod linear;
mod query;
#[cfg(test)]
mod tests;

use crate::core::num::Q;
pub use crate::core::term::{Key, LinearForm, Monomial, TimeFactor, TrigFactor};

pub(crate) use query::coeff_words;

/// An expression in normal form: terms sorted by key, no zero coefficients.
#[derive(Clone, PartialEq, Eq, Hash, Default)]
pub struct Expr {
    terms: Vec<(Key, Q)>,
}
