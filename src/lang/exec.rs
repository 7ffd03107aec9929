//! Execution of statements: declarations, definitions, printing, checks,
//! `show`, session commands (`save`, `run`, `names`, `forget`, `help`,
//! `set budget`). Series and numeric commands live in `commands`.

use std::time::Instant;

use super::ast::{Ident, Rhs, Stmt, StmtKind};
use super::session::{
    ErrorKind, Report, Rich, Session, SessionError, SessionResult, Style, SymKind,
};
use super::split::SourceStmt;
use super::value::Value;
use crate::core::limits::{self, Limits};
use crate::core::Sym;
use crate::render::code;

impl Session {
    pub(crate) fn execute_parsed(
        &mut self,
        stmt: &Stmt,
        src: &SourceStmt,
        origin: Option<&str>,
        started: Instant,
    ) -> SessionResult<Report> {
        let mut report = Report::default();
        match &stmt.kind {
            StmtKind::State(ids) => self.declare_state(ids)?,
            StmtKind::Param(ids) => self.declare(ids, SymKind::Param)?,
            StmtKind::Input(ids) => self.declare(ids, SymKind::Input)?,
            StmtKind::Func(decls) => self.declare_funcs(decls)?,
            StmtKind::Define { names, rhs } => match rhs {
                Rhs::Expr(e) => {
                    if names.len() != 1 {
                        return Err(SessionError::invalid(
                            names[1].span,
                            "only a command with two results (`average … with transform`) binds two names",
                        ));
                    }
                    let v = self.eval(e)?;
                    self.bind(&names[0], v, &mut report)?;
                }
                Rhs::Command(c) => self.run_command(c, names, &mut report, started)?,
            },
            StmtKind::Print(e) => {
                let v = self.eval(e)?;
                report.push(Style::Result, v.plain());
                report.rich = Some(Rich::Value(v, self.states.clone()));
            }
            StmtKind::Run(c) => self.run_command(c, &[], &mut report, started)?,
            StmtKind::Check { lhs, rhs } => self.check(lhs, rhs, &mut report, src, origin)?,
            StmtKind::Show { expr, how, to } => self.show(expr, how, to.as_ref(), &mut report)?,
            StmtKind::Save { path, checks } => {
                if !self.replaying {
                    let p = self.resolve_path(&path.path);
                    let (text, added) = if *checks {
                        self.script_with_checks()
                    } else {
                        let mut text = self.accepted.join("\n");
                        text.push('\n');
                        (text, 0)
                    };
                    crate::lang::files::write_file(
                        &p,
                        text.as_bytes(),
                        crate::lang::files::FileKind::Script,
                    )
                    .map_err(|e| {
                        SessionError::at(
                            path.span,
                            ErrorKind::File {
                                path: path.path.clone(),
                                reason: e,
                            },
                        )
                    })?;
                    let mut note = format!("saved {} lines to {}", self.accepted.len(), path.path);
                    if *checks {
                        note.push_str(&format!(
                            " with {added} {}",
                            super::commands::plural(added, "check")
                        ));
                    }
                    report.push(Style::Note, note);
                }
            }
            StmtKind::RunFile(path) => self.run_file(&path.path, path.span, &mut report)?,
            StmtKind::Names => self.list_names(&mut report),
            StmtKind::Forget(id) => self.forget(id, &mut report)?,
            StmtKind::Help(word) => {
                let text =
                    super::help::help(word.as_ref().map(|w| w.name.as_str())).ok_or_else(|| {
                        let w = word.as_ref().map_or(String::new(), |w| w.name.clone());
                        let hint = super::diag::nearest(&w, super::help::topic_words())
                            .map(|h| format!(" (did you mean `help {h}`?)"))
                            .unwrap_or_default();
                        SessionError::invalid(
                            word.as_ref().map_or(stmt.span, |w| w.span),
                            format!("no help for `{w}`{hint}; `help` lists the topics"),
                        )
                    })?;
                for l in text.lines() {
                    report.push(Style::Plain, l);
                }
            }
            StmtKind::SetBudget(n) => {
                if n.value == 0 {
                    return Err(SessionError::invalid(n.span, "the budget must be positive"));
                }
                let mut l: Limits = limits::limits();
                let asked = usize::try_from(n.value).unwrap_or(usize::MAX);
                l.max_terms = asked;
                if let Some(memory) = crate::lang::files::usable_memory() {
                    let cap = limits::budget_cap(memory);
                    if asked > cap {
                        l.max_terms = cap;
                        report.push(
                            Style::Warn,
                            format!(
                                "a budget of {} terms could let one statement take about {} \
                                 ({} bytes a term), more than half of the {} this process may \
                                 use: capped at {cap}",
                                n.value,
                                human_bytes(
                                    u128::from(n.value) * u128::from(limits::BYTES_PER_BUDGET_TERM)
                                ),
                                limits::BYTES_PER_BUDGET_TERM,
                                human_bytes(u128::from(memory)),
                            ),
                        );
                    }
                }
                limits::set_limits(l);
                report.push(Style::Note, format!("term budget {}", l.max_terms));
            }
            StmtKind::SetTolerance(value) => self.set_tolerance(value, &mut report)?,
            StmtKind::Quit => report.quit = true,
        }
        Ok(report)
    }

