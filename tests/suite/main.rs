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
mod vibrational;
