//! Symbolic frequency (DESIGN §2.7c): `cos(w*t)` for a parameter `w`.
//!
//! The phase `w*t` is kept as an atom of its own inside trigonometric
//! arguments: a symbol named `w*t` (no identifier can be spelt so), which
//! the normal form treats like an angle (`cos(th - 2*w*t)` splits by the
//! addition formulas, products reduce, `check` decides exactly: the phase
//! is algebraically independent of everything else). Its time dependence
//! is known only here: `average … in 1/w` rescales time `s = w*t`,
//! `eps = 1/w` and averages in s; every command that needs time itself
//! refuses a field with a phase (`refuse_phase`), and `plug` of `w` by a
//! number turns the phase into an ordinary frequency.

use std::collections::HashMap;

use super::ast::Span;
use super::session::{Report, Session, SessionError, SessionResult, Style, SymKind};
use super::value::{FieldValue, Value};
use crate::averaging::{self, Averaged, Form, Options};
use crate::core::expr::{TimeFactor, TrigFactor};
use crate::core::{CoreError, Expr, Field, Sym};
use crate::render::plain;

/// The phase atom `w*t` of a parameter `w`.
pub fn phase_of(w: Sym) -> Sym {
    Sym::new(&format!("{}*t", w.name()))
}

/// The parameter of a phase atom, when `s` is one.
pub fn param_of(s: Sym) -> Option<Sym> {
    let name = s.name();
    name.strip_suffix("*t").map(Sym::new)
}

/// The phase atoms an expression mentions.
pub fn phases(e: &Expr) -> Vec<Sym> {
    e.symbols()
        .into_iter()
        .filter(|s| param_of(*s).is_some())
        .collect()
}

/// The phase atoms of several expressions, sorted, without repeats.
pub fn phases_all<'a>(es: impl IntoIterator<Item = &'a Expr>) -> Vec<Sym> {
    let mut out: Vec<Sym> = es.into_iter().flat_map(phases).collect();
    out.sort();
    out.dedup();
    out
}

impl Session {
    /// The argument of `sin`/`cos` with each `c*w*t` (w a parameter)
    /// replaced by `c` times the phase atom of w, and the states extended
    /// by the phases found (for `Expr::cos_of`).
    pub(crate) fn phase_arg(&self, arg: &Expr) -> (Expr, Vec<Sym>) {
        let mut found: Vec<Sym> = Vec::new();
        let mut out = Expr::zero();
        for (k, c) in arg.terms() {
            let plain = k.exp.is_zero() && k.wave == TrigFactor::One && k.beat == TimeFactor::One;
            let param = match k.mono.powers() {
                [(a, 1), (b, 1)] if plain && (*a == Sym::T || *b == Sym::T) => {
                    let w = if *a == Sym::T { *b } else { *a };
                    (self.sym_kind(&w.name()) == Some(SymKind::Param)).then_some(w)
                }
                _ => None,
            };
            match param {
                Some(w) => {
                    let ph = phase_of(w);
                    if !found.contains(&ph) {
                        found.push(ph);
                    }
                    out = out.add(&Expr::sym(ph).scale(c));
                }
                None => out = out.add(&Expr::term(k.clone(), c.clone())),
            }
        }
        let mut states = self.states.clone();
        states.extend(found.iter().copied());
        (out, states)
    }

