//! The grammar of the numeric commands: `simulate`, `compare`,
//! `equilibria` and `stability`, with their shared clauses (initial values,
//! horizons, sweeps, plots).

use nom::Err as NomErr;

use super::error::{GrammarError, GrammarResult};
use super::lex::*;
use super::words::is_reserved;
use super::Parser;
use crate::lang::ast::{Assign, CommandKind, Ident, PathArg, PhasePlot, Span, SyntaxExpr};

impl<'a> Parser<'a> {
    /// The next word of a command's clause loop (`with`, `plot`, `sweep` …):
    /// what follows it, the word and its span; `None` where no word starts.
    fn clause_word(&self, rest: &'a str) -> Option<(&'a str, &'a str, Span)> {
        let at = ws(rest);
        let (after, word) = ident(at).ok()?;
        Some((after, word, Span::new(self.off(at), self.off(after))))
    }

    pub(super) fn simulate(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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
            let Some((after, word, span)) = self.clause_word(rest) else {
                break;
            };
            match word {
                "with" => {
                    rest = self.once(&mut with, span, "`with`", || self.assigns(after, "with"))?;
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
                    rest = self.once(&mut plot, span, "`plot`", || {
                        self.path(after, "a file name after `plot`")
                    })?;
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

    pub(super) fn compare(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
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
        let mut sweep: Option<(Ident, Vec<SyntaxExpr>)> = None;
        let mut tol: Option<SyntaxExpr> = None;
        let mut plot: Option<PathArg> = None;
        let mut paths: Option<PathArg> = None;
        let mut table: Option<PathArg> = None;
        loop {
            let Some((after, word, span)) = self.clause_word(rest) else {
                break;
            };
            match word {
                "with" => {
                    rest = self.once(&mut with, span, "`with`", || self.assigns(after, "with"))?;
                }
                "sweep" => {
                    rest = self.once(&mut sweep, span, "`sweep`", || self.sweep(after))?;
                }
                "tol" => {
                    rest = self.once(&mut tol, span, "`tol`", || {
                        self.expect_expr(after, "a tolerance after `tol`")
                    })?;
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
                    rest = self.once(&mut plot, span, "`plot`", || {
                        self.path(after, "a file name after `plot`")
                    })?;
                }
                "table" => {
                    rest = self.once(&mut table, span, "`table`", || {
                        self.path(after, "a file name after `table`")
                    })?;
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
    pub(super) fn paths_plot(
        &self,
        input: &'a str,
    ) -> Result<Option<(&'a str, PathArg)>, NomErr<GrammarError>> {
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
    pub(super) fn phase_plot(
        &self,
        input: &'a str,
    ) -> Result<Option<(&'a str, PhasePlot)>, NomErr<GrammarError>> {
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

    pub(super) fn equilibria(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
        let (rest, (field, near, with)) = self.field_point_with(
            input,
            "equilibria",
            "near",
            "a guess such as `q = 1, p = 0`",
        )?;
        Ok((rest, CommandKind::Equilibria { field, near, with }))
    }

    pub(super) fn stability(&self, input: &'a str) -> GrammarResult<'a, CommandKind> {
        let (rest, (field, at, with)) =
            self.field_point_with(input, "stability", "at", "a point such as `q = 0, p = 0`")?;
        Ok((rest, CommandKind::Stability { field, at, with }))
    }

    /// `FIELD WORD q = …, p = … [with k = …]`, the shape of `stability`
    /// and `equilibria`.
    #[allow(clippy::type_complexity)]
    pub(super) fn field_point_with(
        &self,
        input: &'a str,
        command: &str,
        word: &str,
        point: &str,
    ) -> GrammarResult<'a, (SyntaxExpr, Vec<Assign>, Vec<Assign>)> {
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
    pub(super) fn horizon(&self, input: &'a str) -> GrammarResult<'a, SyntaxExpr> {
        let Some(after_for) = self.keyword(input, "for") else {
            return self.expected(input, "`for` and a time horizon after the initial values");
        };
        self.expect_expr(after_for, "a time horizon after `for`")
    }

    /// `NAME = v1, v2, ...` after `sweep`.
    pub(super) fn sweep(&self, input: &'a str) -> GrammarResult<'a, (Ident, Vec<SyntaxExpr>)> {
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
    pub(super) fn assigns(
        &self,
        input: &'a str,
        after_word: &str,
    ) -> GrammarResult<'a, Vec<Assign>> {
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
}
