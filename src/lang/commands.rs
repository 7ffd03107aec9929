//! The series commands: `flow`, `magnus`, `average`, `carleman`; and the
//! dispatch to the numerical commands (`simulate`, `compare`, `stability`).
//! Each prints its terms order by order, a total and a summary line, and
//! can be bound to names.

use std::time::Instant;

use super::ast::{Command, CommandKind, Ident, Span};
use super::session::{Report, Session, SessionError, SessionResult, Style, SymKind};
use super::value::{AveragedInfo, BracketTerm, FieldValue, Value};
use crate::averaging::{self, Averaged, Form, Method, Options};
use crate::core::calc::Period;
use crate::core::error::LimitKind;
use crate::core::{limits, CoreError, Expr, Field, Matrix, Sym, Q};
use crate::render::plain;
use crate::series::chrono::{self, Graded};

fn order_arg(n: u64, span: Span) -> SessionResult<usize> {
    limits::check_order(n).map_err(|e| SessionError::core(span, e))?;
    if n == 0 {
        return Err(SessionError::invalid(span, "the order must be at least 1"));
    }
    Ok(n as usize)
}

/// The bracket form is an extra over a result already computed: when it
/// alone would outgrow the term budget, say so and go on without it.
fn optional_structure<T>(
    structure: Result<Option<T>, CoreError>,
    report: &mut Report,
) -> Result<Option<T>, CoreError> {
    match structure {
        Err(
            e @ CoreError::Limit {
                kind: LimitKind::Terms,
                ..
            },
        ) => {
            report.push(Style::Warn, format!("no bracket form: {e}"));
            Ok(None)
        }
        // A system the bracket form does not cover (a letter without a
        // positive power of the small parameter, too many ad-words, …):
        // the concrete result stands; say why there is no Lie polynomial.
        Err(CoreError::Refused { reason }) => {
            report.push(Style::Note, format!("no bracket form: {reason}"));
            Ok(None)
        }
        other => other,
    }
}

impl Session {
    pub(crate) fn run_command(
        &mut self,
        cmd: &Command,
        names: &[Ident],
        report: &mut Report,
        started: Instant,
    ) -> SessionResult<()> {
        let span = cmd.span;
        let results: Vec<Value> = match &cmd.kind {
            CommandKind::Flow { field, on, to } => {
                want_results(names, 1, span)?;
                let n = order_arg(to.value, to.span)?;
                let v = self.eval_field(field, "the field of `flow`")?;
                self.refuse_phase(&v.field.0, field.span, "the field of `flow`")?;
                let h = match on {
                    Some(h) => Some(self.eval_scalar(h, "the output of `flow … on h`")?),
                    None => None,
                };
                vec![self.flow(&v.field, h, n, span, report)?]
            }
            CommandKind::Magnus { field, to, over } => {
                want_results(names, 1, span)?;
                let n = order_arg(to.value, to.span)?;
                let v = self.eval_field(field, "the field of `magnus`")?;
                self.refuse_phase(&v.field.0, field.span, "the field of `magnus`")?;
                let period = match over {
                    Some(t) => Some((
                        self.eval_scalar(t, "the horizon of `magnus … over T`")?,
                        t.span,
                    )),
                    None => None,
                };
                vec![self.magnus(&v, n, period, span, report)?]
            }
            CommandKind::Average { .. } => self.run_average(cmd, names, report)?,
            CommandKind::Change { field, to, by } => {
                want_results(names, 1, span)?;
                vec![self.change(field, to, by, span, report)?]
            }
            CommandKind::Carleman { field, degree } => {
                want_results(names, 1, span)?;
                let v = self.eval_field(field, "the field of `carleman`")?;
                if degree.value > 12 {
                    return Err(SessionError::invalid(
                        degree.span,
                        "the degree of a Carleman section is at most 12",
                    ));
                }
                vec![self.carleman(&v.field, degree.value as u32, span, report)?]
            }
            CommandKind::Simulate { .. }
            | CommandKind::Compare { .. }
            | CommandKind::Stability { .. }
            | CommandKind::Equilibria { .. } => {
                want_results(names, 0, span)?;
                self.run_numeric(cmd, report)?;
                Vec::new()
            }
        };
        if self.show_timing {
            append_timing(report, started);
        }
        for (name, value) in names.iter().zip(results) {
            let mut tmp = Report::default();
            self.bind(name, value, &mut tmp)?;
        }
        Ok(())
    }