    /// `show E as WORD [to FILE]`: LaTeX, the bracket form, or code for
    /// simulation; printed, or written atomically to the file.
    fn show(
        &self,
        expr: &super::ast::SyntaxExpr,
        how: &Ident,
        to: Option<&super::ast::PathArg>,
        report: &mut Report,
    ) -> SessionResult<()> {
        let v = self.eval(expr)?;
        let text = match how.name.as_str() {
            "latex" => {
                report.rich = Some(Rich::Latex);
                v.latex(&self.states)
            }
            "brackets" => match &v {
                Value::Field(f) => match &f.structure {
                    Some(terms) => super::structural::show_terms(terms),
                    None => return Err(SessionError::invalid(
                        expr.span,
                        "no bracket form: it exists for results of `magnus`, `average` and `bch` \
                             on systems written as Σ c_i(t)*X_i with named fields X_i",
                    )),
                },
                _ => {
                    return Err(SessionError::invalid(
                        expr.span,
                        format!("a {} has no bracket form", v.kind_name()),
                    ))
                }
            },
            word => {
                let Some(lang) = code::Lang::from_word(word) else {
                    return Err(SessionError::invalid(
                        how.span,
                        format!(
                            "unknown display `{word}`: use `latex`, `brackets`, or code: \
                             `python`, `julia`, `c`, `rust`"
                        ),
                    ));
                };
                let entries: Vec<&crate::core::Expr> = match &v {
                    Value::Scalar(e) => vec![e],
                    Value::Field(f) => f.field.0.iter().collect(),
                    Value::Matrix(m) => m.data.iter().collect(),
                };
                // Floating-point code needs numbers: no unspecified function,
                // no symbolic-frequency phase.
                if let Some(a) = entries.iter().find_map(|e| e.first_atom()) {
                    return Err(SessionError::invalid(
                        expr.span,
                        format!(
                            "code needs numbers, and `{a}` is an unspecified function \
                             (hint: plug a definition first, e.g. `plug(E, {}({}) = …)`)",
                            a.sig.name,
                            a.sig.params.join(", ")
                        ),
                    ));
                }
                self.refuse_phase(entries.iter().copied(), expr.span, "the value")?;
                let shape = match &v {
                    Value::Scalar(e) => code::Shape::Scalar(e),
                    Value::Field(f) => code::Shape::Field(&f.field),
                    Value::Matrix(m) => code::Shape::Matrix(m),
                };
                let name = match &expr.kind {
                    super::ast::ExprKind::Name(n) => n.clone(),
                    _ => "ordex_value".to_string(),
                };
                let declared: Vec<Sym> = self
                    .symbols
                    .iter()
                    .filter(|(_, k)| **k == SymKind::Param)
                    .map(|(n, _)| Sym::new(n))
                    .collect();
                let mut declared = declared;
                declared.sort();
                let params = code::parameters(&shape, &self.states, &declared);
                code::function(lang, &name, &shape, &self.states, &params)
            }
        };
        match to {
            None => {
                for l in text.lines() {
                    report.push(Style::Result, l);
                }
            }
            Some(path) => {
                if !self.replaying {
                    let p = self.resolve_path(&path.path);
                    let mut bytes = text.into_bytes();
                    if !bytes.ends_with(b"\n") {
                        bytes.push(b'\n');
                    }
                    let kind = crate::lang::files::FileKind::Code;
                    crate::lang::files::write_file(&p, &bytes, kind).map_err(|e| {
                        SessionError::at(
                            path.span,
                            ErrorKind::File {
                                path: path.path.clone(),
                                reason: e,
                            },
                        )
                    })?;
                    report.push(Style::Note, format!("wrote {} to {}", how.name, path.path));
                }
            }
        }
        Ok(())
    }

