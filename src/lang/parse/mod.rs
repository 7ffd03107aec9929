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
//!
//! Layout: [`words`] (reserved words), [`error`] (the error type and its
//! wording), `lex` (tokens and whitespace), `expr` (expressions), `stmt`
//! (statements and declarations), `series_cmds` and `numeric_cmds` (the
//! command grammars). Every grammar rule is a method of one `Parser` over
//! the statement text; tests are in `tests/`.

mod error;
mod expr;
mod lex;
mod numeric_cmds;
mod series_cmds;
mod stmt;
mod words;

#[cfg(test)]
mod tests;

pub use error::{ParseError, ParseErrorKind};
pub use words::{is_reserved, COMMAND_WORDS, RESERVED_WORDS, STATEMENT_WORDS};

use crate::lang::ast::{Span, Stmt, SyntaxExpr};
use crate::lang::split::{scan_line, BracketFault};

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
pub fn parse_expr(text: &str) -> Result<SyntaxExpr, ParseError> {
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

/// Grammar rules over one statement text; every `&'a str` handled is a suffix
/// of `src`, so positions are `src.len() - rest.len()`.
struct Parser<'a> {
    src: &'a str,
}
