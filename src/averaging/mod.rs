//! Higher-order averaging of time-periodic systems (DESIGN §2.6).
//!
//! The input `x' = V(t, x)` is split by powers of the small parameter:
//! `V = f_0 + Σ_{j≥1} eps^j f_j`. Three shapes of `f_0` are accepted:
//! zero (standard form), a fast oscillation `Σ u_i(t) g_i` with zero-mean
//! `u_i` and commuting `g_i` (removed by the pull-back through
//! `exp(Σ U_i(t) g_i)`), and a linear centre `A x` (removed by rotating
//! coordinates `exp(A t)`). The resulting standard form is averaged either
//! stroboscopically (`F = W_T / T`, unique) or classically (near-identity
//! transform with zero-mean generator terms).
//!
//! Pure: no I/O; the caller prints the notes.

mod centre;

use std::collections::HashMap;

use crate::core::calc::{common_period, Period, TimeKey};
use crate::core::expr::TimeFactor;
use crate::core::field::{
    bracket_sum_onto_parts, bracket_sum_onto_prepared, bracket_work, map_on_workers, BracketStart,
    Prepared,
};
use crate::core::sum::Keep;
use crate::core::sum::{TimePart, TimeParts};
use crate::core::{limits, CoreError, CoreResult, Expr, Field, Matrix, Sym, Q};
use crate::series::chrono::{magnus_generator, Graded};

/// Which averaged field is wanted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Method {
    /// The autonomous field whose time-T flow is the period map.
    Strobo,
    /// Near-identity transform with zero-mean generator terms.
    Classic,
}

impl Method {
    /// The adjective the reports use: `stroboscopic` or `classical`.
    pub fn adjective(self) -> &'static str {
        match self {
            Method::Strobo => "stroboscopic",
            Method::Classic => "classical",
        }
    }
}

/// The shape in which the system was recognised.
#[derive(Clone, Debug, PartialEq)]
pub enum Form {
    /// `x' = Σ_{j≥1} eps^j f_j(t, x)`.
    Standard,
    /// Fast oscillation `f_0 = Σ u_i(t) g_i`, pulled back by `exp(Σ U_i g_i)`.
    FastOscillation {
        /// `(U_i(t), g_i)`: the antiderivatives (from 0, or of zero mean:
        /// see `zero_mean`) and the fields.
        generator: Vec<(Expr, Field)>,
        /// The base of the antiderivatives: `U_i = ∫_0^t u_i` (false; so
        /// that x = z at multiples of the period, stroboscopic averaging)
        /// or the zero-mean `Ū_i = ∫_0^t u_i − mean(∫_0^t u_i)` (true;
        /// classical averaging, the vibrational transform).
        zero_mean: bool,
        /// Depth reached by the ad-series.
        depth: u64,
        /// True when the ad-series ended by itself (nilpotent).
        ended: bool,
    },
    /// Linear centre `f_0 = A x`, pulled back by `exp(A t)`.
    LinearCentre {
        /// The constant matrix A.
        a: Matrix,
        /// The exact `exp(A t)`.
        rotation: Matrix,
    },
}

/// The result of `average`.
#[derive(Clone, Debug)]
pub struct Averaged {
    /// `F_1..F_N` (or `G_1..G_N`), autonomous, without their eps factors.
    pub orders: Vec<Field>,
    /// The classical generator `w_1..w_N` (functions of t and the new
    /// coordinates), for classical averaging.
    pub transform: Option<Vec<Field>>,
    /// The period of the standard form that was averaged.
    pub period: Period,
    /// The recognised form.
    pub form: Form,
    /// The standard form that was averaged, by order (`h_1..h_N`).
    pub standard: Vec<Field>,
}

impl Averaged {
    /// `Σ eps^k F_k`.
    pub fn total(&self, eps: Sym) -> CoreResult<Field> {
        sum_with_powers(&self.orders, eps)
    }

