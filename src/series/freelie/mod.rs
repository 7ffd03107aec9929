//! The free Lie algebra over a generic coefficient ring: words and truncated
//! tensor series, Lyndon words with their standard bracketing, projection of
//! Lie elements onto the Lyndon basis, the truncated exponential and
//! logarithm, the Baker–Campbell–Hausdorff series and the evaluation of Lie
//! polynomials with concrete values (fields, matrices, ...).
//!
//! This module owns the structural side of the chronological logarithm
//! (DESIGN §2.5, §2.7). It must not know about anything else in ordex:
//! coefficients enter through the [`Coeff`] trait (implemented here for
//! [`BigRational`], and by the caller for its exact expressions), and
//! concrete values enter only through the closures given to [`evaluate`].
//!
//! # Conventions
//! - A letter is a `u16`; letters `0..m` form an [`Alphabet`] in which every
//!   letter carries a positive integer weight (for ordex: the power of eps it
//!   brings). Truncation is by total weight: a word of weight above the
//!   bound is dropped. With all weights 1 this is truncation by length.
//! - A word `a1 a2 … ak` stands for the composition `X_a1 ∘ X_a2 ∘ … ∘ X_ak`
//!   of operators on functions, so the product of the tensor algebra is
//!   concatenation and the commutator is `[u, v] = uv − vu`. For vector
//!   fields acting as derivations this is exactly the Lie bracket
//!   `[X, Y](h) = X(Y(h)) − Y(X(h))`.
//! - In a Chen series the earliest time acts outermost: the earliest letter
//!   is the leftmost one in the word.
//! - Lyndon words are taken for the letter order `0 < 1 < 2 < …`; the
//!   standard factorisation of a Lyndon word `w` of length at least 2 is
//!   `w = uv` with `v` its longest proper Lyndon suffix, and the standard
//!   bracketing `P_w = [P_u, P_v]` gives the Lyndon basis of the free Lie
//!   algebra. `P_w` is `w` plus words of the same length that are
//!   lexicographically larger, which makes the projection onto the basis a
//!   triangular elimination.

mod bch;
mod coeff;
mod error;
mod evaluate;
mod lyndon_basis;
mod tensor;
mod words;

pub use bch::{bch, bch_by_tensor, witt_total, MAX_DEGREE};
pub use coeff::Coeff;
pub use error::FreeLieError;
pub use evaluate::evaluate;
pub use lyndon_basis::{chronological_log, project_lyndon, LiePoly};
pub use tensor::{expand_bracket, Tensor};
pub use words::{
    is_lyndon, lyndon_words, standard_bracketing, standard_factorization, Alphabet, Bracket,
    Letter, Word,
};

#[cfg(test)]
mod tests;
