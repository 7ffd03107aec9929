//! Calculus on normal forms: partial derivatives, substitution, and the
//! time calculus (antiderivatives in `t`, definite integrals, periods and
//! means, separation into time coefficients × autonomous parts).
//!
//! Pure functions of expressions; no I/O, no session.
//!
//! Rooms: [`derivative`], [`subst`] (substitution, renaming), [`parts`]
//! (separation by time factor), [`time`] (integrals in time, periods,
//! means), [`plug`] (values at a time).

mod derivative;
mod parts;
mod plug;
mod subst;
#[cfg(test)]
mod tests;
mod time;

pub use parts::TimeKey;
pub use time::{common_period, Period};
