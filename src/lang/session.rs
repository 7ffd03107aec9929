//! A session: declared symbols, defined names, accepted input lines, and
//! the execution of statements.
//!
//! `Session::execute` takes one statement cut by the splitter and returns a
//! `Report` (lines to print, whether a check failed) or a `SessionError`
//! carrying the span to underline. The session never prints; the prompt and
//! the script runner decide how reports look. File effects (`save`, `run`,
//! plots) happen here, at the edge of the language layer, and can be
//! suppressed when a journal is replayed.

use std::collections::BTreeMap;
use std::fmt;
use std::path::{Path, PathBuf};
use std::time::Instant;

use super::ast::{Span, StmtKind};
use super::parse::{parse_stmt, ParseError};
use super::split::{split_runnable, SourceStmt};
use super::value::Value;
use crate::core::limits::{self, Limits};
use crate::core::{CoreError, Sym};

/// How a printed line should look.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    /// A result value.
    Result,
    /// What a command did (form detected, sizes, timing).
    Note,
    /// A warning (e.g. a truncated series).
    Warn,
    /// A check that held.
    Pass,
    /// A failed check.
    Fail,
    /// Help and listings.
    Plain,
}

/// One line of output.
#[derive(Clone, Debug, PartialEq)]
pub struct Line {
    /// How it should look.
    pub style: Style,
    /// The text (no trailing newline).
    pub text: String,
}

/// What executing one statement produced.
#[derive(Clone, Debug, Default)]
pub struct Report {
    /// Lines to print.
    pub lines: Vec<Line>,
    /// A `check` failed.
    pub check_failed: bool,
    /// `quit` was given.
    pub quit: bool,
    /// Lines to append to the journal for this statement (for `run FILE`,
    /// the lines that ran).
    pub journal: Vec<String>,
    /// What the `Result` lines show, for front ends with rich output (the
    /// notebook kernel); the lines stay what a terminal prints.
    pub rich: Option<Rich>,
    /// Plot files this statement wrote, resolved against the base directory.
    pub plots: Vec<PathBuf>,
}

/// What the `Result` lines of a report show, for rich front ends.
#[derive(Clone, Debug)]
pub enum Rich {
    /// The value of a bare expression line (its result line is the value in
    /// input syntax), with the session's state order (the LaTeX of a
    /// product puts parameters before states).
    Value(Value, Vec<Sym>),
    /// The result lines are LaTeX (`show … as latex`).
    Latex,
}

impl Report {
    /// Adds a line.
    pub fn push(&mut self, style: Style, text: impl Into<String>) {
        self.lines.push(Line {
            style,
            text: text.into(),
        });
    }

    /// Notes that a plot was written to `shown` (as the user typed it),
    /// resolved to `path`.
    pub fn plot_written(&mut self, shown: &str, path: PathBuf) {
        self.push(Style::Note, format!("plot written to {shown}"));
        self.plots.push(path);
    }
}

/// What went wrong while executing a statement.
#[derive(Clone, Debug, PartialEq)]
pub enum ErrorKind {
    /// A syntax error.
    Parse(ParseError),
    /// An error of the exact core (limits, forms, division, …).
    Core(CoreError),
    /// A name that is not defined; with the nearest defined name.
    UnknownName {
        name: String,
        suggestion: Option<String>,
    },
    /// An operator applied to values of the wrong kinds.
    Kind {
        op: String,
        left: &'static str,
        right: Option<&'static str>,
    },
    /// Anything else the language refuses, with the reason.
    Invalid(String),
    /// A file could not be read or written.
    File { path: String, reason: String },
    /// An error inside a script run with `run FILE`, already rendered, with
    /// the journal lines of the statements that ran before it (they changed
    /// the session and belong in the journal) and what they printed (shown
    /// before the error: a failed check earlier in the script is not lost).
    Nested {
        message: String,
        ran: Vec<String>,
        printed: Vec<Line>,
        check_failed: bool,
    },
}

/// What the session's steps return: a value, or an error with its span.
pub(crate) type SessionResult<T> = Result<T, SessionError>;

/// An error with the span of the offending input.
#[derive(Clone, Debug, PartialEq)]
pub struct SessionError {
    /// Where (bytes of the statement text); `None` for whole-statement errors.
    pub span: Option<Span>,
    /// What.
    pub kind: ErrorKind,
}

