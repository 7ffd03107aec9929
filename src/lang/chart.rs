//! Charts: named ordered sets of coordinates, and the values that live in them.
//!
//! The declared `state` is the first chart. `change A to r, phi by …` makes
//! a new one (`(r, phi)`), and `average … as z1, z2` names the averaged
//! state's chart. Every bound field carries the chart it was made in (and a
//! scalar or matrix the chart whose coordinates it mentions; one that
//! mentions none is free of charts). A statement runs in the chart of what
//! it mentions: the session's coordinates are that chart's for the length
//! of the statement, so field literals, brackets, Lie derivatives, series
//! and numerical commands all work in it. A statement that mentions two
//! charts is refused, naming both. The coordinate-change mathematics is in
//! `core::chart`.

use std::collections::BTreeMap;

use super::ast::{Arg, Assign, Command, CommandKind, ExprKind, Ident, Rhs, Span, SyntaxExpr};
use super::ast::{Stmt, StmtKind};
use super::session::{Report, Session, SessionError, SessionResult, Style, SymKind};
use super::value::{FieldValue, Value};
use crate::core::chart::Change;
use crate::core::{CoreError, Expr, Field, Sym};
use crate::render::plain;

/// The charts of a session beyond the declared state, and which chart each
/// bound name lives in.
#[derive(Clone, Debug, Default)]
pub struct Charts {
    /// Charts other than the declared state, in order of creation.
    list: Vec<Vec<Sym>>,
    /// `(z chart, system chart)`: a chart named by `average … as` for the
    /// averaged state of a system on the other chart (`compare` relates them).
    averaged_of: Vec<(Vec<Sym>, Vec<Sym>)>,
    /// The chart of each bound name that depends on one.
    of_name: BTreeMap<String, Vec<Sym>>,
    /// The declared state while a statement runs in another chart.
    declared: Vec<Sym>,
    /// A command left its result in another chart (the session's coordinates
    /// are put back after the statement).
    moved: bool,
}

/// `(r, phi)`.
pub fn chart_name(coords: &[Sym]) -> String {
    let names: Vec<String> = coords.iter().map(|s| s.name()).collect();
    format!("({})", names.join(", "))
}

/// What the session's coordinates were before a statement, to be put back.
pub(crate) struct Scope {
    saved: Vec<Sym>,
    swapped: bool,
}

/// A name mentioned by a statement, with where.
struct Mention<'a> {
    name: &'a str,
    span: Span,
    /// In the model position of `compare` (an averaged chart counts as its
    /// system's chart there).
    model: bool,
}

impl Session {
    /// The chart whose coordinate `name` is, if any.
    fn chart_of_coordinate(&self, name: &str) -> Option<&[Sym]> {
        if self.states.iter().any(|s| s.name() == name) {
            return Some(&self.states);
        }
        if self.charts.declared.iter().any(|s| s.name() == name) {
            return Some(&self.charts.declared);
        }
        self.charts
            .list
            .iter()
            .find(|c| c.iter().any(|s| s.name() == name))
            .map(Vec::as_slice)
    }

    /// Whether `name` is a coordinate of a chart other than the declared state.
    pub(crate) fn is_chart_coordinate(&self, name: &str) -> bool {
        self.charts
            .list
            .iter()
            .any(|c| c.iter().any(|s| s.name() == name))
    }

    /// The charts other than the declared state, for `names`.
    pub(crate) fn chart_lines(&self) -> Vec<String> {
        self.charts
            .list
            .iter()
            .map(|c| {
                let base = self
                    .charts
                    .averaged_of
                    .iter()
                    .find(|(z, _)| z == c)
                    .map(|(_, x)| format!(" (averaged state of {})", chart_name(x)))
                    .unwrap_or_default();
                let names: Vec<String> = c.iter().map(|s| s.name()).collect();
                format!("chart  {}{base}", names.join(", "))
            })
            .collect()
    }

    /// The chart a bound name lives in, when it depends on one.
    pub(crate) fn chart_of_name(&self, name: &str) -> Option<&[Sym]> {
        self.charts.of_name.get(name).map(Vec::as_slice)
    }

