//! The interactive prompt: line editing, history, completion, multi-line
//! input, Ctrl-C and Ctrl-D, the journal of accepted statements, and
//! `--resume`.
//!
//! With a terminal on standard input the prompt uses rustyline; otherwise
//! (a pipe or a file) it reads plain lines, joining them while a bracket is
//! open or a line ends with `\`, and prints no banner or prompt string. Both
//! write the journal. Ctrl-C while a statement runs sets the core's
//! interrupt flag: the statement ends with the error `interrupted` and the
//! session is intact; pressed three times during one statement that does not
//! stop, it ends the process (the journal is already on disk).
//!
//! This module owns the terminal interaction; it must not know how
//! statements are parsed or evaluated (it uses the splitter's `needs_more`
//! and the session's public API only).

use std::borrow::Cow;
use std::io::{self, BufRead, IsTerminal, Write};
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};

use rustyline::completion::{Completer, FilenameCompleter, Pair};
use rustyline::error::ReadlineError;
use rustyline::highlight::Highlighter;
use rustyline::hint::Hinter;
use rustyline::history::FileHistory;
use rustyline::validate::{ValidationContext, ValidationResult, Validator};
use rustyline::{CompletionType, Config, Context, Editor, Helper};

use super::journal::{Claim, Journal, Resumed, Unterminated};
use super::{home_dir, new_session, HomeKind, Invocation, Output, Painter};
use crate::core::limits;
use crate::lang::builtins::BUILTIN_NAMES;
use crate::lang::parse::RESERVED_WORDS;
use crate::lang::session::render_error;
use crate::lang::split::{needs_more, split_statements, SourceStmt};
use crate::lang::{Line, Report, Session};

/// The prompt string.
pub(crate) const PROMPT: &str = "» ";

/// File name of the history inside the data home.
pub(crate) const HISTORY_FILE: &str = "history";

/// Ctrl-C presses during one statement after which the process ends.
const PRESSES_TO_LEAVE: usize = 3;

/// A statement is running (Ctrl-C interrupts it).
static RUNNING: AtomicBool = AtomicBool::new(false);
/// Ctrl-C presses during the running statement.
static PRESSES: AtomicUsize = AtomicUsize::new(0);

/// Runs the prompt until `quit`, Ctrl-D or the end of input; returns the
/// exit status: 0, or 2 when standard output could not be written.
pub(crate) fn run_prompt(invocation: &Invocation, painter: Painter) -> u8 {
    let interactive = io::stdin().is_terminal();
    let output = Output {
        painter,
        indent: "  ",
    };
    let mut session = new_session(invocation.timing);
    if interactive && !install_interrupt_handler() {
        output.warning("warning: cannot catch Ctrl-C; it will end ordex instead of a computation");
    }
    let mut reader = if interactive {
        match EditorInput::new() {
            Ok(editor) => Input::Editor(Box::new(editor)),
            Err(err) => {
                output.warning(&format!("warning: no line editing ({err})"));
                Input::Plain
            }
        }
    } else {
        Input::Plain
    };
    if interactive {
        let banner = format!(
            "ordex {}: exact series workbench. `help` lists the topics; Ctrl-D leaves.",
            env!("CARGO_PKG_VERSION")
        );
        if let Err(err) = output.note(&banner) {
            output.stdout_failed(&err);
            return 2;
        }
    }
    let mut journal = open_journal(invocation.resume, &mut session, &output);
    loop {
        if let Input::Editor(editor) = &mut reader {
            editor.set_names(session.known_names());
        }
        let text = match reader.read() {
            Read::Text(text) => text,
            Read::Cancelled => continue,
            Read::End => break,
        };
        session.begin_prompt_input(text.lines().count());
        match execute_input(&mut session, &text, &output, &mut journal) {
            Flow::Continue => {}
            Flow::Quit => break,
            Flow::OutputFailed(err) => {
                output.stdout_failed(&err);
                return 2;
            }
        }
    }
    0
}

/// What to do after one input.
enum Flow {
    /// Prompt again.
    Continue,
    /// Leave the prompt (`quit`).
    Quit,
    /// Standard output cannot be written: leave with status 2.
    OutputFailed(io::Error),
}

