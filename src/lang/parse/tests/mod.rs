//! Tests of the parser, by theme: `expr` (precedence, spans, nesting and a
//! round trip through minimally bracketed text), `commands` (statements and
//! commands as trees) and `errors` (kinds, carets and wording of syntax
//! errors). The helpers here are the only callers of the entry points.

mod commands;
mod errors;
mod expr;

use super::series_cmds::ORDER;
use super::stmt::QUOTE_HINT;
use super::{
    parse_expr, parse_stmt, ParseError, ParseErrorKind, INLINE_NESTING, MAX_EXPR_DEPTH, MAX_NESTING,
};
use crate::lang::ast::{
    Arg, BinOp, Command, CommandKind, ExprKind, Ident, Rhs, Span, Stmt, StmtKind, SyntaxExpr,
};

pub(super) fn stmt(text: &str) -> Stmt {
    match parse_stmt(text) {
        Ok(stmt) => stmt,
        Err(err) => panic!("{text:?} failed: {err} at {:?}", err.span),
    }
}

pub(super) fn expr(text: &str) -> SyntaxExpr {
    match parse_expr(text) {
        Ok(expr) => expr,
        Err(err) => panic!("{text:?} failed: {err} at {:?}", err.span),
    }
}

pub(super) fn error(text: &str) -> ParseError {
    match parse_stmt(text) {
        Ok(stmt) => panic!("{text:?} parsed as {}", stmt.sexpr()),
        Err(err) => err,
    }
}

pub(super) fn expected(what: &str, found: &str) -> ParseErrorKind {
    ParseErrorKind::Expected {
        what: what.to_string(),
        found: found.to_string(),
    }
}

pub(super) const END: &str = "the end of the line";
