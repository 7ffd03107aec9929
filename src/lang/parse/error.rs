//! Syntax errors: the public [`ParseError`] with its span and kind, how a
//! kind is worded, and the grammar's error inside nom ([`GrammarError`]),
//! which the entry points turn into a [`ParseError`].

use std::fmt;

use nom::error::{ErrorKind, ParseError as NomParseError};
use nom::{Err as NomErr, IResult};

use super::lex::{describe, next_token, ws};
use super::Parser;
use crate::lang::ast::Span;
use crate::lang::split::closer_of;

/// A syntax error: where it is (byte offsets into the statement text) and what
/// is wrong.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ParseError {
    /// The offending token, or an empty span where something is missing.
    pub span: Span,
    /// What is wrong.
    pub kind: ParseErrorKind,
}

/// The kinds of syntax error. `found` fields are ready to print: a quoted
/// token such as "`x`" or "the end of the line".
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ParseErrorKind {
    /// The statement has no tokens at all.
    EmptyInput,
    /// Something specific was required at this point.
    Expected {
        /// What was expected, e.g. "an expression after `+`".
        what: String,
        /// What was there instead.
        found: String,
    },
    /// A reserved word where a new name is required.
    Reserved(String),
    /// A `(`, `[` or `{` that is never closed (reported at the bracket).
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
    /// Text after a complete statement.
    TrailingInput {
        /// The first unexpected token.
        found: String,
    },
    /// A number literal that breaks the number syntax.
    BadNumber {
        /// The literal as typed.
        text: String,
        /// What is wrong with it.
        reason: &'static str,
    },
    /// An order, degree, depth or budget that does not fit in 64 bits.
    NumberTooLarge {
        /// The literal as typed.
        text: String,
    },
    /// Two operands written next to each other, as in `2x` or `2(x + 1)`.
    ImplicitMultiplication {
        /// The left operand as typed (shortened if long).
        left: String,
        /// The start of the right operand.
        right: String,
    },
    /// A "quoted file name" without its closing quote.
    UnterminatedString,
    /// An optional part of a command given twice.
    Duplicate {
        /// The part, ready to print (e.g. "`depth`").
        clause: String,
    },
    /// Brackets nested deeper than [`MAX_NESTING`].
    NestingTooDeep {
        /// The limit.
        limit: usize,
    },
    /// An expression deeper than [`MAX_EXPR_DEPTH`].
    ExpressionTooDeep {
        /// The limit.
        limit: usize,
    },
    /// A flat sum of more than [`MAX_SUM_TERMS`] terms.
    SumTooLong {
        /// The limit.
        limit: usize,
    },
}

/// The ASCII names for a Greek letter (the ones LaTeX output shows as
/// that letter), for the hint on a name that is not ASCII.
pub(super) fn greek_names(c: char) -> Option<&'static str> {
    Some(match c {
        'α' => "`alpha` or `alp`",
        'β' => "`beta` or `bet`",
        'γ' => "`gamma` or `gam`",
        'δ' => "`delta` or `del`",
        'ε' | 'ϵ' => "`eps`",
        'ζ' => "`zeta`",
        'η' => "`eta`",
        'θ' | 'ϑ' => "`theta` or `th`",
        'κ' => "`kappa` or `kap`",
        'λ' => "`lambda` or `lam`",
        'μ' => "`mu`",
        'ν' => "`nu`",
        'ξ' => "`xi`",
        'π' => "`pi` (the constant)",
        'ρ' => "`rho`",
        'σ' => "`sigma` or `sig`",
        'τ' => "`tau`",
        'φ' | 'ϕ' => "`phi`",
        'χ' => "`chi`",
        'ψ' => "`psi`",
        'ω' => "`omega` or `om`",
        'Ω' => "`Omega` or `Om`",
        _ => return None,
    })
}

/// A hint for a token that starts with a letter outside ASCII (`θ`):
/// names are ASCII, and a Greek letter has a usual spelling.
pub(super) fn non_ascii_hint(found: &str) -> Option<String> {
    let c = found.strip_prefix('`')?.chars().next()?;
    if c.is_ascii() || !c.is_alphabetic() {
        return None;
    }
    Some(match greek_names(c) {
        Some(names) => format!(
            " (names are ASCII letters, digits and `_`: for `{c}` write {names}; LaTeX output shows it as the letter)"
        ),
        None => format!(" (names are ASCII letters, digits and `_`: `{c}` is not one of them)"),
    })
}

