//! Unspecified functions applied to linear arguments (DESIGN §2.7a).
//!
//! Owns: the atoms `f^(α)(L_1 + c_1, …, L_n + c_n)` — an unspecified smooth
//! function `f` (its [`Signature`]), a derivative multi-index `α` and
//! arguments that are linear forms in the state plus a constant (a rational
//! number and a rational multiple of pi). Each distinct atom is interned as
//! a [`Sym`] of its own (in order of first appearance, like names), so it is
//! a factor of the monomial with an integer exponent and every product,
//! sum and packed fast path treats it as a symbol. What makes it more than a
//! symbol lives here: the chain rule for partial derivatives
//! (`∂_s f^(α)(L) = Σ_j (∂L_j/∂s) f^(α+e_j)(L)`), arguments evaluated under
//! substitution, and concrete definitions substituted with all derivatives.
//!
//! The table is per thread, like the symbol interner. Products never look
//! atoms up; derivatives and substitutions (which do) run on the session's
//! thread.
//!
//! Must not know: the command language, parsing, printing styles other than
//! the plain input syntax.
//!
//! Rooms: [`elementary`] (`cos`, `sin`, `exp` of linear arguments),
//! [`unspecified`] (application, substitution, definitions, chain rule);
//! the atoms themselves are terms ([`super::term`]).

mod elementary;
#[cfg(test)]
mod tests;
mod unspecified;

pub use crate::core::term::{
    any, atom, intern, packed_lanes, push_signed, show_arg, Arg, Atom, Signature,
};
pub use unspecified::{chain_rule, subst_args, Definition};
