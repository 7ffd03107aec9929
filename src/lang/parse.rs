//! Parser of the command language: the text of one statement to the syntax
//! tree of `super::ast`, or a [`ParseError`] with a span and what was expected.
//!
//! Owns the grammar (written with nom 7 and a custom error type), the reserved
//! words and the parse limits (bracket nesting, expression depth). It must not
//! know what names refer to, the kinds of values, numbers' exact values or
//! anything about evaluation, and it knows nothing of files and line numbers:
//! cutting a script into statements is `super::split`, showing an error with a
//! caret is `super::diag`.
//!
//! Grammar (whitespace, newlines and `# comments` separate tokens):
//!
//! ```text
//! stmt     := state|param|input NAME {, NAME}   | check expr == expr
//!           | show expr as WORD | save PATH | run PATH | names | forget NAME
//!           | help [WORD] | set budget INT | quit | command
//!           | NAME = (command | expr) | NAME {, NAME} = command | expr
//! expr     := product {(+|-) product}            left associative
//! product  := unary {(*|/) unary}                left associative
//! unary    := {-} power
//! power    := postfix [(^|**) {-} power]         right associative
//! postfix  := atom {( args )}                    application binds tightest
//! atom     := NUMBER | NAME | NAME ( args ) | ( expr ) | [ expr {, expr} ]
//!           | { expr {, expr} {; expr {, expr}} }
//! args     := arg {, arg};  arg := NAME = expr | expr
//! NUMBER   := DIGITS [. DIGITS] [(e|E) [+|-] DIGITS] | . DIGITS [...]   kept as text
//! PATH     := "any text on one line" | a run without blanks, quotes, brackets or #
//! ```
//!
//! Commands (the optional parts after the required ones may come in any order):
//!
//! ```text
//! flow E [on E] to N            magnus E to N [over E]
//! average E to N in NAME [strobo|classic] [depth N] [with transform]
//! carleman E degree N           stability E at q = v, ... [with a = v, ...]
//! simulate E from q = v, ... for E [with a = v, ...] [plot PATH]
//! compare E with E from q = v, ... for E [with ...] sweep NAME = E, ... [tol E] [plot PATH]
//! ```

use std::fmt;

use nom::{
    bytes::complete::take_while,
    character::complete::satisfy,
    combinator::recognize,
    error::{ErrorKind, ParseError as NomParseError},
    sequence::pair,
    Err as NomErr, IResult,
};

use super::ast::{
    Arg, Assign, BinOp, Command, CommandKind, Expr, ExprKind, FuncDecl, Ident, PathArg, PhasePlot,
    Rhs, Span, Spanned, Stmt, StmtKind,
};
use super::split::{closer_of, scan_line, BracketFault};

/// The deepest bracket nesting accepted in one statement.
pub const MAX_NESTING: usize = 256;

/// The deepest syntax tree accepted for one expression (a chain of `n`
/// operators is `n` levels deep), so that later recursive passes stay
/// within the stack.
pub const MAX_EXPR_DEPTH: usize = 1000;

/// The most terms of one flat sum (`a + b - c …`): a long sum becomes a
/// balanced tree and so counts as nesting only by its logarithm, but each
/// term costs memory before the term budget can see it.
pub const MAX_SUM_TERMS: usize = 1_000_000;

/// Flat sums of at most this many terms keep the left-leaning tree they
/// are written as (their errors name the operators as written).
const SHORT_SUM: usize = 64;

/// Words that cannot be used as names. `t` and `pi` are still values in
/// expressions, and `sin`, `cos`, `exp` are still called as functions.
pub const RESERVED_WORDS: &[&str] = &[
    "t",
    "pi",
    "sin",
    "cos",
    "exp",
    "state",
    "param",
    "input",
    "func",
    "flow",
    "on",
    "to",
    "magnus",
    "over",
    "average",
    "in",
    "strobo",
    "classic",
    "depth",
    "with",
    "transform",
    "carleman",
    "degree",
    "change",
    "by",
    "simulate",
    "from",
    "for",
    "plot",
    "compare",
    "sweep",
    "tol",
    "stability",
    "at",
    "equilibria",
    "near",
    "check",
    "show",
    "as",
    "save",
    "run",
    "names",
    "forget",
    "help",
    "set",
    "budget",
    "quit",
];

/// The words that start a series or numeric command.
pub const COMMAND_WORDS: &[&str] = &[
    "flow",
    "magnus",
    "average",
    "carleman",
    "change",
    "simulate",
    "compare",
    "stability",
    "equilibria",
];

/// The words that start the other statements.
pub const STATEMENT_WORDS: &[&str] = &[
    "state", "param", "input", "func", "check", "show", "save", "run", "names", "forget", "help",
    "set", "quit",
];

/// Whether `word` is reserved (see [`RESERVED_WORDS`]).
pub fn is_reserved(word: &str) -> bool {
    RESERVED_WORDS.contains(&word)
}

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
fn greek_names(c: char) -> Option<&'static str> {
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
fn non_ascii_hint(found: &str) -> Option<String> {
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

/// Parses one statement. The whole text must be consumed; it may span lines
/// (as handed out by `super::split`), and `# comments` and `\` line
/// continuations inside it are skipped as whitespace.
pub fn parse_stmt(text: &str) -> Result<Stmt, ParseError> {
    let nesting = check_brackets(text)?;
    with_stack_for(nesting, || {
        let parser = Parser { src: text };
        match parser.statement(text) {
            Ok((_, stmt)) => Ok(stmt),
            Err(err) => Err(parser.convert(err)),
        }
    })
}

/// Parses a text that must be exactly one expression (used for expressions
/// that arrive on their own, e.g. from tests or tools).
pub fn parse_expr(text: &str) -> Result<Expr, ParseError> {
    let nesting = check_brackets(text)?;
    with_stack_for(nesting, || {
        let parser = Parser { src: text };
        let result = parser
            .require(parser.expr(text), text, "an expression")
            .and_then(|(rest, node)| {
                parser.end_of_expr(rest)?;
                Ok((rest, node))
            });
        match result {
            Ok((_, node)) => Ok(*node.expr),
            Err(err) => Err(parser.convert(err)),
        }
    })
}

/// Bracket nesting up to which a statement is parsed on the caller's stack
/// (a few kilobytes per level even in unoptimised builds).
const INLINE_NESTING: usize = 24;

/// Stack size of the helper thread that parses more deeply nested statements.
const DEEP_STACK_BYTES: usize = 16 << 20;

/// Runs `parse` on the caller's stack for shallow text, and on a scoped
/// helper thread with a large stack when the brackets nest deeper than
/// [`INLINE_NESTING`], so that no caller (a test thread, an unoptimised
/// build) can run out of stack on [`MAX_NESTING`] levels. If the thread
/// cannot be started the parse runs inline.
fn with_stack_for<T: Send>(nesting: usize, parse: impl Fn() -> T + Sync) -> T {
    if nesting <= INLINE_NESTING {
        return parse();
    }
    std::thread::scope(|scope| {
        let spawned = std::thread::Builder::new()
            .name("ordex-parse".to_string())
            .stack_size(DEEP_STACK_BYTES)
            .spawn_scoped(scope, &parse);
        match spawned {
            Ok(handle) => match handle.join() {
                Ok(result) => result,
                // Only a bug in the parser can get here; pass it on unchanged.
                Err(payload) => std::panic::resume_unwind(payload),
            },
            Err(_) => parse(),
        }
    })
}

/// Reports stray, mismatched, unclosed and too deeply nested brackets before
/// the grammar runs, so that each is reported at the bracket itself. Returns
/// the deepest nesting.
fn check_brackets(text: &str) -> Result<usize, ParseError> {
    let mut stack = Vec::new();
    let mut base = 0;
    let mut deepest = 0;
    for line in text.split('\n') {
        let (at, kind) = match scan_line(line, base, &mut stack, MAX_NESTING) {
            Ok(scan) => {
                deepest = deepest.max(scan.deepest);
                base += line.len() + 1;
                continue;
            }
            Err(BracketFault::Stray { close, at }) => (at, ParseErrorKind::UnexpectedClose(close)),
            Err(BracketFault::Mismatch { open, close, at }) => {
                (at, ParseErrorKind::MismatchedClose { open, close })
            }
            Err(BracketFault::TooDeep { at }) => {
                (at, ParseErrorKind::NestingTooDeep { limit: MAX_NESTING })
            }
        };
        return Err(ParseError {
            span: Span::new(at, at + 1),
            kind,
        });
    }
    match stack.last() {
        Some(&(open, at)) => Err(ParseError {
            span: Span::new(at, at + 1),
            kind: ParseErrorKind::UnclosedBracket { open },
        }),
        None => Ok(deepest),
    }
}

/// The parser's error inside nom: the position as the length of the input
/// left (so that no reference to the text is needed), the length of the
/// offending token, and the kind. `kind` is `None` for nom's own recoverable
/// errors, which only mean "this alternative does not start here".
#[derive(Debug)]
struct PErr {
    rem: usize,
    len: usize,
    kind: Option<Box<ParseErrorKind>>,
}

impl<'a> NomParseError<&'a str> for PErr {
    fn from_error_kind(input: &'a str, _kind: ErrorKind) -> Self {
        PErr {
            rem: input.len(),
            len: 0,
            kind: None,
        }
    }

    fn append(_input: &'a str, _kind: ErrorKind, other: Self) -> Self {
        other
    }

    /// Of two failed alternatives, keep the one that got furthest.
    fn or(self, other: Self) -> Self {
        if other.rem < self.rem {
            other
        } else {
            self
        }
    }
}

type PResult<'a, T> = IResult<&'a str, T, PErr>;

/// An expression with the depth of its tree, tracked while building. The
/// expression is boxed to keep the recursive rules' stack frames small.
struct Node {
    expr: Box<Expr>,
    depth: usize,
}

fn is_ident_start(ch: char) -> bool {
    ch.is_ascii_alphabetic() || ch == '_'
}

fn is_ident_char(ch: char) -> bool {
    ch.is_ascii_alphanumeric() || ch == '_'
}

/// An identifier: an ASCII letter or `_`, then letters, digits and `_`.
fn ident(input: &str) -> PResult<'_, &str> {
    recognize(pair(satisfy(is_ident_start), take_while(is_ident_char)))(input)
}

/// Skips whitespace (newlines included), `# comments` to the end of their
/// line, and a `\` that ends a line.
fn ws(mut input: &str) -> &str {
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
fn starts_power(input: &str) -> bool {
    input.starts_with('^') || input.starts_with("**")
}

/// `=` that is not the start of `==`.
fn single_eq(input: &str) -> bool {
    input.starts_with('=') && !input.starts_with("==")
}

fn starts_number(input: &str) -> bool {
    let mut chars = input.chars();
    match chars.next() {
        Some(ch) if ch.is_ascii_digit() => true,
        Some('.') => chars.next().is_some_and(|ch| ch.is_ascii_digit()),
        _ => false,
    }
}

fn count_digits(input: &str, from: usize) -> usize {
    input.get(from..).map_or(0, |rest| {
        rest.bytes().take_while(u8::is_ascii_digit).count()
    })
}

/// The token at the start of `input` (already past whitespace), for messages:
/// a word, a number-like run, `==`, `**`, or one character; empty at the end.
fn next_token(input: &str) -> &str {
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
fn describe(token: &str) -> String {
    if token.is_empty() {
        "the end of the line".to_string()
    } else {
        format!("`{token}`")
    }
}

/// A recoverable error: no expression starts at `input`.
fn no_expr<T>(input: &str) -> PResult<'_, T> {
    Err(NomErr::Error(PErr {
        rem: input.len(),
        len: 0,
        kind: None,
    }))
}

/// Grammar rules over one statement text; every `&'a str` handled is a suffix
/// of `src`, so positions are `src.len() - rest.len()`.
struct Parser<'a> {
    src: &'a str,
}

impl<'a> Parser<'a> {
    // ----- positions and errors -----

    fn off(&self, input: &str) -> usize {
        self.src.len().saturating_sub(input.len())
    }

