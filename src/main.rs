//! The `ordex` binary: parses the command line, runs the prompt or the
//! scripts, and turns the outcome into the exit status. Everything else
//! lives in `ordex::app`.

use std::process::ExitCode;

fn main() -> ExitCode {
    let invocation = ordex::app::Invocation::from_env();
    ExitCode::from(ordex::app::run(&invocation))
}