/// The journal of a prompt session: claimed (locked) at the start, started
/// (rotating the old one) only when the first statement is accepted, so
/// that a session that accepts nothing (`ordex </dev/null`) rotates
/// nothing.
enum JournalSlot {
    /// No journal for this session.
    Off,
    /// Locked, not started yet.
    Claimed(Claim),
    /// Appending.
    Open(Journal),
}

impl JournalSlot {
    /// Appends accepted statements (starting the journal first if needed);
    /// on failure warns once and turns the journal off.
    fn append(&mut self, statements: &[String], output: &Output) {
        if statements.is_empty() {
            return;
        }
        if matches!(self, JournalSlot::Claimed(_)) {
            let JournalSlot::Claimed(claim) = std::mem::replace(self, JournalSlot::Off) else {
                return;
            };
            let home = claim.home().display().to_string();
            match claim.start_new() {
                Ok(journal) => *self = JournalSlot::Open(journal),
                Err(err) => {
                    output.warning(&format!(
                        "warning: the journal in {home} cannot be started ({err}); this session has no journal"
                    ));
                    return;
                }
            }
        }
        if let JournalSlot::Open(open) = self {
            if let Err(err) = open.append(statements) {
                output.warning(&format!(
                    "warning: the journal {} cannot be written ({err}); it is off for this session",
                    open.path().display()
                ));
                *self = JournalSlot::Off;
            }
        }
    }
}

/// Runs every statement of one input; the first error stops the rest.
fn execute_input(
    session: &mut Session,
    text: &str,
    output: &Output,
    journal: &mut JournalSlot,
) -> Flow {
    let statements = match split_statements(text) {
        Ok(statements) => statements,
        Err(err) => {
            output.error(&err.render(None));
            return Flow::Continue;
        }
    };
    for statement in &statements {
        match run_one(session, statement, None) {
            Ok(report) => {
                journal.append(&report.journal, output);
                if let Err(err) = output.report(&report) {
                    return Flow::OutputFailed(err);
                }
                if report.quit {
                    return Flow::Quit;
                }
            }
            Err(failed) => {
                // Statements of a `run FILE` before its error changed the
                // session: they are journalled like accepted lines, and
                // what they printed is shown before the error.
                journal.append(&failed.ran, output);
                if let Err(err) = output.lines(&failed.printed) {
                    return Flow::OutputFailed(err);
                }
                output.error(&failed.rendered);
                break;
            }
        }
    }
    Flow::Continue
}

/// A statement that ended with an error.
struct Failed {
    /// The error with place and caret.
    rendered: String,
    /// Journal lines of what ran before it (a `run FILE` failed partway).
    ran: Vec<String>,
    /// What ran before it printed.
    printed: Vec<Line>,
}

/// Executes one statement with Ctrl-C armed; an error comes back rendered.
fn run_one(
    session: &mut Session,
    statement: &SourceStmt,
    origin: Option<&str>,
) -> Result<Report, Failed> {
    PRESSES.store(0, Ordering::SeqCst);
    RUNNING.store(true, Ordering::SeqCst);
    let result = session.execute(statement, origin);
    RUNNING.store(false, Ordering::SeqCst);
    result.map_err(|err| Failed {
        rendered: render_error(statement, origin, &err),
        ran: err.journal_lines().to_vec(),
        printed: err.printed().to_vec(),
    })
}

/// Installs the Ctrl-C handler; false when it cannot be installed.
fn install_interrupt_handler() -> bool {
    ctrlc::try_set_handler(|| {
        if !RUNNING.load(Ordering::SeqCst) {
            return;
        }
        limits::interrupt();
        let presses = PRESSES.fetch_add(1, Ordering::SeqCst) + 1;
        if presses >= PRESSES_TO_LEAVE {
            let _ = writeln!(
                io::stderr(),
                "\nordex: the computation does not stop; leaving (the journal is kept)"
            );
            std::process::exit(130);
        }
    })
    .is_ok()
}