    pub(crate) fn check_new_name(
        &self,
        id: &Ident,
        allow_redefine_value: bool,
    ) -> SessionResult<()> {
        if let Some(k) = self.symbols.get(&id.name) {
            let what = match k {
                SymKind::State => "a state coordinate",
                SymKind::Param => "a parameter",
                SymKind::Input => "an input",
                SymKind::Func => "an unspecified function",
            };
            return Err(SessionError::invalid(
                id.span,
                format!("`{}` is already {what}", id.name),
            ));
        }
        if !allow_redefine_value && self.names.contains_key(&id.name) {
            return Err(SessionError::invalid(
                id.span,
                format!(
                    "`{}` is already defined (use `forget {}` first)",
                    id.name, id.name
                ),
            ));
        }
        if super::builtins::is_builtin(&id.name) {
            return Err(SessionError::invalid(
                id.span,
                format!("`{}` is a built-in function", id.name),
            ));
        }
        Ok(())
    }

    fn declare_state(&mut self, ids: &[Ident]) -> SessionResult<()> {
        let new: Vec<String> = ids.iter().map(|i| i.name.clone()).collect();
        let old: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        if new == old {
            return Ok(());
        }
        if !self.states.is_empty() && self.names.values().any(|v| !matches!(v, Value::Scalar(_))) {
            return Err(SessionError::invalid(
                ids.first().map_or_else(Default::default, |i| i.span),
                format!(
                    "the state is ({}) and fields or matrices are defined on it: changing it would \
                     invalidate them (start a new session, or `forget` them first)",
                    old.join(", ")
                ),
            ));
        }
        for (i, id) in ids.iter().enumerate() {
            if ids[..i].iter().any(|j| j.name == id.name) {
                return Err(SessionError::invalid(
                    id.span,
                    format!("`{}` is listed twice", id.name),
                ));
            }
            if self.symbols.get(&id.name) != Some(&SymKind::State) {
                self.check_new_name(id, false)?;
            }
        }
        self.check_state_against_charts(ids)?;
        for s in &old {
            self.symbols.remove(s);
        }
        self.states = ids.iter().map(|i| Sym::new(&i.name)).collect();
        for id in ids {
            self.symbols.insert(id.name.clone(), SymKind::State);
        }
        Ok(())
    }