    /// `average`: the options checked, the averaging run (in eps or in a
    /// symbolic frequency `1/w`), the averaged state named.
    fn run_average(
        &mut self,
        cmd: &Command,
        names: &[Ident],
        report: &mut Report,
    ) -> SessionResult<Vec<Value>> {
        let span = cmd.span;
        let CommandKind::Average {
            field,
            to,
            param,
            inverse,
            method,
            depth,
            with_transform,
            chart,
        } = &cmd.kind
        else {
            return Err(SessionError::invalid(span, "not `average`"));
        };
        let n = order_arg(to.value, to.span)?;
        let v = self.eval_field(field, "the system of `average`")?;
        let eps = self.param_sym(param)?;
        if !*inverse {
            self.refuse_phase(&v.field.0, field.span, "the system of `average … in eps`")?;
        }
        let method = match method.as_ref().map(|m| m.name.as_str()) {
            None | Some("strobo") => Method::Strobo,
            Some("classic") => Method::Classic,
            Some(other) => {
                let sp = method.as_ref().map_or(span, |m| m.span);
                return Err(SessionError::invalid(
                    sp,
                    format!("unknown method `{other}`: use `strobo` or `classic`"),
                ));
            }
        };
        if *with_transform && method != Method::Classic {
            return Err(SessionError::invalid(
                span,
                "`with transform` goes with `classic` (stroboscopic averaging needs no transform)",
            ));
        }
        want_results(names, if *with_transform { 2 } else { 1 }, span)?;
        let depth = match depth {
            Some(d) => {
                limits::check_order(d.value).map_err(|e| SessionError::core(d.span, e))?;
                d.value
            }
            None => 8,
        };
        let opts = Options {
            method,
            order: n,
            depth,
            with_transform: *with_transform,
        };
        let results = if *inverse {
            self.average_in_frequency(&v, eps, &opts, span, report)?
        } else {
            self.average(&v, eps, &opts, span, report)?
        };
        if chart.is_empty() {
            self.note_averaged_chart(report);
            Ok(results)
        } else {
            self.name_averaged_state(chart, results, span, report)
        }
    }

    pub(crate) fn param_sym(&self, id: &Ident) -> SessionResult<Sym> {
        match self.sym_kind(&id.name) {
            Some(SymKind::Param) => Ok(Sym::new(&id.name)),
            _ => Err(SessionError::invalid(
                id.span,
                format!(
                    "`{}` must be a parameter (declare it with `param {}`)",
                    id.name, id.name
                ),
            )),
        }
    }

    fn input_syms(&self) -> Vec<Sym> {
        self.symbols
            .iter()
            .filter(|(_, k)| **k == SymKind::Input)
            .map(|(n, _)| Sym::new(n))
            .collect()
    }

