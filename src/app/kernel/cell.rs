//! The kernel's session thread: shell requests in order, one session for
//! the kernel's life.
//!
//! A cell is a block of ordex lines, run statement by statement as a script
//! runs (an error stops the cell; a failed check is shown as an error and
//! the cell goes on). What a statement reports becomes iopub messages:
//! text as `stream`, the value of a bare expression line and
//! `show … as latex` as `text/plain` + `text/latex`, plots as
//! `image/svg+xml`, errors as `error` with the caret in the traceback.

use std::cell::RefCell;
use std::rc::Rc;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use serde_json::{json, Value as Json};

use super::server::{log, Links};
use super::wire::{Message, Origin, PROTOCOL_VERSION};
use crate::app::repl::{in_path_argument, word_completions, word_start};
use crate::core::limits;
use crate::core::CoreError;
use crate::lang::session::{render_error, ErrorKind, SessionError, Style};
use crate::lang::split::{needs_more, split_runnable, split_statements};
use crate::lang::{Report, Rich, Session};

/// The content of `kernel_info_reply`.
pub(crate) fn kernel_info() -> Json {
    let version = env!("CARGO_PKG_VERSION");
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": "ordex",
        "implementation_version": version,
        "language_info": {
            "name": "ordex",
            "version": version,
            "mimetype": "text/x-ordex",
            "file_extension": ".ordex",
        },
        "banner": format!("ordex {version}: exact series workbench. `help` lists the topics."),
        "help_links": [],
        "debugger": false,
    })
}

/// Seconds a statement runs before progress is shown, and between reports.
const PROGRESS_EVERY: Duration = Duration::from_secs(1);

/// Where progress reports of the running statement go.
struct Ticker {
    origin: Origin,
    iopub: tokio::sync::mpsc::UnboundedSender<Message>,
    /// The execute request being served (`None`: report nothing).
    parent: Option<Message>,
    /// When the running statement started.
    started: Instant,
    /// When progress was last reported.
    last: Option<Instant>,
}

impl Ticker {
    fn tick(&mut self, what: &str, done: usize, total: usize) {
        let Some(parent) = &self.parent else { return };
        let now = Instant::now();
        if now.duration_since(self.started) < PROGRESS_EVERY
            || self
                .last
                .is_some_and(|last| now.duration_since(last) < PROGRESS_EVERY)
        {
            return;
        }
        self.last = Some(now);
        let secs = now.duration_since(self.started).as_secs_f64();
        let text = format!("… {what}: {done} of {total} ({secs:.0} s)\n");
        let _ = self.iopub.send(self.origin.publish(
            Some(parent),
            "stream",
            json!({"name": "stdout", "text": text}),
        ));
    }
}

/// How a cell ended.
enum Outcome {
    /// Every statement ran and every check held.
    Ok,
    /// An error, a failed check or an interrupt: `(ename, evalue, traceback)`.
    Error(String, String, Vec<String>),
}

/// The session thread's state.
pub(crate) struct Kernel {
    session: Session,
    origin: Origin,
    links: Links,
    /// The execution counter (`In [n]`).
    count: u64,
    ticker: Rc<RefCell<Ticker>>,
}

impl Kernel {
    /// A kernel around a fresh session (relative paths against the working
    /// directory, which Jupyter sets to the notebook's; no timings, so that
    /// a re-run notebook is identical).
    pub(crate) fn new(origin: Origin, links: Links) -> Kernel {
        let session = crate::app::new_session(false);
        let ticker = Rc::new(RefCell::new(Ticker {
            origin: origin.clone(),
            iopub: links.iopub.clone(),
            parent: None,
            started: Instant::now(),
            last: None,
        }));
        crate::lang::progress::use_bars(false);
        let hook_ticker = Rc::clone(&ticker);
        limits::set_progress_hook(Some(Box::new(move |what, done, total| {
            if let Ok(mut t) = hook_ticker.try_borrow_mut() {
                t.tick(what, done, total);
            }
        })));
        Kernel {
            session,
            origin,
            links,
            count: 0,
            ticker,
        }
    }