    /// `func V(s), J(a, b)`: checks every declaration before recording
    /// any; declaring a function again with the same arguments is a no-op.
    fn declare_funcs(&mut self, decls: &[super::ast::FuncDecl]) -> SessionResult<()> {
        use crate::core::func::Signature;
        let mut new: Vec<Signature> = Vec::new();
        for (i, d) in decls.iter().enumerate() {
            let sig = Signature {
                name: d.name.name.clone(),
                params: d.params.iter().map(|p| p.name.clone()).collect(),
            };
            if decls[..i].iter().any(|e| e.name.name == d.name.name) {
                return Err(SessionError::invalid(
                    d.name.span,
                    format!("`{}` is listed twice", d.name.name),
                ));
            }
            for (j, p) in d.params.iter().enumerate() {
                if d.params[..j].iter().any(|o| o.name == p.name) {
                    return Err(SessionError::invalid(
                        p.span,
                        format!("argument `{}` is listed twice", p.name),
                    ));
                }
            }
            if let Some(old) = self.funcs.get(&d.name.name) {
                if **old == sig {
                    continue;
                }
                return Err(SessionError::invalid(
                    d.name.span,
                    format!(
                        "`{}` is already declared as `{}({})`",
                        old.name,
                        old.name,
                        old.params.join(", ")
                    ),
                ));
            }
            self.check_new_name(&d.name, false)?;
            new.push(sig);
        }
        for sig in new {
            self.symbols.insert(sig.name.clone(), SymKind::Func);
            self.funcs
                .insert(sig.name.clone(), std::sync::Arc::new(sig));
        }
        Ok(())
    }

    fn declare(&mut self, ids: &[Ident], kind: SymKind) -> SessionResult<()> {
        for id in ids {
            if self.symbols.get(&id.name) == Some(&kind) {
                continue;
            }
            self.check_new_name(id, false)?;
        }
        for id in ids {
            Sym::new(&id.name);
            self.symbols.insert(id.name.clone(), kind);
        }
        Ok(())
    }

    /// Binds a value to a name, saying so when it replaces an old value.
    pub(crate) fn bind(&mut self, id: &Ident, v: Value, report: &mut Report) -> SessionResult<()> {
        self.check_new_name(id, true)?;
        let summary = self.describe(&v);
        self.record_chart(&id.name, &v);
        let old = self.names.insert(id.name.clone(), v);
        let replaced = old.is_some();
        if let Some(old) = old {
            self.retire(&id.name, old);
        }
        self.bound.push(super::session::Bound {
            line: self.accepted.len(),
            name: id.name.clone(),
            retired: None,
        });
        if replaced {
            report.push(
                Style::Note,
                format!("{}: {summary} (replaces the previous {})", id.name, id.name),
            );
        } else {
            self.order.push(id.name.clone());
            report.push(Style::Note, format!("{}: {summary}", id.name));
        }
        Ok(())
    }

    /// A one-line description of a value's kind (a field on the current chart).
    pub(crate) fn describe(&self, v: &Value) -> String {
        self.describe_on(v, &self.states)
    }

    /// A one-line description of a value's kind, a field on `chart`.
    fn describe_on(&self, v: &Value, chart: &[Sym]) -> String {
        match v {
            Value::Scalar(e) => {
                let tv = if e.is_time_varying() {
                    "time-varying scalar"
                } else {
                    "scalar"
                };
                format!(
                    "{tv}, {} term{}",
                    e.len(),
                    if e.len() == 1 { "" } else { "s" }
                )
            }
            Value::Field(f) => {
                let tv = f.field.0.iter().any(|e| e.is_time_varying());
                let n = f.field.n_terms();
                let mut s = format!(
                    "{}field on {}, {} term{}",
                    if tv { "time-varying " } else { "" },
                    super::chart::chart_name(chart),
                    n,
                    if n == 1 { "" } else { "s" }
                );
                if tv {
                    let exprs: Vec<&crate::core::Expr> = f.field.0.iter().collect();
                    if let Some(p) = crate::series::chrono::period_of(&exprs) {
                        if f.field.0.iter().all(|e| e.check_periodic().is_ok()) {
                            s.push_str(&format!(", period {p}"));
                        }
                    }
                }
                let phases = super::phase::phases_all(&f.field.0);
                if let Some(w) = phases.first().and_then(|p| super::phase::param_of(*p)) {
                    s.push_str(&format!(
                        ", symbolic frequency {0} (for `average … in 1/{0}`)",
                        w.name()
                    ));
                }
                s
            }
            Value::Matrix(m) => format!("{}x{} matrix", m.rows, m.cols),
        }
    }

