//! Statement splitter for scripts and multi-line prompt input.
//!
//! Owns the lexical rules that decide where a statement ends: one statement a
//! line, `#` starts a comment (not inside a "double-quoted" path), and a line
//! that ends inside open `(` `[` `{` or with a trailing `\` continues on the
//! next line. It also owns the bracket scanner that the parser reuses for its
//! bracket checks. It must not know the grammar of statements or anything
//! about evaluation; it never fails on text it does not understand, it only
//! cuts it up and maps positions back to lines and columns.

use std::fmt;

use super::ast::Span;
use super::diag;

/// One statement cut out of a source text, with enough information to map a
/// byte offset inside [`SourceStmt::text`] back to a line and column.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SourceStmt {
    /// The statement text: its lines joined with `\n`, comments and the
    /// continuation backslashes removed (everything before them on each line
    /// is kept byte for byte, so columns are unchanged).
    pub text: String,
    /// The 1-based line number of the statement's first line.
    pub line: usize,
    /// Byte offset in `text` where each of the statement's lines starts.
    line_starts: Vec<usize>,
    /// The original lines (comments included, without line terminators).
    lines: Vec<String>,
}

impl SourceStmt {
    /// The 1-based line and 1-based column (counted in characters) in the
    /// original source of the byte `byte_in_text` of [`SourceStmt::text`].
    /// Offsets past the end map to just after the last character.
    pub fn locate(&self, byte_in_text: usize) -> (usize, usize) {
        let byte = diag::floor_boundary(&self.text, byte_in_text);
        let line_idx = match self.line_starts.binary_search(&byte) {
            Ok(idx) => idx,
            Err(idx) => idx.saturating_sub(1),
        };
        let line_start = self.line_starts.get(line_idx).copied().unwrap_or(0);
        let column = self
            .text
            .get(line_start..byte)
            .map_or(0, |s| s.chars().count())
            + 1;
        (self.line + line_idx, column)
    }

    /// The original text of source line `line` (1-based, as returned by
    /// [`SourceStmt::locate`]), comments included; empty if the statement does
    /// not cover that line.
    pub fn line_text(&self, line: usize) -> &str {
        line.checked_sub(self.line)
            .and_then(|idx| self.lines.get(idx))
            .map_or("", String::as_str)
    }

    /// The statement exactly as written: its original lines (comments and
    /// continuation backslashes kept) joined with `\n`. Splitting this text
    /// again gives back this one statement, so it is what a journal or a
    /// saved script should hold.
    pub fn source(&self) -> String {
        self.lines.join("\n")
    }

    /// The 1-based line number of the statement's last line.
    pub fn last_line(&self) -> usize {
        self.line + self.lines.len().saturating_sub(1)
    }

    /// Renders an error at `span` (bytes of [`SourceStmt::text`]) with
    /// `file:line:column`, the original line and a caret line (see
    /// [`diag::render_located`]). A span that crosses lines is shown on the
    /// line where it starts.
    pub fn render(&self, origin: Option<&str>, span: Span, message: &str) -> String {
        let start = diag::floor_boundary(&self.text, span.start);
        let (line, column) = self.locate(start);
        let line_idx = line - self.line;
        let line_start = self.line_starts.get(line_idx).copied().unwrap_or(0);
        let line_end = self
            .line_starts
            .get(line_idx + 1)
            .map_or(self.text.len(), |next| next.saturating_sub(1));
        let end = diag::floor_boundary(&self.text, span.end.clamp(start, line_end));
        let local = Span::new(start - line_start, end - line_start);
        diag::render_located(origin, line, column, self.line_text(line), local, message)
    }
}

/// A bracket problem that stops the splitter, with its place in the source.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct SplitError {
    /// What is wrong.
    pub kind: SplitErrorKind,
    /// 1-based line of the offending bracket.
    pub line: usize,
    /// 1-based column (in characters) of the offending bracket.
    pub column: usize,
    /// The offending line as written.
    pub source_line: String,
    /// The bracket's byte span within `source_line`.
    pub span: Span,
}

/// The kinds of splitter error.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum SplitErrorKind {
    /// An opening bracket that is still open at the end of the input.
    UnclosedBracket {
        /// The opening bracket.
        open: char,
    },
    /// A closing bracket with nothing open.
    UnexpectedClose(char),
    /// A closing bracket of the wrong shape for the innermost open bracket.
    MismatchedClose {
        /// The innermost open bracket.
        open: char,
        /// The closing bracket found.
        close: char,
    },
}

