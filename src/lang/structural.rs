//! The structural (free Lie) route: Chen series of iterated integrals of
//! the time coefficients of a field written `Σ c_i(t) X_i` over named
//! fields, its logarithm in the Lyndon basis, and the display of Lie
//! polynomials in the names (DESIGN §2.7); the Chen–Fliess series with
//! unspecified inputs; and `bch`.

use std::cell::RefCell;
use std::collections::HashMap;
use std::num::NonZeroU64;

use super::ast::{Arg, ExprKind, Ident, Span};
use super::session::{Session, SessionError};
use super::value::{BracketTerm, FieldCombination, FieldValue, Value};
use crate::core::calc::Period;
use crate::core::{CoreError, CoreResult, Expr, Field, Sym, Q};
use crate::render::latex;
use crate::series::chrono;
use crate::series::freelie::{self, Alphabet, Coeff, FreeLieError, LiePoly, Tensor};
use crate::series::{freelie as freelie_lyndon, lie_fields};

thread_local! {
    static COEFF_ERROR: RefCell<Option<CoreError>> = const { RefCell::new(None) };
}

fn note_error(e: CoreError) {
    COEFF_ERROR.with(|c| {
        let mut c = c.borrow_mut();
        if c.is_none() {
            *c = Some(e);
        }
    });
}

fn take_error() -> Option<CoreError> {
    COEFF_ERROR.with(|c| c.borrow_mut().take())
}

/// Exact expressions as free-Lie coefficients. A product that trips a
/// limit is recorded and surfaces as an error after the computation.
impl Coeff for Expr {
    fn zero() -> Self {
        Expr::zero()
    }
    fn one() -> Self {
        Expr::int(1)
    }
    fn is_zero(&self) -> bool {
        Expr::is_zero(self)
    }
    fn add(&self, o: &Self) -> Self {
        Expr::add(self, o)
    }
    fn sub(&self, o: &Self) -> Self {
        Expr::sub(self, o)
    }
    fn mul(&self, o: &Self) -> Self {
        Expr::mul(self, o).unwrap_or_else(|e| {
            note_error(e);
            Expr::zero()
        })
    }
    fn neg(&self) -> Self {
        Expr::neg(self)
    }
    fn scale(&self, num: i64, den: NonZeroU64) -> Self {
        let q = Q::ratio(num, den.get() as i64).unwrap_or(Q::ZERO);
        Expr::scale(self, &q)
    }
    /// Stops at the term budget, on an interrupt, and as soon as a
    /// coefficient product has failed (no point going on with zeros).
    fn keep_going(n_terms: usize) -> bool {
        match crate::core::limits::check_terms(n_terms) {
            Ok(()) => COEFF_ERROR.with(|c| c.borrow().is_none()),
            Err(e) => {
                note_error(e);
                false
            }
        }
    }
}

fn lie_err(e: FreeLieError) -> CoreError {
    CoreError::Refused {
        reason: format!("free Lie algebra: {e}"),
    }
}

fn checked<T>(r: Result<T, FreeLieError>) -> CoreResult<T> {
    // The noted error first (and always taken, so none is left behind for
    // a later computation): it is why the computation stopped.
    match (take_error(), r) {
        (Some(e), _) => Err(e),
        (None, Err(e)) => Err(lie_err(e)),
        (None, Ok(v)) => Ok(v),
    }
}

/// The plain and LaTeX text of the standard bracketing of a Lyndon word,
/// remembered by word: the factors of a standard factorisation are Lyndon
/// words, so a series shares them (`None` for a word that is not Lyndon).
fn bracket_text(
    w: &[u16],
    names: &[String],
    tex: &[String],
    memo: &mut HashMap<Vec<u16>, (String, String)>,
) -> Option<(String, String)> {
    if let Some(found) = memo.get(w) {
        return Some(found.clone());
    }
    let text = if let [l] = w {
        let name = names.get(*l as usize).cloned().unwrap_or_default();
        (name, tex.get(*l as usize).cloned().unwrap_or_default())
    } else {
        let (left, right) = freelie::standard_factorization(w)?;
        let (lp, lt) = bracket_text(&left, names, tex, memo)?;
        let (rp, rt) = bracket_text(&right, names, tex, memo)?;
        (
            format!("[{lp}, {rp}]"),
            format!("\\left[{lt}, {rt}\\right]"),
        )
    };
    memo.insert(w.to_vec(), text.clone());
    Some(text)
}

