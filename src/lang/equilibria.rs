//! `stability F at …` and `equilibria F near …`: the Jacobian at a point,
//! exactly when the point is exact and the numbers stay short, otherwise
//! in decimals; the residual of the field there; the eigenvalues and what
//! they say; and Newton's method to find the equilibrium itself.

use std::collections::HashMap;

use super::ast::{Assign, Span, SyntaxExpr};
use super::numeric_cmds::{compile_err, refuse_functions, sci};
use super::session::{Report, Session, SessionError, SessionResult, Style};
use crate::core::{limits, CoreError, Expr, Field, Matrix, Sym, Q};
use crate::numeric::compile::{float_values, CompiledExpr, CompiledField};
use crate::numeric::sweep::{decimal, num};
use crate::numeric::{eigen, newton};
use crate::render::plain;

/// A residual `|F|` at most this times the field's scale there counts as
/// zero (the scale is `1 + |J|·(1 + |x|)`, the size a rounding error of
/// the point would give): double precision leaves about 1e-16, a point
/// typed with 10 digits about 1e-10.
const RESIDUAL_RELATIVE: f64 = 1e-9;

/// Printed exact numbers longer than this many digits switch the
/// Jacobian to decimals.
const MAX_EXACT_DIGITS: usize = 8;

/// Digits of a coordinate of an equilibrium.
const POINT_DIGITS: usize = 10;

/// Digits of a Jacobian entry in decimals.
const ENTRY_DIGITS: usize = 7;

fn longest_digit_run(text: &str) -> usize {
    let mut best = 0;
    let mut run = 0;
    for c in text.chars() {
        if c.is_ascii_digit() {
            run += 1;
            best = best.max(run);
        } else {
            run = 0;
        }
    }
    best
}

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