    /// The field whose time-1 flow is the change of coordinates at
    /// `t = 0` (and at every multiple of the period): `Σ U_i(0) g_i` of a
    /// fast-oscillation form, `None` when that is the identity (the base
    /// `∫_0^t`, every other form). A classical fast-oscillation result
    /// maps `y` to `x = exp(Y(0))(y + W(0, y))` there.
    pub fn outer_at_zero(&self) -> Option<Field> {
        let Form::FastOscillation { generator, .. } = &self.form else {
            return None;
        };
        let dim = generator.first().map_or(0, |(_, g)| g.dim());
        let mut y = Field::zero(dim);
        for (u, g) in generator {
            y = y.add(&g.mul_expr(&u.at_time_zero()).ok()?).ok()?;
        }
        (!y.is_zero()).then_some(y)
    }

    /// `Σ eps^k w_k`, when computed.
    pub fn transform_total(&self, eps: Sym) -> CoreResult<Option<Field>> {
        match &self.transform {
            None => Ok(None),
            Some(w) => Ok(Some(sum_with_powers(w, eps)?)),
        }
    }
}

/// `Σ_k eps^k parts[k-1]`.
pub fn sum_with_powers(parts: &[Field], eps: Sym) -> CoreResult<Field> {
    let dim = parts.first().map_or(0, Field::dim);
    let mut acc = Field::zero(dim);
    for (k, f) in parts.iter().enumerate() {
        let p = Expr::sym(eps).pow(k as i64 + 1)?;
        acc = acc.add(&f.mul_expr(&p)?)?;
    }
    Ok(acc)
}

/// Options of `average`.
#[derive(Clone, Debug)]
pub struct Options {
    /// Strobo or classic.
    pub method: Method,
    /// Highest order N.
    pub order: usize,
    /// Depth limit of the fast-oscillation ad-series.
    pub depth: u64,
    /// Compute the classical generator too.
    pub with_transform: bool,
}