    /// Serves shell requests until the socket thread is gone.
    pub(crate) fn serve(mut self) {
        self.publish(None, "status", json!({"execution_state": "starting"}));
        while let Ok(msg) = self.links.requests.recv() {
            self.handle(&msg);
        }
    }

    fn publish(&self, parent: Option<&Message>, msg_type: &str, content: Json) {
        let _ = self
            .links
            .iopub
            .send(self.origin.publish(parent, msg_type, content));
    }

    fn reply(&self, request: &Message, msg_type: &str, content: Json) {
        let _ = self
            .links
            .shell
            .send(self.origin.reply(request, msg_type, content));
    }

    fn handle(&mut self, msg: &Message) {
        self.publish(Some(msg), "status", json!({"execution_state": "busy"}));
        let waiting = match msg.msg_type() {
            "execute_request" => self.execute(msg),
            "kernel_info_request" => {
                self.reply(msg, "kernel_info_reply", kernel_info());
                Vec::new()
            }
            "complete_request" => {
                let content = self.complete(&msg.content);
                self.reply(msg, "complete_reply", content);
                Vec::new()
            }
            "is_complete_request" => {
                let code = msg.content["code"].as_str().unwrap_or("");
                self.reply(msg, "is_complete_reply", is_complete(code));
                Vec::new()
            }
            "inspect_request" => {
                let content = self.inspect(&msg.content);
                self.reply(msg, "inspect_reply", content);
                Vec::new()
            }
            "history_request" => {
                self.reply(msg, "history_reply", json!({"status": "ok", "history": []}));
                Vec::new()
            }
            "comm_info_request" => {
                self.reply(msg, "comm_info_reply", json!({"status": "ok", "comms": {}}));
                Vec::new()
            }
            other => {
                log(&format!("ignored a {other} on shell"));
                Vec::new()
            }
        };
        self.publish(Some(msg), "status", json!({"execution_state": "idle"}));
        self.abort_waiting(waiting);
    }

    /// After an error with `stop_on_error`, execute requests that were
    /// waiting are answered `aborted` (as "run all" expects); other
    /// requests are served.
    fn abort_waiting(&mut self, waiting: Vec<Message>) {
        let mut others = Vec::new();
        for next in waiting {
            if next.msg_type() == "execute_request" {
                self.publish(Some(&next), "status", json!({"execution_state": "busy"}));
                self.reply(
                    &next,
                    "execute_reply",
                    json!({"status": "aborted", "execution_count": self.count}),
                );
                self.publish(Some(&next), "status", json!({"execution_state": "idle"}));
            } else {
                others.push(next);
            }
        }
        for msg in &others {
            self.handle(msg);
        }
    }

    /// Runs a cell; when it failed and asked to stop on errors, returns
    /// the requests that were waiting when it ended.
    fn execute(&mut self, msg: &Message) -> Vec<Message> {
        let content = &msg.content;
        let code = content["code"].as_str().unwrap_or("");
        let silent = content["silent"].as_bool().unwrap_or(false);
        let store = content["store_history"].as_bool().unwrap_or(!silent);
        if !silent && store {
            self.count += 1;
        }
        let count = self.count;
        self.outputs(msg, silent, count).send(
            "execute_input",
            json!({"code": code, "execution_count": count}),
        );
        let outcome = self.run_cell(code, msg, silent, count);
        let reply = match outcome {
            Outcome::Ok => json!({
                "status": "ok",
                "execution_count": count,
                "user_expressions": {},
                "payload": [],
            }),
            Outcome::Error(ename, evalue, traceback) => json!({
                "status": "error",
                "execution_count": count,
                "ename": ename,
                "evalue": evalue,
                "traceback": traceback,
            }),
        };
        // Requests already waiting are taken before the reply goes out, so
        // that what a client sends after seeing the error is never aborted.
        let waiting =
            if reply["status"] == "error" && content["stop_on_error"].as_bool().unwrap_or(true) {
                self.links.requests.try_iter().collect()
            } else {
                Vec::new()
            };
        self.reply(msg, "execute_reply", reply);
        waiting
    }

