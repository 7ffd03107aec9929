//! Statements and declarations: `state`/`param`/`input`/`func`, `check`,
//! `show`, files, `help`, `set`, definitions `NAME = …`, and bare
//! expressions or commands.

use super::error::{GrammarResult, ParseErrorKind};
use super::lex::*;
use super::words::{is_reserved, COMMAND_WORDS};
use super::Parser;
use crate::lang::ast::{FuncDecl, Ident, Rhs, Span, Stmt, StmtKind};

/// What is expected after a bare file name.
pub(super) const QUOTE_HINT: &str = "the end of the line (quote a file name that contains spaces)";

impl<'a> Parser<'a> {
    pub(super) fn statement(&self, input: &'a str) -> GrammarResult<'a, Stmt> {
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
    pub(super) fn statement_kind(&self, at: &'a str) -> GrammarResult<'a, StmtKind> {
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

    pub(super) fn declaration(
        &self,
        input: &'a str,
        word: &str,
        make: fn(Vec<Ident>) -> StmtKind,
    ) -> GrammarResult<'a, StmtKind> {
        let (rest, names) = self.name_list(input, word)?;
        self.end(rest, Some("`,` or the end of the line"))?;
        Ok((rest, make(names)))
    }

    /// `func V(s), J(a, b)`.
    pub(super) fn func_declaration(&self, input: &'a str) -> GrammarResult<'a, StmtKind> {
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

    pub(super) fn check(&self, input: &'a str) -> GrammarResult<'a, StmtKind> {
        let (rest, lhs) = self.expect_expr(input, "an expression after `check`")?;
        let at = ws(rest);
        let Some(after) = at.strip_prefix("==") else {
            return self.expected(at, "`==` between the two sides of `check`");
        };
        let (rest, rhs) = self.expect_expr(after, "an expression after `==`")?;
        self.end(rest, Some("an operator or the end of the line"))?;
        Ok((rest, StmtKind::Check { lhs, rhs }))
    }

    pub(super) fn show(&self, input: &'a str) -> GrammarResult<'a, StmtKind> {
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
    pub(super) fn define(&self, input: &'a str) -> GrammarResult<'a, StmtKind> {
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
}