/// Splits a field as `Σ_k c_k(t) G_k` over the time parts of all components.
pub fn split_field_time(f: &Field) -> Vec<(TimeKey, Field)> {
    let mut groups: HashMap<TimeKey, Field> = HashMap::new();
    let dim = f.dim();
    for (i, comp) in f.0.iter().enumerate() {
        for (tk, g) in comp.split_time() {
            let entry = groups.entry(tk).or_insert_with(|| Field::zero(dim));
            entry.0[i] = g;
        }
    }
    let mut out: Vec<(TimeKey, Field)> = groups.into_iter().collect();
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

/// Splits `v` by powers of `eps`: `f_0, f_1, …, f_n` (higher powers dropped).
fn split_eps(v: &Field, eps: Sym, n: usize) -> CoreResult<Vec<Field>> {
    for comp in &v.0 {
        if let Some((lo, _)) = comp.power_range(eps) {
            if lo < 0 {
                return Err(CoreError::Refused {
                    reason: format!(
                        "negative power of `{}` in `{}`: write the system as f_0 + eps*f_1 + …",
                        eps.name(),
                        comp
                    ),
                });
            }
        }
    }
    let mut parts = Vec::with_capacity(n + 1);
    for j in 0..=n {
        parts.push(Field(
            v.0.iter()
                .map(|c| c.coeff_of_power(eps, j as i32))
                .collect(),
        ));
    }
    Ok(parts)
}

/// Averages `v` in `eps` to order `opts.order` (DESIGN §2.6).
pub fn average(v: &Field, eps: Sym, opts: &Options, states: &[Sym]) -> CoreResult<Averaged> {
    let n = opts.order;
    limits::check_order(n as u64)?;
    if n == 0 {
        return Err(CoreError::Refused {
            reason: "the order must be at least 1".to_string(),
        });
    }
    let parts = split_eps(v, eps, n)?;
    let f0 = &parts[0];
    let (form, standard) = if f0.is_zero() {
        (Form::Standard, parts[1..].to_vec())
    } else if f0.0.iter().any(Expr::is_time_varying) {
        fast_oscillation(
            f0,
            &parts[1..],
            opts.depth,
            opts.method == Method::Classic,
            states,
        )?
    } else {
        centre::linear_centre(f0, &parts[1..], states)?
    };
    // The period must also bring the change of coordinates back to the
    // identity, so that x = z at multiples of it.
    let mut freqs = match &form {
        Form::Standard => Vec::new(),
        Form::FastOscillation { generator, .. } => generator
            .iter()
            .flat_map(|(u, _)| u.frequencies())
            .collect(),
        Form::LinearCentre { rotation, .. } => {
            rotation.data.iter().flat_map(Expr::frequencies).collect()
        }
    };
    for f in &standard {
        for c in &f.0 {
            c.check_periodic()?;
            freqs.extend(c.frequencies());
        }
    }
    let period = common_period(&freqs).unwrap_or(Period(Q::int(2)));
    let (orders, transform) = match opts.method {
        Method::Strobo => (stroboscopic(&standard, &period, states)?, None),
        Method::Classic => {
            let (g, w) = classical(&standard, &period, states)?;
            (g, Some(w))
        }
    };
    Ok(Averaged {
        orders,
        transform,
        period,
        form,
        standard,
    })
}

/// Stroboscopic averaging of a standard form: `F_k = W_k(T) / T` with `W`
/// the chronological logarithm (the definition; used by tests to check the
/// faster route below).
pub fn stroboscopic_by_logarithm(
    standard: &[Field],
    period: &Period,
    states: &[Sym],
) -> CoreResult<Vec<Field>> {
    let n = standard.len();
    let w = magnus_generator(
        &Graded {
            parts: standard.to_vec(),
        },
        n,
        states,
    )?;
    let t_expr = period.to_expr();
    w.iter()
        .map(|wk| wk.map(|e| e.at_time_pi_multiple(&period.0)?.div(&t_expr)))
        .collect()
}

/// Stroboscopic averaging of a standard form through a periodic
/// near-identity transform `x = exp(W_t)(y)` with `W_0 = 0`: then the
/// time-T flow of `V` is `exp(T F)`, so `F` is the stroboscopic field.
///
/// With operators on functions, `P_t = exp(tF) ∘ exp(W_t)` and
/// `P_t' = P_t ∘ V_t` give `V = e^{−ad_W} F + Σ_{n≥0} (−1)^n/(n+1)! ad_W^n W'`,
/// that is `V = Σ_{p≥0} (−1)^p ad_W^p U_p` with `U_p = F/p! + W'/(p+1)!`.
/// The brackets are summed in Horner form, `H_p = U_p − ad_W H_{p+1}`, so
/// that `V = F + W' − ad_W H_1`: one chain of brackets instead of one for
/// `F` and one for `W'`. By grades, `R_k = −Σ_j [W_j, H_{1,k−j}]` uses
/// lower orders only; `F_k` is the mean of `V_k − R_k`,
/// `W_k = ∫_0^t (V_k − R_k − F_k)`, and then
/// `H_{p,k} = U_{p,k} − Σ_j [W_j, H_{p+1,k−j}]` for `p + k ≤ n`. Every
/// intermediate is periodic (no secular powers of t), which keeps it much
/// smaller than the logarithm.
///
/// Only the averaged field is wanted: at the last order only the mean of
/// `V_n − R_n` is used, so its brackets form only the products of equal
/// frequencies (a product of `cos(h₁ t)` and `cos(h₂ t)` has frequencies
/// `|h₁ − h₂|` and `h₁ + h₂`), and `W_n` is not formed. Likewise `H_{p,k}`
/// with `p + k = n` reaches `F_n` only through `p` brackets with `W_1` and
/// the mean, so only its harmonics up to `p` times the highest frequency of
/// `W_1` are formed. `W_{n−1}` reaches `F_n` only through the mean of
/// `[W_{n−1}, H_{1,1}]` and `W'_{n−1}` only through `H_{1,n−1}`, so order
/// `n − 1` keeps the harmonics up to those of `W_1`, plus the constant that
/// the others give to `W_{n−1}`: it must vanish at `t = 0`, and
/// `∫_0^t sin(h s) ds = (1 − cos(h t))/h`, so each dropped `s_h sin(h t)`
/// of `W'_{n−1}` adds `s_h / h` (only sine-times-cosine products can give
/// one). Other quantities are needed whole.
pub fn stroboscopic(standard: &[Field], period: &Period, states: &[Sym]) -> CoreResult<Vec<Field>> {
    let n = standard.len();
    let dim = states.len();
    let zero = Field::zero(dim).prepare(states)?;
    // w[j] = W_j and h[p][m] = H_{p,m} (p + m ≤ n), with their derivatives:
    // each enters several brackets.
    let mut w: Vec<Prepared> = vec![zero.clone(); n + 1];
    let mut h: Vec<Vec<Prepared>> = vec![vec![zero; n + 1]; n + 2];
    let mut f_out = Vec::with_capacity(n);
    let mut fact = vec![Q::ONE; n + 2];
    for i in 1..n + 2 {
        fact[i] = fact[i - 1].mul(&Q::int(i as i64));
    }
    // The highest frequency in W_1.
    let mut rho1 = Q::ZERO;
    for k in 1..=n {
        limits::progress("stroboscopic averaging", k - 1, n);
        limits::poll()?;
        // V_k − R_k = V_k + Σ_j [W_j, H_{1,k−j}]: at the last order only its
        // mean; at order n − 1 (from 2) its harmonics up to those of W_1 and
        // the constant its higher sines give to W_k.
        let low = k + 1 == n && k >= 2;
        let cap = if k == n {
            Keep::UpTo(&Q::ZERO)
        } else if low {
            Keep::UpToWithSines(&rho1)
        } else {
            Keep::All
        };
        let pairs = grade_pairs(&w, &h[1], k);
        let start = [(BracketStart::Field(&standard[k - 1]), Q::ONE)];
        let (rest, sines) = bracket_sum_onto_parts(&start, &pairs, false, states, cap)?;
        let step = split_and_integrate(rest, &sines, period, states)?;
        let fk = step.mean;
        if k == n {
            f_out.push(fk);
            break;
        }
        let fk_parts = step.mean_parts;
        let wk_dot = step.oscillating;
        w[k] = step.integral;
        if k == 1 {
            rho1 = w[1]
                .parts()
                .iter()
                .flat_map(|c| c.iter().map(|part| part.freq.clone()))
                .max()
                .unwrap_or(Q::ZERO);
        }
        // The sums H_{p,k}, p = 1..n−k, use lower orders only: they are
        // independent, and the cores share them.
        let work: Vec<usize> = (1..=n - k)
            .map(|p| bracket_work(&grade_pairs(&w, &h[p + 1], k)))
            .collect();
        let sums = map_on_workers(&work, |i| {
            let p = i + 1;
            limits::poll()?;
            // On the last diagonal (p + k = n), H_{p,k} reaches F_n only
            // through p brackets with W_1 and the mean: frequencies above
            // p times those of W_1 cannot get there.
            let cap = (p + k == n).then(|| rho1.mul(&Q::int(p as i64)));
            let keep = cap.as_ref().map_or(Keep::All, Keep::UpTo);
            let u = [
                (
                    BracketStart::Parts(&fk_parts),
                    fact[p].recip().unwrap_or(Q::ZERO),
                ),
                (
                    BracketStart::Parts(&wk_dot),
                    fact[p + 1].recip().unwrap_or(Q::ZERO),
                ),
            ];
            let pairs = grade_pairs(&w, &h[p + 1], k);
            bracket_sum_onto_prepared(&u, &pairs, true, states, keep)
        })?;
        for (p, sum) in (1..).zip(sums) {
            h[p][k] = sum;
        }
        f_out.push(fk);
    }
    Ok(f_out)
}

/// One order of the stroboscopic recursion after its sum: the mean `F_k`,
/// the oscillating part `W'_k` (split by time factor) and the prepared
/// `W_k = ∫_0^t W'_k` plus the sine constants.
struct Step {
    mean: Field,
    /// The mean split by time factor (packed when it was): the sums
    /// `H_{p,k}` start from it without packing `F_k` again for each `p`.
    mean_parts: Vec<TimeParts>,
    oscillating: Vec<TimeParts>,
    integral: Prepared,
}

/// Splits `V_k − R_k` (by time parts) into its mean and oscillating part
/// and integrates the latter from 0, adding `sines`. Part by part (packed
/// parts stay packed) when no part has a power of t and every frequency
/// completes whole cycles in the period (then the mean is the part without
/// time factor); through the normal forms otherwise.
fn split_and_integrate(
    rest: Vec<TimeParts>,
    sines: &Field,
    period: &Period,
    states: &[Sym],
) -> CoreResult<Step> {
    let half = period.0.half();
    let by_parts = rest
        .iter()
        .flatten()
        .all(|part| !part.has_time_power() && part.freq.mul(&half).is_integer());
    if !by_parts {
        let whole = Field(
            rest.iter()
                .map(|parts| parts.iter().fold(Expr::zero(), |acc, p| acc.add(p.expr())))
                .collect(),
        );
        let mean = whole.map(|e| e.mean_over(period))?;
        let osc = whole.sub(&mean)?;
        let integral = osc.map(|e| e.integral_from_zero())?.add(sines)?;
        limits::check_terms(integral.n_terms())?;
        return Ok(Step {
            mean_parts: mean
                .0
                .iter()
                .cloned()
                .map(Expr::into_by_frequency)
                .collect(),
            mean,
            oscillating: osc.0.into_iter().map(Expr::into_by_frequency).collect(),
            integral: integral.prepare(states)?,
        });
    }
    let mut mean = Vec::with_capacity(rest.len());
    let mut mean_parts = Vec::with_capacity(rest.len());
    let mut oscillating = Vec::with_capacity(rest.len());
    let mut integral = Vec::with_capacity(rest.len());
    for (parts, s) in rest.into_iter().zip(&sines.0) {
        let (constant, osc): (Vec<TimePart>, Vec<TimePart>) =
            parts.into_iter().partition(|p| p.freq.is_zero());
        // The constant part has no sine (sin 0 = 0): it is the mean.
        let m = constant
            .first()
            .map_or_else(Expr::zero, |p| p.expr().clone());
        let mut c = s.clone();
        let mut waves: TimeParts = Vec::with_capacity(osc.len());
        for p in &osc {
            for q in p.integral_from_zero()? {
                if q.freq.is_zero() {
                    c = c.add(q.expr());
                } else {
                    waves.push(q);
                }
            }
        }
        let mut w_parts = c.into_by_frequency();
        w_parts.extend(waves);
        w_parts.sort_by(|a, b| (&a.freq, a.odd).cmp(&(&b.freq, b.odd)));
        mean.push(m);
        mean_parts.push(constant);
        oscillating.push(osc);
        integral.push(w_parts);
    }
    let terms: usize = integral.iter().flatten().map(TimePart::len).sum();
    limits::check_terms(terms)?;
    Ok(Step {
        mean: Field(mean),
        mean_parts,
        oscillating,
        integral: Prepared::from_parts(integral, states),
    })
}

/// The pairs `(W_j, c_{k−j})`, `1 ≤ j < k`, with nonzero members.
fn grade_pairs<'a>(
    w: &'a [Prepared],
    c: &'a [Prepared],
    k: usize,
) -> Vec<(&'a Prepared, &'a Prepared)> {
    (1..k)
        .filter(|&j| !w[j].is_zero() && !c[k - j].is_zero())
        .map(|j| (&w[j], &c[k - j]))
        .collect()
}

