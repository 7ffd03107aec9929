//! The numerical commands `simulate` and `compare`, and `set tolerance`:
//! the language side (names, values, output, files); the floating point
//! lives in `crate::numeric`. `stability` and `equilibria` are in
//! `equilibria.rs`.

use std::collections::HashMap;
use std::sync::Arc;

use super::ast::{Assign, Command, CommandKind, PathArg, PhasePlot, Span, SyntaxExpr};
use super::files::FileKind;
use super::progress::Progress;
use super::session::{ErrorKind, Report, Session, SessionError, SessionResult, Style, SymKind};
use super::value::AveragedInfo;
use crate::core::{limits, CoreError, Expr, Sym, Q};
use crate::numeric::compile::{float_values, CompileError, CompiledExpr, CompiledField};
use crate::numeric::ode::{integrate_at, OdeError};
use crate::numeric::sweep::{self, num};
use crate::numeric::validate::{self, compare_errors, CompareResult, CompareRun};
use crate::numeric::{plot, plot::PlotError};

/// Numerical commands need concrete functions: an unspecified one is
/// refused, naming it, with the hint to plug a definition.
pub(crate) fn refuse_functions(f: &crate::core::Field, span: Span, cmd: &str) -> SessionResult<()> {
    match f.0.iter().find_map(Expr::first_atom) {
        None => Ok(()),
        Some(a) => Err(SessionError::invalid(
            span,
            format!(
                "`{cmd}` needs numbers, and `{a}` is an unspecified function \
                 (hint: plug a definition first, e.g. `plug(S, {}({}) = …)`)",
                a.sig.name,
                a.sig.params.join(", ")
            ),
        )),
    }
}

pub(crate) fn compile_err(span: Span, e: CompileError) -> SessionError {
    SessionError::invalid(span, e.to_string())
}

fn ode_err(span: Span, e: OdeError) -> SessionError {
    match e {
        OdeError::Cancelled { .. } => SessionError::core(span, CoreError::Interrupted),
        other => SessionError::invalid(span, format!("integration failed: {other}")),
    }
}

/// Smallest and largest integration tolerance `set tolerance` accepts:
/// the check run goes ten times tighter, and below 1e-14 double precision
/// cannot meet a tolerance; above 1e-3 the numbers would mislead.
const TOLERANCE_RANGE: (f64, f64) = (1e-13, 1e-3);

/// Largest power k in a horizon `L/eps^k`.
const MAX_HORIZON_POWER: i64 = 12;

/// A horizon `eps^k * t <= slow`.
struct Horizon {
    slow: f64,
    power: i32,
}

impl Horizon {
    fn t_end(&self, eps: f64) -> f64 {
        self.slow / eps.powi(self.power)
    }
    fn describe(&self, eps: &str) -> String {
        match self.power {
            1 => format!("{eps}*t <= {}", num(self.slow)),
            k => format!("{eps}^{k}*t <= {}", num(self.slow)),
        }
    }
}