    fn run_cell(&mut self, code: &str, msg: &Message, silent: bool, count: u64) -> Outcome {
        super::CELL_INTERRUPTED.store(false, Ordering::SeqCst);
        let origin = format!("cell[{count}]");
        let (statements, split_error) = split_runnable(code);
        let mut first_failure: Option<Outcome> = None;
        let n = statements.len();
        for (i, statement) in statements.iter().enumerate() {
            if super::CELL_INTERRUPTED.load(Ordering::SeqCst) {
                let rendered = format!("{origin}: interrupted before: {}", statement.text.trim());
                return self.fail(msg, silent, count, "interrupted", rendered);
            }
            self.start_ticker(msg, silent);
            let result = self.session.execute(statement, Some(&origin));
            self.ticker.borrow_mut().parent = None;
            match result {
                Ok(report) => {
                    let last = i + 1 == n && split_error.is_none();
                    let failure = self.show_report(msg, silent, count, &report, last);
                    if first_failure.is_none() {
                        first_failure = failure;
                    }
                    if report.quit {
                        self.stream(
                            msg,
                            silent,
                            "quit: the rest of the cell is skipped; the kernel keeps the session \
                             (shut the kernel down from the notebook)\n",
                        );
                        break;
                    }
                }
                Err(err) => {
                    let rendered = render_error(statement, Some(&origin), &err);
                    return self.fail(msg, silent, count, error_name(&err), rendered);
                }
            }
        }
        if let Some(e) = split_error {
            return self.fail(msg, silent, count, "syntax error", e.render(Some(&origin)));
        }
        first_failure.unwrap_or(Outcome::Ok)
    }

    fn start_ticker(&self, msg: &Message, silent: bool) {
        let mut t = self.ticker.borrow_mut();
        t.parent = (!silent).then(|| msg.clone());
        t.started = Instant::now();
        t.last = None;
    }

    fn outputs<'a>(&'a self, msg: &'a Message, silent: bool, count: u64) -> Outputs<'a> {
        Outputs {
            kernel: self,
            parent: msg,
            silent,
            count,
        }
    }

    fn stream(&self, msg: &Message, silent: bool, text: &str) {
        self.outputs(msg, silent, 0).stream("stdout", text);
    }

    /// Publishes an error and returns it as the cell's outcome.
    fn fail(
        &self,
        msg: &Message,
        silent: bool,
        count: u64,
        ename: &str,
        rendered: String,
    ) -> Outcome {
        let traceback: Vec<String> = rendered.lines().map(str::to_string).collect();
        let evalue = traceback
            .first()
            .map(|l| l.split(": error: ").last().unwrap_or(l).to_string())
            .unwrap_or_default();
        self.outputs(msg, silent, count)
            .error(ename, &evalue, &traceback);
        Outcome::Error(ename.to_string(), evalue, traceback)
    }

    /// Publishes what one statement reported; a failed check comes back
    /// as the error it is shown as.
    fn show_report(
        &self,
        msg: &Message,
        silent: bool,
        count: u64,
        report: &Report,
        last: bool,
    ) -> Option<Outcome> {
        let out = self.outputs(msg, silent, count);
        if report.check_failed {
            let traceback: Vec<String> = report.lines.iter().map(|l| l.text.clone()).collect();
            let evalue = report
                .lines
                .iter()
                .find(|l| l.style == Style::Fail)
                .map_or_else(|| "a check failed".to_string(), |l| l.text.clone());
            out.error("check failed", &evalue, &traceback);
            return Some(Outcome::Error(
                "check failed".to_string(),
                evalue,
                traceback,
            ));
        }
        let mut text = String::new();
        let mut warnings = String::new();
        let mut shown = false;
        for line in &report.lines {
            let rich = line.style == Style::Result && report.rich.is_some();
            if rich {
                if !shown {
                    out.stream("stdout", &std::mem::take(&mut text));
                    out.rich(report, last);
                    shown = true;
                }
                continue;
            }
            let target = if line.style == Style::Warn {
                &mut warnings
            } else {
                &mut text
            };
            target.push_str(&line.text);
            target.push('\n');
        }
        out.stream("stdout", &text);
        for path in &report.plots {
            out.plot(path);
        }
        out.stream("stderr", &warnings);
        None
    }