/// Fresh copies of the state symbols, used to freeze the generator while
/// Taylor-expanding `f(t, y + w)`.
fn frozen_copies(states: &[Sym]) -> Vec<Sym> {
    states
        .iter()
        .map(|s| Sym::new(&format!("{}'", s.name())))
        .collect()
}

/// Classical averaging of a standard form with the zero-mean direct
/// transform; returns `(G_1..G_N, w_1..w_N)`.
pub fn classical(
    standard: &[Field],
    period: &Period,
    states: &[Sym],
) -> CoreResult<(Vec<Field>, Vec<Field>)> {
    let n = standard.len();
    let dim = states.len();
    let frozen = frozen_copies(states);
    let mut ext = states.to_vec();
    ext.extend(frozen.iter().copied());
    let to_frozen: HashMap<Sym, Expr> = states
        .iter()
        .zip(&frozen)
        .map(|(s, z)| (*s, Expr::sym(*z)))
        .collect();
    let from_frozen: HashMap<Sym, Expr> = frozen
        .iter()
        .zip(states)
        .map(|(z, s)| (*z, Expr::sym(*s)))
        .collect();
    // p[m][g]: (1/m!) (w̃·∇)^m f at grade g (index g, grade 0 unused).
    let mut p: Vec<Vec<Field>> = vec![vec![Field::zero(dim); n + 1]; n + 1];
    p[0][1..=n].clone_from_slice(&standard[..n]);
    let mut g_out: Vec<Field> = Vec::with_capacity(n);
    let mut w_out: Vec<Field> = Vec::with_capacity(n);
    let mut w_frozen: Vec<Field> = Vec::with_capacity(n);
    for k in 1..=n {
        limits::poll()?;
        limits::progress("classical averaging", k - 1, n);
        // Taylor terms at grade k.
        for m in 1..k {
            let mut acc = Field::zero(dim);
            for i in 1..k {
                if k - i < m || p[m - 1][k - i].is_zero() {
                    continue;
                }
                let wi = &w_frozen[i - 1];
                // L_i(h) = Σ_c w̃_{i,c} ∂h/∂y_c, componentwise.
                let applied = p[m - 1][k - i].map(|h| wi.lie_derivative(h, states))?;
                acc = acc.add(&applied)?;
            }
            p[m][k] = acc.scale(&Q::ratio(1, m as i64).unwrap_or(Q::ZERO));
        }
        let mut r = Field::zero(dim);
        for row in p.iter().take(k) {
            r = r.add(&row[k])?;
        }
        let mut r = r.map(|e| e.subst(&from_frozen, &ext))?;
        // − Σ_{i+j=k} Dw_i · G_j
        for i in 1..k {
            let j = k - i;
            let gj = &g_out[j - 1];
            let dwg = w_out[i - 1].map(|wc: &Expr| gj.lie_derivative(wc, states))?;
            r = r.sub(&dwg)?;
        }
        let gk = r.map(|e| e.mean_over(period))?;
        let osc = r.sub(&gk)?;
        let wk = osc.map(|e| e.zero_mean_antiderivative(period))?;
        w_frozen.push(wk.map(|e| e.subst(&to_frozen, &ext))?);
        g_out.push(gk);
        w_out.push(wk);
    }
    Ok((g_out, w_out))
}