    fn mention_chart(&self, m: &Mention) -> Option<Vec<Sym>> {
        let chart = self
            .chart_of_coordinate(m.name)
            .or_else(|| self.chart_of_name(m.name))?
            .to_vec();
        if m.model {
            if let Some((_, x)) = self.charts.averaged_of.iter().find(|(z, _)| *z == chart) {
                return Some(x.clone());
            }
        }
        Some(chart)
    }

    /// Puts the session in the chart of what `stmt` mentions; refuses a
    /// statement that mentions two charts.
    pub(crate) fn enter_chart(&mut self, stmt: &Stmt) -> SessionResult<Scope> {
        self.charts.moved = false;
        let saved = self.states.clone();
        self.charts.declared = saved.clone();
        let mut mentions = Vec::new();
        stmt_mentions(stmt, &mut mentions);
        let mut found: Option<(Vec<Sym>, &Mention)> = None;
        for m in &mentions {
            let Some(chart) = self.mention_chart(m) else {
                continue;
            };
            match &found {
                None => found = Some((chart, m)),
                Some((c, first)) if *c != chart => {
                    return Err(SessionError::invalid(
                        m.span,
                        format!(
                            "cannot mix charts: `{}` is on {} and `{}` on {} (bring one into the \
                             other's coordinates with `change … to … by …`)",
                            first.name,
                            chart_name(c),
                            m.name,
                            chart_name(&chart)
                        ),
                    ));
                }
                Some(_) => {}
            }
        }
        let swapped = match found {
            Some((chart, _)) if chart != self.states => {
                self.states = chart;
                true
            }
            _ => false,
        };
        Ok(Scope { saved, swapped })
    }

    /// Puts the declared state back after a statement.
    pub(crate) fn leave_chart(&mut self, scope: Scope) {
        if scope.swapped || self.charts.moved {
            self.states = scope.saved;
        }
        self.charts.moved = false;
        self.charts.declared.clear();
    }

    /// Records the chart of a value bound to `name` (the current chart for a
    /// field; for a scalar or matrix, the current chart if it mentions one
    /// of its coordinates).
    pub(crate) fn record_chart(&mut self, name: &str, v: &Value) {
        let mentions = |es: &[Expr]| {
            es.iter()
                .any(|e| self.states.iter().any(|s| e.mentions(*s)))
        };
        let charted = match v {
            Value::Field(_) => true,
            Value::Scalar(e) => mentions(std::slice::from_ref(e)),
            Value::Matrix(m) => mentions(&m.data),
        };
        if charted {
            self.charts
                .of_name
                .insert(name.to_string(), self.states.clone());
        } else {
            self.charts.of_name.remove(name);
        }
    }

    /// Forgets the chart of a name that is forgotten.
    pub(crate) fn forget_chart(&mut self, name: &str) {
        self.charts.of_name.remove(name);
    }

    /// Refuses a `state` declaration that would split an existing chart;
    /// declaring exactly a chart's coordinates makes it the state.
    pub(crate) fn check_state_against_charts(&mut self, ids: &[Ident]) -> SessionResult<()> {
        let names: Vec<&str> = ids.iter().map(|i| i.name.as_str()).collect();
        for id in ids {
            if let Some(c) = self
                .charts
                .list
                .iter()
                .find(|c| c.iter().any(|s| s.name() == id.name))
            {
                let same =
                    c.len() == names.len() && c.iter().zip(&names).all(|(s, n)| s.name() == *n);
                if !same {
                    return Err(SessionError::invalid(
                        id.span,
                        format!(
                            "`{}` is a coordinate of the chart {}: a state uses all of a chart's \
                             coordinates in order, or new names",
                            id.name,
                            chart_name(c)
                        ),
                    ));
                }
            }
        }
        let state: Vec<Sym> = names.iter().map(|n| Sym::new(n)).collect();
        self.charts.list.retain(|c| *c != state);
        // Values of the previous state chart no longer have their coordinates.
        let old = self.states.clone();
        self.charts.of_name.retain(|_, c| *c != old);
        Ok(())
    }