impl fmt::Display for SplitErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SplitErrorKind::UnclosedBracket { open } => write!(f, "`{open}` is never closed"),
            SplitErrorKind::UnexpectedClose(close) => {
                write!(f, "`{close}` has no matching opening bracket")
            }
            SplitErrorKind::MismatchedClose { open, close } => write!(
                f,
                "`{close}` cannot close `{open}` (expected `{}`)",
                closer_of(*open)
            ),
        }
    }
}

impl fmt::Display for SplitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.kind.fmt(f)
    }
}

impl std::error::Error for SplitError {}

impl SplitError {
    /// Renders the error with `file:line:column`, the line and a caret.
    pub fn render(&self, origin: Option<&str>) -> String {
        diag::render_located(
            origin,
            self.line,
            self.column,
            &self.source_line,
            self.span,
            &self.kind.to_string(),
        )
    }
}

/// Cuts a script into statements. Blank and comment-only lines yield nothing;
/// a statement continues over the next line while a bracket is open or when
/// its line ends with `\` (the backslash is removed). A trailing `\` on the
/// last line simply ends the statement.
///
/// Fails on a stray or mismatched closing bracket (at its position) and on a
/// bracket still open at the end of the input (at the bracket's own line and
/// column).
pub fn split_statements(src: &str) -> Result<Vec<SourceStmt>, SplitError> {
    let src = src.strip_prefix('\u{feff}').unwrap_or(src);
    let mut statements = Vec::new();
    let mut stack: Vec<(char, usize)> = Vec::new();
    let mut current: Option<SourceStmt> = None;
    let mut line_offset = 0;
    for (line_idx, raw_line) in src.split('\n').enumerate() {
        let line_no = line_idx + 1;
        let line = raw_line.strip_suffix('\r').unwrap_or(raw_line);
        let scan = scan_line(line, line_offset, &mut stack, usize::MAX)
            .map_err(|fault| fault_error(src, fault))?;
        line_offset += raw_line.len() + 1;
        let code = line.get(..scan.code_end).unwrap_or(line);
        let (kept, continued) = match continuation(code, scan.open_string) {
            Some(before_backslash) => (before_backslash, true),
            None => (code, false),
        };
        let statement = match current.as_mut() {
            Some(statement) => statement,
            None => {
                if kept.trim().is_empty() && !continued && stack.is_empty() {
                    continue;
                }
                current.insert(SourceStmt {
                    text: String::new(),
                    line: line_no,
                    line_starts: Vec::new(),
                    lines: Vec::new(),
                })
            }
        };
        if !statement.lines.is_empty() {
            statement.text.push('\n');
        }
        statement.line_starts.push(statement.text.len());
        statement.text.push_str(kept);
        statement.lines.push(line.to_string());
        if stack.is_empty() && !continued {
            if let Some(done) = current.take() {
                push_nonblank(&mut statements, done);
            }
        }
    }
    if let Some(&(open, at)) = stack.last() {
        let (line, column, source_line, span) = place(src, at, open);
        return Err(SplitError {
            kind: SplitErrorKind::UnclosedBracket { open },
            line,
            column,
            source_line,
            span,
        });
    }
    if let Some(done) = current.take() {
        push_nonblank(&mut statements, done);
    }
    Ok(statements)
}

/// The statements of `src` that can run: all of them, or, when a line is
/// broken (an unclosed bracket, a stray closing one), those before that
/// line, with the error to report after running them.
pub fn split_runnable(src: &str) -> (Vec<SourceStmt>, Option<SplitError>) {
    match split_statements(src) {
        Ok(statements) => (statements, None),
        Err(e) => {
            let before: String = src
                .split_inclusive('\n')
                .take(e.line.saturating_sub(1))
                .collect();
            (split_statements(&before).unwrap_or_default(), Some(e))
        }
    }
}

/// For an interactive prompt's validator: true while `src` has an open
/// bracket or its last line ends with a continuation `\` (comments ignored).
/// A stray or mismatched closing bracket gives false, so that the text is
/// submitted and the error reported.
pub fn needs_more(src: &str) -> bool {
    let mut stack: Vec<(char, usize)> = Vec::new();
    let mut last_continues = false;
    for raw_line in src.split('\n') {
        let line = raw_line.strip_suffix('\r').unwrap_or(raw_line);
        match scan_line(line, 0, &mut stack, usize::MAX) {
            Ok(scan) => {
                let code = line.get(..scan.code_end).unwrap_or(line);
                last_continues = continuation(code, scan.open_string).is_some();
            }
            Err(_) => return false,
        }
    }
    !stack.is_empty() || last_continues
}