    fn fail<T>(&self, span: Span, kind: ParseErrorKind) -> PResult<'a, T> {
        Err(NomErr::Failure(PErr {
            rem: self.src.len().saturating_sub(span.start),
            len: span.end.saturating_sub(span.start),
            kind: Some(Box::new(kind)),
        }))
    }

    fn fail_at<T>(&self, input: &str, len: usize, kind: ParseErrorKind) -> PResult<'a, T> {
        let start = self.off(input);
        self.fail(Span::new(start, start + len), kind)
    }

    /// A failure "expected `what`" at the next token after whitespace.
    fn expected<T>(&self, input: &str, what: &str) -> PResult<'a, T> {
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
    fn require<T>(&self, result: PResult<'a, T>, input: &str, what: &str) -> PResult<'a, T> {
        match result {
            Err(NomErr::Error(_)) => self.expected(input, what),
            other => other,
        }
    }

    fn convert(&self, err: NomErr<PErr>) -> ParseError {
        let perr = match err {
            NomErr::Error(perr) | NomErr::Failure(perr) => perr,
            NomErr::Incomplete(_) => PErr {
                rem: 0,
                len: 0,
                kind: None,
            },
        };
        let start = self.src.len().saturating_sub(perr.rem);
        let kind = perr.kind.map(|kind| *kind).unwrap_or_else(|| {
            let at = ws(self.src.get(start..).unwrap_or(""));
            ParseErrorKind::Expected {
                what: "a statement or an expression".to_string(),
                found: describe(next_token(at)),
            }
        });
        ParseError {
            span: Span::new(start, start + perr.len),
            kind,
        }
    }

    /// Builds a node one level above `child_depth`, refusing trees deeper
    /// than [`MAX_EXPR_DEPTH`] (reported at byte `at`).
    fn make(
        &self,
        kind: ExprKind,
        span: Span,
        child_depth: usize,
        at: usize,
    ) -> Result<Node, NomErr<PErr>> {
        let depth = child_depth + 1;
        if depth > MAX_EXPR_DEPTH {
            self.fail::<()>(
                Span::new(at, at + 1),
                ParseErrorKind::ExpressionTooDeep {
                    limit: MAX_EXPR_DEPTH,
                },
            )?;
        }
        Ok(Node {
            expr: Box::new(Expr::new(kind, span)),
            depth,
        })
    }

    fn binary(&self, op: BinOp, lhs: Node, rhs: Node, at: usize) -> Result<Node, NomErr<PErr>> {
        let span = lhs.expr.span.join(rhs.expr.span);
        let depth = lhs.depth.max(rhs.depth);
        self.make(ExprKind::Bin(op, lhs.expr, rhs.expr), span, depth, at)
    }

    /// Wraps `node` in one unary minus per offset in `minuses` (the last one innermost).
    fn negate(&self, mut node: Node, minuses: &[usize]) -> Result<Node, NomErr<PErr>> {
        for &at in minuses.iter().rev() {
            let span = Span::new(at, node.expr.span.end);
            node = self.make(ExprKind::Neg(node.expr), span, node.depth, at)?;
        }
        Ok(node)
    }

    /// Shortened source text of `span` for messages.
    fn snippet(&self, span: Span) -> String {
        let text = self.src.get(span.start..span.end).unwrap_or("");
        let n_chars = text.chars().count();
        if n_chars <= 24 {
            text.to_string()
        } else {
            let tail: String = text.chars().skip(n_chars - 23).collect();
            format!("\u{2026}{tail}")
        }
    }

    // ----- tokens -----

    /// A number literal (`input` starts with a digit or `.digit`).
    fn number(&self, input: &'a str) -> PResult<'a, &'a str> {
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
    fn uint(&self, input: &'a str, what: &str) -> PResult<'a, Spanned<u64>> {
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
    fn keyword(&self, input: &'a str, word: &str) -> Option<&'a str> {
        match ident(ws(input)) {
            Ok((rest, found)) if found == word => Some(rest),
            _ => None,
        }
    }

    /// A new name: an identifier that is not reserved.
    fn name(&self, input: &'a str, what: &str) -> PResult<'a, Ident> {
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
    fn word(&self, input: &'a str, what: &str) -> PResult<'a, Ident> {
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
    fn path(&self, input: &'a str, what: &str) -> PResult<'a, PathArg> {
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
    fn end(&self, input: &'a str, what: Option<&str>) -> PResult<'a, ()> {
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
    fn end_of_expr(&self, input: &'a str) -> PResult<'a, ()> {
        if ws(input).starts_with("==") {
            return self.expected(
                input,
                "the end of the line (to compare two sides, write `check A == B`)",
            );
        }
        self.end(input, Some("an operator or the end of the line"))
    }

    // ----- expressions -----
    //
    // The rules that recurse (through brackets) keep few locals: stack use per
    // bracket level stays small, and every other repetition (operator chains,
    // runs of minus signs, exponent towers) is a loop.

    /// An expression: products joined by `+` and `-`, products of unary
    /// operands joined by `*` and `/`, all left associative. A recoverable
    /// error if no expression starts here.
    fn expr(&self, input: &'a str) -> PResult<'a, Node> {
        let (mut rest, mut product) = self.unary(input)?;
        // The terms of the sum so far, each with the additive operator
        // before it and that operator's offset (the first has none).
        let mut terms: Vec<(BinOp, usize, Node)> = Vec::new();
        loop {
            let at = ws(rest);
            let (op, what) = match at.as_bytes() {
                [b'+', ..] => (BinOp::Add, "an expression after `+`"),
                [b'-', ..] => (BinOp::Sub, "an expression after `-`"),
                [b'*', b'*', ..] => break,
                [b'*', ..] => (BinOp::Mul, "an expression after `*`"),
                [b'/', ..] => (BinOp::Div, "an expression after `/`"),
                _ => break,
            };
            let after = at.get(1..).unwrap_or("");
            let (next, operand) = self.require(self.unary(after), after, what)?;
            let op_at = self.off(at);
            if matches!(op, BinOp::Mul | BinOp::Div) {
                product = self.binary(op, product, operand, op_at)?;
            } else {
                if terms.len() >= MAX_SUM_TERMS {
                    self.fail::<()>(
                        Span::new(op_at, op_at + 1),
                        ParseErrorKind::SumTooLong {
                            limit: MAX_SUM_TERMS,
                        },
                    )?;
                }
                terms.push((op, op_at, product));
                product = operand;
            }
            rest = next;
        }
        if terms.is_empty() {
            return Ok((rest, product));
        }
        terms.push((BinOp::Add, 0, product));
        let node = self.sum_tree(terms)?;
        Ok((rest, node))
    }

    /// Builds the tree of a flat sum `t0 o1 t1 o2 t2 …` (`terms[k]` holds
    /// `t_k` and the operator *after* it, which the last term lacks).
    /// Short sums fold to the left as written; a long one (a pasted
    /// result of thousands of terms) becomes a balanced tree, so that its
    /// depth counts nesting, not length: `L − (R)` with the signs inside
    /// `R` flipped is the same sum (exact arithmetic is associative).
    fn sum_tree(&self, terms: Vec<(BinOp, usize, Node)>) -> Result<Node, NomErr<PErr>> {
        let mut items: Vec<Option<(BinOp, usize, Node)>> = terms.into_iter().map(Some).collect();
        self.sum_range(&mut items, false)
    }

    /// The tree of `items` (taken out of their slots), with every operator
    /// flipped (`+` ↔ `−`) when `flip` is set.
    fn sum_range(
        &self,
        items: &mut [Option<(BinOp, usize, Node)>],
        flip: bool,
    ) -> Result<Node, NomErr<PErr>> {
        let turn = |op: BinOp| match (op, flip) {
            (BinOp::Add, true) => BinOp::Sub,
            (BinOp::Sub, true) => BinOp::Add,
            (other, _) => other,
        };
        // Every slot holds a term until it is taken once: not reached.
        let missing = || -> Result<Node, NomErr<PErr>> {
            Err(NomErr::Failure(PErr {
                rem: 0,
                len: 0,
                kind: Some(Box::new(ParseErrorKind::SumTooLong {
                    limit: MAX_SUM_TERMS,
                })),
            }))
        };
        if items.len() <= SHORT_SUM {
            let mut iter = items.iter_mut();
            let Some((mut op, mut op_at, mut acc)) = iter.next().and_then(Option::take) else {
                return missing();
            };
            for slot in iter {
                let Some((next_op, next_at, term)) = slot.take() else {
                    return missing();
                };
                acc = self.binary(turn(op), acc, term, op_at)?;
                op = next_op;
                op_at = next_at;
            }
            return Ok(acc);
        }
        let mid = items.len() / 2;
        let (left, right) = items.split_at_mut(mid);
        // The operator joining the halves is the one after the left
        // half's last term.
        let (join, join_at) = match left.last() {
            Some(Some((op, at, _))) => (turn(*op), *at),
            _ => return missing(),
        };
        let lhs = self.sum_range(left, flip)?;
        let rhs = self.sum_range(right, flip ^ (join == BinOp::Sub))?;
        self.binary(join, lhs, rhs, join_at)
    }

    /// Leading minus signs (collected in a loop), then a power.
    fn unary(&self, input: &'a str) -> PResult<'a, Node> {
        let (minuses, at) = self.minuses(input);
        let result = self.postfix(at);
        let (rest, base) = if minuses.is_empty() {
            result?
        } else {
            self.require(result, at, "an expression after `-`")?
        };
        let (rest, node) = if starts_power(ws(rest)) {
            self.power_tail(base, rest)?
        } else {
            (rest, base)
        };
        Ok((rest, self.negate(node, &minuses)?))
    }

    /// Offsets of a run of `-` signs and the input after them.
    fn minuses(&self, input: &'a str) -> (Vec<usize>, &'a str) {
        let mut at = ws(input);
        let mut minuses = Vec::new();
        while let Some(after) = at.strip_prefix('-') {
            minuses.push(self.off(at));
            at = ws(after);
        }
        (minuses, at)
    }

    /// `base ^ b ^ -c ...` after `base`: operands are collected left to right
    /// and folded from the right (right associative); the exponent of each
    /// `^` (or `**`) may start with minus signs.
    fn power_tail(&self, base: Node, mut rest: &'a str) -> PResult<'a, Node> {
        // (offset of `^`, minuses after it, operand)
        let mut tail: Vec<(usize, Vec<usize>, Node)> = Vec::new();
        loop {
            let at = ws(rest);
            let (after, what) = if let Some(after) = at.strip_prefix("**") {
                (after, "an exponent after `**`")
            } else if let Some(after) = at.strip_prefix('^') {
                (after, "an exponent after `^`")
            } else {
                break;
            };
            let (minuses, operand_at) = self.minuses(after);
            let what = if minuses.is_empty() {
                what
            } else {
                "an expression after `-`"
            };
            let (next, operand) = self.require(self.postfix(operand_at), operand_at, what)?;
            tail.push((self.off(at), minuses, operand));
            rest = next;
        }
        let mut exponent: Option<(Node, usize)> = None;
        while let Some((op_at, minuses, operand)) = tail.pop() {
            let node = match exponent.take() {
                None => operand,
                Some((power, power_op)) => self.binary(BinOp::Pow, operand, power, power_op)?,
            };
            exponent = Some((self.negate(node, &minuses)?, op_at));
        }
        let node = match exponent {
            None => base,
            Some((power, op_at)) => self.binary(BinOp::Pow, base, power, op_at)?,
        };
        Ok((rest, node))
    }

    /// An atom followed by any number of applications `(args)`.
    fn postfix(&self, input: &'a str) -> PResult<'a, Node> {
        let (mut rest, mut node) = self.atom(input)?;
        loop {
            self.adjacent(rest, &node)?;
            let at = ws(rest);
            if !at.starts_with('(') {
                return Ok((rest, node));
            }
            let (next, applied) = self.apply(node, at)?;
            node = applied;
            rest = next;
        }
    }

    /// `head(args)` for a head that is not a plain name (`at` starts with `(`).
    fn apply(&self, head: Node, at: &'a str) -> PResult<'a, Node> {
        let mut args = Vec::new();
        let (next, args_depth) = self.args(at, &mut args)?;
        let span = Span::new(head.expr.span.start, self.off(next));
        let depth = args_depth.max(head.depth);
        let node = self.make(ExprKind::Apply(head.expr, args), span, depth, self.off(at))?;
        Ok((next, node))
    }

    /// Refuses an operand written directly against the previous one (`2x`,
    /// `(a)b`, `2[x]`), and a number followed by `(`: implicit multiplication.
    fn adjacent(&self, rest: &'a str, left: &Node) -> PResult<'a, ()> {
        let touching = rest
            .chars()
            .next()
            .is_some_and(|ch| is_ident_start(ch) || ch == '[' || ch == '{' || starts_number(rest));
        let at = ws(rest);
        let number_call = at.starts_with('(') && matches!(left.expr.kind, ExprKind::Num(_));
        if !touching && !number_call {
            return Ok((rest, ()));
        }
        let at = if touching { rest } else { at };
        let token = next_token(at);
        self.fail_at(
            at,
            token.len(),
            ParseErrorKind::ImplicitMultiplication {
                left: self.snippet(left.expr.span),
                right: token.to_string(),
            },
        )
    }

    /// A number, a name, a call `name(args)`, `(expr)`, a list or a matrix.
    fn atom(&self, input: &'a str) -> PResult<'a, Node> {
        let at = ws(input);
        match at.as_bytes().first() {
            Some(b'(') => self.parens(at),
            Some(b'[') => self.list(at),
            Some(b'{') => self.matrix(at),
            _ if starts_number(at) => self.number_atom(at),
            Some(byte) if is_ident_start(char::from(*byte)) => self.name_atom(at),
            _ => no_expr(at),
        }
    }

    fn number_atom(&self, at: &'a str) -> PResult<'a, Node> {
        let (rest, text) = self.number(at)?;
        let span = Span::new(self.off(at), self.off(rest));
        let expr = Box::new(Expr::new(ExprKind::Num(text.to_string()), span));
        Ok((rest, Node { expr, depth: 1 }))
    }

    /// A name, or a call when `(` follows. Reserved words other than `t` and
    /// `pi` are not names; `sin`, `cos` and `exp` must be called.
    fn name_atom(&self, at: &'a str) -> PResult<'a, Node> {
        let (rest, word) = ident(at)?;
        if rest.starts_with('\'') {
            return self.primed_call(at, rest, word);
        }
        let name_span = Span::new(self.off(at), self.off(rest));
        let after = ws(rest);
        let is_call = after.starts_with('(');
        if matches!(word, "sin" | "cos" | "exp") {
            if !is_call {
                return self.expected(after, &format!("`(` and an argument after `{word}`"));
            }
        } else if is_reserved(word) && word != "t" && word != "pi" {
            return no_expr(at);
        }
        if !is_call {
            let expr = Box::new(Expr::new(ExprKind::Name(word.to_string()), name_span));
            return Ok((rest, Node { expr, depth: 1 }));
        }
        self.call(Ident::new(word, name_span), after)
    }

    /// `V'(q)`, `V''(q)`, …: a derivative of an unspecified function of
    /// one argument (the primes are kept in the called name).
    fn primed_call(&self, at: &'a str, rest: &'a str, word: &str) -> PResult<'a, Node> {
        let after_primes = rest.trim_start_matches('\'');
        let name_span = Span::new(self.off(at), self.off(after_primes));
        if is_reserved(word) {
            return self.fail(name_span, ParseErrorKind::Reserved(word.to_string()));
        }
        let after = ws(after_primes);
        if !after.starts_with('(') {
            let primed = &at[..name_span.end - name_span.start];
            return self.expected(after, &format!("`(` and an argument after `{primed}`"));
        }
        let primed = &at[..name_span.end - name_span.start];
        self.call(Ident::new(primed, name_span), after)
    }

    /// `name(args)` (`at` starts with `(`).
    fn call(&self, name: Ident, at: &'a str) -> PResult<'a, Node> {
        let mut args = Vec::new();
        let (next, depth) = self.args(at, &mut args)?;
        let span = Span::new(name.span.start, self.off(next));
        let node = self.make(ExprKind::Call(name, args), span, depth, self.off(at))?;
        Ok((next, node))
    }

    /// `(expr)`; the span of the result includes the parentheses.
    fn parens(&self, at: &'a str) -> PResult<'a, Node> {
        let inner = at.get(1..).unwrap_or("");
        let (next, mut node) = self.require(self.expr(inner), inner, "an expression after `(`")?;
        let close = ws(next);
        if let Some(after) = close.strip_prefix(')') {
            node.expr.span = Span::new(self.off(at), self.off(after));
            return Ok((after, node));
        }
        if close.starts_with(',') {
            return self.expected(
                close,
                "an operator or `)` (a field is written with square brackets, as in `[a, b]`)",
            );
        }
        self.expected(close, "an operator or `)`")
    }

    /// `[e, ...]` (`input` starts with `[`).
    fn list(&self, input: &'a str) -> PResult<'a, Node> {
        let start = self.off(input);
        let mut next_in = input.get(1..).unwrap_or("");
        let mut entries = Vec::new();
        let mut depth = 0;
        loop {
            let what = if entries.is_empty() {
                "an entry after `[`"
            } else {
                "an entry after `,`"
            };
            let (rest, entry) = self.require(self.expr(next_in), next_in, what)?;
            depth = depth.max(entry.depth);
            entries.push(*entry.expr);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(']') {
                let span = Span::new(start, self.off(after));
                let node = self.make(ExprKind::List(entries), span, depth, start)?;
                return Ok((after, node));
            } else {
                return self.expected(at, "`,` or `]`");
            }
        }
    }

    /// `{a, b; c, d}` (`input` starts with `{`).
    fn matrix(&self, input: &'a str) -> PResult<'a, Node> {
        let start = self.off(input);
        let mut next_in = input.get(1..).unwrap_or("");
        let mut rows = Vec::new();
        let mut row = Vec::new();
        let mut depth = 0;
        loop {
            let what = match (row.is_empty(), rows.is_empty()) {
                (false, _) => "an entry after `,`",
                (true, true) => "an entry after `{`",
                (true, false) => "an entry after `;`",
            };
            let (rest, entry) = self.require(self.expr(next_in), next_in, what)?;
            depth = depth.max(entry.depth);
            row.push(*entry.expr);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(';') {
                rows.push(std::mem::take(&mut row));
                next_in = after;
            } else if let Some(after) = at.strip_prefix('}') {
                rows.push(row);
                let span = Span::new(start, self.off(after));
                let node = self.make(ExprKind::Matrix(rows), span, depth, start)?;
                return Ok((after, node));
            } else {
                return self.expected(at, "`,`, `;` or `}`");
            }
        }
    }

    /// `(arg, ...)` (`input` starts with `(`): pushes the arguments on `args`
    /// and returns the depth of the deepest.
    fn args(&self, input: &'a str, args: &mut Vec<Arg>) -> PResult<'a, usize> {
        let mut next_in = input.get(1..).unwrap_or("");
        let mut depth = 0;
        loop {
            let what = if args.is_empty() {
                "an argument after `(`"
            } else {
                "an argument after `,`"
            };
            let (rest, arg_depth) = self.arg(next_in, what, args)?;
            depth = depth.max(arg_depth);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(')') {
                return Ok((after, depth));
            } else {
                return self.expected(at, "`,` or `)`");
            }
        }
    }

    /// `NAME = expr` (a binding, as in `plug`) or a plain expression, pushed
    /// on `args`; returns its depth.
    fn arg(&self, input: &'a str, what: &str, args: &mut Vec<Arg>) -> PResult<'a, usize> {
        let at = ws(input);
        if let Some((name, value_in)) = self.binding(at)? {
            return self.bound_arg(name, value_in, args);
        }
        if let Some((name, params, value_in)) = self.function_binding(at) {
            let (rest, depth) = self.bound_arg(name, value_in, args)?;
            if let Some(Arg::Bind(name, value)) = args.pop() {
                args.push(Arg::BindFunc(name, params, value));
            }
            return Ok((rest, depth));
        }
        let (rest, node) = self.require(self.expr(at), at, what)?;
        args.push(Arg::Pos(*node.expr));
        Ok((rest, node.depth))
    }

    /// The value of `name = value` in an argument list, pushed on `args`.
    fn bound_arg(&self, name: Ident, value_in: &'a str, args: &mut Vec<Arg>) -> PResult<'a, usize> {
        let (rest, value) = match self.expr(value_in) {
            Err(NomErr::Error(_)) => {
                return self.expected(value_in, &format!("a value after `{} =`", name.name))
            }
            other => other?,
        };
        args.push(Arg::Bind(name, *value.expr));
        Ok((rest, value.depth))
    }

    /// `NAME =` (not `==`) at `at`: the name and the input after `=`.
    /// `t` and `pi` are accepted (lowering decides); other reserved words are not.
    fn binding(&self, at: &'a str) -> Result<Option<(Ident, &'a str)>, NomErr<PErr>> {
        let Ok((after_name, word)) = ident(at) else {
            return Ok(None);
        };
        let eq = ws(after_name);
        if !single_eq(eq) {
            return Ok(None);
        }
        let span = Span::new(self.off(at), self.off(after_name));
        if is_reserved(word) && word != "t" && word != "pi" {
            self.fail::<()>(span, ParseErrorKind::Reserved(word.to_string()))?;
        }
        Ok(Some((Ident::new(word, span), eq.get(1..).unwrap_or(""))))
    }

    /// `NAME(a, b) =` (not `==`) at `at`, placeholders bare names: the
    /// name, the placeholders and the input after `=` (as in
    /// `plug(e, V(s) = -cos(s))`). Anything else is not a definition.
    fn function_binding(&self, at: &'a str) -> Option<(Ident, Vec<Ident>, &'a str)> {
        let (after_name, word) = ident(at).ok()?;
        let mut rest = ws(after_name).strip_prefix('(')?;
        let mut params = Vec::new();
        loop {
            let p_at = ws(rest);
            let (after, p) = ident(p_at).ok()?;
            params.push(Ident::new(p, Span::new(self.off(p_at), self.off(after))));
            let next = ws(after);
            if let Some(r) = next.strip_prefix(',') {
                rest = r;
            } else {
                rest = next.strip_prefix(')')?;
                break;
            }
        }
        let eq = ws(rest);
        if !single_eq(eq) || is_reserved(word) {
            return None;
        }
        let span = Span::new(self.off(at), self.off(after_name));
        Some((Ident::new(word, span), params, eq.get(1..).unwrap_or("")))
    }

    /// A required expression.
    fn expect_expr(&self, input: &'a str, what: &str) -> PResult<'a, Expr> {
        let (rest, node) = self.require(self.expr(input), input, what)?;
        Ok((rest, *node.expr))
    }

    // ----- statements -----

    fn statement(&self, input: &'a str) -> PResult<'a, Stmt> {
        let at = ws(input);
        if at.is_empty() {
            return self.fail(Span::new(0, 0), ParseErrorKind::EmptyInput);
        }
        let start = self.off(at);
        let (rest, kind) = self.statement_kind(at)?;
        Ok((
            rest,
            Stmt {
                kind,
                span: Span::new(start, self.off(rest)),
            },
        ))
    }

    /// Decides the statement by its first word; each branch checks that the
    /// text ends after it and returns the input after its last token.
    fn statement_kind(&self, at: &'a str) -> PResult<'a, StmtKind> {
        if let Ok((after, word)) = ident(at) {
            let look = ws(after);
            let binds = single_eq(look) || look.starts_with(',');
            if is_reserved(word) && binds {
                let span = Span::new(self.off(at), self.off(after));
                return self.fail(span, ParseErrorKind::Reserved(word.to_string()));
            }
            match word {
                "state" => return self.declaration(after, word, StmtKind::State),
                "param" => return self.declaration(after, word, StmtKind::Param),
                "input" => return self.declaration(after, word, StmtKind::Input),
                "func" => return self.func_declaration(after),
                "check" => return self.check(after),
                "show" => return self.show(after),
                "save" => {
                    let (mut rest, path) = self.path(after, "a file name after `save`")?;
                    let mut checks = false;
                    if let Some(after_with) = self.keyword(rest, "with") {
                        let Some(after_checks) = self.keyword(after_with, "checks") else {
                            return self.expected(after_with, "`checks` after `with` in `save`");
                        };
                        rest = after_checks;
                        checks = true;
                    }
                    self.end(rest, Some(QUOTE_HINT))?;
                    return Ok((rest, StmtKind::Save { path, checks }));
                }
                "run" => {
                    let (rest, path) = self.path(after, "a file name after `run`")?;
                    self.end(rest, Some(QUOTE_HINT))?;
                    return Ok((rest, StmtKind::RunFile(path)));
                }
                "names" => {
                    self.end(after, None)?;
                    return Ok((after, StmtKind::Names));
                }
                "quit" => {
                    self.end(after, None)?;
                    return Ok((after, StmtKind::Quit));
                }
                "forget" => {
                    let (rest, name) = self.name(after, "a name after `forget`")?;
                    self.end(rest, None)?;
                    return Ok((rest, StmtKind::Forget(name)));
                }
                "help" => {
                    if ws(after).is_empty() {
                        return Ok((after, StmtKind::Help(None)));
                    }
                    let what = "a topic word after `help`, or the end of the line";
                    let (rest, topic) = self.word(after, what)?;
                    self.end(rest, None)?;
                    return Ok((rest, StmtKind::Help(Some(topic))));
                }
                "set" => {
                    if let Some(after_tol) = self.keyword(after, "tolerance") {
                        let (rest, value) =
                            self.expect_expr(after_tol, "a number after `tolerance`")?;
                        self.end(rest, None)?;
                        return Ok((rest, StmtKind::SetTolerance(value)));
                    }
                    let Some(after_budget) = self.keyword(after, "budget") else {
                        return self.expected(after, "`budget` or `tolerance` after `set`");
                    };
                    let (rest, budget) =
                        self.uint(after_budget, "a whole number after `budget`")?;
                    self.end(rest, None)?;
                    return Ok((rest, StmtKind::SetBudget(budget)));
                }
                _ if COMMAND_WORDS.contains(&word) => {
                    let (rest, command) = self.command(at)?;
                    return Ok((rest, StmtKind::Run(command)));
                }
                _ if binds => return self.define(at),
                _ => {}
            }
        }
        let (rest, expr) = self.expect_expr(at, "a statement or an expression")?;
        self.end_of_expr(rest)?;
        Ok((rest, StmtKind::Print(expr)))
    }

    fn declaration(
        &self,
        input: &'a str,
        word: &str,
        make: fn(Vec<Ident>) -> StmtKind,
    ) -> PResult<'a, StmtKind> {
        let (rest, names) = self.name_list(input, word)?;
        self.end(rest, Some("`,` or the end of the line"))?;
        Ok((rest, make(names)))
    }

    /// `func V(s), J(a, b)`.
    fn func_declaration(&self, input: &'a str) -> PResult<'a, StmtKind> {
        let mut decls = Vec::new();
        let mut next_in = input;
        loop {
            let what = if decls.is_empty() {
                "a function name after `func`, e.g. `func V(s)`"
            } else {
                "a function name after `,`"
            };
            let (rest, name) = self.name(next_in, what)?;
            let at = ws(rest);
            let Some(mut inner) = at.strip_prefix('(') else {
                return self.expected(
                    at,
                    &format!(
                        "`(` and argument names after `{}` (e.g. `{}(s)`)",
                        name.name, name.name
                    ),
                );
            };
            let mut params = Vec::new();
            let rest = loop {
                let (after, p) = self.name(inner, "an argument name")?;
                params.push(p);
                let next = ws(after);
                if let Some(r) = next.strip_prefix(',') {
                    inner = r;
                } else if let Some(r) = next.strip_prefix(')') {
                    break r;
                } else {
                    return self.expected(next, "`,` or `)`");
                }
            };
            decls.push(FuncDecl { name, params });
            match ws(rest).strip_prefix(',') {
                Some(after) => next_in = after,
                None => {
                    self.end(rest, Some("`,` or the end of the line"))?;
                    return Ok((rest, StmtKind::Func(decls)));
                }
            }
        }
    }

    fn check(&self, input: &'a str) -> PResult<'a, StmtKind> {
        let (rest, lhs) = self.expect_expr(input, "an expression after `check`")?;
        let at = ws(rest);
        let Some(after) = at.strip_prefix("==") else {
            return self.expected(at, "`==` between the two sides of `check`");
        };
        let (rest, rhs) = self.expect_expr(after, "an expression after `==`")?;
        self.end(rest, Some("an operator or the end of the line"))?;
        Ok((rest, StmtKind::Check { lhs, rhs }))
    }

    fn show(&self, input: &'a str) -> PResult<'a, StmtKind> {
        let (rest, expr) = self.expect_expr(input, "an expression after `show`")?;
        let Some(after_as) = self.keyword(rest, "as") else {
            return self.expected(
                rest,
                "`as` and a format (`latex` or `brackets`) after the expression in `show`",
            );
        };
        let (mut rest, how) = self.word(
            after_as,
            "a format word after `as`, such as `latex` or `brackets`",
        )?;
        let mut to = None;
        if let Some(after_to) = self.keyword(rest, "to") {
            let (after_path, path) = self.path(after_to, "a file name after `to`")?;
            rest = after_path;
            to = Some(path);
        }
        self.end(rest, None)?;
        Ok((rest, StmtKind::Show { expr, how, to }))
    }

    /// `NAME = ...` or `NAME, NAME = command` (`input` starts at the first name).
    fn define(&self, input: &'a str) -> PResult<'a, StmtKind> {
        let mut names = Vec::new();
        let mut next_in = input;
        let rhs_in = loop {
            let what = if names.is_empty() {
                "a name"
            } else {
                "a name after `,`"
            };
            let (rest, name) = self.name(next_in, what)?;
            names.push(name);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if single_eq(at) {
                break at.get(1..).unwrap_or("");
            } else {
                return self.expected(at, "`,` or `=` after the names");
            }
        };
        let rhs_at = ws(rhs_in);
        if let Ok((_, word)) = ident(rhs_at) {
            if COMMAND_WORDS.contains(&word) {
                let (rest, command) = self.command(rhs_at)?;
                let rhs = Rhs::Command(command);
                return Ok((rest, StmtKind::Define { names, rhs }));
            }
        }
        if names.len() > 1 {
            return self.expected(
                rhs_at,
                "a command after `=` (only a command, such as `average ... with transform`, binds several names)",
            );
        }
        let (rest, expr) = self.expect_expr(rhs_in, "an expression or a command after `=`")?;
        self.end_of_expr(rest)?;
        let rhs = Rhs::Expr(expr);
        Ok((rest, StmtKind::Define { names, rhs }))
    }

    // ----- commands -----

    /// A command, from its word to the end of the text.
    fn command(&self, input: &'a str) -> PResult<'a, Command> {
        let start = self.off(input);
        let (after, word) = match ident(input) {
            Ok(found) => found,
            Err(_) => return self.expected(input, "a command"),
        };
        let (rest, kind) = match word {
            "flow" => self.flow(after)?,
            "magnus" => self.magnus(after)?,
            "average" => self.average(after)?,
            "carleman" => self.carleman(after)?,
            "change" => self.change(after)?,
            "simulate" => self.simulate(after)?,
            "compare" => self.compare(after)?,
            "stability" => self.stability(after)?,
            "equilibria" => self.equilibria(after)?,
            _ => return self.expected(input, "a command"),
        };
        let span = Span::new(start, self.off(rest));
        Ok((rest, Command { kind, span }))
    }

    fn flow(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field after `flow`")?;
        let (rest, on) = match self.keyword(rest, "on") {
            Some(after) => {
                let (rest, output) = self.expect_expr(after, "an output expression after `on`")?;
                (rest, Some(output))
            }
            None => (rest, None),
        };
        let Some(after_to) = self.keyword(rest, "to") else {
            let what = if on.is_some() {
                "`to` and an order after the output in `flow`"
            } else {
                "`to` and an order after the field in `flow`"
            };
            return self.expected(rest, what);
        };
        let (rest, to) = self.uint(after_to, ORDER)?;
        self.end(rest, None)?;
        Ok((rest, CommandKind::Flow { field, on, to }))
    }

    fn magnus(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field after `magnus`")?;
        let Some(after_to) = self.keyword(rest, "to") else {
            return self.expected(rest, "`to` and an order after the field in `magnus`");
        };
        let (rest, to) = self.uint(after_to, ORDER)?;
        let (rest, over) = match self.keyword(rest, "over") {
            Some(after) => {
                let (rest, span) = self.expect_expr(after, "a time span after `over`")?;
                self.end(rest, None)?;
                (rest, Some(span))
            }
            None => {
                self.end(rest, Some("`over` or the end of the line"))?;
                (rest, None)
            }
        };
        Ok((rest, CommandKind::Magnus { field, to, over }))
    }

    fn average(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field after `average`")?;
        let Some(after_to) = self.keyword(rest, "to") else {
            return self.expected(rest, "`to` and an order after the field in `average`");
        };
        let (rest, to) = self.uint(after_to, ORDER)?;
        let Some(after_in) = self.keyword(rest, "in") else {
            return self.expected(
                rest,
                "`in` and the small parameter after the order in `average`",
            );
        };
        // `in 1/w`: a symbolic frequency (DESIGN §2.7c).
        let (after_in, inverse) = match ws(after_in).strip_prefix('1') {
            Some(r) if ws(r).starts_with('/') => (&ws(r)[1..], true),
            _ => (after_in, false),
        };
        let (mut rest, param) = self.name(after_in, "the small parameter after `in`")?;
        let mut method: Option<Ident> = None;
        let mut depth: Option<Spanned<u64>> = None;
        let mut with_transform = false;
        let mut chart: Vec<Ident> = Vec::new();
        loop {
            let at = ws(rest);
            let Ok((after, word)) = ident(at) else {
                break;
            };
            let span = Span::new(self.off(at), self.off(after));
            match word {
                "strobo" | "classic" => {
                    if method.is_some() {
                        return self.duplicate(span, "the method (`strobo` or `classic`)");
                    }
                    method = Some(Ident::new(word, span));
                    rest = after;
                }
                "depth" => {
                    if depth.is_some() {
                        return self.duplicate(span, "`depth`");
                    }
                    let (next, value) =
                        self.uint(after, "the depth (a whole number) after `depth`")?;
                    depth = Some(value);
                    rest = next;
                }
                "with" => {
                    if with_transform {
                        return self.duplicate(span, "`with transform`");
                    }
                    let Some(next) = self.keyword(after, "transform") else {
                        return self.expected(after, "`transform` after `with`");
                    };
                    with_transform = true;
                    rest = next;
                }
                "as" => {
                    if !chart.is_empty() {
                        return self.duplicate(span, "`as`");
                    }
                    let (next, names) = self.name_list(after, "as")?;
                    chart = names;
                    rest = next;
                }
                _ => break,
            }
        }
        self.end(
            rest,
            Some("`strobo`, `classic`, `depth`, `with transform`, `as` or the end of the line"),
        )?;
        Ok((
            rest,
            CommandKind::Average {
                field,
                to,
                param,
                inverse,
                method,
                depth,
                with_transform,
                chart,
            },
        ))
    }

    /// `NAME, NAME, …` after `word` (stops before anything that is not `,`).
    fn name_list(&self, input: &'a str, word: &str) -> PResult<'a, Vec<Ident>> {
        let mut names = Vec::new();
        let mut next_in = input;
        loop {
            let what = if names.is_empty() {
                format!("a name after `{word}`")
            } else {
                "a name after `,`".to_string()
            };
            let (rest, name) = self.name(next_in, &what)?;
            names.push(name);
            match ws(rest).strip_prefix(',') {
                Some(after) => next_in = after,
                None => return Ok((rest, names)),
            }
        }
    }

    /// `change E to r, phi by x = r*cos(phi), v = r*sin(phi)`.
    fn change(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field or scalar after `change`")?;
        let Some(after_to) = self.keyword(rest, "to") else {
            return self.expected(
                rest,
                "`to` and the new coordinates after the value in `change`",
            );
        };
        let (rest, to) = self.name_list(after_to, "to")?;
        let Some(after_by) = self.keyword(rest, "by") else {
            return self.expected(
                rest,
                "`,` or `by` and the old coordinates in the new ones (`by x = r*cos(phi), …`)",
            );
        };
        let (rest, by) = self.assigns(after_by, "by")?;
        self.end(
            rest,
            Some("`,` and another `name = value` or the end of the line"),
        )?;
        Ok((rest, CommandKind::Change { field, to, by }))
    }

    fn carleman(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field after `carleman`")?;
        let Some(after_degree) = self.keyword(rest, "degree") else {
            return self.expected(
                rest,
                "`degree` and a whole number after the field in `carleman`",
            );
        };
        let (rest, degree) = self.uint(after_degree, "a degree (a whole number) after `degree`")?;
        self.end(rest, None)?;
        Ok((rest, CommandKind::Carleman { field, degree }))
    }

    fn simulate(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, field) = self.expect_expr(input, "the field after `simulate`")?;
        let Some(after_from) = self.keyword(rest, "from") else {
            return self.expected(
                rest,
                "`from` and initial values (such as `q = 1, p = 0`) after the field in `simulate`",
            );
        };
        let (rest, from) = self.assigns(after_from, "from")?;
        let (mut rest, horizon) = self.horizon(rest)?;
        let mut with: Option<Vec<Assign>> = None;
        let mut plot: Option<PathArg> = None;
        let mut phase: Option<PhasePlot> = None;
        loop {
            let at = ws(rest);
            let Ok((after, word)) = ident(at) else {
                break;
            };
            let span = Span::new(self.off(at), self.off(after));
            match word {
                "with" => {
                    if with.is_some() {
                        return self.duplicate(span, "`with`");
                    }
                    let (next, values) = self.assigns(after, "with")?;
                    with = Some(values);
                    rest = next;
                }
                "plot" => {
                    if let Some((next, pair)) = self.phase_plot(after)? {
                        if phase.is_some() {
                            return self.duplicate(span, "`plot` of a state pair");
                        }
                        phase = Some(pair);
                        rest = next;
                        continue;
                    }
                    if plot.is_some() {
                        return self.duplicate(span, "`plot`");
                    }
                    let (next, path) = self.path(after, "a file name after `plot`")?;
                    plot = Some(path);
                    rest = next;
                }
                _ => break,
            }
        }
        self.end(rest, Some("`with`, `plot` or the end of the line"))?;
        Ok((
            rest,
            CommandKind::Simulate {
                field,
                from,
                horizon,
                with: with.unwrap_or_default(),
                plot,
                phase,
            },
        ))
    }

    fn compare(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, system) = self.expect_expr(input, "the system after `compare`")?;
        let Some(after_with) = self.keyword(rest, "with") else {
            return self.expected(
                rest,
                "`with` and the averaged model after the system in `compare`",
            );
        };
        let (rest, model) = self.expect_expr(after_with, "the model after `with`")?;
        let Some(after_from) = self.keyword(rest, "from") else {
            return self.expected(
                rest,
                "`from` and initial values (such as `q = 1, p = 0`) after the model in `compare`",
            );
        };
        let (rest, from) = self.assigns(after_from, "from")?;
        let (mut rest, horizon) = self.horizon(rest)?;
        let mut with: Option<Vec<Assign>> = None;
        let mut sweep: Option<(Ident, Vec<Expr>)> = None;
        let mut tol: Option<Expr> = None;
        let mut plot: Option<PathArg> = None;
        let mut paths: Option<PathArg> = None;
        let mut table: Option<PathArg> = None;
        loop {
            let at = ws(rest);
            let Ok((after, word)) = ident(at) else {
                break;
            };
            let span = Span::new(self.off(at), self.off(after));
            match word {
                "with" => {
                    if with.is_some() {
                        return self.duplicate(span, "`with`");
                    }
                    let (next, values) = self.assigns(after, "with")?;
                    with = Some(values);
                    rest = next;
                }
                "sweep" => {
                    if sweep.is_some() {
                        return self.duplicate(span, "`sweep`");
                    }
                    let (next, swept) = self.sweep(after)?;
                    sweep = Some(swept);
                    rest = next;
                }
                "tol" => {
                    if tol.is_some() {
                        return self.duplicate(span, "`tol`");
                    }
                    let (next, value) = self.expect_expr(after, "a tolerance after `tol`")?;
                    tol = Some(value);
                    rest = next;
                }
                "plot" => {
                    if let Some((next, path)) = self.paths_plot(after)? {
                        if paths.is_some() {
                            return self.duplicate(span, "`plot paths`");
                        }
                        paths = Some(path);
                        rest = next;
                        continue;
                    }
                    if plot.is_some() {
                        return self.duplicate(span, "`plot`");
                    }
                    let (next, path) = self.path(after, "a file name after `plot`")?;
                    plot = Some(path);
                    rest = next;
                }
                "table" => {
                    if table.is_some() {
                        return self.duplicate(span, "`table`");
                    }
                    let (next, path) = self.path(after, "a file name after `table`")?;
                    table = Some(path);
                    rest = next;
                }
                _ => break,
            }
        }
        let Some((sweep_param, sweep)) = sweep else {
            let at = ws(rest);
            let what = if at.is_empty() {
                "`sweep` and values such as `eps = 0.2, 0.1` in `compare`"
            } else {
                "`with`, `sweep`, `tol`, `plot`, `table` or the end of the line"
            };
            return self.expected(at, what);
        };
        self.end(
            rest,
            Some("`with`, `tol`, `plot`, `table` or the end of the line"),
        )?;
        Ok((
            rest,
            CommandKind::Compare {
                system,
                model,
                from,
                horizon,
                with: with.unwrap_or_default(),
                sweep_param,
                sweep,
                tol,
                plot,
                paths,
                table,
            },
        ))
    }

    /// `paths FILE` after `plot` in `compare`; `None` when `paths` is the
    /// file name itself.
    fn paths_plot(&self, input: &'a str) -> Result<Option<(&'a str, PathArg)>, NomErr<PErr>> {
        let Some(after) = self.keyword(input, "paths") else {
            return Ok(None);
        };
        let next = ws(after);
        if next.is_empty() || next.starts_with('#') {
            return Ok(None);
        }
        let (rest, path) = self.path(after, "a file name after `plot paths`")?;
        Ok(Some((rest, path)))
    }

    /// `q, p FILE` after `plot` in `simulate` (a phase portrait); `None`
    /// when no `NAME,` follows.
    fn phase_plot(&self, input: &'a str) -> Result<Option<(&'a str, PhasePlot)>, NomErr<PErr>> {
        let at = ws(input);
        let Ok((after_x, x)) = ident(at) else {
            return Ok(None);
        };
        let Some(after_comma) = ws(after_x).strip_prefix(',') else {
            return Ok(None);
        };
        let x = Ident::new(x, Span::new(self.off(at), self.off(after_x)));
        let (rest, y) = self.name(after_comma, "the second state of the phase portrait")?;
        let (rest, path) = self.path(rest, "a file name after `plot q, p`")?;
        Ok(Some((rest, PhasePlot { x, y, path })))
    }

    fn equilibria(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, (field, near, with)) = self.field_point_with(
            input,
            "equilibria",
            "near",
            "a guess such as `q = 1, p = 0`",
        )?;
        Ok((rest, CommandKind::Equilibria { field, near, with }))
    }

    fn stability(&self, input: &'a str) -> PResult<'a, CommandKind> {
        let (rest, (field, at, with)) =
            self.field_point_with(input, "stability", "at", "a point such as `q = 0, p = 0`")?;
        Ok((rest, CommandKind::Stability { field, at, with }))
    }

    /// `FIELD WORD q = …, p = … [with k = …]`, the shape of `stability`
    /// and `equilibria`.
    #[allow(clippy::type_complexity)]
    fn field_point_with(
        &self,
        input: &'a str,
        command: &str,
        word: &str,
        point: &str,
    ) -> PResult<'a, (Expr, Vec<Assign>, Vec<Assign>)> {
        let (rest, field) = self.expect_expr(input, &format!("the field after `{command}`"))?;
        let Some(after_word) = self.keyword(rest, word) else {
            return self.expected(
                rest,
                &format!("`{word}` and {point} after the field in `{command}`"),
            );
        };
        let (rest, at) = self.assigns(after_word, word)?;
        let (rest, with) = match self.keyword(rest, "with") {
            Some(after) => {
                let (rest, values) = self.assigns(after, "with")?;
                self.end(rest, None)?;
                (rest, values)
            }
            None => {
                self.end(rest, Some("`with` or the end of the line"))?;
                (rest, Vec::new())
            }
        };
        Ok((rest, (field, at, with)))
    }

    /// `for E` after the initial values of `simulate` and `compare`.
    fn horizon(&self, input: &'a str) -> PResult<'a, Expr> {
        let Some(after_for) = self.keyword(input, "for") else {
            return self.expected(input, "`for` and a time horizon after the initial values");
        };
        self.expect_expr(after_for, "a time horizon after `for`")
    }

    /// `NAME = v1, v2, ...` after `sweep`.
    fn sweep(&self, input: &'a str) -> PResult<'a, (Ident, Vec<Expr>)> {
        let (rest, name) = self.name(input, "the swept parameter after `sweep`")?;
        let at = ws(rest);
        if !single_eq(at) {
            return self.expected(
                at,
                &format!("`=` and values such as `{} = 0.2, 0.1`", name.name),
            );
        }
        let mut next_in = at.get(1..).unwrap_or("");
        let mut values = Vec::new();
        loop {
            let what = if values.is_empty() {
                "a value after `=`"
            } else {
                "a value after `,`"
            };
            let (rest, value) = self.expect_expr(next_in, what)?;
            values.push(value);
            match ws(rest).strip_prefix(',') {
                Some(after) => next_in = after,
                None => return Ok((rest, (name, values))),
            }
        }
    }

    /// `q = 1, p = 0` after `from`, `at` or `with`.
    fn assigns(&self, input: &'a str, after_word: &str) -> PResult<'a, Vec<Assign>> {
        let mut assigns = Vec::new();
        let mut next_in = input;
        loop {
            let at = ws(next_in);
            let what = if assigns.is_empty() {
                format!("a name after `{after_word}`")
            } else {
                "a name after `,`".to_string()
            };
            // A reserved word here is a new name only if `=` follows it;
            // otherwise the list simply lacks its entry (`from q = 1, for 4`).
            if let Ok((after, word)) = ident(at) {
                if is_reserved(word) && !single_eq(ws(after)) {
                    return self.expected(at, &what);
                }
            }
            let (rest, name) = self.name(at, &what)?;
            let eq = ws(rest);
            if !single_eq(eq) {
                return self.expected(eq, &format!("`=` and a value after `{}`", name.name));
            }
            let value_in = eq.get(1..).unwrap_or("");
            let what = format!("a value after `{} =`", name.name);
            let (rest, value) = self.expect_expr(value_in, &what)?;
            assigns.push(Assign { name, value });
            match ws(rest).strip_prefix(',') {
                Some(after) => next_in = after,
                None => return Ok((rest, assigns)),
            }
        }
    }

    fn duplicate<T>(&self, span: Span, clause: &str) -> PResult<'a, T> {
        self.fail(
            span,
            ParseErrorKind::Duplicate {
                clause: clause.to_string(),
            },
        )
    }
}

/// What an order after `to` is called in messages.
const ORDER: &str = "an order (a whole number) after `to`";

/// What is expected after a bare file name.
const QUOTE_HINT: &str = "the end of the line (quote a file name that contains spaces)";

#[cfg(test)]
mod tests {
    use super::super::diag::line_col;
    use super::*;

    fn stmt(text: &str) -> Stmt {
        match parse_stmt(text) {
            Ok(stmt) => stmt,
            Err(err) => panic!("{text:?} failed: {err} at {:?}", err.span),
        }
    }

    fn expr(text: &str) -> Expr {
        match parse_expr(text) {
            Ok(expr) => expr,
            Err(err) => panic!("{text:?} failed: {err} at {:?}", err.span),
        }
    }

    fn error(text: &str) -> ParseError {
        match parse_stmt(text) {
            Ok(stmt) => panic!("{text:?} parsed as {}", stmt.sexpr()),
            Err(err) => err,
        }
    }

    fn expected(what: &str, found: &str) -> ParseErrorKind {
        ParseErrorKind::Expected {
            what: what.to_string(),
            found: found.to_string(),
        }
    }

    const END: &str = "the end of the line";

    #[test]
    fn precedence_and_associativity() {
        let cases = [
            ("x", "x"),
            ("-x^2", "(neg (^ x 2))"),
            ("x^-2", "(^ x (neg 2))"),
            ("x^-2^3", "(^ x (neg (^ 2 3)))"),
            ("x^2^-1", "(^ x (^ 2 (neg 1)))"),
            ("x^--2", "(^ x (neg (neg 2)))"),
            ("2^3^2", "(^ 2 (^ 3 2))"),
            ("2**3**2", "(^ 2 (^ 3 2))"),
            ("2**3^2", "(^ 2 (^ 3 2))"),
            ("-2^-x", "(neg (^ 2 (neg x)))"),
            ("a-b-c", "(- (- a b) c)"),
            ("a/b/c", "(/ (/ a b) c)"),
            ("a-b+c", "(+ (- a b) c)"),
            ("a*b/c*d", "(* (/ (* a b) c) d)"),
            ("a+b*c", "(+ a (* b c))"),
            ("a*b+c", "(+ (* a b) c)"),
            ("a*b^c", "(* a (^ b c))"),
            ("a^b*c", "(* (^ a b) c)"),
            ("-a*b", "(* (neg a) b)"),
            ("a*-b", "(* a (neg b))"),
            ("a - -b", "(- a (neg b))"),
            ("--a", "(neg (neg a))"),
            ("(a+b)*c", "(* (+ a b) c)"),
            ("(a-b)-(c-d)", "(- (- a b) (- c d))"),
            ("x^(1/2)", "(^ x (/ 1 2))"),
            ("2*pi*t", "(* (* 2 pi) t)"),
            ("-X(h)^2", "(neg (^ (call X h) 2))"),
            ("a +\n  b # comment\n * c", "(+ a (* b c))"),
            ("a + \\\n b", "(+ a b)"),
        ];
        for (text, expected) in cases {
            assert_eq!(expr(text).sexpr(), expected, "{text:?}");
        }
    }

    #[test]
    fn atoms_calls_and_applications() {
        let cases = [
            ("3", "3"),
            ("0.25", "0.25"),
            (".5", ".5"),
            ("1e-4", "1e-4"),
            ("2.5E+3", "2.5E+3"),
            ("10e3", "10e3"),
            ("007", "007"),
            ("pi/2", "(/ pi 2)"),
            ("eps_2", "eps_2"),
            ("sin(q + pi/2)", "(call sin (+ q (/ pi 2)))"),
            ("exp(x) * cos(2*x)", "(* (call exp x) (call cos (* 2 x)))"),
            ("sin (t)", "(call sin t)"),
            ("X(h)", "(call X h)"),
            ("X (h)", "(call X h)"),
            ("X(Y(h))", "(call X (call Y h))"),
            ("[X, Y](h)", "(apply [X Y] h)"),
            ("(X + Y)(h)", "(apply (+ X Y) h)"),
            ("(f)(x)", "(apply f x)"),
            ("order(A, eps, 2)(p)", "(apply (call order A eps 2) p)"),
            ("X(h)(g)", "(apply (call X h) g)"),
            ("plug(e, q = 1, p = x)", "(call plug e (= q 1) (= p x))"),
            ("plug(W, t = 0)", "(call plug W (= t 0))"),
            (
                "plug(pd(order(A, eps, 1)(p), th), th = pi)",
                "(call plug (call pd (apply (call order A eps 1) p) th) (= th pi))",
            ),
            ("ad(X, Y, 3)", "(call ad X Y 3)"),
            ("bch(X, Y, 4)", "(call bch X Y 4)"),
            ("iint(u1, u2)", "(call iint u1 u2)"),
            ("mean(cos(t)^2)", "(call mean (^ (call cos t) 2))"),
            ("[p, -gam*sin(th)]", "[p (* (neg gam) (call sin th))]"),
            ("[[a, b], c]", "[[a b] c]"),
            ("[x]", "[x]"),
            ("{a, b; c, d}", "{a b; c d}"),
            ("{1; 2, 3}", "{1; 2 3}"),
            ("det({a, b;\n c, d})", "(call det {a b; c d})"),
            (
                "cos(t)*[0, bet*sin(th)]",
                "(* (call cos t) [0 (* bet (call sin th))])",
            ),
        ];
        for (text, expected) in cases {
            assert_eq!(expr(text).sexpr(), expected, "{text:?}");
        }
    }

    #[test]
    fn spans_cover_what_was_typed() {
        let neg = expr("-x^2");
        assert_eq!(neg.span, Span::new(0, 4));
        let ExprKind::Neg(power) = &neg.kind else {
            panic!("not a negation: {}", neg.sexpr());
        };
        assert_eq!(power.span, Span::new(1, 4));

        let product = expr("(a + b) * c");
        assert_eq!(product.span, Span::new(0, 11));
        let ExprKind::Bin(BinOp::Mul, lhs, rhs) = &product.kind else {
            panic!("not a product: {}", product.sexpr());
        };
        assert_eq!(lhs.span, Span::new(0, 7));
        assert_eq!(rhs.span, Span::new(10, 11));

        let call = expr("plug(e, q = 1)");
        assert_eq!(call.span, Span::new(0, 14));
        let ExprKind::Call(name, args) = &call.kind else {
            panic!("not a call: {}", call.sexpr());
        };
        assert_eq!(name.span, Span::new(0, 4));
        let [Arg::Pos(first), Arg::Bind(bound, value)] = args.as_slice() else {
            panic!("unexpected arguments: {}", call.sexpr());
        };
        assert_eq!(first.span, Span::new(5, 6));
        assert_eq!((bound.name.as_str(), bound.span), ("q", Span::new(8, 9)));
        assert_eq!(value.span, Span::new(12, 13));

        let statement = stmt("  flow V to 12   # comment");
        assert_eq!(statement.span, Span::new(2, 14));
        let StmtKind::Run(command) = &statement.kind else {
            panic!("not a command: {}", statement.sexpr());
        };
        assert_eq!(command.span, Span::new(2, 14));
        let CommandKind::Flow { to, .. } = &command.kind else {
            panic!("not flow: {}", command.sexpr());
        };
        assert_eq!((to.value, to.span), (12, Span::new(12, 14)));

        let save = stmt("save \"my file.ordex\"");
        let StmtKind::Save { path, .. } = &save.kind else {
            panic!("not save: {}", save.sexpr());
        };
        assert_eq!(path.span, Span::new(5, 20));
    }

    #[test]
    fn statements_and_commands() {
        let cases = [
            ("state q, p", "(state q p)"),
            ("param eps, k, a", "(param eps k a)"),
            ("input u1,u2", "(input u1 u2)"),
            ("x + 1", "(print (+ x 1))"),
            ("t", "(print t)"),
            ("(x)", "(print x)"),
            ("-1", "(print (neg 1))"),
            (
                "S = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]",
                "(define S (+ (* eps [p (* (neg gam) (call sin th))]) (* (call cos t) [0 (* bet (call sin th))])))",
            ),
            ("x = a +\n b", "(define x (+ a b))"),
            ("x=1", "(define x 1)"),
            ("check a == b", "(check a b)"),
            ("check a==-b", "(check a (neg b))"),
            (
                "check plug(pd(order(A, eps, 1)(p), th), th = pi) == gam - bet^2/2",
                "(check (call plug (call pd (apply (call order A eps 1) p) th) (= th pi)) (- gam (/ (^ bet 2) 2)))",
            ),
            (
                "show order(A, eps, 1) as latex",
                "(show (call order A eps 1) as latex)",
            ),
            ("show A as brackets", "(show A as brackets)"),
            ("save session.ordex", "(save \"session.ordex\")"),
            (
                "save session.ordex with checks",
                "(save \"session.ordex\" with checks)",
            ),
            (
                "show jac(X) as c to \"field.c\"",
                "(show (call jac X) as c to \"field.c\")",
            ),
            ("save \"my #1 file.ordex\"", "(save \"my #1 file.ordex\")"),
            ("save out.ordex # the session", "(save \"out.ordex\")"),
            ("run scripts/boom.ordex", "(run \"scripts/boom.ordex\")"),
            ("names", "(names)"),
            ("forget S", "(forget S)"),
            ("help", "(help)"),
            ("help average", "(help average)"),
            ("help flow", "(help flow)"),
            ("help plug", "(help plug)"),
            ("set budget 1000000", "(set-budget 1000000)"),
            ("quit", "(quit)"),
            ("  quit  # bye", "(quit)"),
            ("flow V to 3", "(flow V to 3)"),
            ("flow V on h to 4", "(flow V on h to 4)"),
            (
                "flow eps*V on q^2 to 4",
                "(flow (* eps V) on (^ q 2) to 4)",
            ),
            ("flow\n  V\n  to\n  3", "(flow V to 3)"),
            ("Y = flow V on h to 2", "(define Y (flow V on h to 2))"),
            ("magnus V to 4", "(magnus V to 4)"),
            ("magnus V to 4 over 2*pi", "(magnus V to 4 over (* 2 pi))"),
            ("average V to 2 in eps", "(average V to 2 in eps)"),
            (
                "average V to 3 in eps classic depth 4",
                "(average V to 3 in eps classic depth 4)",
            ),
            (
                "average V to 3 in eps depth 4 strobo",
                "(average V to 3 in eps strobo depth 4)",
            ),
            (
                "average V to 3 in eps with transform classic",
                "(average V to 3 in eps classic transform)",
            ),
            (
                "average V to 3 in eps depth 2 with transform strobo",
                "(average V to 3 in eps strobo depth 2 transform)",
            ),
            (
                "A, W = average S to 3 in eps classic with transform",
                "(define [A W] (average S to 3 in eps classic transform))",
            ),
            (
                "A = average S to 3 in eps",
                "(define A (average S to 3 in eps))",
            ),
            ("carleman X degree 3", "(carleman X degree 3)"),
            (
                "simulate V from q=1, p=0 for 40",
                "(simulate V from [(= q 1) (= p 0)] for 40)",
            ),
            (
                "simulate V from q=1, p=0 for 40 with eps=0.05, k=1 plot out.svg",
                "(simulate V from [(= q 1) (= p 0)] for 40 with [(= eps 0.05) (= k 1)] plot \"out.svg\")",
            ),
            (
                "simulate V from q = -1 for 2*pi plot \"my plot.svg\" with eps = 1/20",
                "(simulate V from [(= q (neg 1))] for (* 2 pi) with [(= eps (/ 1 20))] plot \"my plot.svg\")",
            ),
            (
                "compare S with A from q=1, p=0 for L with k=1 sweep eps=0.2,0.1,0.05 tol 1e-3 plot cmp.svg",
                "(compare S with A from [(= q 1) (= p 0)] for L with [(= k 1)] sweep eps [0.2 0.1 0.05] tol 1e-3 plot \"cmp.svg\")",
            ),
            (
                "compare S with A from q=1 for 10 sweep eps = 0.1",
                "(compare S with A from [(= q 1)] for 10 sweep eps [0.1])",
            ),
            (
                "compare S with A from q=1 for 10 plot c.svg sweep eps=0.1, 0.05 with k=2",
                "(compare S with A from [(= q 1)] for 10 with [(= k 2)] sweep eps [0.1 0.05] plot \"c.svg\")",
            ),
            (
                "stability F at q=pi, p=0",
                "(stability F at [(= q pi) (= p 0)])",
            ),
            (
                "stability order(A, eps, 1) at th = pi, p = 0 with gam = 12.26, bet = 6.1",
                "(stability (call order A eps 1) at [(= th pi) (= p 0)] with [(= gam 12.26) (= bet 6.1)])",
            ),
        ];
        for (text, expected) in cases {
            assert_eq!(stmt(text).sexpr(), expected, "{text:?}");
        }
    }

    #[test]
    fn change_and_average_as_keep_their_names() {
        let s = stmt("P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)");
        assert_eq!(
            s.sexpr(),
            "(define P (change A to r phi by (= x (* r (call cos phi))) (= v (* r (call sin phi)))))"
        );
        let s = stmt("Z = average S to 2 in eps classic as z1, z2");
        assert_eq!(
            s.sexpr(),
            "(define Z (average S to 2 in eps classic as z1 z2))"
        );
        assert!(parse_stmt("P = change A to r, phi").is_err());
        assert!(parse_stmt("P = change A to r, by x = r").is_err());
    }

    #[test]
    fn average_keeps_every_part() {
        let statement = stmt("A, W = average S to 3 in eps classic depth 5 with transform");
        let StmtKind::Define { names, rhs } = &statement.kind else {
            panic!("not a definition: {}", statement.sexpr());
        };
        let spans: Vec<Span> = names.iter().map(|name| name.span).collect();
        assert_eq!(spans, vec![Span::new(0, 1), Span::new(3, 4)]);
        let Rhs::Command(Command {
            kind:
                CommandKind::Average {
                    to,
                    param,
                    method,
                    depth,
                    with_transform,
                    ..
                },
            span,
        }) = rhs
        else {
            panic!("not average: {}", statement.sexpr());
        };
        assert_eq!(*span, Span::new(7, 59));
        assert_eq!(to.value, 3);
        assert_eq!(
            (param.name.as_str(), param.span),
            ("eps", Span::new(25, 28))
        );
        assert_eq!(
            method.as_ref().map(|m| (m.name.as_str(), m.span)),
            Some(("classic", Span::new(29, 36)))
        );
        assert_eq!(depth.as_ref().map(|d| d.value), Some(5));
        assert!(*with_transform);
    }

    #[test]
    fn largest_integer_is_accepted() {
        let statement = stmt("set budget 18446744073709551615");
        assert_eq!(statement.sexpr(), "(set-budget 18446744073709551615)");
    }

    #[test]
    fn bad_inputs_report_kind_and_caret_column() {
        let long_chain = format!("x{}", "*x".repeat(1500));
        let long_minus = format!("{}x", "-".repeat(2000));
        let long_power = format!("x{}", "^x".repeat(2000));
        let deep_parens = format!("{}x{}", "(".repeat(300), ")".repeat(300));
        let cases: Vec<(&str, ParseErrorKind, usize)> = vec![
            ("x +", expected("an expression after `+`", END), 4),
            ("flow V to", expected(ORDER, END), 10),
            ("state t", ParseErrorKind::Reserved("t".into()), 7),
            ("sin(x", ParseErrorKind::UnclosedBracket { open: '(' }, 4),
            ("[1, 2", ParseErrorKind::UnclosedBracket { open: '[' }, 1),
            (
                "{1, 2; 3",
                ParseErrorKind::UnclosedBracket { open: '{' },
                1,
            ),
            (
                "f(a, [b, c)",
                ParseErrorKind::MismatchedClose {
                    open: '[',
                    close: ')',
                },
                11,
            ),
            ("(a]", ParseErrorKind::MismatchedClose { open: '(', close: ']' }, 3),
            (")", ParseErrorKind::UnexpectedClose(')'), 1),
            ("x = 1]", ParseErrorKind::UnexpectedClose(']'), 6),
            (
                "2x",
                ParseErrorKind::ImplicitMultiplication {
                    left: "2".into(),
                    right: "x".into(),
                },
                2,
            ),
            (
                "2(x+1)",
                ParseErrorKind::ImplicitMultiplication {
                    left: "2".into(),
                    right: "(".into(),
                },
                2,
            ),
            (
                "y = 3 (x+1)",
                ParseErrorKind::ImplicitMultiplication {
                    left: "3".into(),
                    right: "(".into(),
                },
                7,
            ),
            (
                "(a+b)c",
                ParseErrorKind::ImplicitMultiplication {
                    left: "(a+b)".into(),
                    right: "c".into(),
                },
                6,
            ),
            (
                "[a, b][c, d]",
                ParseErrorKind::ImplicitMultiplication {
                    left: "[a, b]".into(),
                    right: "[".into(),
                },
                7,
            ),
            (
                "2pi",
                ParseErrorKind::ImplicitMultiplication {
                    left: "2".into(),
                    right: "pi".into(),
                },
                2,
            ),
            (
                "2 x",
                expected("an operator or the end of the line", "`x`"),
                3,
            ),
            (
                "f = ",
                expected("an expression or a command after `=`", END),
                5,
            ),
            (
                "check a = b",
                expected("`==` between the two sides of `check`", "`=`"),
                9,
            ),
            ("check a ==", expected("an expression after `==`", END), 11),
            (
                "average S to 3",
                expected(
                    "`in` and the small parameter after the order in `average`",
                    END,
                ),
                15,
            ),
            (
                "x foo",
                expected("an operator or the end of the line", "`foo`"),
                3,
            ),
            (
                "set budget 99999999999999999999999",
                ParseErrorKind::NumberTooLarge {
                    text: "99999999999999999999999".into(),
                },
                12,
            ),
            ("", ParseErrorKind::EmptyInput, 1),
            ("   # only a comment", ParseErrorKind::EmptyInput, 1),
            (
                "names foo",
                ParseErrorKind::TrailingInput {
                    found: "`foo`".into(),
                },
                7,
            ),
            (
                "quit now",
                ParseErrorKind::TrailingInput {
                    found: "`now`".into(),
                },
                6,
            ),
            (
                "flow V to 3 x",
                ParseErrorKind::TrailingInput {
                    found: "`x`".into(),
                },
                13,
            ),
            (
                "flow V",
                expected("`to` and an order after the field in `flow`", END),
                7,
            ),
            (
                "flow to 3",
                expected("the field after `flow`", "`to`"),
                6,
            ),
            (
                "flow V on h",
                expected("`to` and an order after the output in `flow`", END),
                12,
            ),
            ("flow V to 2.5", expected(ORDER, "`2.5`"), 11),
            ("flow V to 1x", expected(ORDER, "`1x`"), 11),
            ("magnus V to -1", expected(ORDER, "`-`"), 13),
            (
                "magnus V to 2 over",
                expected("a time span after `over`", END),
                19,
            ),
            (
                "magnus V to 2 in eps",
                expected("`over` or the end of the line", "`in`"),
                15,
            ),
            ("average S to 3 in t", ParseErrorKind::Reserved("t".into()), 19),
            (
                "average S to 3 in eps classic strobo",
                ParseErrorKind::Duplicate {
                    clause: "the method (`strobo` or `classic`)".into(),
                },
                31,
            ),
            (
                "average S to 3 in eps depth 2 depth 3",
                ParseErrorKind::Duplicate {
                    clause: "`depth`".into(),
                },
                31,
            ),
            (
                "average S to 3 in eps with",
                expected("`transform` after `with`", END),
                27,
            ),
            (
                "average S to 3 in eps fast",
                expected(
                    "`strobo`, `classic`, `depth`, `with transform`, `as` or the end of the line",
                    "`fast`",
                ),
                23,
            ),
            (
                "carleman X",
                expected(
                    "`degree` and a whole number after the field in `carleman`",
                    END,
                ),
                11,
            ),
            (
                "simulate V for 40",
                expected(
                    "`from` and initial values (such as `q = 1, p = 0`) after the field in `simulate`",
                    "`for`",
                ),
                12,
            ),
            (
                "simulate V from q 1 for 40",
                expected("`=` and a value after `q`", "`1`"),
                19,
            ),
            (
                "simulate V from q=1, for 40",
                expected("a name after `,`", "`for`"),
                22,
            ),
            (
                "simulate V from t=0 for 4",
                ParseErrorKind::Reserved("t".into()),
                17,
            ),
            (
                "simulate V from q=1",
                expected("`for` and a time horizon after the initial values", END),
                20,
            ),
            (
                "simulate V from q=1 for 4 plot a.svg plot b.svg",
                ParseErrorKind::Duplicate {
                    clause: "`plot`".into(),
                },
                38,
            ),
            (
                "simulate V from q=1 for 4 with",
                expected("a name after `with`", END),
                31,
            ),
            (
                "compare S with A from q=1 for 10",
                expected(
                    "`sweep` and values such as `eps = 0.2, 0.1` in `compare`",
                    END,
                ),
                33,
            ),
            (
                "compare S from q=1 for 10 sweep eps=1",
                expected(
                    "`with` and the averaged model after the system in `compare`",
                    "`from`",
                ),
                11,
            ),
            (
                "compare S with A from q=1 for 10 sweep eps 0.1",
                expected("`=` and values such as `eps = 0.2, 0.1`", "`0.1`"),
                44,
            ),
            (
                "stability F",
                expected(
                    "`at` and a point such as `q = 0, p = 0` after the field in `stability`",
                    END,
                ),
                12,
            ),
            (
                "show A",
                expected(
                    "`as` and a format (`latex` or `brackets`) after the expression in `show`",
                    END,
                ),
                7,
            ),
            ("save", expected("a file name after `save`", END), 5),
            ("save \"unterminated", ParseErrorKind::UnterminatedString, 6),
            (
                "save \"\"",
                expected("a file name after `save`", "an empty name `\"\"`"),
                6,
            ),
            ("save my file.ordex", expected(QUOTE_HINT, "`file`"), 9),
            ("forget pi", ParseErrorKind::Reserved("pi".into()), 8),
            ("forget", expected("a name after `forget`", END), 7),
            ("t = 3", ParseErrorKind::Reserved("t".into()), 1),
            ("flow = 2", ParseErrorKind::Reserved("flow".into()), 1),
            ("x, sin = average S to 1 in eps", ParseErrorKind::Reserved("sin".into()), 4),
            (
                "A, W = S + 1",
                expected(
                    "a command after `=` (only a command, such as `average ... with transform`, binds several names)",
                    "`S`",
                ),
                8,
            ),
            ("a, = 3", expected("a name after `,`", "`=`"), 4),
            ("a, b c", expected("`,` or `=` after the names", "`c`"), 6),
            ("x ** * y", expected("an exponent after `**`", "`*`"), 6),
            ("x^", expected("an exponent after `^`", END), 3),
            ("x^-", expected("an expression after `-`", END), 4),
            ("-", expected("an expression after `-`", END), 2),
            ("a * / b", expected("an expression after `*`", "`/`"), 5),
            (
                "(a, b)",
                expected(
                    "an operator or `)` (a field is written with square brackets, as in `[a, b]`)",
                    "`,`",
                ),
                3,
            ),
            ("(a b)", expected("an operator or `)`", "`b`"), 4),
            ("()", expected("an expression after `(`", "`)`"), 2),
            ("[a b]", expected("`,` or `]`", "`b`"), 4),
            ("[]", expected("an entry after `[`", "`]`"), 2),
            ("[a,]", expected("an entry after `,`", "`]`"), 4),
            ("{1, 2 3}", expected("`,`, `;` or `}`", "`3`"), 7),
            ("{1, 2;}", expected("an entry after `;`", "`}`"), 7),
            ("f()", expected("an argument after `(`", "`)`"), 3),
            ("plug(e, q == 1)", expected("`,` or `)`", "`==`"), 11),
            ("plug(e, to = 1)", ParseErrorKind::Reserved("to".into()), 9),
            ("plug(e, q = )", expected("a value after `q =`", "`)`"), 13),
            (
                "sin x",
                expected("`(` and an argument after `sin`", "`x`"),
                5,
            ),
            (
                "1.2.3",
                ParseErrorKind::BadNumber {
                    text: "1.2.3".into(),
                    reason: "a number has at most one decimal point",
                },
                1,
            ),
            (
                "x + 1e",
                ParseErrorKind::BadNumber {
                    text: "1e".into(),
                    reason: "the exponent has no digits",
                },
                5,
            ),
            (
                "1e-",
                ParseErrorKind::BadNumber {
                    text: "1e-".into(),
                    reason: "the exponent has no digits",
                },
                1,
            ),
            (
                "3.",
                ParseErrorKind::BadNumber {
                    text: "3.".into(),
                    reason: "digits must follow the decimal point",
                },
                1,
            ),
            (
                "a == b",
                expected(
                    "the end of the line (to compare two sides, write `check A == B`)",
                    "`==`",
                ),
                3,
            ),
            ("set x 3", expected("`budget` or `tolerance` after `set`", "`x`"), 5),
            ("set budget", expected("a whole number after `budget`", END), 11),
            (
                "help +",
                expected("a topic word after `help`, or the end of the line", "`+`"),
                6,
            ),
            ("to 3", expected("a statement or an expression", "`to`"), 1),
            (
                "\u{3b8} = 1",
                expected("a statement or an expression", "`\u{3b8}`"),
                1,
            ),
            (
                "x = 2 $",
                expected("an operator or the end of the line", "`$`"),
                7,
            ),
            ("state a b", expected("`,` or the end of the line", "`b`"), 9),
            ("state", expected("a name after `state`", END), 6),
            ("x + flow V to 3", expected("an expression after `+`", "`flow`"), 5),
            (
                &long_chain,
                ParseErrorKind::ExpressionTooDeep {
                    limit: MAX_EXPR_DEPTH,
                },
                2000,
            ),
            (
                &long_minus,
                ParseErrorKind::ExpressionTooDeep {
                    limit: MAX_EXPR_DEPTH,
                },
                1001,
            ),
            (
                &long_power,
                ParseErrorKind::ExpressionTooDeep {
                    limit: MAX_EXPR_DEPTH,
                },
                2002,
            ),
            (
                &deep_parens,
                ParseErrorKind::NestingTooDeep { limit: MAX_NESTING },
                MAX_NESTING + 1,
            ),
        ];
        assert!(cases.len() >= 30);
        for (text, kind, column) in cases {
            let err = error(text);
            assert_eq!(err.kind, kind, "kind for {text:?}");
            assert_eq!(
                line_col(text, err.span.start),
                (0, column),
                "caret column for {text:?} ({err})"
            );
            assert!(err.span.start <= err.span.end && err.span.end <= text.len());
        }
    }

    #[test]
    fn error_on_a_later_line_of_a_statement() {
        let text = "f = [a,\n  b +]";
        let err = error(text);
        assert_eq!(err.kind, expected("an expression after `+`", "`]`"));
        assert_eq!(line_col(text, err.span.start), (1, 6));
        let text = "g = sin(x,\n  [1, 2\n)";
        let err = error(text);
        assert_eq!(
            err.kind,
            ParseErrorKind::MismatchedClose {
                open: '[',
                close: ')'
            }
        );
        assert_eq!(line_col(text, err.span.start), (2, 1));
    }

    #[test]
    fn brackets_in_comments_and_quotes_do_not_count() {
        assert_eq!(stmt("x # (").sexpr(), "(print x)");
        assert_eq!(stmt("save \"a(b.svg\"").sexpr(), "(save \"a(b.svg\")");
    }

    #[test]
    fn messages_are_lowercase_without_full_stop_and_quote_the_input() {
        let cases = [
            (
                "x +",
                "expected an expression after `+`, found the end of the line",
            ),
            (
                "state t",
                "`t` is a reserved word and cannot be used as a name",
            ),
            ("sin(x", "`(` is never closed"),
            (")", "`)` has no matching opening bracket"),
            ("(a]", "`]` cannot close `(` (expected `)`)"),
            (
                "names foo",
                "unexpected `foo` after the end of the statement",
            ),
            (
                "2x",
                "missing `*` between `2` and `x`: implicit multiplication is not allowed",
            ),
            (
                "1.2.3",
                "malformed number `1.2.3`: a number has at most one decimal point",
            ),
            (
                "set budget 99999999999999999999999",
                "`99999999999999999999999` is too large (at most 18446744073709551615)",
            ),
            ("save \"x", "quoted file name without its closing `\"`"),
            (
                "average S to 1 in e depth 1 depth 2",
                "`depth` is given more than once",
            ),
            ("", "empty statement"),
        ];
        for (text, message) in cases {
            let shown = error(text).to_string();
            assert_eq!(shown, message, "{text:?}");
            assert!(!shown.ends_with('.'));
        }
    }

    #[test]
    fn long_operands_are_shortened_in_messages() {
        let err = error("(aaaaaaaaaa + bbbbbbbbbb + cccccccccc)x");
        let ParseErrorKind::ImplicitMultiplication { left, right } = err.kind else {
            panic!("unexpected {:?}", err.kind);
        };
        assert_eq!(left, "\u{2026}bbbbbbbbb + cccccccccc)");
        assert_eq!(right, "x");
    }

    #[test]
    fn nesting_up_to_the_limit_parses() {
        let parens = format!("{}x{}", "(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
        assert_eq!(expr(&parens).sexpr(), "x");
        let lists = format!("{}x{}", "[".repeat(MAX_NESTING), "]".repeat(MAX_NESTING));
        assert_eq!(
            expr(&lists).sexpr(),
            format!("{}x{}", "[".repeat(MAX_NESTING), "]".repeat(MAX_NESTING))
        );
        let calls = format!("{}x{}", "f(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
        assert!(expr(&calls).sexpr().starts_with("(call f (call f"));
        let mixed = format!(
            "{}x{}",
            "-g(1 + [{a, ".repeat(MAX_NESTING / 3),
            "}])".repeat(MAX_NESTING / 3)
        );
        assert!(expr(&mixed).sexpr().starts_with("(neg (call g (+ 1 [{a"));
        let chain = format!("x{}", "+x".repeat(MAX_EXPR_DEPTH - 2));
        assert!(parse_expr(&chain).is_ok());
    }

    #[test]
    fn deep_nesting_is_safe_on_a_small_stack() {
        let handle = std::thread::Builder::new()
            .stack_size(256 * 1024)
            .spawn(|| {
                let calls = format!("{}x{}", "f(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
                let shallow = format!(
                    "{}x{}",
                    "g(".repeat(INLINE_NESTING),
                    ")".repeat(INLINE_NESTING)
                );
                (
                    parse_stmt(&calls).map(|stmt| stmt.span),
                    parse_stmt(&shallow).map(|stmt| stmt.span),
                )
            });
        let joined = match handle {
            Ok(handle) => handle.join(),
            Err(err) => panic!("cannot start the test thread: {err}"),
        };
        let Ok((deep, shallow)) = joined else {
            panic!("parsing on a small stack panicked");
        };
        assert_eq!(deep, Ok(Span::new(0, 3 * MAX_NESTING + 1)));
        assert_eq!(shallow, Ok(Span::new(0, 3 * INLINE_NESTING + 1)));
    }

    #[test]
    fn parse_expr_requires_exactly_one_expression() {
        assert_eq!(expr(" a*b ").sexpr(), "(* a b)");
        let Err(err) = parse_expr("a b") else {
            panic!("`a b` parsed");
        };
        assert_eq!(err.span, Span::new(2, 3));
        let Err(err) = parse_expr("") else {
            panic!("empty text parsed");
        };
        assert_eq!(err.kind, expected("an expression", END));
    }

    #[test]
    fn reserved_words_cover_the_statement_and_command_words() {
        for word in COMMAND_WORDS.iter().chain(STATEMENT_WORDS) {
            assert!(is_reserved(word), "{word}");
        }
        assert!(!is_reserved("plug"));
        assert!(!is_reserved("eps"));
    }

    /// Random expression trees over a few leaves, operators, calls and lists.
    fn arb_expr() -> impl proptest::strategy::Strategy<Value = Expr> {
        use proptest::prelude::*;
        let leaf = prop_oneof![
            Just(ExprKind::Name("a".into())),
            Just(ExprKind::Name("t".into())),
            Just(ExprKind::Num("2".into())),
            Just(ExprKind::Num("0.5".into())),
        ]
        .prop_map(|kind| Expr::new(kind, Span::default()));
        leaf.prop_recursive(5, 48, 3, |inner| {
            let op = prop_oneof![
                Just(BinOp::Add),
                Just(BinOp::Sub),
                Just(BinOp::Mul),
                Just(BinOp::Div),
                Just(BinOp::Pow),
            ];
            prop_oneof![
                (op, inner.clone(), inner.clone()).prop_map(|(op, l, r)| ExprKind::Bin(
                    op,
                    Box::new(l),
                    Box::new(r)
                )),
                inner.clone().prop_map(|e| ExprKind::Neg(Box::new(e))),
                proptest::collection::vec(inner.clone(), 1..3).prop_map(|args| {
                    let args = args.into_iter().map(Arg::Pos).collect();
                    ExprKind::Call(Ident::new("f", Span::default()), args)
                }),
                proptest::collection::vec(inner, 1..3).prop_map(ExprKind::List),
            ]
            .prop_map(|kind| Expr::new(kind, Span::default()))
        })
    }

    /// Binding strength of the outermost operator, as the grammar defines it.
    fn strength(expr: &Expr) -> u8 {
        match &expr.kind {
            ExprKind::Bin(BinOp::Add | BinOp::Sub, ..) => 1,
            ExprKind::Bin(BinOp::Mul | BinOp::Div, ..) => 2,
            ExprKind::Neg(_) => 3,
            ExprKind::Bin(BinOp::Pow, ..) => 4,
            _ => 5,
        }
    }

    /// Writes `expr` with only the parentheses the precedence rules require.
    fn print_min(expr: &Expr, min: u8) -> String {
        let body = match &expr.kind {
            ExprKind::Num(text) | ExprKind::Name(text) => text.clone(),
            ExprKind::Neg(inner) => format!("-{}", print_min(inner, 3)),
            ExprKind::Bin(op, lhs, rhs) => {
                let (left_min, right_min) = match op {
                    BinOp::Add | BinOp::Sub => (1, 2),
                    BinOp::Mul | BinOp::Div => (2, 3),
                    BinOp::Pow => (5, 3),
                };
                format!(
                    "{} {} {}",
                    print_min(lhs, left_min),
                    op.symbol(),
                    print_min(rhs, right_min)
                )
            }
            ExprKind::Call(name, args) => {
                let args: Vec<String> = args
                    .iter()
                    .map(|arg| match arg {
                        Arg::Pos(e) | Arg::Bind(_, e) | Arg::BindFunc(_, _, e) => print_min(e, 0),
                    })
                    .collect();
                format!("{}({})", name.name, args.join(", "))
            }
            ExprKind::List(entries) => {
                let entries: Vec<String> = entries.iter().map(|e| print_min(e, 0)).collect();
                format!("[{}]", entries.join(", "))
            }
            ExprKind::Apply(..) | ExprKind::Matrix(_) => String::new(),
        };
        if strength(expr) < min {
            format!("({body})")
        } else {
            body
        }
    }

    proptest::proptest! {
        #[test]
        fn minimally_bracketed_text_parses_back_to_the_same_tree(tree in arb_expr()) {
            let text = print_min(&tree, 0);
            let parsed = parse_expr(&text);
            proptest::prop_assert_eq!(parsed.map(|e| e.sexpr()), Ok(tree.sexpr()), "{}", text);
        }

        #[test]
        fn never_panics_and_spans_stay_inside(text in "[a-z0-9 ()\\[\\]{}+*/^=,;.#\"\\\\\n-]{0,40}") {
            if let Err(err) = parse_stmt(&text) {
                proptest::prop_assert!(err.span.start <= err.span.end);
                proptest::prop_assert!(err.span.end <= text.len());
                let _ = err.to_string();
            }
        }

        #[test]
        fn never_panics_on_word_soup(words in proptest::collection::vec(
            proptest::sample::select(vec![
                "flow", "on", "to", "magnus", "over", "average", "in", "strobo", "classic",
                "depth", "with", "transform", "carleman", "degree", "simulate", "from", "for",
                "plot", "compare", "sweep", "tol", "stability", "at", "check", "show", "as",
                "save", "run", "names", "forget", "help", "set", "budget", "quit", "state",
                "x", "q", "3", "1e-4", "=", "==", ",", "(", ")", "[", "]", "-", "^", "t", "pi",
                "sin", "\"a b\"", "#", "\n", "\\",
            ]),
            0..14,
        )) {
            let text = words.join(" ");
            match parse_stmt(&text) {
                Ok(stmt) => { let _ = stmt.sexpr(); }
                Err(err) => proptest::prop_assert!(err.span.end <= text.len()),
            }
        }

        #[test]
        fn any_unicode_never_panics(text in "\\PC{0,30}") {
            if let Err(err) = parse_stmt(&text) {
                proptest::prop_assert!(text.is_char_boundary(err.span.start));
                proptest::prop_assert!(err.span.end <= text.len());
            }
        }
    }
}