    /// A new chart named `to`, or the existing chart with exactly these names.
    fn new_chart(&mut self, to: &[Ident]) -> SessionResult<Vec<Sym>> {
        for (i, id) in to.iter().enumerate() {
            if to[..i].iter().any(|j| j.name == id.name) {
                return Err(SessionError::invalid(
                    id.span,
                    format!("`{}` is listed twice", id.name),
                ));
            }
        }
        let names: Vec<&str> = to.iter().map(|i| i.name.as_str()).collect();
        if let Some(c) = self.chart_of_coordinate(&to[0].name) {
            let same = c.len() == names.len() && c.iter().zip(&names).all(|(s, n)| s.name() == *n);
            if same {
                return Ok(c.to_vec());
            }
        }
        for id in to {
            if let Some(c) = self.chart_of_coordinate(&id.name) {
                return Err(SessionError::invalid(
                    id.span,
                    format!(
                        "`{}` is a coordinate of the chart {}: a new chart needs new names \
                         (or exactly the names of an existing chart, in order)",
                        id.name,
                        chart_name(c)
                    ),
                ));
            }
            self.check_new_name(id, false)?;
        }
        let chart: Vec<Sym> = names.iter().map(|n| Sym::new(n)).collect();
        for n in &names {
            self.symbols.insert(n.to_string(), SymKind::State);
        }
        self.charts.list.push(chart.clone());
        Ok(chart)
    }

