//! The pure exact core: numbers → expressions → fields.
//!
//! Architecture invariant: nothing here does I/O, knows about the command
//! language, the prompt or floating point. Coefficients are exact rationals.

pub mod calc;
pub mod chart;
pub mod error;
pub mod expr;
pub mod field;
pub mod func;
pub mod limits;
pub mod num;
pub mod packed;
pub mod symbol;
#[cfg(test)]
mod tests;

pub use error::{CoreError, CoreResult};
pub use expr::Expr;
pub use field::{Field, Matrix};
pub use num::Q;
pub use symbol::Sym;
