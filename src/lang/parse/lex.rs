//! Tokens: whitespace and comments, identifiers, number literals, whole
//! numbers, keywords, names, file names and the end of a statement.

use nom::{
    bytes::complete::take_while, character::complete::satisfy, combinator::recognize,
    sequence::pair,
};

use super::error::{GrammarResult, ParseErrorKind};
use super::words::is_reserved;
use super::Parser;
use crate::lang::ast::{Ident, PathArg, Span, Spanned};

pub(super) fn is_ident_start(ch: char) -> bool {
    ch.is_ascii_alphabetic() || ch == '_'
}

pub(super) fn is_ident_char(ch: char) -> bool {
    ch.is_ascii_alphanumeric() || ch == '_'
}

/// An identifier: an ASCII letter or `_`, then letters, digits and `_`.
pub(super) fn ident(input: &str) -> GrammarResult<'_, &str> {
    recognize(pair(satisfy(is_ident_start), take_while(is_ident_char)))(input)
}

/// Skips whitespace (newlines included), `# comments` to the end of their
/// line, and a `\` that ends a line.
pub(super) fn ws(mut input: &str) -> &str {
    loop {
        let trimmed = input.trim_start();
        if let Some(comment) = trimmed.strip_prefix('#') {
            input = comment.find('\n').map_or("", |idx| &comment[idx..]);
        } else if let Some(after) = trimmed.strip_prefix('\\') {
            let blank = after.trim_start_matches([' ', '\t', '\r']);
            if blank.is_empty() || blank.starts_with('\n') || blank.starts_with('#') {
                input = blank;
            } else {
                return trimmed;
            }
        } else {
            return trimmed;
        }
    }
}

/// `^` or `**`.
pub(super) fn starts_power(input: &str) -> bool {
    input.starts_with('^') || input.starts_with("**")
}

/// `=` that is not the start of `==`.
pub(super) fn single_eq(input: &str) -> bool {
    input.starts_with('=') && !input.starts_with("==")
}

pub(super) fn starts_number(input: &str) -> bool {
    let mut chars = input.chars();
    match chars.next() {
        Some(ch) if ch.is_ascii_digit() => true,
        Some('.') => chars.next().is_some_and(|ch| ch.is_ascii_digit()),
        _ => false,
    }
}

pub(super) fn count_digits(input: &str, from: usize) -> usize {
    input.get(from..).map_or(0, |rest| {
        rest.bytes().take_while(u8::is_ascii_digit).count()
    })
}

/// The token at the start of `input` (already past whitespace), for messages:
/// a word, a number-like run, `==`, `**`, or one character; empty at the end.
pub(super) fn next_token(input: &str) -> &str {
    if let Ok((_, word)) = ident(input) {
        return word;
    }
    if starts_number(input) {
        let len = input
            .find(|ch: char| !(is_ident_char(ch) || ch == '.'))
            .unwrap_or(input.len());
        return input.get(..len).unwrap_or(input);
    }
    if input.starts_with("==") || input.starts_with("**") {
        return input.get(..2).unwrap_or(input);
    }
    input
        .chars()
        .next()
        .and_then(|ch| input.get(..ch.len_utf8()))
        .unwrap_or("")
}

/// How a token is named in a message.
pub(super) fn describe(token: &str) -> String {
    if token.is_empty() {
        "the end of the line".to_string()
    } else {
        format!("`{token}`")
    }
}

impl<'a> Parser<'a> {
    pub(super) fn off(&self, input: &str) -> usize {
        self.src.len().saturating_sub(input.len())
    }

    /// Shortened source text of `span` for messages.
    pub(super) fn snippet(&self, span: Span) -> String {
        let text = self.src.get(span.start..span.end).unwrap_or("");
        let n_chars = text.chars().count();
        if n_chars <= 24 {
            text.to_string()
        } else {
            let tail: String = text.chars().skip(n_chars - 23).collect();
            format!("\u{2026}{tail}")
        }
    }

    /// A number literal (`input` starts with a digit or `.digit`).
    pub(super) fn number(&self, input: &'a str) -> GrammarResult<'a, &'a str> {
        let bytes = input.as_bytes();
        let text_to = |end: usize| input.get(..end).unwrap_or(input).to_string();
        let mut pos = count_digits(input, 0);
        if bytes.get(pos) == Some(&b'.') {
            let n_frac = count_digits(input, pos + 1);
            if n_frac == 0 {
                return self.fail_at(
                    input,
                    pos + 1,
                    ParseErrorKind::BadNumber {
                        text: text_to(pos + 1),
                        reason: "digits must follow the decimal point",
                    },
                );
            }
            pos += 1 + n_frac;
        }
        if matches!(bytes.get(pos), Some(b'e' | b'E')) {
            let mut exp_at = pos + 1;
            if matches!(bytes.get(exp_at), Some(b'+' | b'-')) {
                exp_at += 1;
            }
            let n_exp = count_digits(input, exp_at);
            if n_exp > 0 {
                pos = exp_at + n_exp;
            } else if !bytes
                .get(pos + 1)
                .is_some_and(|byte| is_ident_char(char::from(*byte)))
            {
                // `1e`, `1e-`: an exponent was started; `2eps` is left to the
                // implicit multiplication check.
                return self.fail_at(
                    input,
                    exp_at,
                    ParseErrorKind::BadNumber {
                        text: text_to(exp_at),
                        reason: "the exponent has no digits",
                    },
                );
            }
        }
        if bytes.get(pos) == Some(&b'.') {
            let run = pos
                + input.get(pos..).map_or(0, |rest| {
                    rest.bytes()
                        .take_while(|byte| byte.is_ascii_digit() || *byte == b'.')
                        .count()
                });
            return self.fail_at(
                input,
                run,
                ParseErrorKind::BadNumber {
                    text: text_to(run),
                    reason: "a number has at most one decimal point",
                },
            );
        }
        let (text, rest) = input.split_at(pos.min(input.len()));
        Ok((rest, text))
    }

