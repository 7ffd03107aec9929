//! LaTeX rendering for papers: fields and matrices as `pmatrix`, averaged
//! results as an `aligned` block (`\dot{q} &= \varepsilon\,(…) + …`, one
//! row per coordinate, terms grouped by powers of the small parameter);
//! within a product the number, then parameters, then `t` and states, then
//! `e^{…}`, `\sin`, `\cos`; Greek letters for the usual full and short names
//! (`alp` → `\alpha`, `Om` → `\Omega`), trailing digits and `_x` as
//! subscripts, `q_dot` → `\dot{q}`.
//!
//! Rendering needs only core types and the list of state coordinates (to
//! order factors); the names on the left of an aligned block are handed
//! in by the caller (the language decides them, in one place).

use crate::core::expr::{Key, LinearForm, TimeFactor, TrigFactor};
use crate::core::{Expr, Field, Matrix, Sym, Q};

/// Names that render as Greek letters: full names and the usual short ones.
const GREEK: &[(&str, &str)] = &[
    ("alpha", "\\alpha"),
    ("alph", "\\alpha"),
    ("alp", "\\alpha"),
    ("beta", "\\beta"),
    ("bet", "\\beta"),
    ("gamma", "\\gamma"),
    ("gam", "\\gamma"),
    ("delta", "\\delta"),
    ("del", "\\delta"),
    ("epsilon", "\\varepsilon"),
    ("eps", "\\varepsilon"),
    ("zeta", "\\zeta"),
    ("eta", "\\eta"),
    ("theta", "\\theta"),
    ("th", "\\theta"),
    ("iota", "\\iota"),
    ("kappa", "\\kappa"),
    ("kap", "\\kappa"),
    ("lambda", "\\lambda"),
    ("lam", "\\lambda"),
    ("mu", "\\mu"),
    ("nu", "\\nu"),
    ("xi", "\\xi"),
    ("rho", "\\rho"),
    ("sigma", "\\sigma"),
    ("sig", "\\sigma"),
    ("tau", "\\tau"),
    ("upsilon", "\\upsilon"),
    ("phi", "\\phi"),
    ("chi", "\\chi"),
    ("psi", "\\psi"),
    ("omega", "\\omega"),
    ("om", "\\omega"),
    ("Gamma", "\\Gamma"),
    ("Gam", "\\Gamma"),
    ("Delta", "\\Delta"),
    ("Del", "\\Delta"),
    ("Theta", "\\Theta"),
    ("Th", "\\Theta"),
    ("Lambda", "\\Lambda"),
    ("Lam", "\\Lambda"),
    ("Xi", "\\Xi"),
    ("Sigma", "\\Sigma"),
    ("Sig", "\\Sigma"),
    ("Phi", "\\Phi"),
    ("Psi", "\\Psi"),
    ("Omega", "\\Omega"),
    ("Om", "\\Omega"),
    ("pi", "\\pi"),
];

/// Suffixes that put an accent on the name before them.
const ACCENTS: &[(&str, &str)] = &[
    ("_ddot", "\\ddot"),
    ("_dot", "\\dot"),
    ("_hat", "\\hat"),
    ("_bar", "\\bar"),
];

/// A name in LaTeX: Greek letters, trailing digits and `_x` as subscripts,
/// `q_dot` → `\dot{q}`, other multi-letter names upright.
pub(crate) fn name(n: &str) -> String {
    if !n.is_empty() && n.bytes().all(|b| b.is_ascii_digit()) {
        return n.to_string();
    }
    // A symbolic-frequency phase `w*t` (DESIGN §2.7c).
    if let Some(w) = n.strip_suffix("*t").filter(|w| !w.is_empty()) {
        return format!("{} t", name(w));
    }
    if let Some(rest) = n.strip_prefix("iint(") {
        let inner = rest.trim_end_matches(')');
        let args: Vec<String> = inner.split(", ").map(name).collect();
        return format!("\\mathcal{{I}}\\left({}\\right)", args.join(", "));
    }
    for (suffix, accent) in ACCENTS {
        if let Some(base) = n.strip_suffix(suffix).filter(|b| !b.is_empty()) {
            // `x1_dot` → `\dot{x}_{1}`: the accent sits on the letter.
            let (letter, sub) = split_subscript(base);
            let inner = format!("{accent}{{{}}}", base_name(letter));
            return match sub {
                Some(s) => format!("{inner}_{{{}}}", name(s)),
                None => inner,
            };
        }
    }
    let (base, sub) = split_subscript(n);
    let base_tex = base_name(base);
    match sub {
        Some(s) => format!("{base_tex}_{{{}}}", name(s)),
        None => base_tex,
    }
}