    /// `complete_request`: command words, built-ins and defined names; file
    /// names after `save` and `run`.
    fn complete(&self, content: &Json) -> Json {
        let code = content["code"].as_str().unwrap_or("");
        let pos = byte_of(code, content["cursor_pos"].as_u64());
        let line_start = code
            .get(..pos)
            .and_then(|s| s.rfind('\n'))
            .map_or(0, |i| i + 1);
        let line = code.get(line_start..).unwrap_or("");
        let in_line = pos - line_start;
        let (start, matches) = if in_path_argument(line, in_line) {
            let files = rustyline::completion::FilenameCompleter::new();
            match files.complete_path(line, in_line) {
                Ok((start, pairs)) => (start, pairs.into_iter().map(|p| p.replacement).collect()),
                Err(_) => (in_line, Vec::new()),
            }
        } else {
            word_completions(line, in_line, &self.session.known_names())
        };
        json!({
            "status": "ok",
            "matches": matches,
            "cursor_start": chars_before(code, line_start + start),
            "cursor_end": chars_before(code, pos),
            "metadata": {},
        })
    }

    /// `inspect_request`: the value of a defined name, or the help of a
    /// command word.
    fn inspect(&self, content: &Json) -> Json {
        let code = content["code"].as_str().unwrap_or("");
        let pos = byte_of(code, content["cursor_pos"].as_u64());
        let word = word_at(code, pos);
        let text = if let Some(v) = self.session.get(word) {
            Some(format!(
                "{word}: {}\n{}",
                self.session.describe(v),
                v.plain()
            ))
        } else if word.is_empty() {
            None
        } else {
            crate::lang::help::help(Some(word))
        };
        match text {
            Some(text) => json!({
                "status": "ok",
                "found": true,
                "data": {"text/plain": text},
                "metadata": {},
            }),
            None => json!({"status": "ok", "found": false, "data": {}, "metadata": {}}),
        }
    }
}

/// `is_complete_request`: incomplete while a bracket is open or a line
/// ends with `\`; invalid when the splitter refuses the text.
pub(crate) fn is_complete(code: &str) -> Json {
    if needs_more(code) {
        json!({"status": "incomplete", "indent": ""})
    } else if split_statements(code).is_err() {
        json!({"status": "invalid"})
    } else {
        json!({"status": "complete"})
    }
}

/// The `ename` of an error reply.
fn error_name(err: &SessionError) -> &'static str {
    match &err.kind {
        ErrorKind::Parse(_) => "syntax error",
        ErrorKind::UnknownName { .. } => "unknown name",
        ErrorKind::Kind { .. } => "kind error",
        ErrorKind::Core(CoreError::Interrupted) => "interrupted",
        ErrorKind::Core(CoreError::Limit { .. }) => "limit",
        ErrorKind::File { .. } => "file error",
        ErrorKind::Nested { .. } => "error in script",
        ErrorKind::Core(_) | ErrorKind::Invalid(_) => "error",
    }
}

/// The byte offset of a cursor given in Unicode code points (protocol
/// 5.2 and later); the end when absent or past the end.
fn byte_of(code: &str, cursor: Option<u64>) -> usize {
    let Some(cursor) = cursor.and_then(|c| usize::try_from(c).ok()) else {
        return code.len();
    };
    code.char_indices()
        .nth(cursor)
        .map_or(code.len(), |(b, _)| b)
}

/// Code points before byte `b`.
fn chars_before(code: &str, b: usize) -> usize {
    code.get(..b).map_or(0, |s| s.chars().count())
}