/// Turns a Lie polynomial into display terms.
fn to_terms(poly: &LiePoly<Expr>, names: &[String]) -> Vec<BracketTerm> {
    let tex: Vec<String> = names.iter().map(|n| latex::name(n)).collect();
    to_terms_named(poly, names, &tex)
}

/// As `to_terms`, with the LaTeX of each letter given.
fn to_terms_named(poly: &LiePoly<Expr>, names: &[String], tex: &[String]) -> Vec<BracketTerm> {
    let mut memo = HashMap::new();
    poly.terms()
        .iter()
        .filter_map(|(w, c)| {
            let (bracket, latex) = bracket_text(w, names, tex, &mut memo)?;
            Some(BracketTerm {
                coeff: c.clone(),
                bracket,
                latex,
            })
        })
        .collect()
}

/// The plain display of a Lie polynomial, e.g. `eps^2*(1/2)*[X1, X2]`.
pub fn show_terms(terms: &[BracketTerm]) -> String {
    if terms.is_empty() {
        return "0".to_string();
    }
    let mut s = String::new();
    for (i, t) in terms.iter().enumerate() {
        let c = t.coeff.to_string();
        let simple = t.coeff.len() == 1;
        let (neg, body) = if simple && c.starts_with('-') {
            (true, c[1..].to_string())
        } else {
            (false, c)
        };
        if i > 0 {
            s.push_str(if neg { " - " } else { " + " });
        } else if neg {
            s.push('-');
        }
        if body == "1" {
            s.push_str(&t.bracket);
        } else if simple {
            s.push_str(&format!("{body}*{}", t.bracket));
        } else {
            s.push_str(&format!("({body})*{}", t.bracket));
        }
    }
    s
}

/// Weight of a letter: the lowest power of `eps` in its coefficient (≥ 1),
/// or 1 without a grading parameter.
fn letter_weight(c: &Expr, eps: Option<Sym>) -> CoreResult<u32> {
    let Some(eps) = eps else { return Ok(1) };
    match c.power_range(eps) {
        Some((lo, _)) if lo >= 1 => Ok(lo as u32),
        _ => Err(CoreError::Refused {
            reason: format!(
                "the coefficient `{c}` has no positive power of {}",
                eps.name()
            ),
        }),
    }
}

/// The number of nonempty words of weight at most `max_w` over letters of
/// the given weights (saturating).
fn count_words(weights: &[u32], max_w: u32) -> usize {
    let max_w = max_w as usize;
    let mut by_weight = vec![0usize; max_w + 1];
    by_weight[0] = 1;
    for w in 1..=max_w {
        by_weight[w] = weights
            .iter()
            .filter_map(|&a| w.checked_sub(a as usize).map(|rest| by_weight[rest]))
            .fold(0usize, usize::saturating_add);
    }
    by_weight[1..]
        .iter()
        .fold(0usize, |acc, &c| acc.saturating_add(c))
}

/// Drops powers of eps above `n`.
fn truncate_eps(e: &Expr, eps: Option<Sym>, n: usize) -> Expr {
    match eps {
        None => e.clone(),
        Some(s) => e.filter(|k, _| k.mono.power_of(s) <= n as i32),
    }
}

/// The logarithm of the Chen series of `Σ c_i(t) X_i` over `[0, T]` in the
/// Lyndon basis of the names, divided by `T` when `eps` (averaging) is given.
pub fn magnus_structure(
    combo: &FieldCombination,
    n: usize,
    horizon: &Expr,
    period: Option<&Period>,
    eps: Option<Sym>,
    states: &[Sym],
) -> CoreResult<Option<Vec<BracketTerm>>> {
    let names: Vec<String> = combo.parts.iter().map(|(n, _, _)| n.clone()).collect();
    Ok(magnus_poly(combo, n, horizon, period, eps, states)?.map(|log| to_terms(&log, &names)))
}

