//! ordex: exact series computations on nonlinear time-varying systems.
//!
//! Layers, from the inside out; dependencies point inward only:
//!
//! ```text
//! core → series → averaging → render & numeric → lang → app
//! ```
//!
//! - [`core`]: exact rationals, the canonical normal form of expressions,
//!   vector fields (Lie derivative, bracket), coordinate changes.
//! - [`series`]: time integrals, the chronological exponential and
//!   logarithm, the free Lie algebra (Lyndon basis, BCH).
//! - [`averaging`]: stroboscopic and classical higher-order averaging.
//! - [`render`]: plain text in the input syntax, LaTeX, code for simulation.
//! - [`numeric`]: floating-point evaluation, Runge–Kutta, fits, plots.
//! - [`lang`]: syntax, lowering, values, evaluation, the session.
//! - [`app`]: the prompt, the command line, the journal, the notebook kernel.
//!
//! `render` and `numeric` sit side by side: neither uses the other.
//!
//! **Architecture invariant:** `core` knows no other layer, does no I/O and
//! never uses floats.
//!
//! **Architecture invariant:** `series` and `averaging` never see a session
//! value, a name as typed or a report.
//!
//! **Architecture invariant:** `render` takes core types only (`Expr`,
//! `Field`, `Matrix`, `Sym`, `Q`, names as `&[String]`); it does not know
//! `lang::value::Value` (the glue is `Value::plain` and `Value::latex` in
//! `lang::value`).
//!
//! **Architecture invariant:** `numeric` takes core types only and writes no
//! files; it does not know the language.
//!
//! **Architecture invariant:** `lang` prints nothing: it returns reports and
//! typed errors with spans, and `app` prints them (progress bars on a
//! terminal, `lang::progress`, are the one deliberate exception).
//!
//! `DEVELOPERS.md` has the code map and the cross-cutting concerns.

pub mod app;
pub mod averaging;
pub mod core;
pub mod lang;
pub mod numeric;
pub mod render;
pub mod series;
