//! The chronological exponential and logarithm on concrete fields.
//!
//! Conventions (DESIGN §2.4, §2.5): for a time-varying field `V_t` the
//! flow acts on outputs as `P_t = Σ_k ∫_{0≤τk≤…≤τ1≤t} V_τk ∘ … ∘ V_τ1`
//! (earliest time outermost), so `P_t' = P_t ∘ V_t`. Writing `P_t = exp(W_t)`
//! gives the generator `W' = ad_W / (1 − e^{−ad_W}) V = Σ β_n ad_W^n V` with
//! `Σ β_n x^n = x/(1 − e^{−x})` and `ad_W V = [W, V]`; its degree-2 term is
//! `½ ∫∫_{τ2<τ1} [V_τ2, V_τ1]`.
//!
//! Both series are graded: the input is `V = Σ_j V_j` with `V_j` of grade
//! `j` (the power of eps, or 1 for the plain degree in `V`).

use std::collections::HashMap;

use crate::core::calc::Period;
use crate::core::expr::{Key, LinearForm, Monomial, TimeFactor, TrigFactor};
use crate::core::field::{bracket_sum, Prepared};
use crate::core::sum::Keep;
use crate::core::{limits, CoreError, CoreResult, Expr, Field, Sym, Q};
use crate::series::taylor;

/// A graded time-varying field: `parts[j-1]` has grade `j`.
#[derive(Clone, Debug)]
pub struct Graded {
    /// Components by grade, starting at grade 1.
    pub parts: Vec<Field>,
}

impl Graded {
    /// A field of grade 1 only.
    pub fn single(v: Field) -> Graded {
        Graded { parts: vec![v] }
    }

    fn grade(&self, j: usize) -> Option<&Field> {
        if j == 0 {
            None
        } else {
            self.parts.get(j - 1).filter(|f| !f.is_zero())
        }
    }
}

/// The Bernoulli-type coefficients β_0..β_n of x/(1 − e^{−x}).
pub fn beta_coefficients(n: usize) -> Vec<Q> {
    // x/(1 - e^{-x}) = 1 / (Σ_{k≥0} (-1)^k x^k/(k+1)!): invert the series.
    let mut d = Vec::with_capacity(n + 1);
    let mut fact = Q::ONE;
    for k in 0..=n {
        fact = fact.mul(&Q::int(k as i64 + 1));
        let v = fact.recip().unwrap_or(Q::ZERO);
        d.push(if k % 2 == 0 { v } else { v.neg() });
    }
    let mut b = vec![Q::ZERO; n + 1];
    b[0] = Q::ONE;
    for m in 1..=n {
        let mut s = Q::ZERO;
        for k in 1..=m {
            s = s.add(&d[k].mul(&b[m - k]));
        }
        b[m] = s.neg();
    }
    b
}

fn time_symbol() -> Sym {
    // A name no user can type: the final time of the backward recursion.
    Sym::new("t'")
}

/// Replaces time `t` by the symbol `to`, treated as a state coordinate
/// (`cos(k t)` becomes `cos(k to)`, multiplied into the term's
/// trigonometric factor by the product-to-sum rules). Terms with `t` in an
/// exponential go through `subst`.
fn time_to_symbol(e: &Expr, to: Sym, states: &[Sym]) -> CoreResult<Expr> {
    let mut ext = states.to_vec();
    ext.push(to);
    let mut map = HashMap::new();
    map.insert(Sym::T, Expr::sym(to));
    let mut out: Vec<(Key, Q)> = Vec::with_capacity(e.len());
    for (k, c) in e.terms() {
        if k.exp.terms().iter().any(|(x, _)| *x == Sym::T || *x == to) {
            let slow = Expr::term(k.clone(), c.clone()).subst(&map, &ext)?;
            out.extend(slow.terms().iter().cloned());
            continue;
        }
        let mut key = k.clone();
        key.mono = move_power(&k.mono, Sym::T, to)?;
        key.beat = TimeFactor::One;
        let wave = match &k.beat {
            TimeFactor::One => {
                out.push((key, c.clone()));
                continue;
            }
            TimeFactor::Cos(w) => TrigFactor::Cos(LinearForm::single(to, w.clone())),
            TimeFactor::Sin(w) => TrigFactor::Sin(LinearForm::single(to, w.clone())),
        };
        let factor = Key { wave, ..Key::one() };
        key.mul_into(c, &factor, &Q::ONE, &mut |k, c| out.push((k, c)))?;
    }
    Ok(Expr::from_terms(out))
}