/// `omega_0` → (`omega`, `0`), `a12` → (`a`, `12`), `gain` → (`gain`, none).
fn split_subscript(n: &str) -> (&str, Option<&str>) {
    if let Some(i) = n.find('_').filter(|i| *i > 0 && *i + 1 < n.len()) {
        return (&n[..i], Some(&n[i + 1..]));
    }
    let cut = n.len() - n.chars().rev().take_while(char::is_ascii_digit).count();
    if cut > 0 && cut < n.len() {
        (&n[..cut], Some(&n[cut..]))
    } else {
        (n, None)
    }
}

fn base_name(base: &str) -> String {
    match GREEK.iter().find(|(k, _)| *k == base) {
        Some((_, g)) => g.to_string(),
        None if base.chars().count() == 1 => base.to_string(),
        None => format!("\\mathrm{{{base}}}"),
    }
}

/// A symbol in LaTeX: a name (see [`name`]) or an application of an
/// unspecified function: `V(q)`, `V'(q)`, `V^{(4)}(q)`, `J_{a}(x, y)`,
/// `J_{ab}(x, y)`.
fn sym_tex(s: Sym) -> String {
    let Some(a) = crate::core::func::atom(s) else {
        return name(&s.name());
    };
    let f = name(&a.sig.name);
    let args: Vec<String> = a.args.iter().map(arg_tex).collect();
    let args = args.join(", ");
    let k = a.order();
    if a.sig.params.len() == 1 {
        match k {
            0 => format!("{f}({args})"),
            1..=3 => format!("{f}{}({args})", "'".repeat(k as usize)),
            _ => format!("{f}^{{({k})}}({args})"),
        }
    } else if k == 0 {
        format!("{f}({args})")
    } else {
        let sub: Vec<String> = a.deriv_names().into_iter().map(name).collect();
        format!("{f}_{{{}}}({args})", sub.concat())
    }
}

/// An argument of an unspecified function in LaTeX.
fn arg_tex(a: &crate::core::func::Arg) -> String {
    use crate::core::func::push_signed;
    let mut s = lin(&a.lin, None);
    push_signed(&mut s, &a.constant, |abs| {
        if abs.is_one() {
            "1".to_string()
        } else {
            coeff_prefix(abs)
        }
    });
    push_signed(&mut s, &a.pi, |abs| format!("{}\\pi", coeff_prefix(abs)));
    if s.is_empty() {
        s.push('0');
    }
    s
}

fn power(base: &str, e: i64) -> String {
    if e == 1 {
        base.to_string()
    } else {
        format!("{base}^{{{e}}}")
    }
}

fn lin(l: &LinearForm, extra: Option<&Q>) -> String {
    let mut s = String::new();
    let mut first = true;
    let mut push = |c: &Q, v: String| {
        let neg = c.is_negative();
        let a = c.abs();
        if first {
            if neg {
                s.push('-');
            }
        } else {
            s.push_str(if neg { " - " } else { " + " });
        }
        first = false;
        s.push_str(&coeff_prefix(&a));
        s.push_str(&v);
    };
    for (sym, c) in l.terms() {
        push(c, name(&sym.name()));
    }
    if let Some(k) = extra {
        push(k, "t".to_string());
    }
    s
}

fn coeff_prefix(a: &Q) -> String {
    if a.is_one() {
        String::new()
    } else if a.is_integer() {
        format!("{a}")
    } else {
        format!("\\frac{{{}}}{{{}}}", a.numer(), a.denom())
    }
}

fn trig(func: &str, arg: String, simple: bool) -> String {
    if simple {
        format!("\\{func} {arg}")
    } else {
        format!("\\{func}\\left({arg}\\right)")
    }
}

fn is_simple_lin(l: &LinearForm) -> bool {
    matches!(l.terms(), [(_, c)] if c.is_integer() && !c.is_negative())
}

