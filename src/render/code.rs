//! Code for simulation: a self-contained function of `(t, state, params)`
//! that evaluates a scalar, a field or a matrix in floating point, in
//! Python (NumPy), Julia, C99 or Rust. Parameters are named arguments
//! (keyword-only in Python and Julia); the exact value is kept in a comment
//! beside the code, one line per entry.
//!
//! Works on core types only: the caller passes the value's shape, the state
//! coordinates and the parameters in the order the arguments should take.
//! Names that are keywords or helpers of the target language get a
//! trailing underscore (`lambda` → `lambda_` in Python).

use crate::core::expr::{Key, LinearForm, TimeFactor, TrigFactor};
use crate::core::{Expr, Field, Matrix, Sym, Q};

/// A target language.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Lang {
    /// Python 3 with NumPy.
    Python,
    /// Plain Julia.
    Julia,
    /// C99 with `<math.h>`.
    C,
    /// Rust.
    Rust,
}

impl Lang {
    /// The language for a `show … as WORD` word.
    pub(crate) fn from_word(w: &str) -> Option<Lang> {
        match w {
            "python" => Some(Lang::Python),
            "julia" => Some(Lang::Julia),
            "c" => Some(Lang::C),
            "rust" => Some(Lang::Rust),
            _ => None,
        }
    }

    /// The word users type.
    pub fn word(self) -> &'static str {
        match self {
            Lang::Python => "python",
            Lang::Julia => "julia",
            Lang::C => "c",
            Lang::Rust => "rust",
        }
    }

    fn comment(self) -> &'static str {
        match self {
            Lang::Python | Lang::Julia => "#",
            Lang::C | Lang::Rust => "//",
        }
    }

    /// Keywords and names the generated code itself uses.
    fn taken(self) -> &'static [&'static str] {
        match self {
            Lang::Python => &[
                "False", "None", "True", "and", "as", "assert", "async", "await", "break", "class",
                "continue", "def", "del", "elif", "else", "except", "finally", "for", "from",
                "global", "if", "import", "in", "is", "lambda", "nonlocal", "not", "or", "pass",
                "raise", "return", "try", "while", "with", "yield", "np", "state",
            ],
            Lang::Julia => &[
                "baremodule",
                "begin",
                "break",
                "catch",
                "const",
                "continue",
                "do",
                "else",
                "elseif",
                "end",
                "export",
                "false",
                "finally",
                "for",
                "function",
                "global",
                "if",
                "import",
                "let",
                "local",
                "macro",
                "module",
                "quote",
                "return",
                "struct",
                "true",
                "try",
                "using",
                "while",
                "state",
                "sin",
                "cos",
                "exp",
                "im",
                "e",
            ],
            Lang::C => &[
                "auto", "break", "case", "char", "const", "continue", "default", "do", "double",
                "else", "enum", "extern", "float", "for", "goto", "if", "inline", "int", "long",
                "register", "restrict", "return", "short", "signed", "sizeof", "static", "struct",
                "switch", "typedef", "union", "unsigned", "void", "volatile", "while", "state",
                "out", "sin", "cos", "exp", "pow",
            ],
            Lang::Rust => &[
                "as", "break", "const", "continue", "crate", "else", "enum", "extern", "false",
                "fn", "for", "if", "impl", "in", "let", "loop", "match", "mod", "move", "mut",
                "pub", "ref", "return", "self", "static", "struct", "super", "trait", "true",
                "type", "unsafe", "use", "where", "while", "async", "await", "dyn", "abstract",
                "become", "box", "do", "final", "macro", "override", "priv", "typeof", "unsized",
                "virtual", "yield", "try", "state",
            ],
        }
    }

    /// A symbol's name in the target language.
    pub fn ident(self, name: &str) -> String {
        if self.taken().contains(&name) {
            format!("{name}_")
        } else {
            name.to_string()
        }
    }
}

