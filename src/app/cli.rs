//! The command line: flags, and what to run in which order.
//!
//! `ordex` starts the prompt, `ordex FILE…` runs scripts, `ordex -e LINES`
//! runs inline lines; files and `-e` texts run in the order they are given,
//! in one session. This module owns argument parsing only (with clap); it
//! must not run anything or know about sessions.

use std::path::PathBuf;

use clap::{ArgMatches, CommandFactory, FromArgMatches, Parser, Subcommand};

/// The command-line arguments as clap sees them.
#[derive(Debug, Parser)]
#[command(
    name = "ordex",
    version,
    about = "Exact series computations on nonlinear time-varying systems",
    long_about = None,
    args_conflicts_with_subcommands = true,
    disable_help_subcommand = true,
    after_help = "Without FILE or -e, ordex starts the interactive prompt. Files and -e lines run \
                  in the order given, in one session.\nExit status: 0 all well, 1 a check failed, 2 an error."
)]
struct Args {
    /// Scripts to run in order, in one session (`.ordex` files).
    #[arg(value_name = "FILE", conflicts_with = "resume")]
    files: Vec<PathBuf>,

    /// Run these lines (may be given several times).
    #[arg(
        short = 'e',
        long = "eval",
        value_name = "LINES",
        conflicts_with = "resume"
    )]
    eval: Vec<String>,

    /// Start the prompt with the last prompt session's journal replayed.
    #[arg(long)]
    resume: bool,

    /// Hide the time taken in command summaries (for reproducible output).
    #[arg(long)]
    no_timing: bool,

    #[command(subcommand)]
    command: Option<Command>,
}

/// Subcommands (a script named like one runs as `./NAME`).
#[derive(Debug, Subcommand)]
enum Command {
    /// Jupyter: `ordex kernel install` registers ordex as a kernel for this
    /// user; Jupyter starts `ordex kernel CONNECTION_FILE`.
    #[command(args_conflicts_with_subcommands = true, subcommand_negates_reqs = true)]
    Kernel {
        /// The connection file Jupyter passes when it starts the kernel.
        #[arg(value_name = "CONNECTION_FILE", required = true)]
        connection_file: Option<PathBuf>,
        #[command(subcommand)]
        action: Option<KernelCommand>,
    },
}

#[derive(Debug, Subcommand)]
enum KernelCommand {
    /// Write the kernel spec (kernel.json) into the user's Jupyter data
    /// directory (JUPYTER_DATA_DIR when set).
    Install,
}

/// What `ordex kernel …` asks for.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) enum Kernel {
    /// Register the kernel spec.
    Install,
    /// Serve the kernel with this connection file.
    Start(PathBuf),
}

/// One thing to run non-interactively.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) enum Source {
    /// A script file.
    File(PathBuf),
    /// Lines given with `-e`.
    Inline(String),
}

/// What the command line asks for.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Invocation {
    /// Scripts and inline lines in command-line order; empty for the prompt.
    pub(crate) sources: Vec<Source>,
    /// Replay the last prompt session before prompting.
    pub(crate) resume: bool,
    /// Show timings in command summaries.
    pub(crate) timing: bool,
    /// `ordex kernel …` (then nothing else is run).
    pub(crate) kernel: Option<Kernel>,
}

impl Invocation {
    /// Parses the process arguments; prints help, version or a usage error
    /// and exits the process as clap does (status 0, or 2 for a usage error).
    pub fn from_env() -> Invocation {
        Invocation::from_matches(Args::command().get_matches())
    }

    /// Parses `args` (the first one is the program name).
    #[cfg(test)]
    pub(crate) fn try_parse_from<I, T>(args: I) -> Result<Invocation, clap::Error>
    where
        I: IntoIterator<Item = T>,
        T: Into<std::ffi::OsString> + Clone,
    {
        let matches = Args::command().try_get_matches_from(args)?;
        Ok(Invocation::from_matches(matches))
    }

    fn from_matches(matches: ArgMatches) -> Invocation {
        let mut ordered: Vec<(usize, Source)> = Vec::new();
        if let (Some(indices), Some(values)) = (
            matches.indices_of("files"),
            matches.get_many::<PathBuf>("files"),
        ) {
            ordered.extend(
                indices
                    .zip(values)
                    .map(|(idx, path)| (idx, Source::File(path.clone()))),
            );
        }
        if let (Some(indices), Some(values)) = (
            matches.indices_of("eval"),
            matches.get_many::<String>("eval"),
        ) {
            ordered.extend(
                indices
                    .zip(values)
                    .map(|(idx, text)| (idx, Source::Inline(text.clone()))),
            );
        }
        ordered.sort_by_key(|(idx, _)| *idx);
        // The typed view gives the flags; clap already validated everything.
        let (resume, no_timing, kernel) = match Args::from_arg_matches(&matches) {
            Ok(args) => (args.resume, args.no_timing, kernel_of(args.command)),
            Err(_) => (
                matches.get_flag("resume"),
                matches.get_flag("no_timing"),
                None,
            ),
        };
        Invocation {
            sources: ordered.into_iter().map(|(_, source)| source).collect(),
            resume,
            timing: !no_timing,
            kernel,
        }
    }
}

fn kernel_of(command: Option<Command>) -> Option<Kernel> {
    match command? {
        Command::Kernel {
            action: Some(KernelCommand::Install),
            ..
        } => Some(Kernel::Install),
        Command::Kernel {
            connection_file, ..
        } => connection_file.map(Kernel::Start),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(args: &[&str]) -> Invocation {
        let mut full = vec!["ordex"];
        full.extend_from_slice(args);
        match Invocation::try_parse_from(full) {
            Ok(inv) => inv,
            Err(e) => panic!("{args:?}: {e}"),
        }
    }

    #[test]
    fn no_arguments_means_the_prompt() {
        let inv = parse(&[]);
        assert!(inv.sources.is_empty());
        assert!(!inv.resume);
        assert!(inv.timing);
    }

    #[test]
    fn files_and_inline_lines_keep_command_line_order() {
        let inv = parse(&[
            "-e",
            "state q",
            "a.ordex",
            "--no-timing",
            "-e",
            "names",
            "b.ordex",
        ]);
        assert_eq!(
            inv.sources,
            vec![
                Source::Inline("state q".to_string()),
                Source::File(PathBuf::from("a.ordex")),
                Source::Inline("names".to_string()),
                Source::File(PathBuf::from("b.ordex")),
            ]
        );
        assert!(!inv.timing);
    }

    #[test]
    fn resume_is_for_the_prompt_only() {
        assert!(parse(&["--resume"]).resume);
        assert!(Invocation::try_parse_from(["ordex", "--resume", "a.ordex"]).is_err());
        assert!(Invocation::try_parse_from(["ordex", "--resume", "-e", "names"]).is_err());
        assert!(Invocation::try_parse_from(["ordex", "--frobnicate"]).is_err());
    }

    #[test]
    fn kernel_subcommands() {
        assert_eq!(parse(&["kernel", "install"]).kernel, Some(Kernel::Install));
        assert_eq!(
            parse(&["kernel", "/run/user/1/kernel-1.json"]).kernel,
            Some(Kernel::Start(PathBuf::from("/run/user/1/kernel-1.json")))
        );
        assert_eq!(parse(&["./kernel"]).kernel, None);
        assert!(Invocation::try_parse_from(["ordex", "kernel"]).is_err());
        // After a script, `kernel` is a file name like any other.
        assert_eq!(parse(&["a.ordex", "kernel", "install"]).kernel, None);
    }
}
