//! Rendering of values: plain text in the input syntax (so every result
//! can be pasted back), LaTeX, and code for simulation.

pub mod code;
pub(crate) mod latex;
pub(crate) mod plain;