/// Recognises `f_0 = Σ u_i(t) g_i` and pulls the higher orders back, with
/// `U_i = ∫_0^t u_i`, or its zero-mean shift when `zero_mean` (DESIGN §2.6).
fn fast_oscillation(
    f0: &Field,
    higher: &[Field],
    depth: u64,
    zero_mean: bool,
    states: &[Sym],
) -> CoreResult<(Form, Vec<Field>)> {
    let pieces = split_field_time(f0);
    let f0_freqs: Vec<Q> = f0.0.iter().flat_map(Expr::frequencies).collect();
    let f0_period = common_period(&f0_freqs).unwrap_or(Period(Q::int(2)));
    let mut generator: Vec<(Expr, Field)> = Vec::new();
    for (tk, g) in &pieces {
        if tk.tpow != 0 {
            return Err(CoreError::NotPeriodic {
                term: format!("{}*{}", tk.to_expr(), show_field(g)),
            });
        }
        if tk.beat == TimeFactor::One {
            return Err(CoreError::Refused {
                reason: format!(
                    "the eps^0 part has a nonzero mean {}: it is not a fast oscillation \
                     (averaging needs f_0 = Σ u_i(t) g_i with zero-mean u_i, a linear centre A*x, \
                     or no eps^0 part)",
                    show_field(g)
                ),
            });
        }
        let u = tk.to_expr().integral_from_zero()?;
        let u = if zero_mean {
            u.sub(&u.mean_over(&f0_period)?)
        } else {
            u
        };
        generator.push((u, g.clone()));
    }
    for i in 0..generator.len() {
        for j in i + 1..generator.len() {
            let b = generator[i].1.bracket(&generator[j].1, states)?;
            if !b.is_zero() {
                return Err(CoreError::Refused {
                    reason: format!(
                        "the oscillating fields do not commute: [{}, {}] = {} is not zero",
                        show_field(&generator[i].1),
                        show_field(&generator[j].1),
                        show_field(&b)
                    ),
                });
            }
        }
    }
    let dim = states.len();
    let mut y = Field::zero(dim);
    for (u, g) in &generator {
        y = y.add(&g.mul_expr(u)?)?;
    }
    let mut standard = Vec::with_capacity(higher.len());
    let mut reached = 0;
    let mut all_ended = true;
    for f in higher {
        let (pulled, ended) = f.pullback(&y, depth, states)?;
        all_ended &= ended;
        reached = reached.max(depth);
        standard.push(pulled);
    }
    // Report the depth the series actually needed when it ended.
    let needed = if all_ended {
        ad_series_length(higher, &y, depth, states)?
    } else {
        reached
    };
    Ok((
        Form::FastOscillation {
            generator,
            zero_mean,
            depth: needed,
            ended: all_ended,
        },
        standard,
    ))
}