/// Replaces the symbol `from` by time `t` (the inverse of
/// [`time_to_symbol`]), renaming in place where the normal form allows.
fn symbol_to_time(e: &Expr, from: Sym, states: &[Sym]) -> CoreResult<Expr> {
    let mut map = HashMap::new();
    map.insert(from, Expr::sym(Sym::T));
    rename_terms(
        e,
        |k| {
            if k.beat != TimeFactor::One || k.exp.terms().iter().any(|(x, _)| *x == from) {
                return Ok(None);
            }
            let beat = match &k.wave {
                TrigFactor::One => TimeFactor::One,
                TrigFactor::Cos(l) | TrigFactor::Sin(l) => match l.terms() {
                    [(x, w)] if *x == from => {
                        if matches!(k.wave, TrigFactor::Cos(_)) {
                            TimeFactor::Cos(w.clone())
                        } else {
                            TimeFactor::Sin(w.clone())
                        }
                    }
                    _ if l.terms().iter().all(|(x, _)| *x != from) => TimeFactor::One,
                    _ => return Ok(None),
                },
            };
            let mut key = k.clone();
            key.mono = move_power(&k.mono, from, Sym::T)?;
            if beat != TimeFactor::One {
                key.wave = TrigFactor::One;
            }
            key.beat = beat;
            Ok(Some(key))
        },
        |e| e.subst(&map, states),
    )
}

/// The monomial with the power of `from` moved onto `to`.
fn move_power(m: &Monomial, from: Sym, to: Sym) -> CoreResult<Monomial> {
    let e = m.power_of(from);
    if e == 0 {
        return Ok(m.clone());
    }
    let mut rest = m.clone();
    rest.retain(|(x, _)| *x != from);
    rest.mul(&Monomial::from_powers([(to, e)])?)
}

/// Rewrites every term's key with `fast` (same coefficient), or, where it
/// declines, the term through `slow`; the result is normalised once.
fn rename_terms(
    e: &Expr,
    mut fast: impl FnMut(&Key) -> CoreResult<Option<Key>>,
    slow: impl Fn(&Expr) -> CoreResult<Expr>,
) -> CoreResult<Expr> {
    let mut out: Vec<(Key, Q)> = Vec::with_capacity(e.len());
    for (k, c) in e.terms() {
        match fast(k)? {
            Some(key) => out.push((key, c.clone())),
            None => out.extend(
                slow(&Expr::term(k.clone(), c.clone()))?
                    .terms()
                    .iter()
                    .cloned(),
            ),
        }
    }
    Ok(Expr::from_terms(out))
}

/// The value of a time-varying expression at `t = value`.
pub fn at_time(e: &Expr, value: &Expr, states: &[Sym]) -> CoreResult<Expr> {
    if let Some(c) = value.as_number() {
        if c.is_zero() {
            return Ok(e.at_time_zero());
        }
    }
    let mut map = HashMap::new();
    map.insert(Sym::T, value.clone());
    e.subst(&map, states)
}

/// Terms `k = 1..=n` of the chronological expansion of `h(x(t))` for
/// `x' = V(t, x)`, `x(0) = x` (DESIGN §2.4), as functions of `t` and `x`.
pub fn flow_terms(v: &Field, h: &Expr, n: usize, states: &[Sym]) -> CoreResult<Vec<Expr>> {
    Ok(flow_outputs(v, std::slice::from_ref(h), n, states)?
        .into_iter()
        .next()
        .unwrap_or_default())
}

/// [`flow_terms`] for several outputs: `result[j][k − 1]` is the order-`k`
/// term of `outputs[j]`. Forward ([`taylor::forward_flow`]: one expansion
/// of the solution serves every output) when the field's Taylor expansion
/// needs few multi-indices, as for polynomial fields and transcendental
/// factors in few coordinates; the backward recursion per output otherwise.
pub fn flow_outputs(
    v: &Field,
    outputs: &[Expr],
    n: usize,
    states: &[Sym],
) -> CoreResult<Vec<Vec<Expr>>> {
    if let Some(terms) = taylor::forward_flow(v, outputs, n, states)? {
        return Ok(terms);
    }
    outputs
        .iter()
        .map(|h| backward_flow_output(v, h, n, states))
        .collect()
}