    fn flow(
        &self,
        v: &Field,
        h: Option<Expr>,
        n: usize,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Value> {
        let core = |e: CoreError| SessionError::core(span, e);
        let inputs: Vec<Sym> = self
            .input_syms()
            .into_iter()
            .filter(|u| v.0.iter().any(|c| c.mentions(*u)))
            .collect();
        let outputs: Vec<Expr> = match &h {
            Some(h) => vec![h.clone()],
            None => self.states.iter().map(|s| Expr::sym(*s)).collect(),
        };
        // Without inputs every output comes from one expansion of the
        // solution (the coordinates' terms are shared).
        let per_output: Vec<Vec<Expr>> = if inputs.is_empty() {
            chrono::flow_outputs(v, &outputs, n, &self.states).map_err(core)?
        } else {
            outputs
                .iter()
                .map(|out| super::structural::chen_fliess_terms(v, out, n, &inputs, &self.states))
                .collect::<Result<_, _>>()
                .map_err(core)?
        };
        if !inputs.is_empty() {
            report.push(Style::Note, "Chen–Fliess series: iint(u_i1, …, u_ik) is the iterated integral, first argument at the latest time");
        }
        let mut n_terms = 0;
        for k in 0..n {
            let line = if h.is_some() {
                per_output[0][k].to_string()
            } else {
                plain::field(&Field(per_output.iter().map(|t| t[k].clone()).collect()))
            };
            n_terms += per_output.iter().map(|t| t[k].len()).sum::<usize>();
            report.push(Style::Result, format!("order {}  {}", k + 1, line));
        }
        let totals: Vec<Expr> = outputs
            .iter()
            .zip(&per_output)
            .map(|(o, ts)| ts.iter().fold(o.clone(), |acc, t| acc.add(t)))
            .collect();
        let value = if h.is_some() {
            Value::Scalar(totals[0].clone())
        } else {
            Value::field(Field(totals))
        };
        report.push(Style::Result, format!("total    {}", value.plain()));
        report.push(Style::Note, summary(n, n_terms));
        Ok(value)
    }

    fn magnus(
        &self,
        v: &FieldValue,
        n: usize,
        over: Option<(Expr, Span)>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Value> {
        let core = |e: CoreError| SessionError::core(span, e);
        let (horizon, period, horizon_span) = magnus_horizon(v, over, span)?;
        let w = chrono::magnus_generator(&Graded::single(v.field.clone()), n, &self.states)
            .map_err(core)?;
        let mut orders = Vec::with_capacity(n);
        for wk in &w {
            let at = match &period {
                Some(p) => chrono::field_at_period(wk, p),
                None => wk.map(|e| chrono::at_time(e, &horizon, &self.states)),
            }
            .map_err(|e| match e {
                CoreError::Irrational { what } => {
                    irrational_horizon(&what, &horizon, &v.field, horizon_span)
                }
                other => core(other),
            })?;
            orders.push(at);
        }
        report.push(
            Style::Note,
            format!("chronological logarithm W over [0, {horizon}]"),
        );
        let mut total = Field::zero(self.states.len());
        let mut n_terms = 0;
        for (k, f) in orders.iter().enumerate() {
            report.push(
                Style::Result,
                format!("order {}  {}", k + 1, plain::field(f)),
            );
            total = total.add(f).map_err(core)?;
            n_terms += f.n_terms();
        }
        report.push(Style::Result, format!("total    {}", plain::field(&total)));
        let structure = match &v.combo {
            Some(combo) => optional_structure(
                super::structural::magnus_structure(
                    combo,
                    n,
                    &horizon,
                    period.as_ref(),
                    None,
                    &self.states,
                ),
                report,
            )
            .map_err(core)?,
            None => None,
        };
        if structure.is_some() {
            report.push(
                Style::Note,
                "bracket form available: `show NAME as brackets`",
            );
        }
        report.push(Style::Note, summary(n, n_terms));
        Ok(Value::Field(FieldValue {
            field: total,
            combo: None,
            structure,
            averaged: None,
        }))
    }

    fn average(
        &self,
        v: &FieldValue,
        eps: Sym,
        opts: &Options,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Vec<Value>> {
        let core = |e: CoreError| SessionError::core(span, e);
        let res = averaging::average(&v.field, eps, opts, &self.states)
            .map_err(|e| core(name_small_parameter(e, eps)))?;
        let e = eps.name();
        report_averaging_form(&res, &e, report);
        let method = opts.method.adjective();
        report.push(
            Style::Note,
            format!("{method} averaging in {e} to order {}", opts.order),
        );
        let mut n_terms = 0;
        for (k, f) in res.orders.iter().enumerate() {
            report.push(
                Style::Result,
                format!("order {}  {}", k + 1, plain::field(f)),
            );
            n_terms += f.n_terms();
        }
        let total = res.total(eps).map_err(core)?;
        let structure = self
            .averaged_structure(v, &res, eps, opts, report)
            .map_err(core)?;
        if structure.is_some() {
            report.push(
                Style::Note,
                "bracket form available: `show NAME as brackets`",
            );
        } else if v.combo.is_some() && opts.method == Method::Classic && opts.order > 2 {
            report.push(
                Style::Note,
                "no bracket form: from order 3 the classical averaged field is not a Lie polynomial \
                 (it depends on the coordinates); use `strobo` or order 2 for one",
            );
        }
        let info = AveragedInfo {
            eps,
            orders: res.orders.clone(),
            transform: res.transform.clone(),
            period: res.period.clone(),
            classic: opts.method == Method::Classic,
            outer: res.outer_at_zero(),
        };
        let mut out = vec![Value::Field(FieldValue {
            field: total,
            combo: None,
            structure,
            averaged: Some(std::sync::Arc::new(info)),
        })];
        if !opts.with_transform {
        } else if let Some(w) = res.transform_total(eps).map_err(core)? {
            for (k, wk) in res.transform.iter().flatten().enumerate() {
                report.push(
                    Style::Result,
                    format!("w_{}     {}", k + 1, plain::field(wk)),
                );
            }
            out.push(Value::field(w));
        }
        report.push(Style::Note, summary(opts.order, n_terms));
        Ok(out)
    }

    /// The bracket form of an averaged result, when the system was written
    /// over named fields and the method and form give one (with a note on
    /// the letters a fast-oscillation form treats as commuting).
    fn averaged_structure(
        &self,
        v: &FieldValue,
        res: &Averaged,
        eps: Sym,
        opts: &Options,
        report: &mut Report,
    ) -> Result<Option<Vec<BracketTerm>>, CoreError> {
        Ok(match (&v.combo, &res.form) {
            (Some(combo), Form::Standard) => match opts.method {
                Method::Strobo => optional_structure(
                    super::structural::magnus_structure(
                        combo,
                        opts.order,
                        &res.period.to_expr(),
                        Some(&res.period),
                        Some(eps),
                        &self.states,
                    ),
                    report,
                )?,
                Method::Classic => optional_structure(
                    super::structural::classic_structure(combo, opts.order, &res.period, eps),
                    report,
                )?,
            },
            (Some(combo), Form::FastOscillation { zero_mean, .. }) => {
                let s = optional_structure(
                    super::structural::fast_oscillation_structure(
                        combo,
                        opts.order,
                        &res.period,
                        eps,
                        *zero_mean,
                        opts.depth,
                        &self.states,
                    ),
                    report,
                )?;
                if s.is_some() {
                    let g: Vec<&str> = combo
                        .parts
                        .iter()
                        .filter(|(_, _, c)| !c.coeff_of_power(eps, 0).is_zero())
                        .map(|(n, _, _)| n.as_str())
                        .collect();
                    report.push(
                        Style::Note,
                        format!(
                            "bracket form in the letters with {} commuting (as the fast-oscillation \
                             form needs): over ad-words [G, [G, …]], those that vanish on these \
                             fields left out",
                            g.join(", ")
                        ),
                    );
                }
                s
            }
            _ => None,
        })
    }

    fn carleman(
        &self,
        x: &Field,
        degree: u32,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Value> {
        let core = |e: CoreError| SessionError::core(span, e);
        if let Some(a) = x.0.iter().find_map(Expr::first_atom) {
            return Err(SessionError::invalid(
                span,
                format!(
                    "`carleman` needs a polynomial field, and `{a}` is an unspecified function: \
                     its section on monomials is not finite (plug a polynomial definition first, \
                     e.g. `plug(X, {}({}) = …)`)",
                    a.sig.name,
                    a.sig.params.join(", ")
                ),
            ));
        }
        // The section is a dense N x N matrix on the C(n + d, d) monomials:
        // with many states it is astronomically large, so count its entries
        // against the term budget before building anything.
        let n_basis = binomial(
            self.states.len() as u64 + u64::from(degree),
            u64::from(degree),
        );
        limits::check_terms(usize::try_from(n_basis.saturating_mul(n_basis)).unwrap_or(usize::MAX))
            .map_err(core)?;
        let basis = monomial_basis(&self.states, degree);
        let index = |m: &Expr| basis.iter().position(|b| b == m);
        let mut data = vec![Expr::zero(); basis.len() * basis.len()];
        for (j, m) in basis.iter().enumerate() {
            let xm = x.lie_derivative(m, &self.states).map_err(core)?;
            for (key, c) in xm.split_by_state_monomial(&self.states).map_err(|bad| {
                SessionError::invalid(span, format!("`carleman` needs a polynomial field; `{bad}` is not a polynomial in the state"))
            })? {
                if key.degree_in(&self.states) > degree as i64 {
                    continue;
                }
                let mono = Expr::term(crate::core::expr::Key { mono: key, ..crate::core::expr::Key::one() }, Q::ONE);
                if let Some(i) = index(&mono) {
                    data[i * basis.len() + j] = data[i * basis.len() + j].add(&c);
                }
            }
        }
        let names: Vec<String> = basis.iter().map(|b| b.to_string()).collect();
        report.push(
            Style::Note,
            format!(
                "basis (graded lexicographic, constant first): {}",
                names.join(", ")
            ),
        );
        let m = Matrix {
            rows: basis.len(),
            cols: basis.len(),
            data,
        };
        report.push(Style::Result, plain::matrix(&m));
        report.push(
            Style::Note,
            format!(
                "{}x{} section, {} terms",
                basis.len(),
                basis.len(),
                m.data.iter().map(Expr::len).sum::<usize>()
            ),
        );
        Ok(Value::Matrix(m))
    }
}

/// The averaging core calls the order-0 part of the system "the eps^0
/// part"; say it with the small parameter actually used (`in k`).
fn name_small_parameter(e: CoreError, eps: Sym) -> CoreError {
    match e {
        CoreError::Refused { reason } => CoreError::Refused {
            reason: reason.replace("eps^0", &format!("{}^0", eps.name())),
        },
        other => other,
    }
}

/// A horizon at which some `cos`/`sin` of time is irrational: ordex keeps
/// coefficients rational (no algebraic numbers such as sqrt(3)), so say
/// where the values are rational for this field's frequencies.
fn irrational_horizon(what: &str, horizon: &Expr, field: &Field, span: Span) -> SessionError {
    let mut g: Option<Q> = None;
    for f in field.0.iter().flat_map(Expr::frequencies) {
        g = Some(match g {
            None => f,
            Some(h) => h.gcd(&f),
        });
    }
    let at = g
        .and_then(|g| Q::ratio(1, 2).and_then(|h| h.div(&g)))
        .map(|c| format!("{}", Expr::sym(Sym::PI).scale(&c)))
        .unwrap_or_else(|| "pi/2".to_string());
    SessionError::invalid(
        span,
        format!(
            "over {horizon}, `{what}` is irrational: ordex keeps every coefficient rational \
             (it has no sqrt(3)), so cos and sin of time are evaluated only where they are rational; \
             for this field both are at the multiples of {at} (or omit `over` for the period)"
        ),
    )
}

/// The binomial coefficient `C(n, k)`, saturating.
fn binomial(n: u64, k: u64) -> u64 {
    let k = k.min(n.saturating_sub(k));
    let mut acc: u128 = 1;
    for i in 0..k {
        // acc * (n - i) / (i + 1) stays an integer at every step.
        acc = acc.saturating_mul(u128::from(n - i)) / u128::from(i + 1);
        if acc > u128::from(u64::MAX) {
            return u64::MAX;
        }
    }
    acc as u64
}

/// The summary line of a series command: orders and size (the timing is
/// appended by the caller).
fn summary(n_orders: usize, n_terms: usize) -> String {
    format!(
        "{} {}, {} {}",
        n_orders,
        plural(n_orders, "order"),
        n_terms,
        plural(n_terms, "term")
    )
}

/// `word` or `words`.
pub(crate) fn plural(n: usize, word: &str) -> String {
    if n == 1 {
        word.to_string()
    } else {
        format!("{word}s")
    }
}

/// `c*pi` as a period, when the expression is a rational multiple of pi.
pub(crate) fn period_from_expr(t: &Expr) -> Option<Period> {
    let c = t.coeff_of_power(Sym::PI, 1);
    if t.sub(&Expr::sym(Sym::PI).mul(&c).ok()?).is_zero() {
        let q = c.as_number()?;
        (!q.is_zero() && !q.is_negative()).then_some(Period(q))
    } else {
        None
    }
}

/// Monomials of degree ≤ d in graded lexicographic order, 1 first.
pub fn monomial_basis(states: &[Sym], d: u32) -> Vec<Expr> {
    let n = states.len();
    let mut out = vec![Expr::int(1)];
    for deg in 1..=d {
        // Exponent vectors of total degree `deg`, lexicographically decreasing.
        let mut exps = Vec::new();
        let mut cur = vec![0u32; n];
        gen_exps(0, deg, &mut cur, &mut exps);
        for e in exps {
            let mut m = Expr::int(1);
            for (s, k) in states.iter().zip(&e) {
                if *k > 0 {
                    m = m
                        .mul(&Expr::sym(*s).pow(*k as i64).unwrap_or_default())
                        .unwrap_or_default();
                }
            }
            out.push(m);
        }
    }
    out
}

fn gen_exps(i: usize, left: u32, cur: &mut Vec<u32>, out: &mut Vec<Vec<u32>>) {
    if i + 1 == cur.len() {
        cur[i] = left;
        out.push(cur.clone());
        return;
    }
    if cur.is_empty() {
        return;
    }
    for k in (0..=left).rev() {
        cur[i] = k;
        gen_exps(i + 1, left - k, cur, out);
    }
    cur[i] = 0;
}

impl Expr {
    /// Groups the terms by their monomial in the state variables: pairs
    /// (state monomial, coefficient expression free of the state). Fails
    /// (returning the offending term) when a term is not polynomial in the
    /// state.
    pub fn split_by_state_monomial(
        &self,
        states: &[Sym],
    ) -> Result<Vec<(crate::core::expr::Monomial, Expr)>, String> {
        let mut out: Vec<(crate::core::expr::Monomial, Expr)> = Vec::new();
        for (k, c) in self.terms() {
            let bad = || Expr::term(k.clone(), c.clone()).to_string();
            let mentions_state = |l: &crate::core::expr::LinearForm| {
                l.terms().iter().any(|(s, _)| states.contains(s))
            };
            if mentions_state(&k.exp) {
                return Err(bad());
            }
            if let crate::core::expr::TrigFactor::Cos(l) | crate::core::expr::TrigFactor::Sin(l) =
                &k.wave
            {
                if mentions_state(l) {
                    return Err(bad());
                }
            }
            let mut sm = k.mono.clone();
            let mut rest = k.clone();
            for (s, e) in k.mono.powers() {
                if states.contains(s) && *e < 0 {
                    return Err(bad());
                }
            }
            sm.retain(|(s, _)| states.contains(s));
            rest.mono.retain(|(s, _)| !states.contains(s));
            let coeff = Expr::term(rest, c.clone());
            match out.iter_mut().find(|(m, _)| *m == sm) {
                Some((_, acc)) => *acc = acc.add(&coeff),
                None => out.push((sm, coeff)),
            }
        }
        Ok(out)
    }
}

/// The notes on the form the system was recognised in (standard, fast
/// oscillation with its generator and base, linear centre).
fn report_averaging_form(res: &Averaged, e: &str, report: &mut Report) {
    match &res.form {
        Form::Standard => report.push(
            Style::Note,
            format!(
                "standard form x' = Σ {e}^j f_j(t, x), period {}",
                res.period
            ),
        ),
        Form::FastOscillation {
            generator,
            zero_mean,
            depth,
            ended,
        } => {
            let g: Vec<String> = generator
                .iter()
                .map(|(u, g)| format!("({u})*{}", plain::field(g)))
                .collect();
            report.push(
                Style::Note,
                format!(
                    "fast-oscillation form: x = exp(Y(t))(z), Y = {}; z is averaged, period {}",
                    g.join(" + "),
                    res.period
                ),
            );
            report.push(
                Style::Note,
                if *zero_mean {
                    "base: zero-mean antiderivatives U_i = ∫_0^t u_i - mean(∫_0^t u_i) (classical, \
                     the vibrational transform); full transform x = exp(Y(t))(y + W(t, y))"
                } else {
                    "base: U_i = ∫_0^t u_i (stroboscopic: x = z at multiples of the period)"
                },
            );
            if *ended {
                report.push(Style::Note, format!("ad-series ends at depth {depth}"));
            } else {
                report.push(
                    Style::Warn,
                    format!(
                        "warning: ad-series truncated at depth {depth} (raise it with `depth D`)"
                    ),
                );
            }
        }
        Form::LinearCentre { a, rotation } => {
            report.push(
                Style::Note,
                format!(
                    "linear centre A = {}: rotating coordinates x = R(t) z, R(t) = exp(A*t) = {}; z is averaged, period {}",
                    plain::matrix(a),
                    plain::matrix(rotation),
                    res.period
                ),
            );
        }
    }
}

/// The horizon of `magnus … [over T]`: `T` (a number or a rational multiple
/// of pi, with its period when it is one) or the field's period, and the
/// span that errors at the horizon point to.
fn magnus_horizon(
    v: &FieldValue,
    over: Option<(Expr, Span)>,
    span: Span,
) -> SessionResult<(Expr, Option<Period>, Span)> {
    let core = |e: CoreError| SessionError::core(span, e);
    let mut horizon_span = span;
    let (horizon, period) = match over {
        Some((t, tspan)) => {
            horizon_span = tspan;
            let p = period_from_expr(&t);
            if t.as_number().is_none() && p.is_none() {
                return Err(SessionError::invalid(
                    tspan,
                    format!("the horizon must be a number or a rational multiple of pi, got `{t}`"),
                ));
            }
            (t, p)
        }
        None => {
            let exprs: Vec<&Expr> = v.field.0.iter().collect();
            let p = chrono::period_of(&exprs).ok_or_else(|| core(chrono::no_period_error()))?;
            (p.to_expr(), Some(p))
        }
    };
    Ok((horizon, period, horizon_span))
}

/// Refuses more names on the left of `=` than the command gives results.
fn want_results(names: &[Ident], n: usize, span: Span) -> SessionResult<()> {
    if names.len() > n {
        return Err(SessionError::invalid(
            span,
            format!(
                "this command gives {n} result{}, {} names given",
                if n == 1 { "" } else { "s" },
                names.len()
            ),
        ));
    }
    Ok(())
}

/// Adds the time since `started` to the last note when it is a command's
/// summary (`… terms`, `… section`).
fn append_timing(report: &mut Report, started: Instant) {
    let elapsed = started.elapsed();
    if let Some(last) = report.lines.last_mut() {
        if last.style == Style::Note
            && (last.text.contains(" term") || last.text.contains(" section"))
        {
            last.text.push_str(&format!(", {} ms", elapsed.as_millis()));
        }
    }
}
