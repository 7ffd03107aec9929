//! The pure exact core: numbers → expressions → fields.
//!
//! Architecture invariant: nothing here does I/O, knows about the command
//! language, the prompt or floating point. Coefficients are exact rationals.
//!
//! Layers, each using only those before it (tests excepted):
//!
//! `error → limits → num → symbol → term → packed → expr → sum → func →
//! calc → field → chart`
//!
//! - [`error`]: typed errors; [`limits`]: budgets, deadlines, cancellation.
//! - [`num`]: exact rationals [`Q`]; [`symbol`]: interned names [`Sym`].
//! - [`term`]: the factors of a term (monomial, linear form, trigonometric
//!   and time factors, [`term::Key`], atoms of unspecified functions).
//! - [`packed`]: machine-word copies of terms, the inner loop of products.
//! - [`expr`]: [`Expr`], the normal form (building, queries, linear
//!   operations, printing).
//! - [`sum`]: sums of products ([`sum::SumBuilder`]), parts by time factor,
//!   `Expr::mul`/`pow`/`recip`/`div`.
//! - [`func`]: `cos`, `sin`, `exp` of linear arguments; unspecified
//!   functions.
//! - [`calc`]: derivatives, substitution, time calculus.
//! - [`field`]: vector fields and brackets; [`chart`]: changes of
//!   coordinates.

pub mod calc;
pub mod chart;
pub mod error;
pub mod expr;
pub mod field;
pub mod func;
pub mod limits;
pub mod num;
pub mod packed;
pub mod sum;
pub mod symbol;
pub mod term;
#[cfg(test)]
mod tests;

pub use error::{CoreError, CoreResult};
pub use expr::Expr;
pub use field::{Field, Matrix};
pub use num::Q;
pub use symbol::Sym;