/// The terms of `h(t, x(t))` by the backward recursion: an output that
/// depends on time, `h = Σ_j c_j(t) g_j(x)`, has the terms of each `g_j`
/// times `c_j(t)`.
fn backward_flow_output(v: &Field, h: &Expr, n: usize, states: &[Sym]) -> CoreResult<Vec<Expr>> {
    if !h.is_time_varying() {
        return backward_flow_terms(v, h, n, states);
    }
    let mut sums = vec![Expr::zero(); n];
    for (time, g) in h.split_time() {
        let c = time.to_expr();
        for (sum, term) in sums.iter_mut().zip(backward_flow_terms(v, &g, n, states)?) {
            *sum = sum.add(&term.mul(&c)?);
        }
    }
    Ok(sums)
}

/// The flow terms of one output by the backward recursion in the initial
/// time (an independent route to the forward expansion's result; its
/// intermediates carry the final time as well, so they outgrow the result).
fn backward_flow_terms(v: &Field, h: &Expr, n: usize, states: &[Sym]) -> CoreResult<Vec<Expr>> {
    limits::check_order(n as u64)?;
    let big_t = time_symbol();
    // Backward recursion in the initial time s (written t here), final time
    // T: Z_0 = h, Z_k(s) = ∫_s^T V_σ(Z_{k-1}(σ)) dσ; the k-th term is Z_k(0).
    let mut z = h.clone();
    let mut out = Vec::with_capacity(n);
    for k in 0..n {
        limits::poll()?;
        limits::progress("chronological exponential", k, n);
        let g = v.lie_derivative(&z, states)?;
        let f = g.antiderivative_t()?;
        let f_at_final = time_to_symbol(&f, big_t, states)?;
        z = f_at_final.sub(&f);
        limits::check_terms(z.len())?;
        let term = z.at_time_zero();
        out.push(symbol_to_time(&term, big_t, states)?);
    }
    Ok(out)
}

/// The graded generator `W(t) = Σ_k W_k(t)` with `exp(W_t)` the time-t flow
/// of `V = Σ_j V_j`, for grades `1..=n`, as functions of `t`.
pub fn magnus_generator(v: &Graded, n: usize, states: &[Sym]) -> CoreResult<Vec<Field>> {
    limits::check_order(n as u64)?;
    let dim = states.len();
    let beta = beta_coefficients(n);
    let zero = Field::zero(dim).prepare(states)?;
    // a[p][m]: Σ over ad_{W_k1}…ad_{W_kp} V_j with k1+…+kp+j = m, and the
    // generator's grades, with their derivatives (each enters several
    // brackets); a sum of brackets goes into one accumulator.
    let mut a: Vec<Vec<Prepared>> = vec![vec![zero.clone(); n + 1]; n + 1];
    let mut wp: Vec<Prepared> = vec![zero; n + 1];
    let mut w: Vec<Field> = vec![Field::zero(dim); n + 1];
    for m in 1..=n {
        limits::progress("chronological logarithm", m - 1, n);
        let vm = v.grade(m).cloned().unwrap_or_else(|| Field::zero(dim));
        let mut dw = vm.scale(&beta[0]);
        a[0][m] = vm.prepare(states)?;
        for p in 1..m {
            limits::poll()?;
            let pairs: Vec<_> = (1..m)
                .filter(|&k| m - k >= p && !wp[k].is_zero() && !a[p - 1][m - k].is_zero())
                .map(|k| (&wp[k], &a[p - 1][m - k]))
                .collect();
            let acc = bracket_sum(&pairs, states, Keep::All)?;
            if !beta[p].is_zero() {
                dw = dw.add_scaled(&acc, &beta[p])?;
            }
            if m < n {
                a[p][m] = acc.prepare(states)?;
            }
        }
        w[m] = dw.map(|e| e.integral_from_zero())?;
        limits::check_terms(w[m].n_terms())?;
        if m < n {
            wp[m] = w[m].clone().prepare(states)?;
        }
    }
    w.remove(0);
    Ok(w)
}