/// The identifier around byte `pos`.
fn word_at(code: &str, pos: usize) -> &str {
    let start = word_start(code, pos);
    let rest = code.get(pos..).unwrap_or("");
    let end = pos
        + rest
            .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .unwrap_or(rest.len());
    code.get(start..end).unwrap_or("")
}

/// The last part of a path, for messages.
fn file_name(path: &std::path::Path) -> String {
    path.file_name().map_or_else(
        || path.display().to_string(),
        |n| n.to_string_lossy().into_owned(),
    )
}

/// Publishes the outputs of one execute request.
struct Outputs<'a> {
    kernel: &'a Kernel,
    parent: &'a Message,
    /// A silent request publishes nothing.
    silent: bool,
    count: u64,
}

impl Outputs<'_> {
    fn send(&self, msg_type: &str, content: Json) {
        if !self.silent {
            self.kernel.publish(Some(self.parent), msg_type, content);
        }
    }

    fn stream(&self, name: &str, text: &str) {
        if !text.is_empty() {
            self.send("stream", json!({"name": name, "text": text}));
        }
    }

    fn error(&self, ename: &str, evalue: &str, traceback: &[String]) {
        self.send(
            "error",
            json!({"ename": ename, "evalue": evalue, "traceback": traceback}),
        );
    }

    /// The rich form of a report's result lines: the result of the cell
    /// (`Out [n]`) for its last statement, a display before that.
    fn rich(&self, report: &Report, last: bool) {
        let results: Vec<&str> = report
            .lines
            .iter()
            .filter(|l| l.style == Style::Result)
            .map(|l| l.text.as_str())
            .collect();
        let plain = results.join("\n");
        let tex = match &report.rich {
            Some(Rich::Value(v, states)) => v.latex(states),
            Some(Rich::Latex) => plain.clone(),
            None => return,
        };
        let data = json!({
            "text/plain": plain,
            "text/latex": format!("$\\displaystyle {tex}$"),
        });
        if last {
            self.send(
                "execute_result",
                json!({"execution_count": self.count, "data": data, "metadata": {}}),
            );
        } else {
            self.send("display_data", json!({"data": data, "metadata": {}}));
        }
    }

    /// A plot file shown inline (its text form names the file, not the
    /// folder, so that a notebook run elsewhere shows the same).
    fn plot(&self, path: &std::path::Path) {
        match std::fs::read_to_string(path) {
            Ok(svg) => self.send(
                "display_data",
                json!({
                    "data": {
                        "image/svg+xml": svg,
                        "text/plain": format!("plot {}", file_name(path)),
                    },
                    "metadata": {},
                }),
            ),
            Err(e) => self.stream(
                "stderr",
                &format!("cannot show the plot {}: {e}\n", path.display()),
            ),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn open_brackets_and_continuations_are_incomplete() {
        assert_eq!(is_complete("X = [p,")["status"], "incomplete");
        assert_eq!(is_complete("y = 1 + \\")["status"], "incomplete");
        assert_eq!(is_complete("X = [p, -q]")["status"], "complete");
        assert_eq!(is_complete("X = [p, -q]]")["status"], "invalid");
    }

    #[test]
    fn cursors_count_code_points() {
        let code = "θ1 = eps\nth";
        assert_eq!(byte_of(code, Some(1)), "θ".len());
        assert_eq!(byte_of(code, Some(99)), code.len());
        assert_eq!(byte_of(code, None), code.len());
        assert_eq!(chars_before(code, code.len()), 11);
        assert_eq!(word_at("help average to", 8), "average");
        assert_eq!(word_at("help average", 12), "average");
        assert_eq!(word_at("[p, q]", 0), "");
    }

    #[test]
    fn kernel_info_names_the_language() {
        let info = kernel_info();
        assert_eq!(info["language_info"]["file_extension"], ".ordex");
        assert_eq!(info["protocol_version"], PROTOCOL_VERSION);
    }
}