    /// `change E to NEW by OLD = ψ(NEW), …`: the value in the new chart.
    pub(crate) fn change(
        &mut self,
        target: &SyntaxExpr,
        to: &[Ident],
        by: &[Assign],
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Value> {
        let old = self.states.clone();
        if old.is_empty() {
            return Err(SessionError::invalid(
                span,
                "declare the state first (e.g. `state q, p`)",
            ));
        }
        let value = self.eval(target)?;
        if let Value::Matrix(_) = value {
            return Err(SessionError::invalid(
                target.span,
                "`change` rewrites a field or a scalar; a matrix has no single rule \
                 (change the field, then take `jac` of the result)",
            ));
        }
        if to.len() != old.len() {
            let sp = to[0].span.join(to[to.len() - 1].span);
            return Err(SessionError::invalid(
                sp,
                format!(
                    "the chart {} has {} coordinates: name {} new ones",
                    chart_name(&old),
                    old.len(),
                    old.len()
                ),
            ));
        }
        // Each old coordinate exactly once.
        let mut psi_ast: Vec<Option<&SyntaxExpr>> = vec![None; old.len()];
        for a in by {
            let Some(i) = old.iter().position(|s| s.name() == a.name.name) else {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!(
                        "`{}` is not a coordinate of {}: `by` gives each old coordinate in the new ones",
                        a.name.name,
                        chart_name(&old)
                    ),
                ));
            };
            if psi_ast[i].is_some() {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!("`{}` is given twice", a.name.name),
                ));
            }
            psi_ast[i] = Some(&a.value);
        }
        if let Some(i) = psi_ast.iter().position(Option::is_none) {
            return Err(SessionError::invalid(
                span,
                format!(
                    "`by` must give every old coordinate: `{} = …` is missing",
                    old[i].name()
                ),
            ));
        }
        let new = self.new_chart(to)?;
        // The map's right-hand sides live in the new chart.
        self.states = new.clone();
        self.charts.moved = true;
        let mut psi = Vec::with_capacity(old.len());
        let mut shown = Vec::with_capacity(old.len());
        for (s, e) in old.iter().zip(psi_ast.into_iter().flatten()) {
            let x = self.eval_scalar(e, "the value of an old coordinate")?;
            if let Some(bad) = x
                .symbols()
                .into_iter()
                .find(|y| !new.contains(y) && self.chart_of_coordinate(&y.name()).is_some())
            {
                return Err(SessionError::invalid(
                    e.span,
                    format!(
                        "`{}` must be written in the new coordinates {} (and t), but mentions `{}`",
                        s.name(),
                        chart_name(&new),
                        bad.name()
                    ),
                ));
            }
            shown.push(format!("{} = {}", s.name(), x));
            psi.push(x);
        }
        let core = |e: CoreError| SessionError::core(span, e);
        let change = Change::new(&old, &new, psi).map_err(core)?;
        let result = match value {
            Value::Scalar(h) => Value::Scalar(change.scalar(&h).map_err(core)?),
            Value::Field(f) => Value::field(change.field(&f.field).map_err(core)?),
            Value::Matrix(_) => unreachable_matrix(span)?,
        };
        report.push(
            Style::Note,
            format!(
                "change of coordinates {} -> {}: {}; det Dψ = {}{}",
                chart_name(&old),
                chart_name(&new),
                shown.join(", "),
                change.det(),
                if change.is_time_dependent() {
                    " (time-dependent: −∂_tψ included)"
                } else {
                    ""
                }
            ),
        );
        report.push(Style::Result, result.plain());
        let n = result.n_terms();
        report.push(
            Style::Note,
            format!(
                "on {}, {} {}",
                chart_name(&new),
                n,
                super::commands::plural(n, "term")
            ),
        );
        Ok(result)
    }

    /// `average … as z1, z2`: the averaged results under new names (the
    /// averaging data `compare` uses stays in the system's chart).
    pub(crate) fn name_averaged_state(
        &mut self,
        names: &[Ident],
        results: Vec<Value>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Vec<Value>> {
        let old = self.states.clone();
        if names.len() != old.len() {
            let sp = names[0].span.join(names[names.len() - 1].span);
            return Err(SessionError::invalid(
                sp,
                format!(
                    "the averaged state has {} coordinates (like {}): `as` names {} of them",
                    old.len(),
                    chart_name(&old),
                    old.len()
                ),
            ));
        }
        let new = self.new_chart(names)?;
        if new == old {
            return Ok(results);
        }
        let map: std::collections::HashMap<Sym, Sym> =
            old.iter().copied().zip(new.iter().copied()).collect();
        let core = |e: CoreError| SessionError::core(span, e);
        let rename = |f: &Field| f.map(|c| c.rename(&map, &new));
        let mut out = Vec::with_capacity(results.len());
        for v in results {
            out.push(match v {
                Value::Field(f) => Value::Field(FieldValue {
                    field: rename(&f.field).map_err(core)?,
                    ..f
                }),
                other => other,
            });
        }
        if !self.charts.averaged_of.iter().any(|(z, _)| *z == new) {
            self.charts.averaged_of.push((new.clone(), old.clone()));
        }
        // Print the orders (and the transform) under the new names.
        if let Some(Value::Field(FieldValue {
            averaged: Some(info),
            ..
        })) = out.first()
        {
            let transform = info.transform.iter().flatten();
            let printed = info
                .orders
                .iter()
                .enumerate()
                .map(|(k, f)| (format!("order {}  ", k + 1), f))
                .chain(
                    transform
                        .enumerate()
                        .map(|(k, w)| (format!("w_{}     ", k + 1), w)),
                );
            for (head, f) in printed {
                let renamed = rename(f).map_err(core)?;
                if let Some(line) = report
                    .lines
                    .iter_mut()
                    .find(|l| l.style == Style::Result && l.text.starts_with(&head))
                {
                    line.text = format!("{head}{}", plain::field(&renamed));
                }
            }
        }
        self.states = new.clone();
        self.charts.moved = true;
        let at = report.lines.len().saturating_sub(1);
        report.lines.insert(
            at,
            super::session::Line {
                style: Style::Note,
                text: format!(
                    "the averaged state z is named {} (the system is on {})",
                    chart_name(&new),
                    chart_name(&old)
                ),
            },
        );
        Ok(out)
    }

    /// The note of an averaging result without `as`: in which coordinates it is.
    pub(crate) fn note_averaged_chart(&self, report: &mut Report) {
        let at = report.lines.len().saturating_sub(1);
        report.lines.insert(
            at,
            super::session::Line {
                style: Style::Note,
                text: format!(
                    "the averaged state z is printed as {} (name it with `as`)",
                    chart_name(&self.states)
                ),
            },
        );
    }
}

fn unreachable_matrix(span: Span) -> SessionResult<Value> {
    Err(SessionError::invalid(
        span,
        "internal: matrix refused above",
    ))
}