    fn list_names(&self, report: &mut Report) {
        let by_kind = |k: SymKind| -> Vec<String> {
            self.symbols
                .iter()
                .filter(|(_, v)| **v == k)
                .map(|(n, _)| n.clone())
                .collect()
        };
        if !self.states.is_empty() {
            report.push(Style::Plain, format!("state  {}", self.state_list()));
        }
        let params = by_kind(SymKind::Param);
        if !params.is_empty() {
            report.push(Style::Plain, format!("param  {}", params.join(", ")));
        }
        let inputs = by_kind(SymKind::Input);
        if !inputs.is_empty() {
            report.push(Style::Plain, format!("input  {}", inputs.join(", ")));
        }
        if !self.funcs.is_empty() {
            let shown: Vec<String> = self
                .funcs
                .values()
                .map(|f| format!("{}({})", f.name, f.params.join(", ")))
                .collect();
            report.push(Style::Plain, format!("func   {}", shown.join(", ")));
        }
        for line in self.chart_lines() {
            report.push(Style::Plain, line);
        }
        for n in &self.order {
            if let Some(v) = self.names.get(n) {
                let chart = self.chart_of_name(n).unwrap_or(&self.states);
                report.push(Style::Plain, format!("{n}: {}", self.describe_on(v, chart)));
            }
        }
        if report.lines.is_empty() {
            report.push(Style::Plain, "nothing declared or defined yet");
        }
    }

    /// `forget NAME`: a defined value, or a parameter or input that no
    /// defined value uses. Coordinates stay (a new `state` replaces the state).
    fn forget(&mut self, id: &Ident, report: &mut Report) -> SessionResult<()> {
        let name = id.name.as_str();
        if let Some(old) = self.names.remove(name) {
            self.retire(name, old);
            self.order.retain(|n| n != name);
            self.forget_chart(name);
            report.push(Style::Note, format!("forgot {name}"));
            return Ok(());
        }
        let what = match self.symbols.get(name) {
            None => {
                return Err(SessionError::at(
                    id.span,
                    ErrorKind::UnknownName {
                        name: name.to_string(),
                        suggestion: self.suggest(name),
                    },
                ))
            }
            Some(SymKind::State) => {
                let msg = if self.is_chart_coordinate(name) {
                    format!("`{name}` is a coordinate of a chart made by `change` or `average … as`: charts stay for the session")
                } else {
                    format!(
                        "`{name}` is a state coordinate: it goes only with the whole state \
                         (`state …` declares a new one, refused while fields are defined)"
                    )
                };
                return Err(SessionError::invalid(id.span, msg));
            }
            Some(SymKind::Param) => "parameter",
            Some(SymKind::Input) => "input",
            Some(SymKind::Func) => {
                return Err(SessionError::invalid(
                    id.span,
                    format!("`{name}` is a declared function: functions stay for the session"),
                ))
            }
        };
        let users: Vec<&String> = self
            .order
            .iter()
            .filter(|n| self.names.get(*n).is_some_and(|v| value_uses(v, name)))
            .collect();
        if !users.is_empty() {
            let list: Vec<&str> = users.iter().map(|n| n.as_str()).collect();
            return Err(SessionError::invalid(
                id.span,
                format!(
                    "the {what} `{name}` is used by {}: forget {} first",
                    list.join(", "),
                    if list.len() == 1 { "it" } else { "them" }
                ),
            ));
        }
        self.symbols.remove(name);
        report.push(Style::Note, format!("forgot the {what} {name}"));
        Ok(())
    }