/// One term as (negative, body): the number, then parameters (`lead`
/// first when given, `\pi` before the others; negative powers of
/// parameters under a fraction bar with the number's denominator), then `t`
/// and the states, then `e^{…}`, the state and time trigonometric factors.
fn term(k: &Key, c: &Q, states: &[Sym], lead: Option<Sym>) -> (bool, String) {
    let mut up: Vec<(u8, String)> = Vec::new();
    let mut down: Vec<String> = Vec::new();
    let mut vars: Vec<(usize, String)> = Vec::new();
    let mut funcs: Vec<String> = Vec::new();
    for (s, e) in k.mono.powers() {
        let n = sym_tex(*s);
        if crate::core::func::atom(*s).is_some() && *e > 0 {
            funcs.push(power(&n, *e as i64));
            continue;
        }
        if let Some(i) = states.iter().position(|x| x == s) {
            vars.push((i + 1, power(&n, *e as i64)));
            continue;
        }
        if *s == Sym::T {
            vars.push((0, power(&n, *e as i64)));
            continue;
        }
        let rank = if Some(*s) == lead {
            0
        } else if *s == Sym::PI {
            1
        } else {
            2
        };
        if *e > 0 {
            up.push((rank, power(&n, *e as i64)));
        } else {
            down.push(power(&n, -(*e as i64)));
        }
    }
    up.sort_by_key(|(r, _)| *r);
    vars.sort_by_key(|(r, _)| *r);
    let up: Vec<String> = up.into_iter().map(|(_, s)| s).collect();
    let mut parts: Vec<String> = Vec::new();
    let a = c.abs();
    let (numer, denom) = (a.numer().to_string(), a.denom().to_string());
    if !down.is_empty() {
        let mut top = up.join(" ");
        if numer != "1" || top.is_empty() {
            top = if top.is_empty() {
                numer
            } else {
                format!("{numer} {top}")
            };
        }
        if denom != "1" {
            down.insert(0, denom);
        }
        parts.push(format!("\\frac{{{top}}}{{{}}}", down.join(" ")));
    } else {
        if denom != "1" {
            parts.push(format!("\\frac{{{numer}}}{{{denom}}}"));
        } else if numer != "1" {
            parts.push(numer);
        }
        parts.extend(up);
    }
    parts.extend(vars.into_iter().map(|(_, s)| s));
    parts.extend(funcs);
    if !k.exp.is_zero() {
        parts.push(format!("e^{{{}}}", lin(&k.exp, None)));
    }
    match &k.wave {
        TrigFactor::One => {}
        TrigFactor::Cos(l) => parts.push(trig("cos", lin(l, None), is_simple_lin(l))),
        TrigFactor::Sin(l) => parts.push(trig("sin", lin(l, None), is_simple_lin(l))),
    }
    match &k.beat {
        TimeFactor::One => {}
        TimeFactor::Cos(w) => parts.push(trig(
            "cos",
            lin(&LinearForm::default(), Some(w)),
            w.is_integer(),
        )),
        TimeFactor::Sin(w) => parts.push(trig(
            "sin",
            lin(&LinearForm::default(), Some(w)),
            w.is_integer(),
        )),
    }
    if parts.is_empty() {
        parts.push("1".to_string());
    }
    (c.is_negative(), parts.join(" "))
}

/// Joins signed pieces: `a - b + c`, a leading minus when the first is negative.
fn join_signed(pieces: impl IntoIterator<Item = (bool, String)>) -> String {
    let mut s = String::new();
    for (i, (neg, body)) in pieces.into_iter().enumerate() {
        if i == 0 {
            if neg {
                s.push('-');
            }
        } else {
            s.push_str(if neg { " - " } else { " + " });
        }
        s.push_str(&body);
    }
    s
}

fn expr_lead(e: &Expr, states: &[Sym], lead: Option<Sym>) -> String {
    if e.is_zero() {
        return "0".to_string();
    }
    join_signed(e.terms().iter().map(|(k, c)| term(k, c, states, lead)))
}

/// A scalar expression in LaTeX over the state coordinates `states`.
pub(crate) fn expr(e: &Expr, states: &[Sym]) -> String {
    expr_lead(e, states, None)
}

/// The pieces of `e` grouped by powers of `eps`, lowest order first
/// (`eps^0`, then `eps`, `eps^2`, …, then `eps^-1`, `eps^-2`, …): a group
/// of one term is that term (`\varepsilon` leading its parameters), a
/// larger one `\varepsilon^{k}\left(…\right)`.
fn grouped(e: &Expr, eps: Sym, states: &[Sym]) -> Vec<(bool, String)> {
    let Some((lo, hi)) = e.power_range(eps) else {
        return vec![(false, "0".to_string())];
    };
    let mut powers: Vec<i32> = (lo..=hi).collect();
    powers.sort_by_key(|k| (k.abs(), *k < 0));
    let eps_tex = name(&eps.name());
    let mut out = Vec::new();
    for k in powers {
        let inner = e.coeff_of_power(eps, k);
        if inner.is_zero() {
            continue;
        }
        if k == 0 {
            out.extend(
                inner
                    .terms()
                    .iter()
                    .map(|(key, c)| term(key, c, states, None)),
            );
        } else if inner.len() == 1 {
            out.extend(
                e.terms()
                    .iter()
                    .filter(|(key, _)| key.mono.power_of(eps) == k)
                    .map(|(key, c)| term(key, c, states, Some(eps))),
            );
        } else {
            let scale = if k > 0 {
                power(&eps_tex, i64::from(k))
            } else {
                format!("\\frac{{1}}{{{}}}", power(&eps_tex, -i64::from(k)))
            };
            let body = expr(&inner, states);
            out.push((false, format!("{scale}\\left({body}\\right)")));
        }
    }
    out
}