impl Session {
    /// Exact values of `with` assignments (parameters only).
    pub(crate) fn with_values(&self, with: &[Assign]) -> SessionResult<HashMap<Sym, Q>> {
        let mut out = HashMap::new();
        for a in with {
            if self.sym_kind(&a.name.name) != Some(SymKind::Param) {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!(
                        "`{}` is not a parameter: `with` gives values to parameters",
                        a.name.name
                    ),
                ));
            }
            let v = self.eval_scalar(&a.value, "a parameter value")?;
            let q = v.as_number().ok_or_else(|| {
                SessionError::invalid(
                    a.value.span,
                    format!("the value of `{}` must be a number, got `{v}`", a.name.name),
                )
            })?;
            out.insert(Sym::new(&a.name.name), q);
        }
        Ok(out)
    }

    /// `with` values as a substitution.
    pub(crate) fn with_map(exact: &HashMap<Sym, Q>) -> HashMap<Sym, Expr> {
        exact
            .iter()
            .map(|(s, q)| (*s, Expr::num(q.clone())))
            .collect()
    }

    /// Exact values of a point (`from`, `at`, `near`): every state
    /// coordinate once; values are constant expressions (numbers, `pi`,
    /// parameters), with the `with` values substituted.
    pub(crate) fn point_values(
        &self,
        point: &[Assign],
        exact: &HashMap<Sym, Q>,
        span: Span,
    ) -> SessionResult<Vec<Expr>> {
        let subst = Self::with_map(exact);
        let mut vals: HashMap<String, Expr> = HashMap::new();
        for a in point {
            if self.sym_kind(&a.name.name) != Some(SymKind::State) {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!("`{}` is not a state coordinate", a.name.name),
                ));
            }
            let v = self.eval_scalar(&a.value, "a coordinate value")?;
            let v = v
                .subst(&subst, &self.states)
                .map_err(|e| SessionError::core(a.value.span, e))?;
            if let Some(bad) = v
                .symbols()
                .into_iter()
                .find(|s| *s == Sym::T || self.states.contains(s))
            {
                return Err(SessionError::invalid(
                    a.value.span,
                    format!(
                        "the value of `{}` must be a constant (numbers, `pi`, parameters), not depend on `{}`",
                        a.name.name,
                        bad.name()
                    ),
                ));
            }
            if vals.insert(a.name.name.clone(), v).is_some() {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!("`{}` is given twice", a.name.name),
                ));
            }
        }
        let missing: Vec<String> = self
            .states
            .iter()
            .map(|s| s.name())
            .filter(|n| !vals.contains_key(n))
            .collect();
        if !missing.is_empty() {
            return Err(SessionError::invalid(
                span,
                format!(
                    "the point needs a value for every coordinate; missing: {}",
                    missing.join(", ")
                ),
            ));
        }
        Ok(self
            .states
            .iter()
            .map(|s| vals.remove(&s.name()).unwrap_or_default())
            .collect())
    }

    /// The value of a constant expression in floating point (`pi` and the
    /// given parameter values known).
    pub(crate) fn float_of(
        &self,
        e: &Expr,
        floats: &HashMap<Sym, f64>,
        span: Span,
    ) -> SessionResult<f64> {
        let c = CompiledExpr::new(e, &[], floats).map_err(|err| compile_err(span, err))?;
        Ok(c.eval(0.0, &[]))
    }

    /// A point in floating point.
    pub(crate) fn float_point(
        &self,
        point: &[Assign],
        exact: &HashMap<Sym, Q>,
        span: Span,
    ) -> SessionResult<Vec<f64>> {
        let floats = float_values(exact);
        self.point_values(point, exact, span)?
            .iter()
            .map(|e| self.float_of(e, &floats, span))
            .collect()
    }

    fn positive(
        &self,
        e: &SyntaxExpr,
        floats: &HashMap<Sym, f64>,
        what: &str,
    ) -> SessionResult<f64> {
        let v = self.eval_scalar(e, what)?;
        let f = self.float_of(&v, floats, e.span)?;
        if !(f.is_finite() && f > 0.0) {
            return Err(SessionError::invalid(
                e.span,
                format!("{what} must be a positive number, got `{v}`"),
            ));
        }
        Ok(f)
    }

    /// Writes `text` to a file named in the command (nothing while
    /// replaying a journal) and says so.
    fn write_output(
        &self,
        p: &PathArg,
        text: &str,
        kind: FileKind,
        what: &str,
        report: &mut Report,
    ) -> SessionResult<()> {
        if self.replaying {
            return Ok(());
        }
        let path = self.resolve_path(&p.path);
        super::files::write_file(&path, text.as_bytes(), kind).map_err(|reason| {
            SessionError::at(
                p.span,
                ErrorKind::File {
                    path: p.path.clone(),
                    reason,
                },
            )
        })?;
        if kind == FileKind::Plot {
            report.push(Style::Note, format!("{what} written to {}", p.path));
            report.plots.push(path);
        } else {
            report.push(Style::Note, format!("{what} written to {}", p.path));
        }
        Ok(())
    }

    fn plot_output(
        &self,
        p: &PathArg,
        svg: Result<String, PlotError>,
        what: &str,
        report: &mut Report,
    ) -> SessionResult<()> {
        if self.replaying {
            return Ok(());
        }
        let svg = svg.map_err(|e| {
            SessionError::at(
                p.span,
                ErrorKind::File {
                    path: p.path.clone(),
                    reason: e.to_string(),
                },
            )
        })?;
        self.write_output(p, &svg, FileKind::Plot, what, report)
    }

    /// `set tolerance E`.
    pub(crate) fn set_tolerance(
        &mut self,
        value: &SyntaxExpr,
        report: &mut Report,
    ) -> SessionResult<()> {
        let v = self.eval_scalar(value, "the tolerance")?;
        let tol = v.as_number().map(|q| q.to_f64()).unwrap_or(f64::NAN);
        let (lo, hi) = TOLERANCE_RANGE;
        if !(lo..=hi).contains(&tol) {
            return Err(SessionError::invalid(
                value.span,
                format!(
                    "the integration tolerance must be a number from {} to {}, got `{v}`",
                    num(lo),
                    num(hi)
                ),
            ));
        }
        self.tolerance = tol;
        report.push(
            Style::Note,
            format!("integration tolerance {}", tolerance_text(tol)),
        );
        Ok(())
    }

    pub(crate) fn run_numeric(&mut self, cmd: &Command, report: &mut Report) -> SessionResult<()> {
        match &cmd.kind {
            CommandKind::Simulate { .. } => {
                let spec = self.lower_simulate(cmd)?;
                self.simulate(&spec, cmd.span, report)
            }
            CommandKind::Compare { .. } => {
                let spec = self.lower_compare(cmd)?;
                self.compare(&spec, cmd.span, report)
            }
            CommandKind::Stability { field, at, with } => {
                self.stability(cmd.span, field, at, with, report)
            }
            CommandKind::Equilibria { field, near, with } => {
                self.equilibria(cmd.span, field, near, with, report)
            }
            _ => Err(SessionError::invalid(cmd.span, "not a numerical command")),
        }
    }

    /// Checks a `simulate` command against the session and compiles it:
    /// every error about what was typed comes from here, before any
    /// integration starts.
    fn lower_simulate<'a>(&self, cmd: &'a Command) -> SessionResult<SimulateSpec<'a>> {
        let CommandKind::Simulate {
            field,
            from,
            horizon,
            with,
            plot,
            phase,
        } = &cmd.kind
        else {
            return Err(SessionError::invalid(cmd.span, "not `simulate`"));
        };
        let v = self.eval_field(field, "the field of `simulate`")?;
        refuse_functions(&v.field, field.span, "simulate")?;
        let exact = self.with_values(with)?;
        let floats = float_values(&exact);
        let compiled = CompiledField::new(&v.field, &self.states, &floats)
            .map_err(|e| compile_err(field.span, e))?;
        let x0 = self.float_point(from, &exact, cmd.span)?;
        let len = self.positive(horizon, &floats, "the horizon")?;
        let phase = match phase {
            Some(ph) => {
                let (i, j) = self.phase_indices(ph)?;
                Some((&ph.path, i, j))
            }
            None => None,
        };
        Ok(SimulateSpec {
            field: compiled,
            x0,
            len,
            plot: plot.as_ref(),
            phase,
        })
    }

    /// Integrates a lowered `simulate` and reports the table and plots.
    fn simulate(
        &mut self,
        spec: &SimulateSpec<'_>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let (len, x0) = (spec.len, &spec.x0);
        let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        let n_rows = 10;
        let n_dense = if spec.plot.is_some() || spec.phase.is_some() {
            2000
        } else {
            n_rows
        };
        let times: Vec<f64> = (1..=n_dense)
            .map(|i| len * i as f64 / n_dense as f64)
            .collect();
        let mut rhs = |t: f64, x: &[f64], dx: &mut [f64]| spec.field.eval(t, x, dx);
        let mut bar = Progress::new(1000, "simulate");
        let out = integrate_at(
            &mut rhs,
            0.0,
            x0,
            &times,
            &validate::options_for(self.tolerance),
            &limits::is_interrupted,
            &mut |t| bar.set((t / len * 1000.0) as u64),
        )
        .map_err(|e| ode_err(span, e))?;
        drop(bar);
        report.push(
            Style::Result,
            format!(
                "{:>12}  {}",
                "t",
                names.iter().map(|n| format!("{n:>14}")).collect::<String>()
            ),
        );
        let row = |t: f64, x: &[f64]| {
            format!(
                "{:>12}  {}",
                num(t),
                x.iter()
                    .map(|v| format!("{:>14}", num(*v)))
                    .collect::<String>()
            )
        };
        report.push(Style::Result, row(0.0, x0));
        let step = n_dense / n_rows;
        for i in (step - 1..n_dense).step_by(step) {
            report.push(Style::Result, row(times[i], &out.states[i]));
        }
        report.push(
            Style::Note,
            format!(
                "adaptive Runge–Kutta 5(4), tolerance {}, {} steps ({} rejected)",
                tolerance_text(self.tolerance),
                out.stats.steps,
                out.stats.rejected
            ),
        );
        let mut all_t = vec![0.0];
        all_t.extend(&times);
        let series: Vec<Vec<f64>> = (0..x0.len())
            .map(|k| {
                std::iter::once(x0[k])
                    .chain(out.states.iter().map(|s| s[k]))
                    .collect()
            })
            .collect();
        if let Some(p) = spec.plot {
            let title = format!("simulate from {}", point_text(&names, x0));
            let svg = plot::time_series_svg(&title, &names, &all_t, &series);
            self.plot_output(p, svg, "plot", report)?;
        }
        if let Some((path, i, j)) = spec.phase {
            let title = format!("phase portrait, t from 0 to {}", num(len));
            let svg = plot::phase_svg(&title, &names[i], &names[j], &series[i], &series[j]);
            self.plot_output(path, svg, "phase portrait", report)?;
        }
        Ok(())
    }

    fn phase_indices(&self, ph: &PhasePlot) -> SessionResult<(usize, usize)> {
        let find = |id: &super::ast::Ident| {
            self.states
                .iter()
                .position(|s| s.name() == id.name)
                .ok_or_else(|| {
                    SessionError::invalid(
                        id.span,
                        format!(
                            "`{}` is not a state coordinate: a phase portrait plots two of {}",
                            id.name,
                            self.states
                                .iter()
                                .map(|s| s.name())
                                .collect::<Vec<_>>()
                                .join(", ")
                        ),
                    )
                })
        };
        let (i, j) = (find(&ph.x)?, find(&ph.y)?);
        if i == j {
            return Err(SessionError::invalid(
                ph.y.span,
                "a phase portrait needs two different states",
            ));
        }
        Ok((i, j))
    }

    /// The horizon of `compare`: `L` (meaning `eps*t <= L`) or `L/eps^k`.
    fn compare_horizon(
        &self,
        horizon: &SyntaxExpr,
        eps: Sym,
        exact: &HashMap<Sym, Q>,
        floats: &HashMap<Sym, f64>,
    ) -> SessionResult<Horizon> {
        let v = self.eval_scalar(horizon, "the horizon")?;
        let v = v
            .subst(&Self::with_map(exact), &self.states)
            .map_err(|e| SessionError::core(horizon.span, e))?;
        let mut found = None;
        if !v.symbols().contains(&eps) {
            found = Some((v.clone(), 1));
        } else {
            let e = Expr::sym(eps);
            for k in 1..=MAX_HORIZON_POWER {
                let scaled = e
                    .pow(k)
                    .and_then(|p| v.mul(&p))
                    .map_err(|err| SessionError::core(horizon.span, err))?;
                if !scaled.symbols().contains(&eps) {
                    found = Some((scaled, k as i32));
                    break;
                }
            }
        }
        let Some((slow, power)) = found else {
            return Err(SessionError::invalid(
                horizon.span,
                format!(
                    "the horizon must be `L` (meaning {0}*t <= L) or `L/{0}^k` with k a whole number from 1 to {MAX_HORIZON_POWER}, got `{v}`",
                    eps.name()
                ),
            ));
        };
        let slow_f = self.float_of(&slow, floats, horizon.span)?;
        if !(slow_f.is_finite() && slow_f > 0.0) {
            return Err(SessionError::invalid(
                horizon.span,
                format!("the horizon must be positive, got `{v}`"),
            ));
        }
        Ok(Horizon {
            slow: slow_f,
            power,
        })
    }

    /// Checks a `compare` command against the session and compiles the
    /// system (once per eps) and every order of the model: every error
    /// about what was typed comes from here, before any integration starts.
    fn lower_compare<'a>(&self, cmd: &'a Command) -> SessionResult<CompareSpec<'a>> {
        let CommandKind::Compare {
            system,
            model,
            from,
            horizon,
            with,
            sweep_param,
            sweep,
            tol,
            plot,
            paths,
            table,
        } = &cmd.kind
        else {
            return Err(SessionError::invalid(cmd.span, "not `compare`"));
        };
        let s = self.eval_field(system, "the system of `compare`")?;
        let m = self.eval_field(model, "the averaged model of `compare`")?;
        refuse_functions(&s.field, system.span, "compare")?;
        refuse_functions(&m.field, model.span, "compare")?;
        let info: Arc<AveragedInfo> = m.averaged.clone().ok_or_else(|| {
            SessionError::invalid(
                model.span,
                "the model must be the result of `average` (e.g. `A = average S to 3 in eps`)",
            )
        })?;
        if sweep_param.name != info.eps.name() {
            return Err(SessionError::invalid(
                sweep_param.span,
                format!(
                    "the sweep must be over the averaging parameter `{}`",
                    info.eps.name()
                ),
            ));
        }
        let exact = self.with_values(with)?;
        if exact.contains_key(&info.eps) {
            return Err(SessionError::invalid(
                sweep_param.span,
                "eps is given by the sweep, not by `with`",
            ));
        }
        let floats = float_values(&exact);
        let y0 = self.float_point(from, &exact, cmd.span)?;
        let horizon_spec = self.compare_horizon(horizon, info.eps, &exact, &floats)?;
        let mut eps_values = Vec::with_capacity(sweep.len());
        for e in sweep {
            eps_values.push(self.positive(e, &floats, "an eps value")?);
        }
        let tol = match tol {
            Some(t) => Some(self.positive(t, &floats, "the tolerance")?),
            None => None,
        };
        let period = self.float_of(&info.period.to_expr(), &floats, cmd.span)?;
        let model_spec = self.compile_model(&info, &floats, model.span)?;
        let mut spec = CompareSpec {
            info,
            y0,
            horizon: horizon_spec,
            eps_values,
            tol,
            period,
            model: model_spec,
            systems: Vec::new(),
            n_periods: Vec::new(),
            plot: plot.as_ref(),
            paths: paths.as_ref(),
            table: table.as_ref(),
        };
        self.compile_systems(&mut spec, &s.field, &floats, system.span, horizon.span)?;
        Ok(spec)
    }

    /// The compiled orders of an averaged model, with the transform and the
    /// outer map of a classical model.
    fn compile_model(
        &self,
        info: &AveragedInfo,
        floats: &HashMap<Sym, f64>,
        model_span: Span,
    ) -> SessionResult<CompiledModel> {
        let compile_all = |fields: &[crate::core::Field]| -> SessionResult<Vec<CompiledField>> {
            fields
                .iter()
                .map(|f| CompiledField::new(f, &self.states, floats))
                .collect::<Result<_, _>>()
                .map_err(|e| compile_err(model_span, e))
        };
        let orders = compile_all(&info.orders)?;
        let transform = match (&info.transform, info.classic) {
            (Some(w), true) => Some(compile_all(w)?),
            _ => None,
        };
        let outer = match (&info.outer, info.classic) {
            (Some(y), true) => Some(
                CompiledField::new(y, &self.states, floats)
                    .map_err(|e| compile_err(model_span, e))?,
            ),
            _ => None,
        };
        Ok(CompiledModel {
            orders,
            transform,
            outer,
        })
    }

    /// The system compiled at every eps of the sweep, and the number of
    /// periods each run integrates (refused above a million).
    fn compile_systems(
        &self,
        spec: &mut CompareSpec<'_>,
        system: &crate::core::Field,
        floats: &HashMap<Sym, f64>,
        system_span: Span,
        horizon_span: Span,
    ) -> SessionResult<()> {
        for e in &spec.eps_values {
            let mut vals = floats.clone();
            vals.insert(spec.info.eps, *e);
            spec.systems.push(
                CompiledField::new(system, &self.states, &vals)
                    .map_err(|err| compile_err(system_span, err))?,
            );
            let n = (spec.horizon.t_end(*e) / spec.period * (1.0 + 1e-12))
                .floor()
                .max(1.0);
            if !(n <= 1e6) {
                return Err(SessionError::invalid(
                    horizon_span,
                    format!(
                        "eps = {} needs {} periods: too many (at most 1000000; shorten the horizon or drop the smallest eps)",
                        num(*e),
                        num(n)
                    ),
                ));
            }
            spec.n_periods.push(n as usize);
        }
        Ok(())
    }

    /// Runs a lowered `compare` at every eps and reports the errors, the
    /// slopes and the requested files.
    fn compare(
        &mut self,
        spec: &CompareSpec<'_>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let n_eps = spec.eps_values.len();
        let mut results: Vec<CompareResult> = Vec::with_capacity(n_eps);
        let mut bar = Progress::new(1000 * n_eps as u64, "compare");
        for i in 0..n_eps {
            let r = compare_errors(
                &spec.run_at(i, self.tolerance),
                &limits::is_interrupted,
                &mut |f| bar.set((1000.0 * (i as f64 + f)) as u64),
            )
            .map_err(|err| ode_err(span, err))?;
            results.push(r);
        }
        drop(bar);
        self.report_compare(spec, &results, report);
        self.compare_files(spec, &results, report)?;
        if let Some(p) = spec.paths {
            if !self.replaying {
                self.plot_paths(spec, p, span, report)?;
            }
        }
        report.push(
            Style::Warn,
            "an averaged model is an approximation: validate it before it drives a real machine (help compare)",
        );
        Ok(())
    }

    /// The notes and result lines of `compare`: what was compared, the
    /// error table, the slopes and the tolerance lines.
    fn report_compare(
        &self,
        spec: &CompareSpec<'_>,
        results: &[CompareResult],
        report: &mut Report,
    ) {
        let (info, hz, eps_values) = (&spec.info, &spec.horizon, &spec.eps_values);
        let eps_name = info.eps.name();
        let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        report.push(
            Style::Note,
            format!(
                "{} vs the system at multiples of the period {}, over {}",
                spec.kind(),
                info.period,
                hz.describe(&eps_name)
            ),
        );
        report.push(
            Style::Note,
            format!(
                "error: the largest Euclidean distance in ({}) between system and model at t = m*({}) <= {}",
                names.join(", "),
                info.period,
                match hz.power {
                    1 => format!("{}/{eps_name}", num(hz.slow)),
                    k => format!("{}/{eps_name}^{k}", num(hz.slow)),
                }
            ),
        );
        report.push(
            Style::Note,
            format!(
                "integration: adaptive Runge–Kutta 5(4), tolerance {} (`set tolerance`), checked against a 10 times tighter run",
                tolerance_text(self.tolerance)
            ),
        );
        for l in sweep::table_lines(eps_values, results) {
            report.push(Style::Result, l);
        }
        for l in sweep::slope_lines(eps_values, results) {
            report.push(Style::Result, l);
        }
        if let Some(tol) = spec.tol {
            for l in sweep::tol_lines(eps_values, results, tol) {
                report.push(Style::Result, l);
            }
        }
    }

    /// The `table FILE.csv` and `plot FILE.svg` outputs of `compare`.
    fn compare_files(
        &mut self,
        spec: &CompareSpec<'_>,
        results: &[CompareResult],
        report: &mut Report,
    ) -> SessionResult<()> {
        let eps_values = &spec.eps_values;
        if let Some(p) = spec.table {
            self.write_output(
                p,
                &sweep::csv(eps_values, results),
                FileKind::Table,
                "table",
                report,
            )?;
        }
        if let Some(p) = spec.plot {
            let eps_name = spec.info.eps.name();
            let per: Vec<(String, Vec<f64>, Vec<bool>)> = (0..spec.model.orders.len())
                .map(|k| {
                    (
                        format!("order {}", k + 1),
                        results.iter().map(|r| r.orders[k].max).collect(),
                        results.iter().map(|r| r.orders[k].at_floor()).collect(),
                    )
                })
                .collect();
            let title = format!(
                "{}: error against {eps_name}, {}",
                spec.kind(),
                spec.horizon.describe(&eps_name)
            );
            let svg = plot::error_vs_eps_svg(
                &title,
                "largest distance to the system (log scale)",
                eps_values,
                &per,
            );
            self.plot_output(p, svg, "plot", report)?;
        }
        Ok(())
    }

    /// `plot paths FILE.svg`: the system and every averaged order at the
    /// largest eps, which shows the difference best.
    fn plot_paths(
        &mut self,
        spec: &CompareSpec<'_>,
        path: &PathArg,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let eps_values = &spec.eps_values;
        let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        let i = (0..eps_values.len())
            .max_by(|a, b| eps_values[*a].total_cmp(&eps_values[*b]))
            .unwrap_or(0);
        let run = spec.run_at(i, self.tolerance);
        let t_end = spec.horizon.t_end(eps_values[i]);
        let n = ((t_end / spec.period) * 60.0).clamp(600.0, 6000.0) as usize;
        let tr = validate::paths(&run, t_end, n, &limits::is_interrupted)
            .map_err(|err| ode_err(span, err))?;
        let per_state = |states: &[Vec<f64>]| -> Vec<Vec<f64>> {
            (0..names.len())
                .map(|k| states.iter().map(|s| s[k]).collect())
                .collect()
        };
        let models: Vec<(String, Vec<Vec<f64>>)> = tr
            .models
            .iter()
            .enumerate()
            .map(|(k, st)| (format!("averaged, order {}", k + 1), per_state(st)))
            .collect();
        let title = format!(
            "system and averaged model at {} = {}{}",
            spec.info.eps.name(),
            num(eps_values[i]),
            if spec.info.classic {
                " (model in averaged coordinates)"
            } else {
                ""
            }
        );
        let svg = plot::paths_svg(&title, &names, &tr.times, &per_state(&tr.system), &models);
        self.plot_output(path, svg, "plot of paths", report)
    }
}