/// What is evaluated.
#[derive(Clone, Copy, Debug)]
pub(crate) enum Shape<'a> {
    /// A scalar: the function returns one number.
    Scalar(&'a Expr),
    /// A field: one number per state coordinate.
    Field(&'a Field),
    /// A matrix, row by row.
    Matrix(&'a Matrix),
}

impl Shape<'_> {
    fn entries(&self) -> Vec<&Expr> {
        match self {
            Shape::Scalar(e) => vec![*e],
            Shape::Field(f) => f.0.iter().collect(),
            Shape::Matrix(m) => m.data.iter().collect(),
        }
    }
}

/// The parameters a value needs (symbols other than the states, `t` and
/// `pi`), in the order of `order` (the session's declarations), then any
/// others in symbol order.
pub(crate) fn parameters(shape: &Shape, states: &[Sym], order: &[Sym]) -> Vec<Sym> {
    let mut found: Vec<Sym> = Vec::new();
    for e in shape.entries() {
        for s in e.symbols() {
            if s != Sym::T && s != Sym::PI && !states.contains(&s) && !found.contains(&s) {
                found.push(s);
            }
        }
    }
    let mut out: Vec<Sym> = order
        .iter()
        .copied()
        .filter(|s| found.contains(s))
        .collect();
    let mut rest: Vec<Sym> = found.into_iter().filter(|s| !out.contains(s)).collect();
    rest.sort();
    out.extend(rest);
    out
}

/// A double literal valid in all four languages (`3.0`, `0.25`, `1e-5`).
fn float_lit(x: f64) -> String {
    let s = format!("{x:?}");
    if s.contains(['.', 'e', 'n', 'i']) {
        s
    } else {
        format!("{s}.0")
    }
}

/// The coefficient as a double: `p/q` as one division of exact doubles
/// when both fit in 53 bits (correctly rounded), else the nearest double.
fn coeff_lit(c: &Q) -> String {
    const EXACT: i64 = 1 << 53;
    match (c.numer().try_into(), c.denom().try_into()) {
        (Ok(n), Ok(1i64)) if (-EXACT..=EXACT).contains(&n) => float_lit(n as f64),
        (Ok(n), Ok(d)) if (-EXACT..=EXACT).contains(&n) && d <= EXACT => {
            let n: i64 = n;
            let d: i64 = d;
            format!("({} / {})", float_lit(n as f64), float_lit(d as f64))
        }
        _ => float_lit(c.to_f64()),
    }
}

struct Writer<'a> {
    lang: Lang,
    states: &'a [Sym],
}

impl Writer<'_> {
    fn sym(&self, s: Sym) -> String {
        if s == Sym::T {
            return "t".to_string();
        }
        if s == Sym::PI {
            return match self.lang {
                Lang::Python => "np.pi".to_string(),
                Lang::Julia => "pi".to_string(),
                Lang::C => "3.14159265358979323846".to_string(),
                Lang::Rust => "std::f64::consts::PI".to_string(),
            };
        }
        self.lang.ident(&s.name())
    }

    fn power(&self, base: String, k: i32) -> String {
        if k == 1 {
            return base;
        }
        match self.lang {
            Lang::Python => format!("{base}**{}", paren_neg(k)),
            Lang::Julia => format!("{base}^{}", paren_neg(k)),
            Lang::C => format!("pow({base}, {k})"),
            Lang::Rust => format!("{base}.powi({k})"),
        }
    }

    fn call(&self, f: &str, arg: String) -> String {
        match self.lang {
            Lang::Python => format!("np.{f}({arg})"),
            Lang::Julia | Lang::C => format!("{f}({arg})"),
            Lang::Rust if is_name(&arg) => format!("{arg}.{f}()"),
            Lang::Rust => format!("({arg}).{f}()"),
        }
    }

    fn lin(&self, l: &LinearForm, time: Option<&Q>) -> String {
        let mut parts: Vec<(bool, String)> = Vec::new();
        for (s, c) in l.terms() {
            parts.push(scaled(c, self.sym(*s)));
        }
        if let Some(k) = time {
            parts.push(scaled(k, "t".to_string()));
        }
        join(parts)
    }

    fn term(&self, k: &Key, c: &Q) -> (bool, String) {
        let mut factors: Vec<String> = Vec::new();
        let a = c.abs();
        if !a.is_one() {
            factors.push(coeff_lit(&a));
        }
        for (s, e) in k.mono.powers() {
            factors.push(self.power(self.sym(*s), *e));
        }
        if !k.exp.is_zero() {
            factors.push(self.call("exp", self.lin(&k.exp, None)));
        }
        match &k.wave {
            TrigFactor::One => {}
            TrigFactor::Cos(l) => factors.push(self.call("cos", self.lin(l, None))),
            TrigFactor::Sin(l) => factors.push(self.call("sin", self.lin(l, None))),
        }
        let none = LinearForm::default();
        match &k.beat {
            TimeFactor::One => {}
            TimeFactor::Cos(w) => factors.push(self.call("cos", self.lin(&none, Some(w)))),
            TimeFactor::Sin(w) => factors.push(self.call("sin", self.lin(&none, Some(w)))),
        }
        if factors.is_empty() {
            factors.push("1.0".to_string());
        }
        (c.is_negative(), factors.join(" * "))
    }

    fn expr(&self, e: &Expr) -> String {
        if e.is_zero() {
            return "0.0".to_string();
        }
        join(e.terms().iter().map(|(k, c)| self.term(k, c)).collect())
    }
}