impl SessionError {
    /// An error at `span`.
    pub fn at(span: Span, kind: ErrorKind) -> SessionError {
        SessionError {
            span: Some(span),
            kind,
        }
    }

    /// A refusal at `span` with a message.
    pub fn invalid(span: Span, msg: impl Into<String>) -> SessionError {
        SessionError::at(span, ErrorKind::Invalid(msg.into()))
    }

    /// A core error at `span`.
    pub fn core(span: Span, e: CoreError) -> SessionError {
        SessionError::at(span, ErrorKind::Core(e))
    }
}

impl fmt::Display for ErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ErrorKind::Parse(e) => write!(f, "{e}"),
            ErrorKind::Core(e) => write!(f, "{e}"),
            ErrorKind::UnknownName {
                name,
                suggestion: Some(s),
            } => {
                write!(f, "unknown name `{name}` (did you mean `{s}`?)")
            }
            ErrorKind::UnknownName {
                name,
                suggestion: None,
            } => {
                write!(
                    f,
                    "unknown name `{name}` (declare it with `state`, `param` or define it)"
                )
            }
            ErrorKind::Kind {
                op,
                left,
                right: Some(r),
            } => {
                write!(f, "cannot apply {op} to a {left} and a {r}")
            }
            ErrorKind::Kind {
                op,
                left,
                right: None,
            } => write!(f, "cannot apply {op} to a {left}"),
            ErrorKind::Invalid(m) => write!(f, "{m}"),
            ErrorKind::File { path, reason } => write!(f, "cannot use file `{path}`: {reason}"),
            ErrorKind::Nested { message, .. } => write!(f, "{message}"),
        }
    }
}

impl SessionError {
    /// Journal lines of statements that ran before the error (a `run FILE`
    /// that failed partway); empty for other errors.
    pub fn journal_lines(&self) -> &[String] {
        match &self.kind {
            ErrorKind::Nested { ran, .. } => ran,
            _ => &[],
        }
    }

    /// What the statements before the error printed (a `run FILE` that
    /// failed partway): front ends print it before the error.
    pub fn printed(&self) -> &[Line] {
        match &self.kind {
            ErrorKind::Nested { printed, .. } => printed,
            _ => &[],
        }
    }

    /// A check failed before the error (in a `run FILE` that failed
    /// partway).
    pub fn check_failed(&self) -> bool {
        matches!(
            self.kind,
            ErrorKind::Nested {
                check_failed: true,
                ..
            }
        )
    }
}

impl fmt::Display for SessionError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.kind.fmt(f)
    }
}

impl std::error::Error for SessionError {}

/// The kind of a declared symbol.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SymKind {
    /// A state coordinate.
    State,
    /// An exact parameter.
    Param,
    /// An unspecified input function of time.
    Input,
    /// An unspecified function of the state (`func V(s)`).
    Func,
}

/// The outcome of running a whole text.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct RunStatus {
    /// Some statement failed with an error (the run stopped there).
    pub error: bool,
    /// Some check failed.
    pub check_failed: bool,
    /// `quit` was given.
    pub quit: bool,
}

impl RunStatus {
    /// Exit status: 0 all well, 1 a check failed, 2 an error (2 wins).
    pub fn exit_code(&self) -> i32 {
        if self.error {
            2
        } else if self.check_failed {
            1
        } else {
            0
        }
    }
}

/// Something a text run reports as it goes.
#[derive(Clone, Debug)]
pub enum Event {
    /// The report of one statement.
    Report(Report),
    /// A rendered error (`file:line:column`, the line and a caret).
    Error(String),
}

/// A name bound by an accepted line. The value is the current one while
/// the name keeps it; a redefinition or `forget` moves the old value here
/// (no copy is made for a value that is never replaced).
#[derive(Clone, Debug)]
pub(crate) struct Bound {
    /// Index of the accepted line that bound the name.
    pub(crate) line: usize,
    /// The name.
    pub(crate) name: String,
    /// The value it had, once replaced or forgotten.
    pub(crate) retired: Option<Value>,
}