/// The Lie polynomial of `magnus_structure`.
fn magnus_poly(
    combo: &FieldCombination,
    n: usize,
    horizon: &Expr,
    period: Option<&Period>,
    eps: Option<Sym>,
    states: &[Sym],
) -> CoreResult<Option<LiePoly<Expr>>> {
    if combo.parts.is_empty() || combo.parts.len() > 16 {
        return Ok(None);
    }
    // The letters' coefficients must not depend on the state.
    for (_, _, c) in &combo.parts {
        if c.symbols().iter().any(|s| states.contains(s)) {
            return Ok(None);
        }
    }
    let weights: Vec<u32> = combo
        .parts
        .iter()
        .map(|(_, _, c)| letter_weight(c, eps))
        .collect::<CoreResult<_>>()?;
    let alphabet = Alphabet::new(weights.clone()).map_err(lie_err)?;
    let max_w = n as u32;
    // The Chen series has a term for (nearly) every word of weight at most
    // n, and their number grows exponentially: refuse before building them.
    crate::core::limits::check_terms(count_words(&weights, max_w))?;
    // Iterated integrals by prefix: I(w a)(t) = ∫_0^t I(w)(s) c_a(s) ds,
    // the first letter at the earliest time.
    let mut terms: Vec<(Vec<u16>, Expr)> = vec![(Vec::new(), Expr::int(1))];
    let mut frontier: Vec<(Vec<u16>, Expr, u32)> = vec![(Vec::new(), Expr::int(1), 0)];
    while let Some((word, integral, w)) = frontier.pop() {
        crate::core::limits::poll()?;
        for (a, (_, _, c)) in combo.parts.iter().enumerate() {
            let wa = w + weights[a];
            if wa > max_w {
                continue;
            }
            let integrand = truncate_eps(&integral.mul(c)?, eps, n);
            let next = integrand.integral_from_zero()?;
            if next.is_zero() {
                continue;
            }
            let mut nw = word.clone();
            nw.push(a as u16);
            let at_end = match period {
                Some(p) => next.at_time_pi_multiple(&p.0)?,
                None => chrono::at_time(&next, horizon, states)?,
            };
            terms.push((nw.clone(), at_end));
            crate::core::limits::check_terms(terms.len())?;
            frontier.push((nw, next, wa));
        }
    }
    let chen = Tensor::from_terms(terms);
    // Drop any error noted by an earlier computation that did not finish.
    let _ = take_error();
    let log = checked(freelie::chronological_log(&chen, &alphabet, max_w))?;
    let log = log.map_coeffs(|c| truncate_eps(&c, eps, n));
    let log = if eps.is_some() {
        let t = horizon.recip()?;
        let mut err = None;
        let out = log.map_coeffs(|c| {
            c.mul(&t).unwrap_or_else(|e| {
                err = Some(e);
                Expr::zero()
            })
        });
        if let Some(e) = err {
            return Err(e);
        }
        out
    } else {
        log
    };
    Ok(Some(log))
}

/// The classical averaged field in bracket form, orders 1 and 2
/// (G_1 = Σ mean(a_i) X_i, G_2 = Σ_{i<j} −mean(a_i A_j) [X_i, X_j] + Σ mean(b_i) X_i).
pub fn classic_structure(
    combo: &FieldCombination,
    n: usize,
    period: &Period,
    eps: Sym,
) -> CoreResult<Option<Vec<BracketTerm>>> {
    if n > 2 {
        return Ok(None);
    }
    for (_, _, c) in &combo.parts {
        if let Some((lo, _)) = c.power_range(eps) {
            if lo < 1 {
                return Ok(None);
            }
        }
    }
    let names: Vec<String> = combo.parts.iter().map(|(n, _, _)| n.clone()).collect();
    Ok(Some(to_terms(
        &classic_poly(combo, n, period, eps)?,
        &names,
    )))
}

