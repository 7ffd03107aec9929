//! The command language: syntax (tree, parser, splitter, diagnostics),
//! values, evaluation and the session.
//!
//! Architecture invariant: the parser never evaluates and the evaluator
//! never sees raw text; the session returns reports and never prints.

pub mod ast;
pub mod builtins;
pub mod chart;
pub mod commands;
pub mod diag;
pub mod equilibria;
pub mod eval;
pub mod exec;
pub mod files;
pub mod help;
pub mod numeric_cmds;
pub mod parse;
pub mod phase;
pub mod progress;
pub mod session;
pub mod split;
pub mod structural;
pub mod value;

pub use session::{Event, Line, Report, Rich, RunStatus, Session, Style};