    /// Refuses expressions with a symbolic-frequency phase in a command
    /// that needs time itself.
    pub(crate) fn refuse_phase<'a>(
        &self,
        es: impl IntoIterator<Item = &'a Expr>,
        span: Span,
        what: &str,
    ) -> SessionResult<()> {
        if let Some(ph) = phases_all(es).first() {
            let w = param_of(*ph).map_or_else(String::new, |s| s.name());
            return Err(SessionError::invalid(
                span,
                format!(
                    "{what} has the symbolic frequency `{}` (cos({w}*t)): only `average … in 1/{w}` \
                     takes it (it rescales s = {w}*t, eps = 1/{w}); otherwise give {w} a number \
                     with `plug(…, {w} = 30)`",
                    ph.name()
                ),
            ));
        }
        Ok(())
    }

    /// Completes a `plug` substitution for phases: `w = number` turns `w*t`
    /// into `number*t`, `w = c*v` (v a parameter) into `c*v*t`; any other
    /// value of w, and plugging t, is refused while a phase of w is there.
    /// Returns the states extended by the phases the result may hold.
    pub(crate) fn plug_phases(
        &self,
        target: &[&Expr],
        map: &mut HashMap<Sym, Expr>,
        span: Span,
    ) -> SessionResult<Vec<Sym>> {
        let present = phases_all(target.iter().copied());
        let mut states = self.states.clone();
        states.extend(present.iter().copied());
        if present.is_empty() {
            return Ok(states);
        }
        if map.contains_key(&Sym::T) {
            return Err(SessionError::invalid(
                span,
                format!(
                    "plugging t into an expression with the phase `{}` is not supported",
                    present[0].name()
                ),
            ));
        }
        for ph in present {
            let Some(w) = param_of(ph) else { continue };
            let Some(v) = map.get(&w).cloned() else {
                continue;
            };
            let value = if let Some(q) = v.as_number() {
                Expr::sym(Sym::T).scale(&q)
            } else {
                match v.terms() {
                    [(k, c)]
                        if k.exp.is_zero()
                            && k.wave == TrigFactor::One
                            && k.beat == TimeFactor::One
                            && matches!(k.mono.powers(), [(u, 1)]
                                if self.sym_kind(&u.name()) == Some(SymKind::Param)) =>
                    {
                        let u = k.mono.powers()[0].0;
                        let nph = phase_of(u);
                        states.push(nph);
                        Expr::sym(nph).scale(c)
                    }
                    _ => {
                        return Err(SessionError::invalid(
                            span,
                            format!(
                                "`{}` stands in the phase `{}`: plug a number or a rational \
                                 multiple of a parameter for it",
                                w.name(),
                                ph.name()
                            ),
                        ))
                    }
                }
            };
            map.insert(ph, value);
        }
        Ok(states)
    }

    /// `average S to N in 1/w` (DESIGN §2.7c).
    pub(crate) fn average_in_frequency(
        &self,
        v: &FieldValue,
        w: Sym,
        opts: &Options,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Vec<Value>> {
        let core = |e: CoreError| SessionError::core(span, e);
        let ph = phase_of(w);
        self.check_rescalable(v, w, ph, span)?;
        // Rescaled: dx/ds = S/w with s = w*t and eps = 1/w.
        let eps = Sym::new("1/w");
        let mut map: HashMap<Sym, Expr> = HashMap::new();
        map.insert(ph, Expr::sym(Sym::T));
        map.insert(w, Expr::sym(eps).pow(-1).map_err(core)?);
        let mut ext = self.states.clone();
        ext.push(ph);
        let winv = Expr::sym(w).pow(-1).map_err(core)?;
        let rescaled = v
            .field
            .map(|c| c.subst(&map, &ext)?.mul(&Expr::sym(eps)))
            .map_err(core)?;
        let res = averaging::average(&rescaled, eps, opts, &self.states).map_err(core)?;
        let wn = w.name();
        report.push(
            Style::Note,
            format!(
                "symbolic frequency {wn}: time rescaled s = {wn}*t, eps = 1/{wn}; averaged in s, \
                 result in the original time t as a series in 1/{wn}: z' = Σ_k {wn}^(1-k)*F_k"
            ),
        );
        if let Form::FastOscillation { zero_mean, .. } = &res.form {
            report.push(
                Style::Note,
                if *zero_mean {
                    "fast-oscillation form in s; base: zero-mean antiderivatives (classical, the \
                     vibrational transform x = exp(Y(s))(y + W(s, y)))"
                } else {
                    "fast-oscillation form in s; base: U_i = ∫_0^s u_i (stroboscopic)"
                },
            );
        }
        let method = opts.method.adjective();
        report.push(
            Style::Note,
            format!(
                "{method} averaging in 1/{wn} to order {}, period {} in s",
                opts.order, res.period
            ),
        );
        // Back to t: dz/dt = w dz/ds = Σ_k w^(1-k) F_k.
        let mut total = Field::zero(self.states.len());
        let mut n_terms = 0;
        let mut scale = Expr::int(1);
        for (k, f) in res.orders.iter().enumerate() {
            let term = f.mul_expr(&scale).map_err(core)?;
            report.push(
                Style::Result,
                format!("order {}  {}", k + 1, plain::field(&term)),
            );
            n_terms += f.n_terms();
            total = total.add(&term).map_err(core)?;
            scale = scale.mul(&winv).map_err(core)?;
        }
        let mut out = vec![Value::field(total)];
        if opts.with_transform {
            out.push(Value::field(
                self.transform_in_time(&res, ph, &ext, &winv, span, report)?,
            ));
        }
        report.push(
            Style::Note,
            format!(
                "{} {}, {n_terms} {}; `compare` takes results in eps: compare the rescaled system \
                 (written in s with eps) with `average … in eps`",
                opts.order,
                super::commands::plural(opts.order, "order"),
                super::commands::plural(n_terms, "term")
            ),
        );
        Ok(out)
    }

    /// Refuses a system that `average … in 1/w` cannot rescale: a second
    /// independent phase, slow time outside the phase, or a term that
    /// grows with `w` after rescaling (a term with `w^k` becomes
    /// `eps^(1-k)`, so `k ≤ 1`).
    fn check_rescalable(&self, v: &FieldValue, w: Sym, ph: Sym, span: Span) -> SessionResult<()> {
        let comps: Vec<&Expr> = v.field.0.iter().collect();
        for other in phases_all(comps.iter().copied()) {
            if other != ph {
                return Err(SessionError::invalid(
                    span,
                    format!(
                        "independent symbolic frequencies `{}` and `{}`: `in 1/{}` averages \
                         over one fast frequency (rational multiples of {}*t only)",
                        ph.name(),
                        other.name(),
                        w.name(),
                        w.name()
                    ),
                ));
            }
        }
        for (i, c) in v.field.0.iter().enumerate() {
            for (k, q) in c.terms() {
                let term = Expr::term(k.clone(), q.clone());
                if term.is_time_varying() {
                    return Err(SessionError::invalid(
                        span,
                        format!(
                            "the term `{term}` (component {}) depends on t other than through \
                             {}: with s = {}*t it would vary slowly in s; write the time \
                             dependence through the phase only",
                            i + 1,
                            ph.name(),
                            w.name()
                        ),
                    ));
                }
                let pw = k.mono.power_of(w);
                if pw >= 2 {
                    let amp = k
                        .mono
                        .powers()
                        .iter()
                        .find(|(s, e)| {
                            *e > 0 && *s != w && self.sym_kind(&s.name()) == Some(SymKind::Param)
                        })
                        .map(|(s, _)| *s)
                        .map_or_else(|| "a".to_string(), |s| s.name());
                    return Err(SessionError::invalid(
                        span,
                        format!(
                            "the term `{term}` (component {}) grows like {w}^{} after rescaling \
                             s = {w}*t (dx/ds = S/{w}): hold an amplitude times {w} fixed, e.g. \
                             `plug(S, {amp} = b/{w})` with a new parameter b",
                            i + 1,
                            pw - 1,
                            w = w.name()
                        ),
                    ));
                }
            }
        }
        Ok(())
    }

    /// The transform `W(s, y) = Σ eps^k w_k(s, y)` back in the original
    /// time (`s = w*t`, `eps = 1/w`), each order reported.
    fn transform_in_time(
        &self,
        res: &Averaged,
        ph: Sym,
        ext: &[Sym],
        winv: &Expr,
        span: Span,
        report: &mut Report,
    ) -> SessionResult<Field> {
        let core = |e: CoreError| SessionError::core(span, e);
        // W(s, y) = Σ eps^k w_k(s, y) with s = w*t, eps = 1/w.
        let mut back: HashMap<Sym, Expr> = HashMap::new();
        back.insert(Sym::T, Expr::sym(ph));
        let mut wsum = Field::zero(self.states.len());
        let mut scale = winv.clone();
        for (k, wk) in res.transform.iter().flatten().enumerate() {
            let wt = wk.map(|c| c.subst(&back, ext)?.mul(&scale)).map_err(core)?;
            report.push(
                Style::Result,
                format!("w_{}     {}", k + 1, plain::field(&wt)),
            );
            wsum = wsum.add(&wt).map_err(core)?;
            scale = scale.mul(winv).map_err(core)?;
        }
        Ok(wsum)
    }
}