/// The Lie polynomial of `classic_structure` (n ≤ 2, every coefficient
/// of order eps or higher).
fn classic_poly(
    combo: &FieldCombination,
    n: usize,
    period: &Period,
    eps: Sym,
) -> CoreResult<LiePoly<Expr>> {
    let a: Vec<Expr> = combo
        .parts
        .iter()
        .map(|(_, _, c)| c.coeff_of_power(eps, 1))
        .collect();
    let b: Vec<Expr> = combo
        .parts
        .iter()
        .map(|(_, _, c)| c.coeff_of_power(eps, 2))
        .collect();
    let e1 = Expr::sym(eps);
    let e2 = e1.pow(2)?;
    let mut poly: Vec<(Vec<u16>, Expr)> = Vec::new();
    for (i, ai) in a.iter().enumerate() {
        let mut c = ai.mean_over(period)?.mul(&e1)?;
        if n >= 2 {
            c = c.add(&b[i].mean_over(period)?.mul(&e2)?);
        }
        poly.push((vec![i as u16], c));
    }
    if n >= 2 {
        let big_a: Vec<Expr> = a
            .iter()
            .map(|ai| {
                let osc = ai.sub(&ai.mean_over(period)?);
                osc.zero_mean_antiderivative(period)
            })
            .collect::<CoreResult<_>>()?;
        for (i, ai) in a.iter().enumerate() {
            for (j, aj_int) in big_a.iter().enumerate().skip(i + 1) {
                let m = ai.mul(aj_int)?.mean_over(period)?;
                poly.push((vec![i as u16, j as u16], m.neg().mul(&e2)?));
            }
        }
    }
    let alphabet = Alphabet::uniform(combo.parts.len() as u16);
    LiePoly::from_terms(poly.into_iter().filter(|(_, c)| !c.is_zero()), &alphabet).map_err(lie_err)
}

/// Terms `k = 1..=n` of the Chen–Fliess series of `h` along
/// `V = X_0 + Σ_i u_i X_i` with unspecified inputs `u_i`.
pub fn chen_fliess_terms(
    v: &Field,
    h: &Expr,
    n: usize,
    inputs: &[Sym],
    states: &[Sym],
) -> CoreResult<Vec<Expr>> {
    crate::core::limits::check_order(n as u64)?;
    let mut letters: Vec<(String, Field)> = Vec::new();
    let mut drift = v.clone();
    for u in inputs {
        let mut xu = Vec::with_capacity(v.dim());
        for c in &v.0 {
            if let Some((lo, hi)) = c.power_range(*u) {
                if lo < 0 || hi > 1 {
                    return Err(CoreError::Refused {
                        reason: format!(
                            "the input `{}` must enter linearly (found a power {} in `{c}`)",
                            u.name(),
                            if hi > 1 { hi } else { lo }
                        ),
                    });
                }
            }
            xu.push(c.coeff_of_power(*u, 1));
        }
        let xu = Field(xu);
        for other in inputs {
            if xu.0.iter().any(|c| c.mentions(*other)) {
                return Err(CoreError::Refused {
                    reason: "products of inputs are not supported: V must be X_0 + Σ u_i X_i"
                        .to_string(),
                });
            }
        }
        drift = drift.sub(&xu.mul_expr(&Expr::sym(*u))?)?;
        letters.push((u.name(), xu));
    }
    if !drift.is_zero() {
        letters.insert(0, ("1".to_string(), drift));
    }
    for (_, f) in &letters {
        if f.0.iter().any(Expr::is_time_varying) {
            return Err(CoreError::Refused { reason: "with inputs, the fields X_i must be autonomous (time enters through the inputs)".to_string() });
        }
    }
    let mut out = vec![Expr::zero(); n];
    // Depth-first over words (first letter = latest time acts first on h).
    let mut stack: Vec<(Vec<usize>, Expr)> = vec![(Vec::new(), h.clone())];
    while let Some((word, d)) = stack.pop() {
        crate::core::limits::poll()?;
        if word.len() == n {
            continue;
        }
        for (i, (_, f)) in letters.iter().enumerate() {
            let next = f.lie_derivative(&d, states)?;
            if next.is_zero() {
                continue;
            }
            let mut w = word.clone();
            w.push(i);
            let names: Vec<String> = w.iter().map(|j| letters[*j].0.clone()).collect();
            let coeff = Expr::sym(Sym::new(&super::eval::iint_name(&names)));
            out[w.len() - 1] = out[w.len() - 1].add(&coeff.mul(&next)?);
            crate::core::limits::check_terms(out[w.len() - 1].len())?;
            stack.push((w, next));
        }
    }
    Ok(out)
}

