//! Packed products of polynomial and state-trigonometric parts: the inner
//! loop of brackets.
//!
//! Owns: a compact copy of the terms of one time part (see
//! [`super::expr::TimePart`]) when every term is a monomial in the first
//! [`SLOTS`] symbols, with exponents from 0 to 127 and word-sized
//! coefficients, times at most a state-trigonometric factor `cos L` or
//! `sin L` whose linear form has integer coefficients from −127 to 127 in
//! those symbols (no exponential factor). Each monomial is one `u128`,
//! eight bits per symbol, so the monomial of a product is one addition (two
//! exponents of at most 127 cannot carry into the next symbol); the terms
//! are grouped by trigonometric factor ([`PackedTrig`], the linear form in signed
//! byte lanes), so that product-to-sum runs once per pair of groups and the
//! loop over pairs of terms only adds monomials; the coefficients are
//! integer numerators over one common denominator, so products and their
//! sums need no gcd. [`PackedSum`] accumulates products of packed parts by
//! the time and trigonometric factor of the result and gives back exact
//! terms at the end; whatever does not fit its machine integers is handed
//! to the caller as an exact term instead (the caller adds it to its
//! general sum).
//!
//! Must not know: fields, brackets, budgets or the recursions that use it.

mod keymap;
mod part;
mod route;
mod sum;
mod terms;
#[cfg(test)]
mod tests;
mod trig;
mod word;

pub use part::Packed;
pub use route::{routes, PackedKeep, ProductRoute, ProductRoutes, TimePiece};
pub use sum::{PackedSum, Terms};
pub use terms::{common_denominator, pack_key, sort_terms};
pub use trig::PackedTrig;
pub use word::SLOTS;