/// The result of scanning one line with [`scan_line`].
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) struct LineScan {
    /// Byte index where a `#` comment starts, or the line length.
    pub(super) code_end: usize,
    /// Whether the line ended inside an unterminated "double-quoted" string.
    pub(super) open_string: bool,
    /// The deepest the stack of open brackets got on this line.
    pub(super) deepest: usize,
}

/// A bracket problem found by [`scan_line`]; offsets are `base` plus the byte
/// index in the line.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(super) enum BracketFault {
    /// A closing bracket with nothing open.
    Stray { close: char, at: usize },
    /// A closing bracket that does not match the innermost open one.
    Mismatch { open: char, close: char, at: usize },
    /// An opening bracket that makes the nesting deeper than the limit.
    TooDeep { at: usize },
}

/// Scans one line (without its line terminator) for brackets outside comments
/// and "double-quoted" strings, pushing `(bracket, base + index)` for each
/// opening bracket on `stack` and popping for each closing one. A string ends
/// at its closing quote or at the end of the line.
pub(super) fn scan_line(
    line: &str,
    base: usize,
    stack: &mut Vec<(char, usize)>,
    limit: usize,
) -> Result<LineScan, BracketFault> {
    let mut in_string = false;
    let mut deepest = stack.len();
    for (idx, ch) in line.char_indices() {
        if in_string {
            if ch == '"' {
                in_string = false;
            }
            continue;
        }
        match ch {
            '"' => in_string = true,
            '#' => {
                return Ok(LineScan {
                    code_end: idx,
                    open_string: false,
                    deepest,
                })
            }
            '(' | '[' | '{' => {
                if stack.len() >= limit {
                    return Err(BracketFault::TooDeep { at: base + idx });
                }
                stack.push((ch, base + idx));
                deepest = deepest.max(stack.len());
            }
            ')' | ']' | '}' => match stack.last() {
                None => {
                    return Err(BracketFault::Stray {
                        close: ch,
                        at: base + idx,
                    })
                }
                Some(&(open, _)) if closer_of(open) != ch => {
                    return Err(BracketFault::Mismatch {
                        open,
                        close: ch,
                        at: base + idx,
                    })
                }
                Some(_) => {
                    stack.pop();
                }
            },
            _ => {}
        }
    }
    Ok(LineScan {
        code_end: line.len(),
        open_string: in_string,
        deepest,
    })
}

/// The closing bracket that matches `open`.
pub(super) fn closer_of(open: char) -> char {
    match open {
        '(' => ')',
        '[' => ']',
        '{' => '}',
        other => other,
    }
}

/// If `code` (a line without its comment) ends with a continuation `\`
/// (trailing blanks allowed), the part before the backslash.
fn continuation(code: &str, open_string: bool) -> Option<&str> {
    if open_string {
        return None;
    }
    code.trim_end().strip_suffix('\\')
}

fn push_nonblank(statements: &mut Vec<SourceStmt>, statement: SourceStmt) {
    if !statement.text.trim().is_empty() {
        statements.push(statement);
    }
}

/// Line number, column, line text and in-line span of the bracket `ch` at
/// byte `at` of `src`.
fn place(src: &str, at: usize, ch: char) -> (usize, usize, String, Span) {
    let at = diag::floor_boundary(src, at);
    let before = src.get(..at).unwrap_or("");
    let line_start = before.rfind('\n').map_or(0, |idx| idx + 1);
    let line_no = before.matches('\n').count() + 1;
    let rest = src.get(line_start..).unwrap_or("");
    let line_raw = rest.split('\n').next().unwrap_or("");
    let line = line_raw.strip_suffix('\r').unwrap_or(line_raw);
    let column = before.get(line_start..).map_or(0, |s| s.chars().count()) + 1;
    let local = at - line_start;
    (
        line_no,
        column,
        line.to_string(),
        Span::new(local, local + ch.len_utf8()),
    )
}

