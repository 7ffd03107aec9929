//! Terms of the normal form, one factor per room: [`Monomial`] (powers of
//! symbols), [`LinearForm`] (arguments in the state), [`TrigFactor`] (`cos`
//! or `sin` in the state), [`TimeFactor`] (`cos` or `sin` in time), [`Key`]
//! (everything of a term but its coefficient) and the atoms of unspecified
//! functions ([`Atom`], interned as symbols).
//!
//! Must not know: expressions (sums of terms), packing, fields.

mod atom;
mod key;
mod linear;
mod monomial;
#[cfg(test)]
mod tests;

mod time;
mod trig;

pub(crate) use atom::show_call;
pub use atom::{any, atom, intern, packed_lanes, push_signed, show_arg, Arg, Atom, Signature};
pub use key::Key;
pub use linear::LinearForm;
pub(crate) use monomial::exp_overflow;
pub use monomial::{Monomial, SLOTS};
pub use time::TimeFactor;
pub(crate) use time::{cos_beat, integrate_time_monomial, sin_beat};
pub use trig::TrigFactor;
pub(crate) use trig::{cos_wave, sin_wave};