/// Claims the journal (and for `--resume` opens and replays it);
/// `JournalSlot::Off` when there is no place for one or it cannot be
/// used (with a warning).
fn open_journal(resume: bool, session: &mut Session, output: &Output) -> JournalSlot {
    let Some(home) = home_dir(HomeKind::State) else {
        output.warning("warning: no state directory (set ORDEX_HOME): this session has no journal");
        return JournalSlot::Off;
    };
    let opened = Journal::claim(&home).and_then(|claim| {
        if resume {
            claim.resume().map(|resumed| {
                let Resumed {
                    mut journal,
                    text,
                    unterminated,
                } = resumed;
                replay(session, &text, unterminated, &mut journal, output);
                JournalSlot::Open(journal)
            })
        } else {
            Ok(JournalSlot::Claimed(claim))
        }
    });
    match opened {
        Ok(slot) => slot,
        Err(err) => {
            output.warning(&format!(
                "warning: the journal in {} cannot be opened ({err}); this session has no journal",
                home.display()
            ));
            JournalSlot::Off
        }
    }
}

/// At most this many characters of a cut record are quoted.
const QUOTE_CHARS: usize = 60;

/// `text` shortened for a message.
fn quote(text: &str) -> String {
    let one_line = text.replace('\n', " ");
    if one_line.chars().count() <= QUOTE_CHARS {
        one_line
    } else {
        let head: String = one_line.chars().take(QUOTE_CHARS).collect();
        format!("{head}…")
    }
}

/// Replays a journal's text into the session without file writes and
/// without printing reports. An unterminated last record (already cut
/// off) is reported and not run. If something does not replay, the
/// journal is cut back to what did; the whole text is kept in a numbered
/// backup and the message says where.
fn replay(
    session: &mut Session,
    text: &str,
    unterminated: Option<Unterminated>,
    journal: &mut Journal,
    output: &Output,
) {
    let origin = journal.path().display().to_string();
    if let Some(cut) = unterminated {
        output.warning(&format!(
            "warning: {origin}: the last record was never finished (a write was cut off): \
             `{}` was not run; the whole journal is kept in {}",
            quote(&cut.record),
            cut.backup.display()
        ));
    }
    let (statements, mut complete) = match split_statements(text) {
        Ok(statements) => (statements, true),
        Err(err) => {
            // A kill in the middle of a write can leave an open bracket at
            // the end: replay the lines before the faulty one.
            output.error(&err.render(Some(&origin)));
            let kept: Vec<&str> = text.lines().take(err.line.saturating_sub(1)).collect();
            (
                split_statements(&kept.join("\n")).unwrap_or_default(),
                false,
            )
        }
    };
    session.replaying = true;
    let mut replayed: Vec<String> = Vec::new();
    for statement in &statements {
        match run_one(session, statement, Some(&origin)) {
            Ok(report) => replayed.extend(report.journal),
            Err(_) if limits::is_interrupted() => {
                output.warning(&format!(
                    "resume interrupted after {} lines",
                    replayed.len()
                ));
                complete = false;
                break;
            }
            Err(failed) => {
                replayed.extend(failed.ran);
                output.error(&failed.rendered);
                output.warning("the lines from there on were not replayed");
                complete = false;
                break;
            }
        }
    }
    session.replaying = false;
    if !complete {
        match journal.rewrite(&replayed) {
            Ok(backup) => output.warning(&format!(
                "the journal now holds the {} lines that replayed; all of it is kept in {}",
                replayed.len(),
                backup.display()
            )),
            Err(err) => output.warning(&format!(
                "warning: the journal was left as it was, lines not replayed included ({err})"
            )),
        }
    }
    let _ = output.note(&format!("resumed {} lines from {}", replayed.len(), origin));
}

/// One read from the prompt.
enum Read {
    /// A complete input (possibly several lines).
    Text(String),
    /// Ctrl-C at the prompt: the line was dropped.
    Cancelled,
    /// Ctrl-D or the end of input.
    End,
}

/// Where input comes from.
enum Input {
    /// A terminal, with line editing.
    Editor(Box<EditorInput>),
    /// Plain lines from standard input.
    Plain,
}

impl Input {
    fn read(&mut self) -> Read {
        match self {
            Input::Editor(editor) => editor.read(),
            Input::Plain => read_plain(&mut io::stdin().lock()),
        }
    }
}

