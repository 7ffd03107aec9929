//! ordex: exact series computations on nonlinear time-varying systems.
//!
//! Layers, from the inside out (dependencies point inward):
//! `core` (numbers, expressions, fields) → `series` (time integrals,
//! chronological exponential and logarithm, free Lie algebra) → `averaging`
//! → `lang` (syntax, evaluation, sessions) → `render` → `numeric` → the
//! binary's prompt and command line.

pub mod app;
pub mod averaging;
pub mod core;
pub mod lang;
pub mod numeric;
pub mod render;
pub mod series;