    fn check(
        &self,
        lhs: &super::ast::SyntaxExpr,
        rhs: &super::ast::SyntaxExpr,
        report: &mut Report,
        src: &SourceStmt,
        origin: Option<&str>,
    ) -> SessionResult<()> {
        let a = self.eval(lhs)?;
        let b = self.eval(rhs)?;
        let span = lhs.span.join(rhs.span);
        let core = |e| SessionError::core(span, e);
        let diff: Option<Value> = match (&a, &b) {
            (Value::Scalar(x), Value::Scalar(y)) => {
                let d = x.sub(y);
                (!d.is_zero()).then_some(Value::Scalar(d))
            }
            (Value::Field(x), Value::Field(y)) => {
                let d = x.field.sub(&y.field).map_err(core)?;
                (!d.is_zero()).then_some(Value::field(d))
            }
            (Value::Matrix(x), Value::Matrix(y)) => {
                let d = x.add_scaled(y, &crate::core::Q::int(-1)).map_err(core)?;
                (!d.is_zero()).then_some(Value::Matrix(d))
            }
            _ => {
                return Err(SessionError::at(
                    span,
                    ErrorKind::Kind {
                        op: "`==`".to_string(),
                        left: a.kind_name(),
                        right: Some(b.kind_name()),
                    },
                ))
            }
        };
        match diff {
            None => report.push(Style::Pass, "holds"),
            Some(d) => {
                report.check_failed = true;
                let (line, _) = src.locate(0);
                let place = match origin {
                    Some(o) => format!("{o}:{line}"),
                    None => format!("line {}", line + self.line_offset),
                };
                report.push(
                    Style::Fail,
                    format!("check failed at {place}: {}", src.text.trim()),
                );
                report.push(Style::Fail, format!("  left:       {}", a.plain()));
                report.push(Style::Fail, format!("  right:      {}", b.plain()));
                report.push(Style::Fail, format!("  difference: {}", d.plain()));
            }
        }
        Ok(())
    }

    fn run_file(
        &mut self,
        path: &str,
        span: super::ast::Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        if self.run_depth >= 16 {
            return Err(SessionError::invalid(
                span,
                "`run` is nested more than 16 deep (a script runs itself?)",
            ));
        }
        let p = self.resolve_path(path);
        let text = crate::lang::files::read_script(&p).map_err(|reason| {
            SessionError::at(
                span,
                ErrorKind::File {
                    path: path.to_string(),
                    reason,
                },
            )
        })?;
        self.run_depth += 1;
        let mut events = Vec::new();
        let status = self.run_text(&text, Some(path), &mut |e| events.push(e));
        self.run_depth -= 1;
        let mut nested_error = None;
        for e in events {
            match e {
                super::session::Event::Report(r) => {
                    report.lines.extend(r.lines);
                    report.plots.extend(r.plots);
                    report.check_failed |= r.check_failed;
                    report.journal.extend(r.journal);
                }
                super::session::Event::Error(msg) => nested_error = Some(msg),
            }
        }
        if let Some(message) = nested_error {
            let ran = std::mem::take(&mut report.journal);
            let printed = std::mem::take(&mut report.lines);
            return Err(SessionError::at(
                span,
                ErrorKind::Nested {
                    message,
                    ran,
                    printed,
                    check_failed: report.check_failed,
                },
            ));
        }
        if status.quit {
            report.quit = true;
        }
        Ok(())
    }
}

/// A byte count for messages: `23.5 GiB`.
fn human_bytes(bytes: u128) -> String {
    const UNITS: [&str; 6] = ["bytes", "KiB", "MiB", "GiB", "TiB", "PiB"];
    let mut value = bytes as f64;
    let mut unit = 0;
    while value >= 1024.0 && unit + 1 < UNITS.len() {
        value /= 1024.0;
        unit += 1;
    }
    if unit == 0 {
        format!("{bytes} bytes")
    } else {
        format!("{value:.1} {}", UNITS[unit])
    }
}

/// Whether a value mentions the symbol `name` (or an iterated integral of it).
fn value_uses(v: &Value, name: &str) -> bool {
    let uses = |e: &crate::core::Expr| {
        e.symbols().iter().any(|s| {
            let n = s.name();
            n == name
                || n.strip_prefix("iint(")
                    .and_then(|r| r.strip_suffix(')'))
                    .is_some_and(|args| args.split(", ").any(|a| a == name))
        })
    };
    match v {
        Value::Scalar(e) => uses(e),
        Value::Field(f) => f.field.0.iter().any(uses),
        Value::Matrix(m) => m.data.iter().any(uses),
    }
}
