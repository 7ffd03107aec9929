//! Rendering of values: plain text in the input syntax (so every result
//! can be pasted back) and LaTeX.

pub mod latex;
pub mod plain;