/// Evaluates a time-varying field at the end of a period.
pub fn field_at_period(f: &Field, period: &Period) -> CoreResult<Field> {
    f.map(|e| e.at_time_pi_multiple(&period.0))
}

/// The common period of a collection of expressions (2π over the gcd of
/// their frequencies); `None` when nothing oscillates.
pub fn period_of(exprs: &[&Expr]) -> Option<Period> {
    let mut freqs = Vec::new();
    for e in exprs {
        freqs.extend(e.frequencies());
    }
    crate::core::calc::common_period(&freqs)
}

/// Checks that a time-varying field has no secular (polynomial in t) part.
pub fn check_periodic_field(f: &Field) -> CoreResult<()> {
    for e in &f.0 {
        e.check_periodic()?;
    }
    Ok(())
}

/// Refusal used when a period is needed but nothing oscillates.
pub fn no_period_error() -> CoreError {
    CoreError::Refused {
        reason: "no period: the field does not oscillate in t (give one with `over T`)".to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    fn subst_one(e: &Expr, from: Sym, to: Sym, states: &[Sym]) -> Expr {
        let mut map = HashMap::new();
        map.insert(from, Expr::sym(to));
        e.subst(&map, states).expect("subst")
    }

    /// The in-place renaming agrees with the general substitution, both
    /// ways, on terms with and without trigonometric factors in the state.
    #[test]
    fn time_renaming_agrees_with_substitution() {
        let (q, p) = (Sym::new("q"), Sym::new("p"));
        let states = [q, p];
        let to = time_symbol();
        let mut ext = states.to_vec();
        ext.push(to);
        let (eq, ep, et) = (Expr::sym(q), Expr::sym(p), Expr::sym(Sym::T));
        let cos = |e: &Expr| Expr::cos_of(e, &states).expect("cos");
        let sin = |e: &Expr| Expr::sin_of(e, &states).expect("sin");
        let three_t = et.scale(&Q::int(3));
        let samples = [
            eq.mul(&eq)
                .unwrap()
                .mul(&et.pow(2).unwrap())
                .unwrap()
                .mul(&cos(&three_t))
                .unwrap(),
            ep.mul(&sin(&et.scale(&Q::int(2))))
                .unwrap()
                .add(&et.pow(3).unwrap()),
            sin(&eq).mul(&cos(&et)).unwrap().mul(&et).unwrap(),
            cos(&eq.add(&ep))
                .mul(&et)
                .unwrap()
                .add(&sin(&three_t.add(&eq))),
            Expr::int(7).add(&ep.mul(&et.pow(5).unwrap()).unwrap()),
        ];
        for e in &samples {
            let fast = time_to_symbol(e, to, &states).expect("fast");
            assert_eq!(fast, subst_one(e, Sym::T, to, &ext), "t -> t' of {e}");
            let back = symbol_to_time(&fast, to, &states).expect("back");
            assert_eq!(
                back,
                subst_one(&fast, to, Sym::T, &states),
                "t' -> t of {fast}"
            );
            assert_eq!(&back, e, "round trip of {e}");
        }
    }

    /// A small deterministic generator (no seed file needed).
    struct Lcg(u64);

    impl Lcg {
        fn below(&mut self, n: u64) -> u64 {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (self.0 >> 33) % n
        }
    }

    /// A random term of a field on `(q, p)`: a coefficient, a monomial of
    /// degree at most 2, sometimes a state factor (`sin q`, `cos(q - p)`,
    /// `exp(p)`), and a time factor (`cos t`, `sin 2t`, `cos(t/2)`, `t`, none).
    fn random_term(r: &mut Lcg, states: &[Sym]) -> Expr {
        let (q, p, t) = (
            Expr::sym(states[0]),
            Expr::sym(states[1]),
            Expr::sym(Sym::T),
        );
        let num = r.below(7) as i64 - 3;
        let den = r.below(3) as i64 + 1;
        let mut e = Expr::num(Q::ratio(num, den).expect("nonzero denominator"));
        for _ in 0..r.below(3) {
            e = e.mul(if r.below(2) == 0 { &q } else { &p }).expect("mul");
        }
        let state = match r.below(8) {
            0 => Expr::sin_of(&q, states).expect("sin"),
            1 => Expr::cos_of(&q.sub(&p), states).expect("cos"),
            2 => Expr::exp_of(&p, states).expect("exp"),
            _ => Expr::int(1),
        };
        let time = match r.below(5) {
            0 => Expr::cos_of(&t, states).expect("cos"),
            1 => Expr::sin_of(&t.scale(&Q::int(2)), states).expect("sin"),
            2 => Expr::cos_of(&t.scale(&Q::ratio(1, 2).expect("half")), states).expect("cos"),
            3 => t,
            _ => Expr::int(1),
        };
        e.mul(&state).expect("mul").mul(&time).expect("mul")
    }

    /// The forward expansion (Picard iteration with Taylor expansion of the
    /// field) and the backward recursion in the initial time are different
    /// computations of the same series: they agree term by term on random
    /// fields with polynomial, trigonometric and exponential state factors,
    /// powers of `t` and several frequencies, for the coordinates, a
    /// nonlinear output and one that depends on time.
    #[test]
    fn forward_flow_agrees_with_backward_recursion() {
        let states = [Sym::new("q"), Sym::new("p")];
        let (q, p) = (Expr::sym(states[0]), Expr::sym(states[1]));
        let h = q
            .mul(&p)
            .expect("mul")
            .add(&Expr::cos_of(&p, &states).expect("cos"));
        // An output that depends on time: `h(t, x(t))`.
        let t = Expr::sym(Sym::T);
        let h_t = q
            .mul(&Expr::cos_of(&t, &states).expect("cos"))
            .expect("mul")
            .add(&Expr::sin_of(&p.sub(&t.scale(&Q::int(2))), &states).expect("sin"))
            .add(&t.mul(&p).expect("mul"));
        let mut r = Lcg(7);
        for case in 0..24 {
            let v = Field(
                (0..2)
                    .map(|_| {
                        (0..1 + r.below(3)).fold(Expr::zero(), |acc, _| {
                            acc.add(&random_term(&mut r, &states))
                        })
                    })
                    .collect(),
            );
            let n = if case % 4 == 0 { 4 } else { 3 };
            let outputs = [q.clone(), p.clone(), h.clone(), h_t.clone()];
            let forward = taylor::forward_flow(&v, &outputs, n, &states)
                .expect("forward")
                .expect("few multi-indices");
            for (out, terms) in outputs.iter().zip(&forward) {
                let backward = backward_flow_output(&v, out, n, &states).expect("backward");
                assert_eq!(terms, &backward, "case {case}: V = {v:?}, output {out}");
            }
        }
    }

    /// A field with `exp` of all six coordinates needs every multi-index:
    /// past the cap the backward recursion takes over, and its terms agree
    /// with the forward expansion's at the orders both compute.
    #[test]
    fn many_multi_indices_fall_back_to_the_backward_recursion() {
        let states: Vec<Sym> = ["a", "b", "c", "d", "e", "f"]
            .iter()
            .map(|s| Sym::new(s))
            .collect();
        let x: Vec<Expr> = states.iter().map(|s| Expr::sym(*s)).collect();
        let sum = x.iter().fold(Expr::zero(), |acc, e| acc.add(e));
        let mut comps = vec![
            Expr::exp_of(&sum, &states).expect("exp"),
            Expr::cos_of(&x[0].sub(&x[1]), &states).expect("cos"),
        ];
        comps.extend(x[1..5].iter().cloned());
        let v = Field(comps);
        assert!(taylor::forward_flow(&v, &x, 8, &states)
            .expect("forward")
            .is_none());
        let both = flow_outputs(&v, &x, 8, &states).expect("flow");
        let forward = taylor::forward_flow(&v, &x, 7, &states)
            .expect("forward")
            .expect("923 multi-indices");
        for (b, f) in both.iter().zip(&forward) {
            assert_eq!(b.len(), 8);
            assert_eq!(&b[..7], &f[..]);
            assert!(!b[6].is_zero());
        }
    }
}
