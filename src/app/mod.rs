//! The binary's outer layer: the command line, the script runner, the
//! interactive prompt, the journal and colour.
//!
//! This is the only layer that touches the terminal, standard streams, the
//! history and journal files and the process's exit status. It drives a
//! [`Session`] through its public API and decides how reports look; it must
//! not know how statements are parsed or evaluated.
//!
//! Where files live: the history is `<data dir>/ordex/history` and the
//! journal `<state dir>/ordex/journal.ordex` (state dir falling back to the
//! data dir); the environment variable `ORDEX_HOME`, when set and not empty,
//! replaces both `…/ordex` directories.

pub(crate) mod cli;
pub(crate) mod journal;
pub(crate) mod kernel;
pub(crate) mod repl;
pub(crate) mod style;

use std::io::{self, Write};
use std::path::PathBuf;

use crate::lang::files::read_script;
use crate::lang::session::render_error;
use crate::lang::split::split_statements;
use crate::lang::{Line, Report, RunStatus, Session};

pub use cli::Invocation;
pub(crate) use cli::Source;
pub(crate) use style::Painter;

/// The origin shown for lines given with `-e`.
pub(crate) const INLINE_ORIGIN: &str = "-e";

/// Runs what the command line asks for and returns the exit status:
/// for scripts 0 (all well), 1 (a check failed) or 2 (an error); for the
/// prompt 0.
pub fn run(invocation: &Invocation) -> u8 {
    match &invocation.kernel {
        Some(cli::Kernel::Install) => return kernel::install(),
        Some(cli::Kernel::Start(file)) => return kernel::run(file),
        None => {}
    }
    let painter = Painter::detect();
    if invocation.sources.is_empty() {
        repl::run_prompt(invocation, painter)
    } else {
        run_sources(&invocation.sources, invocation.timing, painter)
    }
}

/// Runs scripts and inline lines in order in one session. Failed checks
/// are reported and the run goes on; the first error is printed to
/// standard error and stops everything. Standard output that cannot be
/// written stops the run with status 2: a closed pipe quietly, any other
/// failure (a full disk) with a message on standard error.
pub(crate) fn run_sources(sources: &[Source], timing: bool, painter: Painter) -> u8 {
    let mut session = new_session(timing);
    let output = Output {
        painter,
        indent: "",
    };
    let mut status = RunStatus::default();
    let n_inline = sources
        .iter()
        .filter(|s| matches!(s, Source::Inline(_)))
        .count();
    let mut inline_index = 0;
    for source in sources {
        let (text, origin) = match source {
            Source::File(path) => {
                let origin = path.display().to_string();
                match read_script(path) {
                    Ok(text) => (text, origin),
                    Err(reason) => {
                        output.error(&format!("{origin}: error: cannot run this file: {reason}"));
                        status.error = true;
                        break;
                    }
                }
            }
            Source::Inline(text) => {
                inline_index += 1;
                (text.clone(), inline_origin(inline_index, n_inline))
            }
        };
        match run_text(&mut session, &text, &origin, &output) {
            Ok(one) => {
                status.check_failed |= one.check_failed;
                status.error |= one.error;
                if one.error || one.quit {
                    break;
                }
            }
            Err(err) => {
                output.stdout_failed(&err);
                return 2;
            }
        }
    }
    u8::try_from(status.exit_code()).unwrap_or(2)
}

/// The origin of the `index`-th of `count` `-e` arguments in messages:
/// `-e` alone, `-e#2` for the second of several (line numbers count within
/// the argument: `-e#2:3:5`).
pub(crate) fn inline_origin(index: usize, count: usize) -> String {
    if count > 1 {
        format!("{INLINE_ORIGIN}#{index}")
    } else {
        INLINE_ORIGIN.to_string()
    }
}