fn stmt_mentions<'a>(stmt: &'a Stmt, out: &mut Vec<Mention<'a>>) {
    match &stmt.kind {
        StmtKind::Define { rhs, .. } => match rhs {
            Rhs::Expr(e) => expr_mentions(e, out, false),
            Rhs::Command(c) => command_mentions(c, out),
        },
        StmtKind::Print(e) => expr_mentions(e, out, false),
        StmtKind::Run(c) => command_mentions(c, out),
        StmtKind::Check { lhs, rhs } => {
            expr_mentions(lhs, out, false);
            expr_mentions(rhs, out, false);
        }
        StmtKind::Show { expr, .. } => expr_mentions(expr, out, false),
        StmtKind::State(_)
        | StmtKind::Param(_)
        | StmtKind::Input(_)
        | StmtKind::Func(_)
        | StmtKind::Save { .. }
        | StmtKind::RunFile(_)
        | StmtKind::Names
        | StmtKind::Forget(_)
        | StmtKind::Help(_)
        | StmtKind::SetBudget(_)
        | StmtKind::Quit => {}
        StmtKind::SetTolerance(e) => expr_mentions(e, out, false),
    }
}

fn ident_mention(id: &Ident, model: bool) -> Mention<'_> {
    Mention {
        name: &id.name,
        span: id.span,
        model,
    }
}

fn assign_mentions<'a>(list: &'a [Assign], out: &mut Vec<Mention<'a>>) {
    for a in list {
        out.push(ident_mention(&a.name, false));
        expr_mentions(&a.value, out, false);
    }
}

fn command_mentions<'a>(c: &'a Command, out: &mut Vec<Mention<'a>>) {
    match &c.kind {
        CommandKind::Flow { field, on, .. } => {
            expr_mentions(field, out, false);
            if let Some(h) = on {
                expr_mentions(h, out, false);
            }
        }
        CommandKind::Magnus { field, over, .. } => {
            expr_mentions(field, out, false);
            if let Some(t) = over {
                expr_mentions(t, out, false);
            }
        }
        CommandKind::Average { field, .. } | CommandKind::Carleman { field, .. } => {
            expr_mentions(field, out, false)
        }
        // The map's right-hand sides are in the new chart: `change` reads them there.
        CommandKind::Change { field, .. } => expr_mentions(field, out, false),
        CommandKind::Simulate {
            field,
            from,
            horizon,
            with,
            ..
        } => {
            expr_mentions(field, out, false);
            assign_mentions(from, out);
            expr_mentions(horizon, out, false);
            assign_mentions(with, out);
        }
        CommandKind::Compare {
            system,
            model,
            from,
            horizon,
            with,
            sweep,
            tol,
            ..
        } => {
            expr_mentions(system, out, false);
            expr_mentions(model, out, true);
            assign_mentions(from, out);
            expr_mentions(horizon, out, false);
            assign_mentions(with, out);
            for e in sweep {
                expr_mentions(e, out, false);
            }
            if let Some(e) = tol {
                expr_mentions(e, out, false);
            }
        }
        CommandKind::Stability { field, at, with }
        | CommandKind::Equilibria {
            field,
            near: at,
            with,
        } => {
            expr_mentions(field, out, false);
            assign_mentions(at, out);
            assign_mentions(with, out);
        }
    }
}

fn expr_mentions<'a>(e: &'a SyntaxExpr, out: &mut Vec<Mention<'a>>, model: bool) {
    match &e.kind {
        ExprKind::Num(_) => {}
        ExprKind::Name(n) => out.push(Mention {
            name: n,
            span: e.span,
            model,
        }),
        ExprKind::Neg(x) => expr_mentions(x, out, model),
        ExprKind::Bin(_, a, b) => {
            expr_mentions(a, out, model);
            expr_mentions(b, out, model);
        }
        ExprKind::Call(name, args) => {
            out.push(ident_mention(name, model));
            args_mentions(args, out, model);
        }
        ExprKind::Apply(head, args) => {
            expr_mentions(head, out, model);
            args_mentions(args, out, model);
        }
        ExprKind::List(items) => {
            for i in items {
                expr_mentions(i, out, model);
            }
        }
        ExprKind::Matrix(rows) => {
            for i in rows.iter().flatten() {
                expr_mentions(i, out, model);
            }
        }
    }
}

fn args_mentions<'a>(args: &'a [Arg], out: &mut Vec<Mention<'a>>, model: bool) {
    for a in args {
        match a {
            Arg::Pos(e) | Arg::BindFunc(_, _, e) => expr_mentions(e, out, model),
            Arg::Bind(id, e) => {
                out.push(ident_mention(id, model));
                expr_mentions(e, out, model);
            }
        }
    }
}