/// A float matrix `{a, b; c, d}` in decimals.
fn float_matrix(rows: &[Vec<f64>]) -> String {
    let body: Vec<String> = rows
        .iter()
        .map(|r| {
            r.iter()
                .map(|v| decimal(*v, ENTRY_DIGITS))
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect();
    format!("{{{}}}", body.join("; "))
}

/// A compiled Jacobian, row by row.
struct CompiledJacobian {
    n: usize,
    entries: Vec<CompiledExpr>,
}

impl CompiledJacobian {
    fn new(
        jac: &Matrix,
        states: &[Sym],
        floats: &HashMap<Sym, f64>,
        span: Span,
    ) -> SessionResult<Self> {
        let entries = jac
            .data
            .iter()
            .map(|e| CompiledExpr::new(e, states, floats))
            .collect::<Result<Vec<_>, _>>()
            .map_err(|e| compile_err(span, e))?;
        Ok(CompiledJacobian {
            n: jac.rows,
            entries,
        })
    }
    fn eval_into(&self, x: &[f64], out: &mut [f64]) {
        for (o, c) in out.iter_mut().zip(&self.entries) {
            *o = c.eval(0.0, x);
        }
    }
    fn rows(&self, x: &[f64]) -> Vec<Vec<f64>> {
        let mut flat = vec![0.0; self.entries.len()];
        self.eval_into(x, &mut flat);
        flat.chunks(self.n.max(1)).map(|c| c.to_vec()).collect()
    }
}

/// An exact value near `x`: `k/d` or `k/d*pi` with `d <= 12`, when `x` is
/// within `1e-9·(1 + |x|)` of one.
fn snap(x: f64) -> Option<Expr> {
    let close = |a: f64| (x - a).abs() <= 1e-9 * (1.0 + x.abs());
    for d in 1..=12i64 {
        let k = (x * d as f64).round();
        if k.abs() < 1e9 && close(k / d as f64) {
            return Q::ratio(k as i64, d).map(Expr::num);
        }
    }
    let pi = std::f64::consts::PI;
    for d in 1..=12i64 {
        let k = (x / pi * d as f64).round();
        if k.abs() < 1e9 && close(k / d as f64 * pi) {
            let q = Q::ratio(k as i64, d)?;
            return Some(Expr::sym(Sym::PI).scale(&q));
        }
    }
    None
}

impl Session {
    fn autonomous(&self, e: &SyntaxExpr, what: &str) -> SessionResult<Field> {
        let v = self.eval_field(e, what)?;
        refuse_functions(&v.field, e.span, what_word(what))?;
        if v.field.0.iter().any(Expr::is_time_varying) {
            return Err(SessionError::invalid(
                e.span,
                format!(
                    "`{}` needs an autonomous field (average it first)",
                    what_word(what)
                ),
            ));
        }
        Ok(v.field)
    }

    /// `stability F at … [with …]`.
    pub(crate) fn stability(
        &mut self,
        span: Span,
        field: &SyntaxExpr,
        at: &[Assign],
        with: &[Assign],
        report: &mut Report,
    ) -> SessionResult<()> {
        let f = self.autonomous(field, "the field of `stability`")?;
        let exact = self.with_values(with)?;
        let point = self.point_values(at, &exact, span)?;
        self.stability_at(&f, &point, &exact, span, report)
    }

    /// The stability report at an exact point: exact when the substitution
    /// works and the numbers stay short, in decimals otherwise.
    fn stability_at(
        &self,
        f: &Field,
        point: &[Expr],
        exact: &HashMap<Sym, Q>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let core = |e: CoreError| SessionError::core(span, e);
        let jac = f.jacobian(&self.states).map_err(core)?;
        let mut map = Self::with_map(exact);
        for (s, e) in self.states.iter().zip(point) {
            map.insert(*s, e.clone());
        }
        let substituted = jac
            .data
            .iter()
            .map(|e| e.subst(&map, &self.states))
            .collect::<Result<Vec<_>, _>>()
            .and_then(|data| Ok((data, f.map(|e| e.subst(&map, &self.states))?)));
        let floats = float_values(exact);
        let is_constant = |e: &Expr| e.symbols().iter().all(|s| *s == Sym::PI);
        match substituted {
            Ok((data, value)) => {
                let jp = Matrix {
                    data,
                    ..jac.clone()
                };
                let text = plain::matrix(&jp);
                let all_constant = jp.data.iter().all(is_constant);
                if longest_digit_run(&text) <= MAX_EXACT_DIGITS || !all_constant {
                    return self.exact_report(jp, &value, point, &floats, span, report);
                }
            }
            Err(CoreError::Interrupted) => return Err(core(CoreError::Interrupted)),
            Err(_) => {}
        }
        // Decimals: the point (and every parameter) must have a value.
        let x: Vec<f64> = point
            .iter()
            .map(|e| self.float_of(e, &floats, span))
            .collect::<SessionResult<_>>()?;
        let cf = CompiledField::new(f, &self.states, &floats).map_err(|e| compile_err(span, e))?;
        let cj = CompiledJacobian::new(&jac, &self.states, &floats, span)?;
        self.numeric_report(&cf, &cj, &x, span, report)
    }

    fn exact_report(
        &self,
        jp: Matrix,
        value: &Field,
        point: &[Expr],
        floats: &HashMap<Sym, f64>,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let core = |e: CoreError| SessionError::core(span, e);
        report.push(Style::Result, format!("Jacobian {}", plain::matrix(&jp)));
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
        if !value.is_zero() {
            let residual: Option<Vec<f64>> = value
                .0
                .iter()
                .map(|e| {
                    CompiledExpr::new(e, &[], &HashMap::new())
                        .ok()
                        .map(|c| c.eval(0.0, &[]))
                })
                .collect();
            let x: Option<Vec<f64>> = point
                .iter()
                .map(|e| {
                    CompiledExpr::new(e, &[], floats)
                        .ok()
                        .map(|c| c.eval(0.0, &[]))
                })
                .collect();
            match (residual, &numeric, x) {
                (Some(r), Some(rows), Some(x)) => {
                    self.residual_lines(&r, rows, &x, report);
                }
                _ => report.push(
                    Style::Warn,
                    format!(
                        "warning: not an equilibrium: the field there is {}",
                        plain::field(value)
                    ),
                ),
            }
        }
        match numeric {
            Some(rows) => self.eigen_lines(&rows, span, report),
            None => {
                let cp = jp.charpoly().map_err(core)?;
                let lam = Expr::sym(Sym::new("lambda"));
                let mut poly = Expr::zero();
                for (k, c) in cp.iter().enumerate() {
                    poly = poly.add(&c.mul(&lam.pow(k as i64).map_err(core)?).map_err(core)?);
                }
                report.push(
                    Style::Result,
                    format!("characteristic polynomial det(lambda*I - J) = {poly}"),
                );
                report.push(
                    Style::Note,
                    "give every parameter a value with `with` for numerical eigenvalues",
                );
                Ok(())
            }
        }
    }

    fn numeric_report(
        &self,
        f: &CompiledField,
        jac: &CompiledJacobian,
        x: &[f64],
        span: Span,
        report: &mut Report,
    ) -> SessionResult<()> {
        let rows = jac.rows(x);
        report.push(
            Style::Result,
            format!("Jacobian (decimals) {}", float_matrix(&rows)),
        );
        let mut r = vec![0.0; f.dim()];
        f.eval(0.0, x, &mut r);
        self.residual_lines(&r, &rows, x, report);
        self.eigen_lines(&rows, span, report)
    }

    /// The residual `|F|` at the point, and a warning when it is not zero
    /// to the accuracy of the point.
    fn residual_lines(&self, r: &[f64], rows: &[Vec<f64>], x: &[f64], report: &mut Report) {
        let size = norm(r);
        let jnorm = rows.iter().flatten().fold(0.0_f64, |m, v| m.max(v.abs()));
        let scale = 1.0 + jnorm * (1.0 + norm(x));
        if size <= RESIDUAL_RELATIVE * scale {
            report.push(
                Style::Note,
                format!(
                    "residual |F| = {} at the point: an equilibrium to the accuracy of the given values",
                    sci(size)
                ),
            );
        } else {
            let comps: Vec<String> = r.iter().map(|v| decimal(*v, ENTRY_DIGITS)).collect();
            report.push(
                Style::Warn,
                format!(
                    "warning: not an equilibrium: the field there is [{}] (|F| = {}); `equilibria` finds one from a guess",
                    comps.join(", "),
                    sci(size)
                ),
            );
        }
    }

    fn eigen_lines(&self, rows: &[Vec<f64>], span: Span, report: &mut Report) -> SessionResult<()> {
        let eigs =
            eigen::eigenvalues(rows).map_err(|e| SessionError::invalid(span, e.to_string()))?;
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
        Ok(())
    }

    /// `equilibria F near … [with …]`: Newton's method from the guess, the
    /// point with its residual, then the stability report there.
    pub(crate) fn equilibria(
        &mut self,
        span: Span,
        field: &SyntaxExpr,
        near: &[Assign],
        with: &[Assign],
        report: &mut Report,
    ) -> SessionResult<()> {
        let f = self.autonomous(field, "the field of `equilibria`")?;
        let exact = self.with_values(with)?;
        let floats = float_values(&exact);
        let cf = CompiledField::new(&f, &self.states, &floats)
            .map_err(|e| compile_err(field.span, e))?;
        let jac = f
            .jacobian(&self.states)
            .map_err(|e| SessionError::core(span, e))?;
        let cj = CompiledJacobian::new(&jac, &self.states, &floats, field.span)?;
        let guess = self.float_point(near, &exact, span)?;
        let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        let point_text = |x: &[f64]| {
            names
                .iter()
                .zip(x)
                .map(|(n, v)| format!("{n} = {}", decimal(*v, POINT_DIGITS)))
                .collect::<Vec<_>>()
                .join(", ")
        };
        let eval = |x: &[f64], out: &mut [f64]| cf.eval(0.0, x, out);
        let jeval = |x: &[f64], out: &mut [f64]| cj.eval_into(x, out);
        let root = match newton::solve(&eval, &jeval, &guess, &limits::is_interrupted) {
            Ok(root) => root,
            Err(_) if limits::is_interrupted() => {
                return Err(SessionError::core(span, CoreError::Interrupted))
            }
            Err(e) => {
                let last = match &e {
                    newton::NewtonError::Singular { at, .. }
                    | newton::NewtonError::NoConvergence { at, .. } => {
                        format!(" (last iterate {})", point_text(at))
                    }
                    newton::NewtonError::NonFinite => String::new(),
                };
                return Err(SessionError::invalid(span, format!("{e}{last}")));
            }
        };
        report.push(
            Style::Result,
            format!(
                "equilibrium {} (residual |F| = {}, {} Newton step{})",
                point_text(&root.x),
                sci(root.residual),
                root.iterations,
                if root.iterations == 1 { "" } else { "s" }
            ),
        );
        // An exact point (rational multiples of 1 or pi) where the field
        // vanishes exactly gets the exact report.
        let snapped: Option<Vec<Expr>> = root.x.iter().map(|v| snap(*v)).collect();
        if let Some(point) = snapped {
            let mut map = Self::with_map(&exact);
            for (s, e) in self.states.iter().zip(&point) {
                map.insert(*s, e.clone());
            }
            if let Ok(value) = f.map(|e| e.subst(&map, &self.states)) {
                if value.is_zero() {
                    let shown: Vec<String> = names
                        .iter()
                        .zip(&point)
                        .map(|(n, e)| format!("{n} = {e}"))
                        .collect();
                    report.push(
                        Style::Note,
                        format!("exactly {}: the field vanishes there", shown.join(", ")),
                    );
                    return self.stability_at(&f, &point, &exact, span, report);
                }
            }
        }
        self.numeric_report(&cf, &cj, &root.x, span, report)
    }
}

fn what_word(what: &str) -> &str {
    what.split('`').nth(1).unwrap_or(what)
}
