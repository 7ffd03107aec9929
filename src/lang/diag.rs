//! Error rendering for the command language: `file:line:column: error: ...`,
//! the offending line and a caret line under the span.
//!
//! Owns the layout of a located error message and the mapping from byte
//! offsets to 1-based character columns. It must not know about colour (the
//! caller decides), about terminals, or about the parser's error kinds: it
//! takes a span and an already formatted message.

use super::ast::Span;

/// Indentation of the quoted source line and the caret line.
const INDENT: &str = "    ";

/// The caret line for `span` (byte offsets into `source_line`): blanks up to
/// the span's first character (tabs are kept so the carets line up under a
/// tab-indented line), then one `^` per character of the span, at least one.
/// The span is clamped to the line; a span past the end puts the caret just
/// after the last character. No trailing newline.
pub fn render_caret(source_line: &str, span: Span) -> String {
    let start = floor_boundary(source_line, span.start);
    let line_from = source_line
        .get(..start)
        .and_then(|before| before.rfind('\n'))
        .map_or(0, |idx| idx + 1);
    let line_to = source_line
        .get(start..)
        .and_then(|after| after.find('\n'))
        .map_or(source_line.len(), |idx| start + idx);
    let end = floor_boundary(source_line, span.end.clamp(start, line_to));
    let mut caret = String::new();
    for ch in source_line.get(line_from..start).unwrap_or("").chars() {
        caret.push(if ch == '\t' { '\t' } else { ' ' });
    }
    let width = source_line.get(start..end).map_or(0, |s| s.chars().count());
    caret.push_str(&"^".repeat(width.max(1)));
    caret
}

/// A full error report for a span inside a statement `text` whose first line
/// is line `line_no` (1-based) of `origin` and starts `col_offset` characters
/// into that line:
///
/// ```text
/// boom.ordex:3:9: error: expected an expression after `+`
///     x = a +
///             ^
/// ```
///
/// Without an origin the header is `3:9: error: ...`. A span that crosses
/// lines is reported on the line where it starts. Columns count characters,
/// not bytes. No trailing newline.
pub fn render_error(
    origin: Option<&str>,
    line_no: usize,
    col_offset: usize,
    text: &str,
    span: Span,
    message: &str,
) -> String {
    let start = floor_boundary(text, span.start);
    let before = text.get(..start).unwrap_or("");
    let line_start = before.rfind('\n').map_or(0, |idx| idx + 1);
    let line_idx = before.matches('\n').count();
    let line_end = text
        .get(start..)
        .and_then(|after| after.find('\n'))
        .map_or(text.len(), |idx| start + idx);
    let raw_line = text.get(line_start..line_end).unwrap_or("");
    let source_line = raw_line.strip_suffix('\r').unwrap_or(raw_line);
    let end = span.end.clamp(start, line_end);
    let local = Span::new(start - line_start, end - line_start);
    let mut column = before.get(line_start..).map_or(0, |s| s.chars().count()) + 1;
    if line_idx == 0 {
        column += col_offset;
    }
    render_located(
        origin,
        line_no + line_idx,
        column,
        source_line,
        local,
        message,
    )
}

/// The report layout shared by [`render_error`], the splitter and callers
/// that already know the line and column: a header
/// `origin:line:column: error: message`, then `source_line` and the caret line
/// for `span_in_line` (byte offsets into `source_line`), both indented.
pub fn render_located(
    origin: Option<&str>,
    line_no: usize,
    column: usize,
    source_line: &str,
    span_in_line: Span,
    message: &str,
) -> String {
    let header = match origin {
        Some(origin) => format!("{origin}:{line_no}:{column}: error: {message}"),
        None => format!("{line_no}:{column}: error: {message}"),
    };
    format!(
        "{header}\n{INDENT}{source_line}\n{INDENT}{}",
        render_caret(source_line, span_in_line)
    )
}

/// The 0-based line index and the 1-based character column of byte `byte` in
/// `text` (clamped to the text and to a character boundary).
pub fn line_col(text: &str, byte: usize) -> (usize, usize) {
    let byte = floor_boundary(text, byte);
    let before = text.get(..byte).unwrap_or("");
    let line_start = before.rfind('\n').map_or(0, |idx| idx + 1);
    let column = before.get(line_start..).map_or(0, |s| s.chars().count()) + 1;
    (before.matches('\n').count(), column)
}

/// `byte` clamped to `text.len()` and moved back to a character boundary.
pub(super) fn floor_boundary(text: &str, byte: usize) -> usize {
    let mut byte = byte.min(text.len());
    while byte > 0 && !text.is_char_boundary(byte) {
        byte -= 1;
    }
    byte
}

/// The candidate nearest to a misspelt `word` (at most two edits, fewer
/// than its length, never the word itself), for "did you mean" hints.
pub fn nearest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let mut best: Option<(usize, &str)> = None;
    for c in candidates {
        let d = super::session::edit_distance(word, c);
        if d > 0 && d <= 2 && d < word.len().max(2) && best.is_none_or(|(bd, _)| d < bd) {
            best = Some((d, c));
        }
    }
    best.map(|(_, c)| c)
}