/// A `simulate` command checked against the session: the field compiled
/// with the `with` values, the start point and the horizon in floating
/// point, and the requested plots (a phase portrait with the indices of
/// its two states).
struct SimulateSpec<'a> {
    field: CompiledField,
    x0: Vec<f64>,
    len: f64,
    plot: Option<&'a PathArg>,
    phase: Option<(&'a PathArg, usize, usize)>,
}

/// The compiled orders of an averaged model (and, for a classical model,
/// its transform and outer map).
struct CompiledModel {
    orders: Vec<CompiledField>,
    transform: Option<Vec<CompiledField>>,
    outer: Option<CompiledField>,
}

/// A `compare` command checked against the session: everything the runs
/// need, in floating point and compiled, and the requested outputs.
struct CompareSpec<'a> {
    /// The averaging result behind the model.
    info: Arc<AveragedInfo>,
    /// The start point.
    y0: Vec<f64>,
    /// How long each run lasts, as a function of eps.
    horizon: Horizon,
    /// The swept values of eps, as given.
    eps_values: Vec<f64>,
    /// The error bound of `tol E`.
    tol: Option<f64>,
    /// The period of the averaged standard form.
    period: f64,
    /// The model, compiled once.
    model: CompiledModel,
    /// The system compiled at each eps.
    systems: Vec<CompiledField>,
    /// The number of periods each run integrates.
    n_periods: Vec<usize>,
    plot: Option<&'a PathArg>,
    paths: Option<&'a PathArg>,
    table: Option<&'a PathArg>,
}