    /// A non-negative integer (orders, degrees, depths, budgets).
    pub(super) fn uint(&self, input: &'a str, what: &str) -> GrammarResult<'a, Spanned<u64>> {
        let at = ws(input);
        if !at.starts_with(|ch: char| ch.is_ascii_digit()) {
            return self.expected(at, what);
        }
        let (rest, text) = self.number(at)?;
        let start = self.off(at);
        let span = Span::new(start, self.off(rest));
        let whole = !text.is_empty() && text.bytes().all(|byte| byte.is_ascii_digit());
        if !whole || rest.starts_with(is_ident_char) {
            let token = next_token(at);
            return self.fail_at(
                at,
                token.len(),
                ParseErrorKind::Expected {
                    what: what.to_string(),
                    found: describe(token),
                },
            );
        }
        match text.parse::<u64>() {
            Ok(value) => Ok((rest, Spanned { value, span })),
            Err(_) => self.fail(
                span,
                ParseErrorKind::NumberTooLarge {
                    text: text.to_string(),
                },
            ),
        }
    }

    /// The keyword `word` after whitespace; returns the input after it.
    pub(super) fn keyword(&self, input: &'a str, word: &str) -> Option<&'a str> {
        match ident(ws(input)) {
            Ok((rest, found)) if found == word => Some(rest),
            _ => None,
        }
    }

    /// A new name: an identifier that is not reserved.
    pub(super) fn name(&self, input: &'a str, what: &str) -> GrammarResult<'a, Ident> {
        let at = ws(input);
        match ident(at) {
            Ok((rest, word)) => {
                let span = Span::new(self.off(at), self.off(rest));
                if is_reserved(word) {
                    self.fail(span, ParseErrorKind::Reserved(word.to_string()))
                } else {
                    Ok((rest, Ident::new(word, span)))
                }
            }
            Err(_) => self.expected(at, what),
        }
    }

    /// Any identifier, reserved words included (help topics, format words).
    pub(super) fn word(&self, input: &'a str, what: &str) -> GrammarResult<'a, Ident> {
        let at = ws(input);
        match ident(at) {
            Ok((rest, word)) => Ok((
                rest,
                Ident::new(word, Span::new(self.off(at), self.off(rest))),
            )),
            Err(_) => self.expected(at, what),
        }
    }

    /// A file name: a bare token (no blanks, brackets, quotes or `#`) or a
    /// "double-quoted string" on one line.
    pub(super) fn path(&self, input: &'a str, what: &str) -> GrammarResult<'a, PathArg> {
        let at = ws(input);
        let start = self.off(at);
        if let Some(inner) = at.strip_prefix('"') {
            let line = inner.split('\n').next().unwrap_or("");
            let Some(close) = line.find('"') else {
                return self.fail_at(at, 1, ParseErrorKind::UnterminatedString);
            };
            let path = line.get(..close).unwrap_or("");
            let rest = inner.get(close + 1..).unwrap_or("");
            if path.is_empty() {
                return self.fail_at(
                    at,
                    2,
                    ParseErrorKind::Expected {
                        what: what.to_string(),
                        found: "an empty name `\"\"`".to_string(),
                    },
                );
            }
            return Ok((
                rest,
                PathArg {
                    path: path.to_string(),
                    span: Span::new(start, self.off(rest)),
                },
            ));
        }
        let len = at
            .find(|ch: char| ch.is_whitespace() || "#\"()[]{}".contains(ch))
            .unwrap_or(at.len());
        if len == 0 {
            return self.expected(at, what);
        }
        let (path, rest) = at.split_at(len);
        Ok((
            rest,
            PathArg {
                path: path.to_string(),
                span: Span::new(start, start + len),
            },
        ))
    }

    /// Succeeds at the end of the text (after whitespace and comments);
    /// otherwise "expected `what`" or, without `what`, trailing input.
    pub(super) fn end(&self, input: &'a str, what: Option<&str>) -> GrammarResult<'a, ()> {
        let at = ws(input);
        if at.is_empty() {
            return Ok((at, ()));
        }
        match what {
            Some(what) => self.expected(at, what),
            None => {
                let token = next_token(at);
                self.fail_at(
                    at,
                    token.len(),
                    ParseErrorKind::TrailingInput {
                        found: describe(token),
                    },
                )
            }
        }
    }

    /// The end of a statement that ends with an expression.
    pub(super) fn end_of_expr(&self, input: &'a str) -> GrammarResult<'a, ()> {
        if ws(input).starts_with("==") {
            return self.expected(
                input,
                "the end of the line (to compare two sides, write `check A == B`)",
            );
        }
        self.end(input, Some("an operator or the end of the line"))
    }
}
