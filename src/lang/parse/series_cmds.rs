//! The grammar of the series commands: `flow`, `magnus`, `average`,
//! `change` and `carleman` (and the dispatch on a command's first word).

use super::error::GrammarResult;
use super::lex::*;
use super::Parser;
use crate::lang::ast::{Command, CommandKind, Ident, Span, Spanned};

/// What an order after `to` is called in messages.
pub(super) const ORDER: &str = "an order (a whole number) after `to`";

impl<'a> Parser<'a> {
    /// A command, from its word to the end of the text.
    pub(super) fn command(&self, input: &'a str) -> GrammarResult<'a, Command> {
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

    pub(super) fn flow(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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

    pub(super) fn magnus(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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

    pub(super) fn average(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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
    pub(super) fn name_list(&self, input: &'a str, word: &str) -> GrammarResult<'a, Vec<Ident>> {
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
    pub(super) fn change(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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

    pub(super) fn carleman(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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
}