fn fault_error(src: &str, fault: BracketFault) -> SplitError {
    let (kind, at, ch) = match fault {
        BracketFault::Stray { close, at } => (SplitErrorKind::UnexpectedClose(close), at, close),
        BracketFault::Mismatch { open, close, at } => {
            (SplitErrorKind::MismatchedClose { open, close }, at, close)
        }
        // The splitter scans without a nesting limit; keep a sensible report anyway.
        BracketFault::TooDeep { at } => (SplitErrorKind::UnclosedBracket { open: '(' }, at, '('),
    };
    let (line, column, source_line, span) = place(src, at, ch);
    SplitError {
        kind,
        line,
        column,
        source_line,
        span,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// (text, first line) of each statement.
    fn split(src: &str) -> Vec<(String, usize)> {
        match split_statements(src) {
            Ok(statements) => statements.into_iter().map(|s| (s.text, s.line)).collect(),
            Err(err) => panic!("unexpected split error {err:?} for {src:?}"),
        }
    }

    fn split_err(src: &str) -> SplitError {
        match split_statements(src) {
            Ok(statements) => panic!("expected an error for {src:?}, got {statements:?}"),
            Err(err) => err,
        }
    }

    #[test]
    fn one_statement_a_line_with_blank_and_comment_lines_skipped() {
        let src = "state q, p\n\n# a comment line\n   \nparam eps # trailing note\nS = q\n";
        assert_eq!(
            split(src),
            vec![
                ("state q, p".to_string(), 1),
                ("param eps ".to_string(), 5),
                ("S = q".to_string(), 6),
            ]
        );
    }

    #[test]
    fn open_brackets_continue_the_statement() {
        let src = "S = eps*[p,\n  -sin(q)] + cos(t)*{1, 2;\n 3, 4}\nnames";
        assert_eq!(
            split(src),
            vec![
                (
                    "S = eps*[p,\n  -sin(q)] + cos(t)*{1, 2;\n 3, 4}".to_string(),
                    1
                ),
                ("names".to_string(), 4),
            ]
        );
    }

    #[test]
    fn comments_inside_a_bracket_continuation_are_removed() {
        let src = "f = [a, # first\n# only a comment\n b]";
        assert_eq!(split(src), vec![("f = [a, \n\n b]".to_string(), 1)]);
    }

    #[test]
    fn backslash_continues_and_is_removed() {
        let src = "x = a + \\\n  b \\   # note\n  + c\nquit";
        assert_eq!(
            split(src),
            vec![
                ("x = a + \n  b \n  + c".to_string(), 1),
                ("quit".to_string(), 4)
            ]
        );
    }

    #[test]
    fn backslash_on_the_last_line_ends_the_statement() {
        assert_eq!(split("x + \\"), vec![("x + ".to_string(), 1)]);
    }

    #[test]
    fn hash_inside_quotes_is_not_a_comment() {
        assert_eq!(
            split("save \"run #2.ordex\" # saved\n"),
            vec![("save \"run #2.ordex\" ".to_string(), 1)]
        );
    }

    #[test]
    fn brackets_inside_quotes_and_comments_are_ignored() {
        assert_eq!(
            split("plot \"a(b.svg\" # (\nquit"),
            vec![
                ("plot \"a(b.svg\" ".to_string(), 1),
                ("quit".to_string(), 2)
            ]
        );
    }

    #[test]
    fn crlf_and_byte_order_mark_are_handled() {
        assert_eq!(
            split("\u{feff}state q\r\nf = [q,\r\n 1]\r\n"),
            vec![("state q".to_string(), 1), ("f = [q,\n 1]".to_string(), 2)]
        );
    }

    #[test]
    fn empty_and_comment_only_sources_yield_nothing() {
        assert!(split("").is_empty());
        assert!(split("\n\n# nothing here\n  # nor here\n").is_empty());
    }

    #[test]
    fn unclosed_bracket_is_reported_at_its_own_line_and_column() {
        let err = split_err("state q\nf = [q,\n  sin(q\n\n");
        assert_eq!(err.kind, SplitErrorKind::UnclosedBracket { open: '(' });
        assert_eq!((err.line, err.column), (3, 6));
        assert_eq!(err.source_line, "  sin(q");
        assert_eq!(err.to_string(), "`(` is never closed");
        let err = split_err("a = 1\nb = {1, 2;\n3, 4");
        assert_eq!(err.kind, SplitErrorKind::UnclosedBracket { open: '{' });
        assert_eq!((err.line, err.column), (2, 5));
    }

    #[test]
    fn stray_and_mismatched_closers_are_errors_at_their_position() {
        let err = split_err("x = 1\ny = 2)\n");
        assert_eq!(err.kind, SplitErrorKind::UnexpectedClose(')'));
        assert_eq!((err.line, err.column), (2, 6));
        let err = split_err("f = (a,\n  b]");
        assert_eq!(
            err.kind,
            SplitErrorKind::MismatchedClose {
                open: '(',
                close: ']'
            }
        );
        assert_eq!((err.line, err.column), (2, 4));
        assert_eq!(err.to_string(), "`]` cannot close `(` (expected `)`)");
    }

    #[test]
    fn split_error_renders_with_a_caret() {
        let err = split_err("f = 1\ng = sin(\u{3b8}\n");
        assert_eq!(err.column, 8);
        assert_eq!(
            err.render(Some("boom.ordex")),
            "boom.ordex:2:8: error: `(` is never closed\n    g = sin(\u{3b8}\n           ^"
        );
    }

    #[test]
    fn locate_maps_text_offsets_back_to_lines_and_char_columns() {
        let statements = match split_statements("# head\n\nS = [\u{3b8},\n    p]\n") {
            Ok(statements) => statements,
            Err(err) => panic!("{err:?}"),
        };
        let statement = &statements[0];
        assert_eq!(statement.line, 3);
        assert_eq!(statement.last_line(), 4);
        assert_eq!(statement.locate(0), (3, 1));
        // The `,` after the two-byte theta is the 7th character of line 3.
        let comma = statement.text.find(',').unwrap_or(0);
        assert_eq!(statement.locate(comma), (3, 7));
        let p = statement.text.find('p').unwrap_or(0);
        assert_eq!(statement.locate(p), (4, 5));
        assert_eq!(statement.locate(10_000), (4, 7));
        assert_eq!(statement.line_text(4), "    p]");
        assert_eq!(statement.line_text(9), "");
        assert_eq!(statement.line_text(0), "");
    }

    #[test]
    fn source_stmt_render_shows_the_original_line() {
        let statements = match split_statements("x = 1\ny = [a, # the entries\n  b +]\n") {
            Ok(statements) => statements,
            Err(err) => panic!("{err:?}"),
        };
        let statement = &statements[1];
        let plus = statement.text.find('+').unwrap_or(0);
        assert_eq!(
            statement.render(Some("s.ordex"), Span::new(plus, plus + 1), "oops"),
            "s.ordex:3:5: error: oops\n      b +]\n        ^"
        );
        // A span that crosses lines is shown on its first line only.
        let open = statement.text.find('[').unwrap_or(0);
        assert_eq!(
            statement.render(None, Span::new(open, statement.text.len()), "list"),
            "2:5: error: list\n    y = [a, # the entries\n        ^^^^"
        );
    }

    #[test]
    fn needs_more_follows_brackets_and_backslashes() {
        let cases = [
            ("x = 1", false),
            ("f = [a,", true),
            ("f = [a,\n b]", false),
            ("f = sin(  # comment (", true),
            ("x = a + \\", true),
            ("x = a + \\  # more", true),
            ("x = a + \\\n b", false),
            ("save \"a(b\"", false),
            ("x)", false),
            ("(]", false),
            ("", false),
        ];
        for (src, expected) in cases {
            assert_eq!(needs_more(src), expected, "needs_more({src:?})");
        }
    }

    proptest::proptest! {
        #[test]
        fn splitting_and_locating_never_panic(src in "[a-z0-9 ()\\[\\]{}+=,#\"\\\\\r\n\u{3b8}]{0,60}") {
            match split_statements(&src) {
                Ok(statements) => {
                    for statement in &statements {
                        proptest::prop_assert!(!statement.text.trim().is_empty());
                        for byte in 0..=statement.text.len() + 1 {
                            let (line, column) = statement.locate(byte);
                            proptest::prop_assert!(line >= statement.line);
                            proptest::prop_assert!(line <= statement.last_line());
                            proptest::prop_assert!(column >= 1);
                            let _ = statement.render(Some("p"), Span::new(byte, byte + 3), "m");
                        }
                    }
                }
                Err(err) => {
                    proptest::prop_assert!(err.line >= 1 && err.column >= 1);
                    let _ = err.render(None);
                }
            }
            let _ = needs_more(&src);
        }
    }

    #[test]
    fn source_keeps_the_lines_as_written_and_splits_back_to_itself() {
        let src = "state q # coordinates\nx = a + \\\n  b\nf = [q, # first\n  1]\r\n\nquit";
        let statements = match split_statements(src) {
            Ok(statements) => statements,
            Err(err) => panic!("{err:?}"),
        };
        let sources: Vec<String> = statements.iter().map(SourceStmt::source).collect();
        assert_eq!(
            sources,
            vec![
                "state q # coordinates",
                "x = a + \\\n  b",
                "f = [q, # first\n  1]",
                "quit"
            ]
        );
        for (statement, source) in statements.iter().zip(&sources) {
            let again = match split_statements(source) {
                Ok(again) => again,
                Err(err) => panic!("{err:?}"),
            };
            let texts: Vec<&str> = again.iter().map(|s| s.text.as_str()).collect();
            assert_eq!(texts, vec![statement.text.as_str()]);
        }
    }

    #[test]
    fn scan_line_reports_depth_limit() {
        let mut stack = Vec::new();
        assert_eq!(
            scan_line("((( ", 10, &mut stack, 2),
            Err(BracketFault::TooDeep { at: 12 })
        );
    }
}