/// A session.
pub struct Session {
    pub(crate) states: Vec<Sym>,
    pub(crate) symbols: BTreeMap<String, SymKind>,
    pub(crate) names: BTreeMap<String, Value>,
    /// The placeholders of a function definition being read (`plug(e,
    /// V(s) = …)`), as names of the state while its body is evaluated.
    pub(crate) placeholders: std::cell::RefCell<Vec<(String, Sym)>>,
    /// Unspecified functions by name (`func V(s)`).
    pub(crate) funcs: BTreeMap<String, std::sync::Arc<crate::core::func::Signature>>,
    /// Order in which names were defined (for `names`).
    pub(crate) order: Vec<String>,
    /// Accepted input lines, for `save`.
    pub(crate) accepted: Vec<String>,
    /// Every binding of a name, by the accepted line that made it, for
    /// `save FILE with checks`.
    pub(crate) bound: Vec<Bound>,
    /// Lines read at the prompt before the current input, so that a failed
    /// check there names its line in the session.
    pub(crate) line_offset: usize,
    lines_seen: usize,
    /// Skip file writes (journal replay).
    pub replaying: bool,
    /// Directory against which relative paths are resolved.
    pub(crate) base_dir: PathBuf,
    /// Depth of nested `run` commands.
    pub(crate) run_depth: usize,
    /// Show timings in command summaries.
    pub show_timing: bool,
    /// Integration tolerance of the numerical commands (`set tolerance`).
    pub(crate) tolerance: f64,
    /// Charts beyond the declared state, and the chart of each bound value.
    pub(crate) charts: super::chart::Charts,
}

impl Default for Session {
    fn default() -> Session {
        Session::new()
    }
}

impl Session {
    /// An empty session with the default limits.
    pub fn new() -> Session {
        limits::set_limits(Limits::default());
        Session {
            states: Vec::new(),
            symbols: BTreeMap::new(),
            names: BTreeMap::new(),
            funcs: BTreeMap::new(),
            placeholders: Default::default(),
            order: Vec::new(),
            accepted: Vec::new(),
            bound: Vec::new(),
            line_offset: 0,
            lines_seen: 0,
            replaying: false,
            base_dir: PathBuf::from("."),
            run_depth: 0,
            show_timing: true,
            tolerance: crate::numeric::validate::DEFAULT_TOLERANCE,
            charts: Default::default(),
        }
    }

    /// The state coordinates in order.
    pub fn states(&self) -> &[Sym] {
        &self.states
    }

    /// Accepted input lines so far.
    pub fn accepted(&self) -> &[String] {
        &self.accepted
    }

    /// Defined names and declared symbols, for completion.
    pub fn known_names(&self) -> Vec<String> {
        let mut v: Vec<String> = self.symbols.keys().cloned().collect();
        v.extend(self.names.keys().cloned());
        v.sort();
        v.dedup();
        v
    }

    /// Called by the prompt before each input of `n_lines` lines: a failed
    /// check then names its line counted from the start of the session.
    pub fn begin_prompt_input(&mut self, n_lines: usize) {
        self.line_offset = self.lines_seen;
        self.lines_seen += n_lines.max(1);
    }

    /// Moves the value a name loses (redefinition, `forget`) to its last
    /// binding record.
    pub(crate) fn retire(&mut self, name: &str, old: Value) {
        if let Some(b) = self
            .bound
            .iter_mut()
            .rev()
            .find(|b| b.name == name && b.retired.is_none())
        {
            b.retired = Some(old);
        }
    }

    /// The script `save FILE with checks` writes: every accepted line, and
    /// after a line that bound names, `check NAME == VALUE` for each with
    /// the value it was given there (in input syntax). A check that is
    /// already the next line (a replayed saved script) is not repeated.
    pub(crate) fn script_with_checks(&self) -> (String, usize) {
        let mut out = String::new();
        let mut added = 0;
        let mut bound = self.bound.iter().peekable();
        for (i, line) in self.accepted.iter().enumerate() {
            out.push_str(line);
            out.push('\n');
            while let Some(b) = bound.next_if(|b| b.line <= i) {
                let value = b.retired.as_ref().or_else(|| self.names.get(&b.name));
                let Some(value) = value else { continue };
                let check = format!("check {} == {}", b.name, value.plain());
                let already = self.accepted.iter().skip(i + 1);
                if already
                    .take_while(|l| l.starts_with("check "))
                    .any(|l| *l == check)
                {
                    continue;
                }
                out.push_str(&check);
                out.push('\n');
                added += 1;
            }
        }
        (out, added)
    }

    /// The value bound to `name`.
    pub fn get(&self, name: &str) -> Option<&Value> {
        self.names.get(name)
    }