impl fmt::Display for ParseErrorKind {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ParseErrorKind::EmptyInput => write!(f, "empty statement"),
            ParseErrorKind::Expected { what, found } => {
                write!(f, "expected {what}, found {found}")?;
                match non_ascii_hint(found) {
                    Some(hint) => write!(f, "{hint}"),
                    None => Ok(()),
                }
            }
            ParseErrorKind::Reserved(word) => {
                write!(
                    f,
                    "`{word}` is a reserved word and cannot be used as a name"
                )
            }
            ParseErrorKind::UnclosedBracket { open } => write!(f, "`{open}` is never closed"),
            ParseErrorKind::UnexpectedClose(close) => {
                write!(f, "`{close}` has no matching opening bracket")
            }
            ParseErrorKind::MismatchedClose { open, close } => write!(
                f,
                "`{close}` cannot close `{open}` (expected `{}`)",
                closer_of(*open)
            ),
            ParseErrorKind::TrailingInput { found } => {
                write!(f, "unexpected {found} after the end of the statement")
            }
            ParseErrorKind::BadNumber { text, reason } => {
                write!(f, "malformed number `{text}`: {reason}")
            }
            ParseErrorKind::NumberTooLarge { text } => {
                write!(f, "`{text}` is too large (at most {})", u64::MAX)
            }
            ParseErrorKind::ImplicitMultiplication { left, right } => write!(
                f,
                "missing `*` between `{left}` and `{right}`: implicit multiplication is not allowed"
            ),
            ParseErrorKind::UnterminatedString => {
                write!(f, "quoted file name without its closing `\"`")
            }
            ParseErrorKind::Duplicate { clause } => write!(f, "{clause} is given more than once"),
            ParseErrorKind::NestingTooDeep { limit } => {
                write!(f, "brackets are nested more than {limit} deep")
            }
            ParseErrorKind::ExpressionTooDeep { limit } => write!(
                f,
                "expression is more than {limit} levels deep; split it into named parts"
            ),
            ParseErrorKind::SumTooLong { limit } => write!(
                f,
                "a sum of more than {limit} terms in one expression; split it into named parts"
            ),
        }
    }
}

impl fmt::Display for ParseError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.kind.fmt(f)
    }
}

impl std::error::Error for ParseError {}

/// The parser's error inside nom: the position as the length of the input
/// left (so that no reference to the text is needed), the length of the
/// offending token, and the kind. `kind` is `None` for nom's own recoverable
/// errors, which only mean "this alternative does not start here".
#[derive(Debug)]
pub(super) struct GrammarError {
    pub(super) remaining: usize,
    pub(super) len: usize,
    pub(super) kind: Option<Box<ParseErrorKind>>,
}

impl<'a> NomParseError<&'a str> for GrammarError {
    fn from_error_kind(input: &'a str, _kind: ErrorKind) -> Self {
        GrammarError {
            remaining: input.len(),
            len: 0,
            kind: None,
        }
    }

    fn append(_input: &'a str, _kind: ErrorKind, other: Self) -> Self {
        other
    }

    /// Of two failed alternatives, keep the one that got furthest.
    fn or(self, other: Self) -> Self {
        if other.remaining < self.remaining {
            other
        } else {
            self
        }
    }
}

pub(super) type GrammarResult<'a, T> = IResult<&'a str, T, GrammarError>;

/// A recoverable error: no expression starts at `input`.
pub(super) fn no_expr<T>(input: &str) -> GrammarResult<'_, T> {
    Err(NomErr::Error(GrammarError {
        remaining: input.len(),
        len: 0,
        kind: None,
    }))
}

impl<'a> Parser<'a> {
    pub(super) fn fail<T>(&self, span: Span, kind: ParseErrorKind) -> GrammarResult<'a, T> {
        Err(NomErr::Failure(GrammarError {
            remaining: self.src.len().saturating_sub(span.start),
            len: span.end.saturating_sub(span.start),
            kind: Some(Box::new(kind)),
        }))
    }

    pub(super) fn fail_at<T>(
        &self,
        input: &str,
        len: usize,
        kind: ParseErrorKind,
    ) -> GrammarResult<'a, T> {
        let start = self.off(input);
        self.fail(Span::new(start, start + len), kind)
    }

    /// A failure "expected `what`" at the next token after whitespace.
    pub(super) fn expected<T>(&self, input: &str, what: &str) -> GrammarResult<'a, T> {
        let at = ws(input);
        let token = next_token(at);
        self.fail_at(
            at,
            token.len(),
            ParseErrorKind::Expected {
                what: what.to_string(),
                found: describe(token),
            },
        )
    }

    /// Turns "nothing of this kind starts here" into a failure naming `what`.
    pub(super) fn require<T>(
        &self,
        result: GrammarResult<'a, T>,
        input: &str,
        what: &str,
    ) -> GrammarResult<'a, T> {
        match result {
            Err(NomErr::Error(_)) => self.expected(input, what),
            other => other,
        }
    }

    pub(super) fn convert(&self, err: NomErr<GrammarError>) -> ParseError {
        let grammar_error = match err {
            NomErr::Error(grammar_error) | NomErr::Failure(grammar_error) => grammar_error,
            NomErr::Incomplete(_) => GrammarError {
                remaining: 0,
                len: 0,
                kind: None,
            },
        };
        let start = self.src.len().saturating_sub(grammar_error.remaining);
        let kind = grammar_error.kind.map(|kind| *kind).unwrap_or_else(|| {
            let at = ws(self.src.get(start..).unwrap_or(""));
            ParseErrorKind::Expected {
                what: "a statement or an expression".to_string(),
                found: describe(next_token(at)),
            }
        });
        ParseError {
            span: Span::new(start, start + grammar_error.len),
            kind,
        }
    }

    pub(super) fn duplicate<T>(&self, span: Span, clause: &str) -> GrammarResult<'a, T> {
        self.fail(
            span,
            ParseErrorKind::Duplicate {
                clause: clause.to_string(),
            },
        )
    }
}
