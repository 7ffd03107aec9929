//! ordex's integration tests, one binary: each module is one area (the
//! command line, the prompt, sessions and their scripts, the algebra's
//! laws, the numerics, limits on hostile input), and `util` holds the
//! helpers several of them share (running text in a session, starting the
//! binary, temporary directories).
//!
//! One binary links the library and the test dependencies once, instead of
//! once per file. Data the tests read stay beside this folder:
//! `tests/checks` (published check values), `tests/fixtures` (reference
//! results from other programs) and `tests/kernel` (the notebook driver).

// Test code may unwrap: a failing unwrap is a failing test (the library
// denies `clippy::unwrap_used`; clippy.toml lets `#[test]` functions
// unwrap, and this covers the helpers they call). A test binary has no
// public interface, so `pub` helpers shared between its modules are fine.
#![allow(clippy::unwrap_used, unreachable_pub)]

mod charts;
mod cli;
mod codegen;
mod errors;
mod fuzz;
mod iint_laws;
mod kernel;
mod laws;
mod limits;
mod linear_crosscheck;
mod numeric;
mod prompt_pty;
mod resume;
mod save_checks;
mod scripts;
mod strobo_routes;
mod util;
mod vibrational;