    /// Resolves a path against the session's base directory.
    pub(crate) fn resolve_path(&self, path: &str) -> PathBuf {
        let p = Path::new(path);
        if p.is_absolute() {
            p.to_path_buf()
        } else {
            self.base_dir.join(p)
        }
    }

    /// Sets the directory for relative paths.
    pub fn set_base_dir(&mut self, dir: PathBuf) {
        self.base_dir = dir;
    }

    /// Executes one statement. Accepted statements (all but errors) are
    /// recorded for `save`.
    pub fn execute(
        &mut self,
        stmt: &SourceStmt,
        origin: Option<&str>,
    ) -> Result<Report, SessionError> {
        limits::clear_interrupt();
        limits::start_work();
        let parsed = parse_stmt(&stmt.text).map_err(|e| {
            match super::diag::misspelt_command(&stmt.text, |w| {
                self.symbols.contains_key(w) || self.names.contains_key(w)
            }) {
                Some((span, msg)) => SessionError::invalid(span, msg),
                None => SessionError::at(e.span, ErrorKind::Parse(e)),
            }
        })?;
        let started = Instant::now();
        super::progress::install();
        let result = match self.enter_chart(&parsed) {
            Ok(scope) => {
                let result = self.execute_parsed(&parsed, stmt, origin, started);
                self.leave_chart(scope);
                result
            }
            Err(e) => Err(e),
        };
        super::progress::remove();
        if result.is_err() {
            // A binding made by a statement that then failed belongs to no line.
            let n = self.accepted.len();
            self.bound.retain(|b| b.line < n);
        }
        let mut report = result?;
        let is_file_op = matches!(
            parsed.kind,
            StmtKind::Save { .. } | StmtKind::RunFile(_) | StmtKind::Help(_) | StmtKind::Names
        );
        if !is_file_op && !matches!(parsed.kind, StmtKind::Quit) {
            self.accepted.push(stmt.source());
        }
        if report.journal.is_empty() && !matches!(parsed.kind, StmtKind::Quit) {
            report.journal.push(stmt.source());
        }
        Ok(report)
    }

    /// Runs every statement of `text` in order, reporting through `sink`.
    /// Failed checks go on; an error stops the run.
    pub fn run_text(
        &mut self,
        text: &str,
        origin: Option<&str>,
        sink: &mut dyn FnMut(Event),
    ) -> RunStatus {
        let mut status = RunStatus::default();
        let (stmts, split_error) = split_runnable(text);
        for stmt in &stmts {
            match self.execute(stmt, origin) {
                Ok(report) => {
                    status.check_failed |= report.check_failed;
                    let quit = report.quit;
                    sink(Event::Report(report));
                    if quit {
                        status.quit = true;
                        return status;
                    }
                }
                Err(err) => {
                    if !err.printed().is_empty() || !err.journal_lines().is_empty() {
                        // A nested `run` that failed partway: what it
                        // printed and ran before the error still counts.
                        status.check_failed |= err.check_failed();
                        sink(Event::Report(Report {
                            lines: err.printed().to_vec(),
                            check_failed: err.check_failed(),
                            quit: false,
                            journal: err.journal_lines().to_vec(),
                            rich: None,
                            plots: Vec::new(),
                        }));
                    }
                    sink(Event::Error(render_error(stmt, origin, &err)));
                    status.error = true;
                    return status;
                }
            }
        }
        if let Some(e) = split_error {
            sink(Event::Error(e.render(origin)));
            status.error = true;
        }
        status
    }
}

/// Renders an error of statement `stmt` with location and caret.
pub fn render_error(stmt: &SourceStmt, origin: Option<&str>, err: &SessionError) -> String {
    if let ErrorKind::Nested { message: text, .. } = &err.kind {
        let (line, col) = stmt.locate(err.span.map_or(0, |s| s.start));
        let head = match origin {
            Some(o) => format!("{o}:{line}:{col}: error: in this script:"),
            None => format!("{line}:{col}: error: in this script:"),
        };
        return format!("{head}\n{text}");
    }
    let span = err.span.unwrap_or(Span::new(0, stmt.text.trim_end().len()));
    stmt.render(origin, span, &err.to_string())
}

/// Edit distance for suggestions.
pub(crate) fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for i in 1..=a.len() {
        let mut cur = vec![i; b.len() + 1];
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            cur[j] = (prev[j] + 1).min(cur[j - 1] + 1).min(prev[j - 1] + cost);
        }
        prev = cur;
    }
    prev[b.len()]
}