/// Runs one text statement by statement, printing as it goes; stops at the
/// first error or `quit`. `Err` when standard output cannot be written.
fn run_text(
    session: &mut Session,
    text: &str,
    origin: &str,
    output: &Output,
) -> io::Result<RunStatus> {
    let mut status = RunStatus::default();
    let statements = match split_statements(text) {
        Ok(statements) => statements,
        Err(err) => {
            output.error(&err.render(Some(origin)));
            status.error = true;
            return Ok(status);
        }
    };
    for statement in &statements {
        match session.execute(statement, Some(origin)) {
            Ok(report) => {
                status.check_failed |= report.check_failed;
                output.report(&report)?;
                if report.quit {
                    status.quit = true;
                    break;
                }
            }
            Err(err) => {
                // A `run FILE` that failed partway: what it printed first.
                output.lines(err.printed())?;
                output.error(&render_error(statement, Some(origin), &err));
                status.error = true;
                break;
            }
        }
    }
    Ok(status)
}

/// A fresh session whose relative paths resolve against the working
/// directory (for the prompt, `-e` and script files alike).
pub(crate) fn new_session(timing: bool) -> Session {
    let mut session = Session::new();
    session.show_timing = timing;
    if let Ok(dir) = std::env::current_dir() {
        session.set_base_dir(dir);
    }
    session
}

/// The directory for the history (`kind` = data) or the journal
/// (`kind` = state); `None` when the platform has neither.
pub(crate) fn home_dir(kind: HomeKind) -> Option<PathBuf> {
    if let Some(home) = std::env::var_os("ORDEX_HOME").filter(|v| !v.is_empty()) {
        return Some(PathBuf::from(home));
    }
    let base = match kind {
        HomeKind::Data => dirs::data_dir(),
        HomeKind::State => dirs::state_dir().or_else(dirs::data_dir),
    };
    base.map(|dir| dir.join("ordex"))
}

/// Which per-user directory.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum HomeKind {
    /// Long-lived data (the history).
    Data,
    /// Session state (the journal).
    State,
}

/// How reports and errors are written.
pub(crate) struct Output {
    pub(crate) painter: Painter,
    /// Put before every report line (the prompt indents its output).
    pub(crate) indent: &'static str,
}

impl Output {
    /// Prints a report's lines to standard output and flushes.
    pub(crate) fn report(&self, report: &Report) -> io::Result<()> {
        self.lines(&report.lines)
    }

    /// Prints lines to standard output and flushes.
    pub(crate) fn lines(&self, lines: &[Line]) -> io::Result<()> {
        if lines.is_empty() {
            return Ok(());
        }
        let stdout = io::stdout();
        let mut out = stdout.lock();
        for line in lines {
            let painted = self.painter.line(line.style, &line.text);
            writeln!(out, "{}{}", self.indent, painted)?;
        }
        out.flush()
    }

    /// Prints one line of the binary's own to standard output.
    pub(crate) fn note(&self, text: &str) -> io::Result<()> {
        let stdout = io::stdout();
        let mut out = stdout.lock();
        writeln!(out, "{}", self.painter.note(text))?;
        out.flush()
    }

    /// Prints a rendered error to standard error (write failures there
    /// are ignored: there is nowhere left to report them).
    pub(crate) fn error(&self, rendered: &str) {
        let stderr = io::stderr();
        let mut err = stderr.lock();
        let _ = writeln!(err, "{}", self.painter.error(rendered));
        let _ = err.flush();
    }

    /// Reports that standard output could not be written: nothing for a
    /// closed pipe (the reader left on purpose, as `head` does), a message
    /// on standard error otherwise (a full disk must not pass unseen).
    pub(crate) fn stdout_failed(&self, err: &io::Error) {
        if err.kind() != io::ErrorKind::BrokenPipe {
            self.error(&format!(
                "ordex: error: cannot write to standard output: {}",
                crate::lang::files::io_reason(err)
            ));
        }
    }

    /// Prints a warning of the binary's own to standard error.
    pub(crate) fn warning(&self, text: &str) {
        let stderr = io::stderr();
        let mut err = stderr.lock();
        let _ = writeln!(err, "{}", self.painter.warning(text));
        let _ = err.flush();
    }
}