/// Reads lines until the text is complete (no open bracket, no trailing
/// `\`). A line that is not UTF-8 is reported and dropped.
fn read_plain(input: &mut dyn BufRead) -> Read {
    let mut text = String::new();
    let mut bytes = Vec::new();
    loop {
        bytes.clear();
        match input.read_until(b'\n', &mut bytes) {
            Ok(0) | Err(_) => {
                return if text.trim().is_empty() {
                    Read::End
                } else {
                    Read::Text(text)
                };
            }
            Ok(_) => {}
        }
        let line = match std::str::from_utf8(&bytes) {
            Ok(line) => line.trim_end_matches(['\n', '\r']),
            Err(_) => {
                let _ = writeln!(
                    io::stderr(),
                    "error: an input line is not valid UTF-8; it was dropped"
                );
                continue;
            }
        };
        if !text.is_empty() {
            text.push('\n');
        }
        text.push_str(line);
        if !needs_more(&text) {
            return Read::Text(text);
        }
    }
}

/// The rustyline editor with its history file.
struct EditorInput {
    editor: Editor<PromptHelper, FileHistory>,
    history: Option<PathBuf>,
    history_dir_made: bool,
}

impl EditorInput {
    fn new() -> rustyline::Result<EditorInput> {
        let config = Config::builder()
            .history_ignore_dups(true)?
            .max_history_size(2000)?
            .auto_add_history(false)
            .completion_type(CompletionType::List)
            .build();
        let mut editor = Editor::with_config(config)?;
        editor.set_helper(Some(PromptHelper {
            names: Vec::new(),
            files: FilenameCompleter::new(),
        }));
        let history = home_dir(HomeKind::Data).map(|dir| dir.join(HISTORY_FILE));
        if let Some(path) = &history {
            // A missing or unreadable history is simply empty.
            let _ = editor.load_history(path);
        }
        Ok(EditorInput {
            editor,
            history,
            history_dir_made: false,
        })
    }

    fn set_names(&mut self, names: Vec<String>) {
        if let Some(helper) = self.editor.helper_mut() {
            helper.names = names;
        }
    }

    fn read(&mut self) -> Read {
        match self.editor.readline(PROMPT) {
            Ok(text) => {
                if !text.trim().is_empty() {
                    self.remember(&text);
                }
                Read::Text(text)
            }
            Err(ReadlineError::Interrupted) => Read::Cancelled,
            Err(_) => Read::End,
        }
    }

    /// Adds an entry to the history and appends it to the history file.
    fn remember(&mut self, text: &str) {
        let _ = self.editor.add_history_entry(text);
        let Some(path) = &self.history else { return };
        if !self.history_dir_made {
            if let Some(dir) = path.parent() {
                let _ = std::fs::create_dir_all(dir);
            }
            self.history_dir_made = true;
        }
        // History is a convenience: a failure to write it is not reported.
        let _ = self.editor.append_history(path);
    }
}

/// Completion, validation (multi-line input) for rustyline.
struct PromptHelper {
    /// Declared and defined names of the session.
    names: Vec<String>,
    /// Paths after `save` and `run`.
    files: FilenameCompleter,
}

/// The command words, built-ins and `names` starting with `prefix`,
/// sorted, without repeats.
pub(crate) fn candidates(prefix: &str, names: &[String]) -> Vec<String> {
    let mut words: Vec<String> = RESERVED_WORDS
        .iter()
        .chain(BUILTIN_NAMES.iter())
        .map(|w| w.to_string())
        .chain(names.iter().cloned())
        .filter(|w| w.starts_with(prefix))
        .collect();
    words.sort();
    words.dedup();
    words
}

/// The words that complete the identifier before byte `pos` of `line`
/// (none after a digit or outside a word), with the byte where that
/// identifier starts.
pub(crate) fn word_completions(line: &str, pos: usize, names: &[String]) -> (usize, Vec<String>) {
    let start = word_start(line, pos);
    let prefix = line.get(start..pos).unwrap_or("");
    if prefix.is_empty() || prefix.starts_with(|c: char| c.is_ascii_digit()) {
        return (pos, Vec::new());
    }
    (start, candidates(prefix, names))
}

/// The byte where the identifier ending at `pos` starts.
pub(crate) fn word_start(line: &str, pos: usize) -> usize {
    let before = line.get(..pos).unwrap_or(line);
    before
        .char_indices()
        .rev()
        .find(|(_, c)| !(c.is_ascii_alphanumeric() || *c == '_'))
        .map_or(0, |(idx, c)| idx + c.len_utf8())
}