/// The largest k with ad_y^k f nonzero over the given fields (≤ depth).
fn ad_series_length(fs: &[Field], y: &Field, depth: u64, states: &[Sym]) -> CoreResult<u64> {
    let mut best = 0;
    for f in fs {
        let mut term = f.clone();
        for k in 1..=depth {
            term = y.bracket(&term, states)?;
            if term.is_zero() {
                break;
            }
            best = best.max(k);
        }
    }
    Ok(best)
}

/// A field in input syntax.
pub fn show_field(f: &Field) -> String {
    let parts: Vec<String> = f.0.iter().map(|e| e.to_string()).collect();
    format!("[{}]", parts.join(", "))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::field::with_workers;

    /// Case e of the benchmarks: a three-state quadratic system with
    /// harmonics 1 and 2 (`scripts/bench_cases/e_strobo_quadratic.ordex`).
    fn case_e() -> (Vec<Field>, Vec<Sym>) {
        let states: Vec<Sym> = ["x", "y", "z"].iter().map(|n| Sym::new(n)).collect();
        let (x, y, z) = (
            Expr::sym(states[0]),
            Expr::sym(states[1]),
            Expr::sym(states[2]),
        );
        let t = Expr::sym(Sym::T);
        let cos = |k: i64| Expr::cos_of(&t.scale(&Q::int(k)), &states).expect("cos");
        let sin = |k: i64| Expr::sin_of(&t.scale(&Q::int(k)), &states).expect("sin");
        let mul = |a: &Expr, b: &Expr| a.mul(b).expect("product");
        let half = Q::ratio(1, 2).expect("half");
        let f = Field(vec![
            mul(&mul(&y, &z), &cos(1)).sub(&x.scale(&half)),
            mul(&mul(&x, &z), &sin(1)).add(&mul(&mul(&y, &y), &cos(2))),
            mul(&x, &y).sub(&mul(&z, &sin(1))),
        ]);
        (vec![f], states)
    }

    #[test]
    fn stroboscopic_averaging_is_the_same_on_one_and_on_several_threads() {
        let (mut standard, states) = case_e();
        // Order 7: every cap of the recursion (mean only, harmonics with
        // sine constants, the last diagonal) is used, on sums of several
        // pairs.
        let dim = states.len();
        standard.extend((1..7).map(|_| Field::zero(dim)));
        let period = Period(Q::int(2));
        let one = with_workers(1, || stroboscopic(&standard, &period, &states)).expect("one");
        for workers in [2, 3] {
            let many = with_workers(workers, || stroboscopic(&standard, &period, &states))
                .expect("several");
            assert_eq!(one, many, "{workers} workers");
            let shown = |v: &[Field]| v.iter().map(show_field).collect::<Vec<_>>();
            assert_eq!(shown(&one), shown(&many), "{workers} workers, as text");
        }
        // F_1 is the mean of the field over the period, by hand:
        // mean(cos t) = mean(sin t) = mean(cos 2t) = 0.
        let (x, y) = (Expr::sym(states[0]), Expr::sym(states[1]));
        let mean = Field(vec![
            x.scale(&Q::ratio(-1, 2).expect("half")),
            Expr::zero(),
            x.mul(&y).expect("product"),
        ]);
        assert_eq!(one[0], mean);
        assert!(one.iter().all(|f| !f.is_zero()));
    }
}