/// For a statement that did not parse: when its first word is an unknown
/// name close to a command or statement word (`averge S to 2 in eps`), the
/// word's span and a message with the suggestion.
pub fn misspelt_command(text: &str, is_known: impl Fn(&str) -> bool) -> Option<(Span, String)> {
    let start = text.len() - text.trim_start().len();
    let rest = &text[start..];
    let len = rest
        .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .unwrap_or(rest.len());
    let word = &rest[..len];
    if word.is_empty() || word.starts_with(|c: char| c.is_ascii_digit()) || is_known(word) {
        return None;
    }
    if super::parse::is_reserved(word) {
        return None;
    }
    let words = super::parse::COMMAND_WORDS
        .iter()
        .chain(super::parse::STATEMENT_WORDS)
        .copied();
    let hint = nearest(word, words)?;
    Some((
        Span::new(start, start + len),
        format!("unknown command `{word}` (did you mean `{hint}`?)"),
    ))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn caret_lines() {
        let cases: &[(&str, Span, &str)] = &[
            ("x + y", Span::new(2, 3), "  ^"),
            ("x + y", Span::new(0, 5), "^^^^^"),
            // An empty span still gets one caret.
            ("x + y", Span::new(4, 4), "    ^"),
            // Past the end: just after the last character.
            ("x +", Span::new(3, 3), "   ^"),
            ("x +", Span::new(40, 50), "   ^"),
            // Columns count characters: theta is two bytes.
            ("\u{3b8} + q", Span::new(5, 6), "    ^"),
            // A span inside a multi-byte character is moved to its start.
            ("\u{3b8}\u{3b8}x", Span::new(3, 4), " ^"),
            // Tabs are kept so the caret lines up.
            ("\tx = 2y", Span::new(6, 7), "\t     ^"),
            // A span crossing a line break stops at the end of its line.
            ("[a,\n b]", Span::new(0, 7), "^^^"),
        ];
        for (line, span, expected) in cases {
            assert_eq!(
                render_caret(line, *span),
                *expected,
                "render_caret({line:?}, {span:?})"
            );
        }
    }

    #[test]
    fn error_report_with_file_line_and_column() {
        let report = render_error(
            Some("boom.ordex"),
            3,
            0,
            "x = a +",
            Span::new(7, 7),
            "expected an expression after `+`",
        );
        assert_eq!(
            report,
            "boom.ordex:3:8: error: expected an expression after `+`\n    x = a +\n           ^"
        );
    }

    #[test]
    fn error_report_on_a_later_line_of_the_statement() {
        let text = "S = [p,\n  -g*sin(\u{3b8}) q]";
        let q = text.rfind('q').unwrap_or(0);
        let report = render_error(None, 10, 4, text, Span::new(q, q + 1), "bad");
        // Line 11, column counted in characters of that line (no offset there).
        let expected = format!(
            "11:13: error: bad\n    {}\n    {}^",
            "  -g*sin(\u{3b8}) q]",
            " ".repeat(12)
        );
        assert_eq!(report, expected);
    }

    #[test]
    fn error_report_with_column_offset_on_the_first_line() {
        let report = render_error(None, 1, 6, "x = 2y", Span::new(5, 6), "msg");
        assert_eq!(report, "1:12: error: msg\n    x = 2y\n         ^");
    }

    #[test]
    fn error_report_with_span_crossing_lines_marks_the_first_line() {
        let report = render_error(Some("f"), 1, 0, "f = (a\r\n+ b", Span::new(4, 10), "m");
        assert_eq!(report, "f:1:5: error: m\n    f = (a\n        ^^");
    }

    proptest::proptest! {
        #[test]
        fn rendering_never_panics(
            text in "[a-z \t\r\n\u{3b8}\u{4e2d}]{0,30}",
            start in 0usize..40,
            len in 0usize..40,
            offset in 0usize..5,
        ) {
            let span = Span::new(start, start + len);
            let caret = render_caret(&text, span);
            proptest::prop_assert!(caret.ends_with('^'));
            let report = render_error(Some("f"), 1, offset, &text, span, "m");
            proptest::prop_assert_eq!(report.lines().count(), 3);
            let (_, column) = line_col(&text, start);
            proptest::prop_assert!(column >= 1);
        }
    }

    #[test]
    fn misspelt_command_words_get_a_suggestion() {
        let (span, msg) = misspelt_command("averge S to 2 in eps", |_| false).unwrap();
        assert_eq!(span, Span::new(0, 6));
        assert_eq!(msg, "unknown command `averge` (did you mean `average`?)");
        assert!(misspelt_command("  chek x == 1", |_| false).is_some());
        // A known name or a far word gets none.
        assert!(misspelt_command("averge S", |w| w == "averge").is_none());
        assert!(misspelt_command("zzzzzz + ", |_| false).is_none());
    }

    #[test]
    fn line_col_counts_characters() {
        assert_eq!(line_col("ab\n\u{3b8}cd", 5), (1, 2));
        assert_eq!(line_col("ab", 99), (0, 3));
        assert_eq!(line_col("", 0), (0, 1));
    }
}