impl CompareSpec<'_> {
    /// The run at the `i`-th eps of the sweep.
    fn run_at(&self, i: usize, tolerance: f64) -> CompareRun<'_> {
        CompareRun {
            system: &self.systems[i],
            orders: &self.model.orders,
            transform: self.model.transform.as_deref(),
            outer: self.model.outer.as_ref(),
            eps: self.eps_values[i],
            period: self.period,
            n_periods: self.n_periods[i],
            y0: &self.y0,
            tolerance,
        }
    }

    /// What kind of model is compared, for the report and the plot title.
    fn kind(&self) -> &'static str {
        if self.info.classic {
            "classical model (through its transform)"
        } else {
            "stroboscopic model"
        }
    }
}

/// `1e-11 (relative; absolute 1e-13)`.
pub(crate) fn tolerance_text(tol: f64) -> String {
    format!("{} (relative; absolute {})", sci(tol), sci(tol / 100.0))
}

/// A number in scientific notation with at most three significant digits
/// and no trailing zeros: `1e-13`, `2.5e-12`.
pub(crate) fn sci(v: f64) -> String {
    let s = format!("{v:.2e}");
    match s.split_once('e') {
        Some((m, e)) => {
            let m = if m.contains('.') {
                m.trim_end_matches('0').trim_end_matches('.')
            } else {
                m
            };
            format!("{m}e{e}")
        }
        None => s,
    }
}

/// `(q, p) = (1, 0)`.
fn point_text(names: &[String], x: &[f64]) -> String {
    format!(
        "({}) = ({})",
        names.join(", "),
        x.iter().map(|v| num(*v)).collect::<Vec<_>>().join(", ")
    )
}
