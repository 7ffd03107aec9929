//! The numerical commands `simulate`, `compare` and `stability`: the
//! language side (names, values, output); the floating point lives in
//! `crate::numeric`.

use std::collections::HashMap;

use super::ast::{Assign, Command, CommandKind, Expr as Ast, Span};
use super::progress::Progress;
use super::session::{ErrorKind, Report, Session, SessionError, Style, SymKind};
use crate::core::{limits, CoreError, Expr, Sym, Q};
use crate::numeric::compile::{CompileError, CompiledExpr, CompiledField};
use crate::numeric::ode::{integrate_at, OdeError, OdeOptions};
use crate::numeric::validate::{compare_errors, CompareRun};
use crate::numeric::{eigen, fit, plot};
use crate::render::plain;

type R<T> = Result<T, SessionError>;

fn compile_err(span: Span, e: CompileError) -> SessionError {
    SessionError::invalid(span, e.to_string())
}

fn ode_err(span: Span, e: OdeError) -> SessionError {
    match e {
        OdeError::Cancelled { .. } => SessionError::core(span, CoreError::Interrupted),
        other => SessionError::invalid(span, format!("integration failed: {other}")),
    }
}

/// Formats a float compactly and deterministically.
/// Numerical commands need concrete functions: an unspecified one is
/// refused, naming it, with the hint to plug a definition.
fn refuse_functions(f: &crate::core::Field, span: Span, cmd: &str) -> R<()> {
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

fn num(v: f64) -> String {
    if v == 0.0 {
        "0".to_string()
    } else if v.abs() >= 1e-3 && v.abs() < 1e5 {
        let s = format!("{v:.6}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.3e}")
    }
}

impl Session {
    /// Exact values of `with` assignments (parameters only).
    fn with_values(&self, with: &[Assign]) -> R<HashMap<Sym, Q>> {
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

    /// Exact values of a point (`from`/`at`): every state coordinate once;
    /// values are numbers or constants such as `pi/2`.
    fn point_values(&self, point: &[Assign], span: Span) -> R<Vec<Expr>> {
        let mut vals: HashMap<String, Expr> = HashMap::new();
        for a in point {
            if self.sym_kind(&a.name.name) != Some(SymKind::State) {
                return Err(SessionError::invalid(
                    a.name.span,
                    format!("`{}` is not a state coordinate", a.name.name),
                ));
            }
            let v = self.eval_scalar(&a.value, "a coordinate value")?;
            if v.symbols().iter().any(|s| *s != Sym::PI) {
                return Err(SessionError::invalid(
                    a.value.span,
                    format!(
                        "the value of `{}` must be a constant, got `{v}`",
                        a.name.name
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

    fn float_of(&self, e: &Expr, span: Span) -> R<f64> {
        let c = CompiledExpr::new(e, &[], &HashMap::new()).map_err(|err| compile_err(span, err))?;
        Ok(c.eval(0.0, &[]))
    }

    fn positive(&self, e: &Ast, what: &str) -> R<f64> {
        let v = self.eval_scalar(e, what)?;
        let f = self.float_of(&v, e.span)?;
        if !(f.is_finite() && f > 0.0) {
            return Err(SessionError::invalid(
                e.span,
                format!("{what} must be a positive number, got `{v}`"),
            ));
        }
        Ok(f)
    }

    pub(crate) fn run_numeric(&mut self, cmd: &Command, report: &mut Report) -> R<()> {
        match &cmd.kind {
            CommandKind::Simulate {
                field,
                from,
                horizon,
                with,
                plot,
            } => {
                let v = self.eval_field(field, "the field of `simulate`")?;
                refuse_functions(&v.field, field.span, "simulate")?;
                let exact = self.with_values(with)?;
                let floats = crate::numeric::compile::float_values(&exact);
                let f = CompiledField::new(&v.field, &self.states, &floats)
                    .map_err(|e| compile_err(field.span, e))?;
                let x0: Vec<f64> = self
                    .point_values(from, cmd.span)?
                    .iter()
                    .map(|e| self.float_of(e, cmd.span))
                    .collect::<R<_>>()?;
                let len = self.positive(horizon, "the horizon")?;
                let n_rows = 10;
                let n_dense = if plot.is_some() { 400 } else { n_rows };
                let times: Vec<f64> = (1..=n_dense)
                    .map(|i| len * i as f64 / n_dense as f64)
                    .collect();
                let mut rhs = |t: f64, x: &[f64], dx: &mut [f64]| f.eval(t, x, dx);
                let mut bar = Progress::new(1000, "simulate");
                let out = integrate_at(
                    &mut rhs,
                    0.0,
                    &x0,
                    &times,
                    &OdeOptions::default(),
                    &limits::is_interrupted,
                    &mut |t| bar.set((t / len * 1000.0) as u64),
                )
                .map_err(|e| ode_err(cmd.span, e))?;
                drop(bar);
                let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
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
                report.push(Style::Result, row(0.0, &x0));
                let step = n_dense / n_rows;
                for i in (step - 1..n_dense).step_by(step) {
                    report.push(Style::Result, row(times[i], &out.states[i]));
                }
                report.push(
                    Style::Note,
                    format!(
                        "adaptive Runge–Kutta 5(4), {} steps ({} rejected)",
                        out.stats.steps, out.stats.rejected
                    ),
                );
                if let Some(p) = plot {
                    if !self.replaying {
                        let mut all_t = vec![0.0];
                        all_t.extend(&times);
                        let series: Vec<Vec<f64>> = (0..x0.len())
                            .map(|k| {
                                std::iter::once(x0[k])
                                    .chain(out.states.iter().map(|s| s[k]))
                                    .collect()
                            })
                            .collect();
                        plot::time_series_svg(
                            &self.resolve_path(&p.path),
                            "simulate",
                            &names,
                            &all_t,
                            &series,
                        )
                        .map_err(|e| {
                            SessionError::at(
                                p.span,
                                ErrorKind::File {
                                    path: p.path.clone(),
                                    reason: e.to_string(),
                                },
                            )
                        })?;
                        report.plot_written(&p.path, self.resolve_path(&p.path));
                    }
                }
                Ok(())
            }
            CommandKind::Compare {
                system,
                model,
                from,
                horizon,
                with,
                sweep_param,
                sweep,
                tol,
                plot,
            } => {
                let s = self.eval_field(system, "the system of `compare`")?;
                let m = self.eval_field(model, "the averaged model of `compare`")?;
                refuse_functions(&s.field, system.span, "compare")?;
                refuse_functions(&m.field, model.span, "compare")?;
                let info = m.averaged.clone().ok_or_else(|| {
                    SessionError::invalid(model.span, "the model must be the result of `average` (e.g. `A = average S to 3 in eps`)")
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
                let y0: Vec<f64> = self
                    .point_values(from, cmd.span)?
                    .iter()
                    .map(|e| self.float_of(e, cmd.span))
                    .collect::<R<_>>()?;
                let slow = self.positive(horizon, "the horizon")?;
                let mut eps_values = Vec::with_capacity(sweep.len());
                for e in sweep {
                    eps_values.push(self.positive(e, "an eps value")?);
                }
                let tol = match tol {
                    Some(t) => Some(self.positive(t, "the tolerance")?),
                    None => None,
                };
                let period = self.float_of(&info.period.to_expr(), cmd.span)?;
                let floats = crate::numeric::compile::float_values(&exact);
                let orders: Vec<CompiledField> = info
                    .orders
                    .iter()
                    .map(|f| CompiledField::new(f, &self.states, &floats))
                    .collect::<Result<_, _>>()
                    .map_err(|e| compile_err(model.span, e))?;
                let transform: Option<Vec<CompiledField>> = match (&info.transform, info.classic) {
                    (Some(w), true) => Some(
                        w.iter()
                            .map(|f| CompiledField::new(f, &self.states, &floats))
                            .collect::<Result<_, _>>()
                            .map_err(|e| compile_err(model.span, e))?,
                    ),
                    _ => None,
                };
                let outer = match (&info.outer, info.classic) {
                    (Some(y), true) => Some(
                        CompiledField::new(y, &self.states, &floats)
                            .map_err(|e| compile_err(model.span, e))?,
                    ),
                    _ => None,
                };
                let n_orders = orders.len();
                let mut table: Vec<Vec<f64>> = Vec::new();
                let mut bar = Progress::new(eps_values.len() as u64, "compare");
                for (i, e) in eps_values.iter().enumerate() {
                    let mut vals = floats.clone();
                    vals.insert(info.eps, *e);
                    let sys = CompiledField::new(&s.field, &self.states, &vals)
                        .map_err(|err| compile_err(system.span, err))?;
                    let n_periods = ((slow / e) / period).ceil().max(1.0) as usize;
                    if n_periods > 1_000_000 {
                        return Err(SessionError::invalid(cmd.span, format!("eps = {e} needs {n_periods} periods: too many (shorten the horizon)")));
                    }
                    let run = CompareRun {
                        system: &sys,
                        orders: &orders,
                        transform: transform.as_deref(),
                        outer: outer.as_ref(),
                        eps: *e,
                        period,
                        n_periods,
                        y0: &y0,
                    };
                    let errs =
                        compare_errors(&run, &limits::is_interrupted, &mut |_| bar.set(i as u64))
                            .map_err(|err| ode_err(cmd.span, err))?;
                    table.push(errs);
                    bar.set(i as u64 + 1);
                }
                drop(bar);
                let kind = if info.classic {
                    "classical (through its transform)"
                } else {
                    "stroboscopic"
                };
                report.push(
                    Style::Note,
                    format!("{kind} model vs the system at multiples of the period {}, over eps*t <= {}", info.period, num(slow)),
                );
                let header: String = (1..=n_orders)
                    .map(|k| format!("{:>12}", format!("order {k}")))
                    .collect();
                report.push(Style::Result, format!("{:>10}{header}", "eps"));
                for (e, errs) in eps_values.iter().zip(&table) {
                    let cols: String = errs
                        .iter()
                        .map(|v| format!("{:>12}", format!("{v:.3e}")))
                        .collect();
                    report.push(Style::Result, format!("{:>10}{cols}", num(*e)));
                }
                for k in 0..n_orders {
                    let ys: Vec<f64> = table.iter().map(|r| r[k]).collect();
                    match fit::loglog_slope(&eps_values, &ys) {
                        Some(sl) => {
                            report.push(Style::Result, format!("slope order {}: {sl:.2}", k + 1))
                        }
                        None => report.push(
                            Style::Result,
                            format!("slope order {}: n/a (fewer than two usable points)", k + 1),
                        ),
                    }
                }
                if let Some(tol) = tol {
                    for k in 0..n_orders {
                        let best = eps_values
                            .iter()
                            .zip(&table)
                            .filter(|(_, r)| r[k] <= tol)
                            .map(|(e, _)| *e)
                            .fold(None, |acc: Option<f64>, e| {
                                Some(acc.map_or(e, |a| a.max(e)))
                            });
                        report.push(
                            Style::Result,
                            match best {
                                Some(e) => format!(
                                    "tol {}: order {} meets it up to eps = {}",
                                    num(tol),
                                    k + 1,
                                    num(e)
                                ),
                                None => format!(
                                    "tol {}: order {} meets it for no eps in the sweep",
                                    num(tol),
                                    k + 1
                                ),
                            },
                        );
                    }
                }
                if let Some(p) = plot {
                    if !self.replaying {
                        let per: Vec<(String, Vec<f64>)> = (0..n_orders)
                            .map(|k| {
                                (
                                    format!("order {}", k + 1),
                                    table.iter().map(|r| r[k]).collect(),
                                )
                            })
                            .collect();
                        plot::error_vs_eps_svg(
                            &self.resolve_path(&p.path),
                            "error against eps",
                            &eps_values,
                            &per,
                        )
                        .map_err(|e| {
                            SessionError::at(
                                p.span,
                                ErrorKind::File {
                                    path: p.path.clone(),
                                    reason: e.to_string(),
                                },
                            )
                        })?;
                        report.plot_written(&p.path, self.resolve_path(&p.path));
                    }
                }
                report.push(Style::Warn, "an averaged model is an approximation: validate it before it drives a real machine (help compare)");
                Ok(())
            }
            CommandKind::Stability { field, at, with } => {
                let v = self.eval_field(field, "the field of `stability`")?;
                refuse_functions(&v.field, field.span, "stability")?;
                if v.field.0.iter().any(Expr::is_time_varying) {
                    return Err(SessionError::invalid(
                        field.span,
                        "`stability` needs an autonomous field (average it first)",
                    ));
                }
                let exact = self.with_values(with)?;
                let point = self.point_values(at, cmd.span)?;
                let mut map: HashMap<Sym, Expr> = exact
                    .iter()
                    .map(|(s, q)| (*s, Expr::num(q.clone())))
                    .collect();
                for (s, e) in self.states.iter().zip(&point) {
                    map.insert(*s, e.clone());
                }
                let core = |e: CoreError| SessionError::core(cmd.span, e);
                let jac = v.field.jacobian(&self.states).map_err(core)?;
                let jp = crate::core::Matrix {
                    data: jac
                        .data
                        .iter()
                        .map(|e| e.subst(&map, &self.states))
                        .collect::<Result<_, _>>()
                        .map_err(core)?,
                    ..jac
                };
                let value = v.field.map(|e| e.subst(&map, &self.states)).map_err(core)?;
                report.push(Style::Result, format!("Jacobian {}", plain::matrix(&jp)));
                if !value.is_zero() {
                    report.push(
                        Style::Warn,
                        format!(
                            "warning: not an equilibrium: the field there is {}",
                            plain::field(&value)
                        ),
                    );
                }
                let numeric: Option<Vec<Vec<f64>>> = (0..jp.rows)
                    .map(|i| {
                        jp.row(i)
                            .iter()
                            .map(|e| {
                                let ok = e.symbols().iter().all(|s| *s == Sym::PI);
                                ok.then(|| {
                                    CompiledExpr::new(e, &[], &HashMap::new())
                                        .ok()
                                        .map(|c| c.eval(0.0, &[]))
                                })
                                .flatten()
                            })
                            .collect::<Option<Vec<f64>>>()
                    })
                    .collect();
                match numeric {
                    Some(rows) => {
                        let eigs = eigen::eigenvalues(&rows)
                            .map_err(|e| SessionError::invalid(cmd.span, e.to_string()))?;
                        // Conjugate pairs are listed together as a ± bi.
                        let shown: Vec<String> = eigs
                            .iter()
                            .filter(|(_, im)| *im >= 0.0)
                            .map(|(re, im)| match (*re == 0.0, *im == 0.0) {
                                (_, true) => num(*re),
                                (true, false) => format!("±{}i", num(*im)),
                                (false, false) => format!("{} ± {}i", num(*re), num(*im)),
                            })
                            .collect();
                        report.push(Style::Result, format!("eigenvalues {}", shown.join(", ")));
                        report.push(
                            Style::Result,
                            format!("equilibrium of this model: {}", eigen::classify(&eigs)),
                        );
                    }
                    None => {
                        let cp = jp.charpoly().map_err(core)?;
                        let lam = Expr::sym(Sym::new("lambda"));
                        let mut poly = Expr::zero();
                        for (k, c) in cp.iter().enumerate() {
                            poly =
                                poly.add(&c.mul(&lam.pow(k as i64).map_err(core)?).map_err(core)?);
                        }
                        report.push(
                            Style::Result,
                            format!("characteristic polynomial det(lambda*I - J) = {poly}"),
                        );
                        report.push(
                            Style::Note,
                            "give every parameter a value with `with` for numerical eigenvalues",
                        );
                    }
                }
                Ok(())
            }
            _ => Err(SessionError::invalid(cmd.span, "not a numerical command")),
        }
    }
}