/// True when the cursor is in the path argument of `save` or `run`.
pub(crate) fn in_path_argument(line: &str, pos: usize) -> bool {
    let before = line.get(..pos).unwrap_or(line).trim_start();
    ["save", "run"].iter().any(|word| {
        before
            .strip_prefix(word)
            .is_some_and(|rest| rest.starts_with(char::is_whitespace))
    })
}

impl Completer for PromptHelper {
    type Candidate = Pair;

    fn complete(
        &self,
        line: &str,
        pos: usize,
        ctx: &Context<'_>,
    ) -> rustyline::Result<(usize, Vec<Pair>)> {
        if in_path_argument(line, pos) {
            return self.files.complete(line, pos, ctx);
        }
        let (start, words) = word_completions(line, pos, &self.names);
        let pairs = words
            .into_iter()
            .map(|word| Pair {
                display: word.clone(),
                replacement: word,
            })
            .collect();
        Ok((start, pairs))
    }
}

impl Hinter for PromptHelper {
    type Hint = String;
}

impl Highlighter for PromptHelper {
    fn highlight_prompt<'b, 's: 'b, 'p: 'b>(
        &'s self,
        prompt: &'p str,
        _default: bool,
    ) -> Cow<'b, str> {
        Cow::Borrowed(prompt)
    }
}

impl Validator for PromptHelper {
    fn validate(&self, ctx: &mut ValidationContext) -> rustyline::Result<ValidationResult> {
        if needs_more(ctx.input()) {
            Ok(ValidationResult::Incomplete)
        } else {
            Ok(ValidationResult::Valid(None))
        }
    }
}

impl Helper for PromptHelper {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn candidates_cover_commands_builtins_and_names() {
        let names: Vec<String> = ["Xfast", "Xslow", "eps"].map(String::from).to_vec();
        assert_eq!(candidates("Xf", &names), vec!["Xfast"]);
        assert_eq!(candidates("X", &names), vec!["Xfast", "Xslow"]);
        assert_eq!(candidates("magn", &names), vec!["magnus"]);
        assert_eq!(candidates("tr", &names), vec!["trace", "transform"]);
        assert!(candidates("e", &names).contains(&"eps".to_string()));
        assert!(candidates("zzz", &names).is_empty());
        assert_eq!(
            word_completions("check Xf", 8, &names),
            (6, vec!["Xfast".to_string()])
        );
        assert_eq!(word_completions("x = 12", 6, &names), (6, Vec::new()));
    }

    #[test]
    fn word_start_finds_the_identifier_before_the_cursor() {
        assert_eq!(word_start("check Xf", 8), 6);
        assert_eq!(word_start("Xf", 2), 0);
        assert_eq!(word_start("[p, -Xs", 7), 5);
        assert_eq!(word_start("\u{3b8}+ab", 5), 3);
        assert_eq!(word_start("a ", 2), 2);
    }

    #[test]
    fn paths_are_completed_after_save_and_run_only() {
        assert!(in_path_argument("save out", 8));
        assert!(in_path_argument("  run ", 6));
        assert!(!in_path_argument("saved", 5));
        assert!(!in_path_argument("save", 4));
        assert!(!in_path_argument("x = run", 7));
    }

    #[test]
    fn plain_reader_joins_lines_while_a_bracket_is_open() {
        let mut input: &[u8] = b"state q, p\nX = [p,\n  -q]\r\ny = 1 + \\\n 2\n\xff\xfe\nnames";
        let mut got = Vec::new();
        loop {
            match read_plain(&mut input) {
                Read::Text(text) => got.push(text),
                Read::Cancelled => {}
                Read::End => break,
            }
        }
        assert_eq!(
            got,
            vec!["state q, p", "X = [p,\n  -q]", "y = 1 + \\\n 2", "names"]
        );
    }

    #[test]
    fn plain_reader_submits_an_unfinished_last_input() {
        let mut input: &[u8] = b"X = [p,\n";
        match read_plain(&mut input) {
            Read::Text(text) => assert_eq!(text, "X = [p,"),
            _ => panic!("expected the unfinished text"),
        }
        assert!(matches!(read_plain(&mut input), Read::End));
    }
}
