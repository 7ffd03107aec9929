//! Helpers the test modules share: running text in a session and reading
//! back what it printed, starting the real binary, temporary directories,
//! and whether a missing tool may be skipped.
//!
//! Must not know what any test checks: these only run things and hand back
//! what happened.

use std::path::Path;
use std::process::{Command, Output};

use ordex::core::Field;
use ordex::lang::{Event, RunStatus, Session, Style};

/// One thing a session printed, in the order it came.
pub enum Printed {
    Line(Style, String),
    Error(String),
}

/// What running some text in a session printed and how it ended.
pub struct Ran {
    pub printed: Vec<Printed>,
    pub status: RunStatus,
}

impl Ran {
    /// The report lines, each ended by a newline.
    pub fn lines(&self) -> String {
        self.joined(true, false)
    }

    /// The error messages, each ended by a newline.
    pub fn errors(&self) -> String {
        self.joined(false, true)
    }

    /// Report lines and errors as they came, each ended by a newline.
    pub fn transcript(&self) -> String {
        self.joined(true, true)
    }

    /// The last error message, if any.
    pub fn last_error(&self) -> Option<String> {
        self.printed.iter().rev().find_map(|p| match p {
            Printed::Error(m) => Some(m.clone()),
            Printed::Line(..) => None,
        })
    }

    /// The lines in the result style (values, not notes or timings).
    pub fn results(&self) -> Vec<String> {
        self.printed
            .iter()
            .filter_map(|p| match p {
                Printed::Line(Style::Result, text) => Some(text.clone()),
                _ => None,
            })
            .collect()
    }

    fn joined(&self, lines: bool, errors: bool) -> String {
        let mut out = String::new();
        for p in &self.printed {
            let text = match p {
                Printed::Line(_, text) if lines => text,
                Printed::Error(m) if errors => m,
                _ => continue,
            };
            out.push_str(text);
            out.push('\n');
        }
        out
    }
}

/// A fresh session that prints no timings (so output is deterministic).
pub fn quiet_session() -> Session {
    let mut session = Session::new();
    session.show_timing = false;
    session
}

/// Runs `text` in `session` as a script called `name` (for messages).
pub fn run_in(session: &mut Session, text: &str, name: Option<&str>) -> Ran {
    let mut printed = Vec::new();
    let status = session.run_text(text, name, &mut |e| match e {
        Event::Report(r) => {
            printed.extend(r.lines.into_iter().map(|l| Printed::Line(l.style, l.text)));
        }
        Event::Error(m) => printed.push(Printed::Error(m)),
    });
    Ran { printed, status }
}

/// Runs `text` in a fresh quiet session.
pub fn run_quiet(text: &str, name: Option<&str>) -> Ran {
    run_in(&mut quiet_session(), text, name)
}

/// A field as `[c1, c2, …]` in the normal form's text.
pub fn field_text(f: &Field) -> String {
    let parts: Vec<String> = f.0.iter().map(|e| e.to_string()).collect();
    format!("[{}]", parts.join(", "))
}

/// The real binary with `args`, run from `dir` without colour, keeping its
/// files (history, journal) under `home`.
pub fn ordex_command(dir: &Path, home: &Path, args: &[&str]) -> Command {
    let mut command = Command::new(env!("CARGO_BIN_EXE_ordex"));
    command
        .args(args)
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .env("ORDEX_HOME", home);
    command
}

/// A child's standard output as text.
pub fn stdout(out: &Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// A child's standard error as text.
pub fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// A fresh temporary directory, removed when dropped.
pub fn temp_dir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary directory")
}

/// True on CI (`CI=true` or `CI=1`), where a missing tool is a failure
/// rather than a skipped test.
pub fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| v == "true" || v == "1")
}

/// True when `tool --version` runs and succeeds.
pub fn have(tool: &str) -> bool {
    Command::new(tool)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}