/// Rows longer than this (in TeX source) put each further order of the
/// small parameter on a continuation row.
const WIDE: usize = 90;

/// An `aligned` block: `\dot{x}_i &= …` for each component of `f`, terms
/// grouped by powers of `eps`, the coordinates named by `coords`.
pub(crate) fn aligned(f: &Field, eps: Sym, states: &[Sym], coords: &[String]) -> String {
    let mut rows = Vec::new();
    for (i, comp) in f.0.iter().enumerate() {
        let lhs = coords
            .get(i)
            .map_or_else(|| format!("x_{{{}}}", i + 1), |c| name(c));
        let lhs = dot(&lhs);
        let pieces = grouped(comp, eps, states);
        let one_line = join_signed(pieces.clone());
        if one_line.len() <= WIDE || pieces.len() == 1 {
            rows.push(format!("{lhs} &= {one_line}"));
            continue;
        }
        for (j, piece) in pieces.into_iter().enumerate() {
            if j == 0 {
                rows.push(format!("{lhs} &= {}", join_signed([piece])));
            } else {
                let sign = if piece.0 { "-" } else { "+" };
                rows.push(format!("&\\quad {sign} {}", piece.1));
            }
        }
    }
    format!(
        "\\begin{{aligned}}\n{}\n\\end{{aligned}}",
        rows.join(" \\\\\n")
    )
}

/// `\dot{…}` of a rendered name; a subscript stays outside the accent
/// (`x_{1}` → `\dot{x}_{1}`).
fn dot(tex: &str) -> String {
    match tex.find("_{") {
        Some(i) if !tex.starts_with("\\mathcal") => {
            format!("\\dot{{{}}}{}", &tex[..i], &tex[i..])
        }
        _ => format!("\\dot{{{tex}}}"),
    }
}

/// A field as a column `pmatrix`.
pub(crate) fn field(f: &Field, states: &[Sym]) -> String {
    let rows: Vec<String> = f.0.iter().map(|e| expr(e, states)).collect();
    format!(
        "\\begin{{pmatrix}} {} \\end{{pmatrix}}",
        rows.join(" \\\\ ")
    )
}

/// A matrix as a `pmatrix`.
pub(crate) fn matrix(m: &Matrix, states: &[Sym]) -> String {
    let rows: Vec<String> = (0..m.rows)
        .map(|i| {
            m.row(i)
                .iter()
                .map(|e| expr(e, states))
                .collect::<Vec<_>>()
                .join(" & ")
        })
        .collect();
    format!(
        "\\begin{{pmatrix}} {} \\end{{pmatrix}}",
        rows.join(" \\\\ ")
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_become_greek_and_subscripts() {
        assert_eq!(name("eps"), "\\varepsilon");
        assert_eq!(name("th"), "\\theta");
        assert_eq!(name("x1"), "x_{1}");
        assert_eq!(name("omega_0"), "\\omega_{0}");
        assert_eq!(name("gain"), "\\mathrm{gain}");
        assert_eq!(name("alp"), "\\alpha");
        assert_eq!(name("kap"), "\\kappa");
        assert_eq!(name("Om"), "\\Omega");
        assert_eq!(name("om"), "\\omega");
        assert_eq!(name("a12"), "a_{12}");
        assert_eq!(name("alp12"), "\\alpha_{12}");
        assert_eq!(name("q_dot"), "\\dot{q}");
        assert_eq!(name("th_dot"), "\\dot{\\theta}");
        assert_eq!(name("x1_dot"), "\\dot{x}_{1}");
        assert_eq!(name("k_th"), "k_{\\theta}");
    }

    #[test]
    fn products_put_numbers_then_parameters_then_states_then_functions() {
        let x = Sym::new("lx_state");
        let c = Sym::new("c");
        let eps = Sym::new("eps");
        let states = [x];
        // x * eps * c * cos(x) / 2, built in any order
        let e = Expr::sym(x)
            .mul(&Expr::sym(eps))
            .unwrap()
            .mul(&Expr::sym(c))
            .unwrap()
            .mul(&Expr::cos_of(&Expr::sym(x), &states).unwrap())
            .unwrap()
            .scale(&Q::ratio(1, 2).unwrap());
        let tex = expr(&e, &states);
        let (n, pc, pe, st, f) = (
            tex.find("\\frac{1}{2}").unwrap(),
            tex.find(" c ").unwrap(),
            tex.find("\\varepsilon").unwrap(),
            tex.find("\\mathrm{lx}").unwrap(),
            tex.find("\\cos").unwrap(),
        );
        assert!(n < pc.min(pe) && pc.max(pe) < st && st < f, "{tex}");
    }
}