fn is_name(s: &str) -> bool {
    s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_')
}

fn paren_neg(k: i32) -> String {
    if k < 0 {
        format!("({k})")
    } else {
        k.to_string()
    }
}

fn scaled(c: &Q, v: String) -> (bool, String) {
    let a = c.abs();
    let body = if a.is_one() {
        v
    } else {
        format!("{} * {v}", coeff_lit(&a))
    };
    (c.is_negative(), body)
}

fn join(parts: Vec<(bool, String)>) -> String {
    let mut s = String::new();
    for (i, (neg, body)) in parts.into_iter().enumerate() {
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

/// The exact value, one comment line per entry.
fn exact_comment(lang: Lang, name: &str, shape: &Shape) -> Vec<String> {
    let c = lang.comment();
    let mut out = vec![format!("{c} exact value of {name} (ordex):")];
    match shape {
        Shape::Scalar(e) => out.push(format!("{c}   {name} = {e}")),
        Shape::Field(f) => {
            for (i, e) in f.0.iter().enumerate() {
                out.push(format!("{c}   {name}[{i}] = {e}"));
            }
        }
        Shape::Matrix(m) => {
            for i in 0..m.rows {
                for (j, e) in m.row(i).iter().enumerate() {
                    out.push(format!("{c}   {name}[{i}, {j}] = {e}"));
                }
            }
        }
    }
    out
}

/// The function `name(t, state, params…)` evaluating `shape` in `lang`.
/// `params` are the named arguments, in order (see [`parameters`]).
pub(crate) fn function(
    lang: Lang,
    name: &str,
    shape: &Shape,
    states: &[Sym],
    params: &[Sym],
) -> String {
    let w = Writer { lang, states };
    let state_names: Vec<String> = w.states.iter().map(|s| w.sym(*s)).collect();
    let what = match shape {
        Shape::Scalar(_) => "a number".to_string(),
        Shape::Field(f) => format!("the {} components", f.dim()),
        Shape::Matrix(m) => format!("the {}x{} matrix", m.rows, m.cols),
    };
    let parts = Parts {
        fname: lang.ident(name),
        state_doc: format!("state = ({})", state_names.join(", ")),
        param_names: params.iter().map(|s| w.sym(*s)).collect(),
        entries: shape.entries().iter().map(|e| w.expr(e)).collect(),
        state_names,
        what,
    };
    let mut out: Vec<String> = exact_comment(lang, name, shape);
    match lang {
        Lang::Python => python(&parts, shape, &mut out),
        Lang::Julia => julia(&parts, shape, &mut out),
        Lang::C => c(&parts, shape, &mut out),
        Lang::Rust => rust(&parts, shape, &mut out),
    }
    let mut s = out.join("\n");
    s.push('\n');
    s
}

/// What every target needs of the function, already in its syntax.
struct Parts {
    /// The function's name.
    fname: String,
    /// The states' names, in order.
    state_names: Vec<String>,
    /// The parameters' names, in order.
    param_names: Vec<String>,
    /// The entries of the shape (row by row for a matrix).
    entries: Vec<String>,
    /// What the function returns, for its comment.
    what: String,
    /// `state = (x, y)`, for its comment.
    state_doc: String,
}

/// `def name(t, state, *, params):` returning a number or a NumPy array.
fn python(p: &Parts, shape: &Shape, out: &mut Vec<String>) {
    let (fname, what) = (&p.fname, &p.what);
    out.push(format!(
        "{} state = ({}); returns {what}",
        Lang::Python.comment(),
        p.state_names.join(", ")
    ));
    out.push("import numpy as np".to_string());
    out.push(String::new());
    out.push(String::new());
    let mut sig = vec!["t".to_string(), "state".to_string()];
    if !p.param_names.is_empty() {
        sig.push("*".to_string());
        sig.extend(p.param_names.iter().cloned());
    }
    out.push(format!("def {fname}({}):", sig.join(", ")));
    if !p.state_names.is_empty() {
        out.push(format!("    {} = state", unpack(&p.state_names)));
    }
    let entries = &p.entries;
    let body = match shape {
        Shape::Scalar(_) => entries[0].clone(),
        Shape::Field(_) => format!("np.array([{}])", indent_list(entries, "        ")),
        Shape::Matrix(m) => {
            let rows = bracketed_rows(entries, m.rows, m.cols);
            format!("np.array([{}])", indent_list(&rows, "        "))
        }
    };
    out.push(format!("    return {body}"));
}

/// `function name(t, state; params)` returning a number, vector or matrix.
fn julia(p: &Parts, shape: &Shape, out: &mut Vec<String>) {
    let (fname, what, state_doc) = (&p.fname, &p.what, &p.state_doc);
    out.push(format!("# {state_doc}; returns {what}"));
    let params = if p.param_names.is_empty() {
        String::new()
    } else {
        format!("; {}", p.param_names.join(", "))
    };
    out.push(format!("function {fname}(t, state{params})"));
    if !p.state_names.is_empty() {
        out.push(format!("    {} = state", unpack(&p.state_names)));
    }
    let entries = &p.entries;
    let body = match shape {
        Shape::Scalar(_) => entries[0].clone(),
        Shape::Field(_) => format!("[{}]", indent_list(entries, "        ")),
        Shape::Matrix(m) => {
            let rows: Vec<String> = (0..m.rows)
                .map(|i| {
                    entries[i * m.cols..(i + 1) * m.cols]
                        .iter()
                        .map(|e| format!("({e})"))
                        .collect::<Vec<_>>()
                        .join(" ")
                })
                .collect();
            format!("[{}]", rows.join(";\n        "))
        }
    };
    out.push(format!("    return {body}"));
    out.push("end".to_string());
}

/// `double name(t, state, params)`, or `void` writing to `out` for fields
/// and matrices.
fn c(p: &Parts, shape: &Shape, out: &mut Vec<String>) {
    let (fname, what, state_doc) = (&p.fname, &p.what, &p.state_doc);
    let n = p.state_names.len();
    out.push(format!(
        "// {state_doc}; {}",
        match shape {
            Shape::Scalar(_) => "returns a number".to_string(),
            Shape::Field(_) => format!("writes {what} to out[0..{}]", n),
            Shape::Matrix(m) => format!("writes {what} to out, row by row (out[i*{} + j])", m.cols),
        }
    ));
    out.push("#include <math.h>".to_string());
    out.push(String::new());
    let mut sig = vec!["double t".to_string(), "const double *state".to_string()];
    sig.extend(p.param_names.iter().map(|p| format!("double {p}")));
    let ret = match shape {
        Shape::Scalar(_) => "double",
        _ => {
            sig.push("double *out".to_string());
            "void"
        }
    };
    out.push(format!("{ret} {fname}({})", sig.join(", ")));
    out.push("{".to_string());
    for (i, s) in p.state_names.iter().enumerate() {
        out.push(format!("    const double {s} = state[{i}];"));
    }
    let mut unused = vec!["t".to_string(), "state".to_string()];
    unused.extend(p.state_names.iter().cloned());
    unused.extend(p.param_names.iter().cloned());
    for u in unused {
        out.push(format!("    (void){u};"));
    }
    match shape {
        Shape::Scalar(_) => out.push(format!("    return {};", p.entries[0])),
        _ => {
            for (i, e) in p.entries.iter().enumerate() {
                out.push(format!("    out[{i}] = {e};"));
            }
        }
    }
    out.push("}".to_string());
}

/// `pub fn name(t, state, params) -> f64` (or a fixed-size array).
fn rust(p: &Parts, shape: &Shape, out: &mut Vec<String>) {
    let (fname, what, state_doc) = (&p.fname, &p.what, &p.state_doc);
    out.push(format!("// {state_doc}; returns {what}"));
    let mut sig = vec!["t: f64".to_string(), "state: &[f64]".to_string()];
    sig.extend(p.param_names.iter().map(|p| format!("{p}: f64")));
    let ret = match shape {
        Shape::Scalar(_) => "f64".to_string(),
        Shape::Field(f) => format!("[f64; {}]", f.dim()),
        Shape::Matrix(m) => format!("[[f64; {}]; {}]", m.cols, m.rows),
    };
    out.push("#[allow(unused_variables, unused_parens, non_snake_case, clippy::all)]".to_string());
    out.push(format!("pub fn {fname}({}) -> {ret} {{", sig.join(", ")));
    for (i, s) in p.state_names.iter().enumerate() {
        out.push(format!("    let {s} = state[{i}];"));
    }
    let entries = &p.entries;
    let body = match shape {
        Shape::Scalar(_) => entries[0].clone(),
        Shape::Field(_) => format!("[{}]", indent_list(entries, "        ")),
        Shape::Matrix(m) => {
            let rows = bracketed_rows(entries, m.rows, m.cols);
            format!("[{}]", indent_list(&rows, "        "))
        }
    };
    out.push(format!("    {body}"));
    out.push("}".to_string());
}

/// The rows of a matrix's entries as list literals `[a, b]`.
fn bracketed_rows(entries: &[String], rows: usize, cols: usize) -> Vec<String> {
    (0..rows)
        .map(|i| format!("[{}]", entries[i * cols..(i + 1) * cols].join(", ")))
        .collect()
}

/// The left side of `… = state`: `x,` for one name, `a, b` for several.
fn unpack(names: &[String]) -> String {
    if names.len() == 1 {
        format!("{},", names[0])
    } else {
        names.join(", ")
    }
}

/// Entries of a list literal, one a line when there are several.
fn indent_list(items: &[String], pad: &str) -> String {
    if items.len() <= 1 {
        return items.join(", ");
    }
    let inner: Vec<String> = items.iter().map(|i| format!("{pad}{i}")).collect();
    format!(
        "\n{},\n{}",
        inner.join(",\n"),
        &pad[..pad.len().saturating_sub(4)]
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn literals_are_valid_doubles_everywhere() {
        assert_eq!(float_lit(3.0), "3.0");
        assert_eq!(float_lit(0.25), "0.25");
        assert_eq!(float_lit(1e-5), "1e-5");
        assert_eq!(coeff_lit(&Q::ratio(1, 4).unwrap()), "(1.0 / 4.0)");
        assert_eq!(coeff_lit(&Q::int(-3)), "-3.0");
    }

    #[test]
    fn keywords_get_an_underscore() {
        assert_eq!(Lang::Python.ident("lambda"), "lambda_");
        assert_eq!(Lang::Python.ident("del"), "del_");
        assert_eq!(Lang::C.ident("double"), "double_");
        assert_eq!(Lang::Rust.ident("type"), "type_");
        assert_eq!(Lang::Julia.ident("end"), "end_");
        assert_eq!(Lang::Python.ident("gam"), "gam");
    }
}