impl Session {
    /// `bch(X, Y, N)`: log(e^X e^Y) to degree N, concrete and structural.
    pub(crate) fn eval_bch(
        &self,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> Result<Value, SessionError> {
        let pos: Vec<&super::ast::SyntaxExpr> = args
            .iter()
            .filter_map(|a| if let Arg::Pos(e) = a { Some(e) } else { None })
            .collect();
        if pos.len() != 3 || pos.len() != args.len() {
            let usage = super::builtins::find("bch").map_or("", |builtin| builtin.usage);
            return Err(SessionError::invalid(name.span, format!("usage: {usage}")));
        }
        let x = self.eval_field(pos[0], "the first argument of `bch`")?;
        let y = self.eval_field(pos[1], "the second argument of `bch`")?;
        let n = self.eval_count(pos[2], "the degree of `bch`")?;
        if n < 1 {
            return Err(SessionError::invalid(
                pos[2].span,
                "the degree of `bch` must be at least 1",
            ));
        }
        crate::core::limits::check_order(n as u64)
            .map_err(|e| SessionError::core(pos[2].span, e))?;
        let core = |e: CoreError| SessionError::core(span, e);
        let _ = take_error();
        let poly = bch_series(n as u32).map_err(core)?;
        let label = |e: &super::ast::SyntaxExpr, d: &str| match &e.kind {
            ExprKind::Name(n) => n.clone(),
            _ => d.to_string(),
        };
        let names = vec![label(pos[0], "X"), label(pos[1], "Y")];
        let fields = [x.field.clone(), y.field.clone()];
        let value = lie_fields::evaluate_on_fields(&poly, &fields, &self.states).map_err(core)?;
        Ok(Value::Field(FieldValue {
            field: value,
            combo: None,
            structure: Some(to_terms(&poly, &names)),
            averaged: None,
        }))
    }
}

/// `log(e^X e^Y)` to degree `n` in the Lyndon basis (letters 0, 1), with
/// the term budget asked before anything is built and the interrupt
/// polled as it goes.
pub fn bch_series(n: u32) -> CoreResult<LiePoly<Expr>> {
    let mut stopped = None;
    let terms = freelie_lyndon::bch(
        n,
        crate::core::field::parallelism(),
        &mut |count| match crate::core::limits::check_terms(count) {
            Ok(()) => true,
            Err(e) => {
                stopped = Some(e);
                false
            }
        },
        &crate::core::limits::is_interrupted,
    );
    let stopped = stopped.or_else(|| crate::core::limits::poll().err());
    match (stopped, terms) {
        (Some(e), _) => Err(e),
        (None, Err(e)) => Err(lie_err(e)),
        (None, Ok(terms)) => Ok(LiePoly::from_sorted_terms(
            terms
                .into_iter()
                .map(|(w, c)| (w, Expr::num(Q::from_big(c))))
                .collect(),
        )),
    }
}

/// The letters of a fast-oscillation system `Σ c_a(t, eps) X_a` after the
/// pull-back by `exp(Σ U_i G_i)`: the standard form as a combination of
/// ad-words `ad_G^α X_b = [G_i1, [G_i2, … X_b]]` (DESIGN §2.6, §2.7).
///
/// The oscillating letters `G_i` are those whose coefficient has an eps^0
/// part `u_i(t)`; they commute (the averaging refused otherwise), so the
/// result lives in the Lie algebra generated by the letters with
/// `[G_i, G_j] = 0`. By Lazard elimination that algebra is spanned by the
/// `G_i` and the free Lie algebra on the ad-words `ad_G^α X_b` with α a
/// multiset (the operators `ad_{G_i}` commute there). The pulled-back
/// field is `Σ_b r_b Σ_α U^α/α! ad_G^α X_b` (with `r_b` the eps ≥ 1 part of
/// `c_b`), a combination of ad-words with time coefficients: a standard form
/// over them, averaged by the same free-Lie route as any standard form.
/// Ad-words that vanish on the concrete fields are left out, as the
/// concrete ad-series ends there (or is truncated at `depth`).
fn pulled_back_combo(
    combo: &FieldCombination,
    eps: Sym,
    period: &Period,
    zero_mean: bool,
    depth: u64,
    states: &[Sym],
) -> CoreResult<Option<(FieldCombination, Vec<String>)>> {
    // u_a (eps^0 part) and r_a (the rest) of each letter.
    let mut osc: Vec<(usize, Expr)> = Vec::new();
    let mut slow: Vec<(usize, Expr)> = Vec::new();
    for (a, (_, _, c)) in combo.parts.iter().enumerate() {
        if let Some((lo, _)) = c.power_range(eps) {
            if lo < 0 {
                return Ok(None);
            }
        }
        let u = c.coeff_of_power(eps, 0);
        let r = c.sub(&u);
        if c.symbols().iter().any(|s| states.contains(s)) {
            return Ok(None);
        }
        if !u.is_zero() {
            let big_u = u.integral_from_zero()?;
            let big_u = if zero_mean {
                big_u.sub(&big_u.mean_over(period)?)
            } else {
                big_u
            };
            osc.push((a, big_u));
        }
        if !r.is_zero() {
            slow.push((a, r));
        }
    }
    if osc.is_empty() {
        return Ok(None);
    }
    let name = |a: usize| combo.parts[a].0.clone();
    let mut parts: Vec<(String, Field, Expr)> = Vec::new();
    let mut tex: Vec<String> = Vec::new();
    for (b, r) in &slow {
        // Multisets over the oscillating letters, grown one letter at a
        // time in nondecreasing order: (last index, word, field, U^α/α!).
        let xb = &combo.parts[*b].1;
        let mut layer: Vec<(usize, Vec<usize>, Field, Expr)> =
            vec![(0, Vec::new(), xb.clone(), Expr::int(1))];
        for k in 0..=depth {
            let mut next = Vec::new();
            for (last, word, field, coeff) in &layer {
                crate::core::limits::poll()?;
                if field.is_zero() {
                    continue;
                }
                let mut plain = name(*b);
                let mut tx = latex::name(&plain);
                for &i in word.iter().rev() {
                    let g = name(osc[i].0);
                    plain = format!("[{g}, {plain}]");
                    tx = format!("[{}, {tx}]", latex::name(&g));
                }
                parts.push((plain, field.clone(), r.mul(coeff)?));
                tex.push(tx);
                crate::core::limits::check_terms(parts.len())?;
                if k == depth {
                    continue;
                }
                for (i, (ga, ui)) in osc.iter().enumerate().skip(*last) {
                    // ad_{G_i} applied outside: [G_i, field]; the power of
                    // G_i in α grows by one, so 1/α! gains 1/(its new power).
                    let power = word.iter().filter(|&&j| j == i).count() as i64 + 1;
                    let f = combo.parts[*ga].1.bracket(field, states)?;
                    let c = coeff.mul(ui)?.scale(&Q::ratio(1, power).unwrap_or(Q::ZERO));
                    let mut w = word.clone();
                    w.push(i);
                    next.push((i, w, f, c));
                }
            }
            layer = next;
            if layer.is_empty() {
                break;
            }
        }
    }
    // Letters with equal names (a letter both slow and oscillating) stay
    // apart: the display names them the same, and evaluation agrees.
    Ok(Some((FieldCombination { parts }, tex)))
}

/// The bracket form of a fast-oscillation result written over named fields
/// (`eps*F0 + cos(t)*G1 + sin(t)*G2`): stroboscopic at every order,
/// classical to order 2 (DESIGN §2.7). `None` when the system is not of
/// that shape or has too many ad-words for the free-Lie route.
pub fn fast_oscillation_structure(
    combo: &FieldCombination,
    n: usize,
    period: &Period,
    eps: Sym,
    classic: bool,
    depth: u64,
    states: &[Sym],
) -> CoreResult<Option<Vec<BracketTerm>>> {
    if classic && n > 2 {
        return Ok(None);
    }
    let Some((pulled, tex)) = pulled_back_combo(combo, eps, period, classic, depth, states)? else {
        return Ok(None);
    };
    if pulled.parts.is_empty() || pulled.parts.len() > 16 {
        return Ok(None);
    }
    let poly = if classic {
        classic_poly(&pulled, n, period, eps)?
    } else {
        match magnus_poly(
            &pulled,
            n,
            &period.to_expr(),
            Some(period),
            Some(eps),
            states,
        )? {
            Some(p) => p,
            None => return Ok(None),
        }
    };
    let names: Vec<String> = pulled.parts.iter().map(|(n, _, _)| n.clone()).collect();
    Ok(Some(to_terms_named(&poly, &names, &tex)))
}
