//! LaTeX rendering: fields and matrices as `pmatrix`, rational
//! coefficients as `\frac`, negative powers in denominators, `\sin`,
//! `\cos`, `e^{…}`, and Greek letters for the usual names (`eps` → `\varepsilon`,
//! `th` → `\theta`, `omega` → `\omega`, …).

use crate::core::expr::{Beat, Key, Lin, Wave};
use crate::core::{Expr, Field, Matrix, Sym, Q};
use crate::lang::value::Value;

const GREEK: &[(&str, &str)] = &[
    ("alpha", "\\alpha"),
    ("alph", "\\alpha"),
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
    ("lambda", "\\lambda"),
    ("lam", "\\lambda"),
    ("mu", "\\mu"),
    ("nu", "\\nu"),
    ("xi", "\\xi"),
    ("rho", "\\rho"),
    ("sigma", "\\sigma"),
    ("sig", "\\sigma"),
    ("tau", "\\tau"),
    ("phi", "\\phi"),
    ("chi", "\\chi"),
    ("psi", "\\psi"),
    ("omega", "\\omega"),
    ("om", "\\omega"),
    ("Gamma", "\\Gamma"),
    ("Delta", "\\Delta"),
    ("Theta", "\\Theta"),
    ("Lambda", "\\Lambda"),
    ("Xi", "\\Xi"),
    ("Sigma", "\\Sigma"),
    ("Phi", "\\Phi"),
    ("Psi", "\\Psi"),
    ("Omega", "\\Omega"),
    ("pi", "\\pi"),
];

/// A name in LaTeX: Greek letters, trailing digits and `_x` as subscripts,
/// other multi-letter names upright.
pub fn name(n: &str) -> String {
    if let Some(rest) = n.strip_prefix("iint(") {
        let inner = rest.trim_end_matches(')');
        let args: Vec<String> = inner.split(", ").map(name).collect();
        return format!("\\mathcal{{I}}\\left({}\\right)", args.join(", "));
    }
    let (base, sub) = match n.find('_') {
        Some(i) if i > 0 => (&n[..i], Some(n[i + 1..].to_string())),
        _ => {
            let digits = n.trim_start_matches(|c: char| !c.is_ascii_digit());
            let cut = n.len() - n.chars().rev().take_while(char::is_ascii_digit).count();
            if cut > 0 && cut < n.len() && !digits.is_empty() {
                (&n[..cut], Some(n[cut..].to_string()))
            } else {
                (n, None)
            }
        }
    };
    let base_tex = match GREEK.iter().find(|(k, _)| *k == base) {
        Some((_, g)) => g.to_string(),
        None if base.chars().count() == 1 => base.to_string(),
        None => format!("\\mathrm{{{base}}}"),
    };
    match sub {
        Some(s) if !s.is_empty() => format!("{base_tex}_{{{}}}", name(&s)),
        _ => base_tex,
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
    let mut s = lin(&a.lin, None);
    let mut push = |c: &Q, what: &str| {
        if c.is_zero() {
            return;
        }
        let neg = c.is_negative();
        let abs = c.abs();
        if s.is_empty() {
            if neg {
                s.push('-');
            }
        } else {
            s.push_str(if neg { " - " } else { " + " });
        }
        if what.is_empty() && abs.is_one() {
            s.push('1');
        } else {
            s.push_str(&coeff_prefix(&abs));
            s.push_str(what);
        }
    };
    push(&a.constant, "");
    push(&a.pi, "\\pi");
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

fn lin(l: &Lin, extra: Option<&Q>) -> String {
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
    for (sym, c) in l.0.iter() {
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

fn is_simple_lin(l: &Lin) -> bool {
    l.0.len() == 1 && l.0[0].1.is_integer() && !l.0[0].1.is_negative()
}

fn term(k: &Key, c: &Q) -> (bool, String) {
    let mut num: Vec<String> = Vec::new();
    let mut den: Vec<String> = Vec::new();
    for (s, e) in &k.mono.0 {
        let n = if *s == Sym::PI {
            "\\pi".to_string()
        } else {
            sym_tex(*s)
        };
        if *e > 0 {
            num.push(power(&n, *e as i64));
        } else {
            den.push(power(&n, -(*e as i64)));
        }
    }
    if !k.exp.is_zero() {
        num.push(format!("e^{{{}}}", lin(&k.exp, None)));
    }
    match &k.wave {
        Wave::One => {}
        Wave::Cos(l) => num.push(trig("cos", lin(l, None), is_simple_lin(l))),
        Wave::Sin(l) => num.push(trig("sin", lin(l, None), is_simple_lin(l))),
    }
    match &k.beat {
        Beat::One => {}
        Beat::Cos(w) => num.push(trig("cos", lin(&Lin::default(), Some(w)), w.is_integer())),
        Beat::Sin(w) => num.push(trig("sin", lin(&Lin::default(), Some(w)), w.is_integer())),
    }
    let neg = c.is_negative();
    let a = c.abs();
    let numer = a.numer().to_string();
    let denom = a.denom().to_string();
    let mut top = num.join(" ");
    if numer != "1" || top.is_empty() {
        top = if top.is_empty() {
            numer
        } else {
            format!("{numer} {top}")
        };
    }
    if denom != "1" {
        den.insert(0, denom);
    }
    let body = if den.is_empty() {
        top
    } else {
        format!("\\frac{{{top}}}{{{}}}", den.join(" "))
    };
    (neg, body)
}

/// A scalar expression in LaTeX.
pub fn expr(e: &Expr) -> String {
    if e.is_zero() {
        return "0".to_string();
    }
    let mut s = String::new();
    for (i, (k, c)) in e.terms().iter().enumerate() {
        let (neg, body) = term(k, c);
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

/// A field as a column `pmatrix`.
pub fn field(f: &Field) -> String {
    let rows: Vec<String> = f.0.iter().map(expr).collect();
    format!(
        "\\begin{{pmatrix}} {} \\end{{pmatrix}}",
        rows.join(" \\\\ ")
    )
}

/// A matrix as a `pmatrix`.
pub fn matrix(m: &Matrix) -> String {
    let rows: Vec<String> = (0..m.rows)
        .map(|i| m.row(i).iter().map(expr).collect::<Vec<_>>().join(" & "))
        .collect();
    format!(
        "\\begin{{pmatrix}} {} \\end{{pmatrix}}",
        rows.join(" \\\\ ")
    )
}

/// Any value; a field with a bracket form also shows it.
pub fn value(v: &Value) -> String {
    match v {
        Value::Scalar(e) => expr(e),
        Value::Field(f) => field(&f.field),
        Value::Matrix(m) => matrix(m),
    }
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
    }
}
