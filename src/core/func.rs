//! Unspecified functions applied to linear arguments (DESIGN §2.7a).
//!
//! Owns: the atoms `f^(α)(L_1 + c_1, …, L_n + c_n)` — an unspecified smooth
//! function `f` (its [`Signature`]), a derivative multi-index `α` and
//! arguments that are linear forms in the state plus a constant (a rational
//! number and a rational multiple of pi). Each distinct atom is interned as
//! a [`Sym`] of its own (in order of first appearance, like names), so it is
//! a factor of the monomial with an integer exponent and every product,
//! sum and packed fast path treats it as a symbol. What makes it more than a
//! symbol lives here: the chain rule for partial derivatives
//! (`∂_s f^(α)(L) = Σ_j (∂L_j/∂s) f^(α+e_j)(L)`), arguments evaluated under
//! substitution, and concrete definitions substituted with all derivatives.
//!
//! The table is per thread, like the symbol interner. Products never look
//! atoms up; derivatives and substitutions (which do) run on the session's
//! thread.
//!
//! Must not know: the command language, parsing, printing styles other than
//! the plain input syntax.

use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;
use std::sync::Arc;

use smallvec::SmallVec;

use super::error::{CoreError, CoreResult};
use super::expr::{Expr, Key, LinearForm, Monomial, TimeFactor, TrigFactor};
use super::num::Q;
use super::packed::SLOTS;
use super::symbol::Sym;

/// An unspecified function: its name and argument names (placeholders).
#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct Signature {
    /// The function's name, e.g. `V`.
    pub name: String,
    /// The argument names of the declaration, e.g. `a, b` for `J(a, b)`.
    pub params: Vec<String>,
}

/// One argument: `L + constant + pi_multiple·pi` with `L` linear in the
/// state.
#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct Arg {
    /// The linear form in the state.
    pub lin: LinearForm,
    /// The rational constant.
    pub constant: Q,
    /// The coefficient of pi.
    pub pi: Q,
}

/// An application of a derivative of an unspecified function.
#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct Atom {
    /// The function.
    pub sig: Arc<Signature>,
    /// How often it is differentiated in each argument.
    pub deriv: SmallVec<[u32; 2]>,
    /// The arguments, one per parameter.
    pub args: SmallVec<[Arg; 2]>,
}

#[derive(Default)]
struct Table {
    ids: HashMap<Atom, Sym>,
    /// Indexed by symbol number (`None` for names).
    by_sym: Vec<Option<Rc<Atom>>>,
    /// The lanes of packed monomials that hold atoms (see
    /// [`super::packed`]).
    lanes: u128,
}

thread_local! {
    static TABLE: RefCell<Table> = RefCell::new(Table::default());
}

/// The symbol of `atom`, interned on first use.
pub fn intern(atom: Atom) -> Sym {
    if let Some(s) = TABLE.with(|t| t.borrow().ids.get(&atom).copied()) {
        return s;
    }
    let s = Sym::fresh(&atom.to_string());
    TABLE.with(|t| {
        let mut t = t.borrow_mut();
        let i = s.0 as usize;
        if t.by_sym.len() <= i {
            t.by_sym.resize(i + 1, None);
        }
        t.by_sym[i] = Some(Rc::new(atom.clone()));
        if s.0 < SLOTS {
            t.lanes |= 0xffu128 << (8 * s.0);
        }
        t.ids.insert(atom, s);
    });
    s
}

/// The atom behind `s`, `None` for a name.
pub fn atom(s: Sym) -> Option<Rc<Atom>> {
    TABLE.with(|t| t.borrow().by_sym.get(s.0 as usize).cloned().flatten())
}

/// True when some atom has been interned on this thread.
pub fn any() -> bool {
    TABLE.with(|t| !t.borrow().by_sym.is_empty())
}

/// The lanes of packed monomials that hold atoms (all ones in each).
pub fn packed_lanes() -> u128 {
    TABLE.with(|t| t.borrow().lanes)
}

impl Arg {
    /// The argument as an expression.
    pub fn to_expr(&self) -> Expr {
        let mut terms: Vec<(Key, Q)> = self
            .lin
            .0
            .iter()
            .map(|(s, c)| (key_of_sym(*s), c.clone()))
            .collect();
        if !self.constant.is_zero() {
            terms.push((Key::one(), self.constant.clone()));
        }
        if !self.pi.is_zero() {
            terms.push((key_of_sym(Sym::PI), self.pi.clone()));
        }
        Expr::from_terms(terms)
    }

    /// Reads `e` as a linear form in `states` plus a constant; the error
    /// says what is wrong.
    pub fn from_expr(e: &Expr, states: &[Sym]) -> Result<Arg, String> {
        let mut lin: Vec<(Sym, Q)> = Vec::new();
        let (mut constant, mut pi) = (Q::ZERO, Q::ZERO);
        for (k, c) in e.terms() {
            if k.beat != TimeFactor::One || k.mono.power_of(Sym::T) != 0 {
                return Err(
                    "time `t` cannot stand inside (the argument is a point of the \
                            state space)"
                        .to_string(),
                );
            }
            if !k.exp.is_zero() || k.wave != TrigFactor::One {
                return Err("the argument is not linear in the state".to_string());
            }
            match k.mono.0.as_slice() {
                [] => constant = c.clone(),
                [(s, 1)] if *s == Sym::PI => pi = c.clone(),
                [(s, 1)] if states.contains(s) => lin.push((*s, c.clone())),
                [(s, 1)] if atom(*s).is_none() => {
                    return Err(format!(
                        "parameter `{}` cannot stand inside (hint: write the function of the \
                         state alone, e.g. `V(q)`, and keep parameters outside)",
                        s.name()
                    ))
                }
                _ => return Err("the argument is not linear in the state".to_string()),
            }
        }
        Ok(Arg {
            lin: LinearForm(lin.into()),
            constant,
            pi,
        })
    }

    fn mentions(&self, s: Sym) -> bool {
        self.lin.0.iter().any(|(x, _)| *x == s)
    }
}

fn key_of_sym(s: Sym) -> Key {
    let mut k = Key::one();
    k.mono.0.push((s, 1));
    k
}

impl Atom {
    /// The atom with one more derivative in argument `j`.
    pub fn derived(&self, j: usize) -> Atom {
        let mut a = self.clone();
        if let Some(d) = a.deriv.get_mut(j) {
            *d += 1;
        }
        a
    }

    /// True when an argument mentions `s`.
    pub fn mentions(&self, s: Sym) -> bool {
        self.args.iter().any(|a| a.mentions(s))
    }

    /// The symbols of the arguments.
    pub fn arg_syms(&self) -> impl Iterator<Item = Sym> + '_ {
        self.args
            .iter()
            .flat_map(|a| a.lin.0.iter().map(|(s, _)| *s))
    }

    /// Total order of differentiation.
    pub fn order(&self) -> u32 {
        self.deriv.iter().sum()
    }

    /// The names of the arguments differentiated, repeated for higher
    /// order, in declaration order (`a, a, b` for `∂_a² ∂_b`).
    pub fn deriv_names(&self) -> Vec<&str> {
        let mut out = Vec::new();
        for (n, d) in self.sig.params.iter().zip(&self.deriv) {
            for _ in 0..*d {
                out.push(n.as_str());
            }
        }
        out
    }
}

/// Appends `± body(|c|)` to a sum being written (`-` alone at the start);
/// nothing for `c = 0`. Shared by the argument printers of the input syntax
/// and of LaTeX.
pub fn push_signed(s: &mut String, c: &Q, body: impl FnOnce(&Q) -> String) {
    if c.is_zero() {
        return;
    }
    let neg = c.is_negative();
    if s.is_empty() {
        if neg {
            s.push('-');
        }
    } else {
        s.push_str(if neg { " - " } else { " + " });
    }
    s.push_str(&body(&c.abs()));
}

/// An argument in the input syntax: the linear form, then the constant,
/// then the multiple of pi (`q - 1`, `x + pi`, `1/2`).
pub fn show_arg(a: &Arg) -> String {
    let mut s = super::expr::fmt_lin(&a.lin);
    push_signed(&mut s, &a.constant, |abs| abs.to_string());
    push_signed(&mut s, &a.pi, |abs| {
        if abs.is_one() {
            "pi".to_string()
        } else {
            format!("{abs}*pi")
        }
    });
    if s.is_empty() {
        s.push('0');
    }
    s
}

/// `f^(α)(args)` in the input syntax, the arguments already shown.
fn show_call(sig: &Signature, deriv: &[u32], args: &[String]) -> String {
    let args = args.join(", ");
    let name = &sig.name;
    let order: u32 = deriv.iter().sum();
    if sig.params.len() == 1 {
        format!("{name}{}({args})", "'".repeat(order as usize))
    } else if order == 0 {
        format!("{name}({args})")
    } else {
        let mut names = Vec::new();
        for (n, d) in sig.params.iter().zip(deriv) {
            names.extend(std::iter::repeat_n(n.as_str(), *d as usize));
        }
        format!("pd({name}, {})({args})", names.join(", "))
    }
}

impl std::fmt::Display for Atom {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let args: Vec<String> = self.args.iter().map(show_arg).collect();
        write!(f, "{}", show_call(&self.sig, &self.deriv, &args))
    }
}

fn bad_argument(call: String, reason: String) -> CoreError {
    CoreError::FunctionArgument { call, reason }
}

impl Expr {
    /// `f^(α)(args)` for expressions `args` linear in `states` plus a
    /// constant; the error names the offending argument.
    pub fn apply_function(
        sig: &Arc<Signature>,
        deriv: &[u32],
        args: &[Expr],
        states: &[Sym],
    ) -> CoreResult<Expr> {
        let shown = || {
            let a: Vec<String> = args.iter().map(Expr::to_string).collect();
            show_call(sig, deriv, &a)
        };
        if args.len() != sig.params.len() || deriv.len() != sig.params.len() {
            return Err(bad_argument(
                shown(),
                format!(
                    "`{}` takes {} argument{} ({}), got {}",
                    sig.name,
                    sig.params.len(),
                    if sig.params.len() == 1 { "" } else { "s" },
                    sig.params.join(", "),
                    args.len()
                ),
            ));
        }
        let mut parsed = SmallVec::new();
        for a in args {
            parsed.push(Arg::from_expr(a, states).map_err(|r| bad_argument(shown(), r))?);
        }
        let atom = Atom {
            sig: sig.clone(),
            deriv: deriv.iter().copied().collect(),
            args: parsed,
        };
        Ok(Expr::sym(intern(atom)))
    }

    /// True when some term has an atom.
    pub fn has_atoms(&self) -> bool {
        self.first_atom().is_some()
    }

    /// The first atom of the expression, for messages.
    pub fn first_atom(&self) -> Option<Rc<Atom>> {
        if !any() {
            return None;
        }
        self.terms()
            .iter()
            .flat_map(|(k, _)| k.mono.0.iter())
            .find_map(|(s, _)| atom(*s))
    }

    /// Replaces every atom for which `value` gives an expression by that
    /// expression (to the atom's power). Atoms are looked up once each.
    pub fn subst_atoms(
        &self,
        value: &mut dyn FnMut(&Atom) -> CoreResult<Option<Expr>>,
    ) -> CoreResult<Expr> {
        if !any() {
            return Ok(self.clone());
        }
        let mut cache: HashMap<Sym, Option<Expr>> = HashMap::new();
        let mut out: Vec<(Key, Q)> = Vec::new();
        for (k, c) in self.terms() {
            super::limits::poll()?;
            let mut rest = k.clone();
            rest.mono = Monomial::one();
            let mut factor: Option<Expr> = None;
            for (s, e) in &k.mono.0 {
                if !cache.contains_key(s) {
                    let v = match atom(*s) {
                        Some(a) => value(&a)?,
                        None => None,
                    };
                    cache.insert(*s, v);
                }
                match cache.get(s).and_then(Option::as_ref) {
                    Some(v) => {
                        let p = v.pow(i64::from(*e)).map_err(|err| match err {
                            CoreError::DivisionBySum { .. }
                            | CoreError::NegativePowerOfSum { .. } => CoreError::OutsideAlgebra {
                                what: format!("`{}^{}` with {} = {}", s.name(), e, s.name(), v),
                            },
                            other => other,
                        })?;
                        factor = Some(match factor {
                            None => p,
                            Some(f) => f.mul(&p)?,
                        });
                    }
                    None => rest.mono.0.push((*s, *e)),
                }
            }
            match factor {
                None => out.push((k.clone(), c.clone())),
                Some(f) => out.extend(Expr::term(rest, c.clone()).mul(&f)?.terms().iter().cloned()),
            }
        }
        let out = Expr::from_terms(out);
        super::limits::check_terms(out.len())?;
        Ok(out)
    }
}

/// The atom `a` with its arguments evaluated under the substitution `map`
/// (of symbols by expressions), as an expression: `None` when no argument
/// is touched.
pub fn subst_args(a: &Atom, map: &HashMap<Sym, Expr>, states: &[Sym]) -> CoreResult<Option<Expr>> {
    if !a.arg_syms().any(|s| map.contains_key(&s)) {
        return Ok(None);
    }
    let mut args = Vec::with_capacity(a.args.len());
    for arg in &a.args {
        let mut v = Expr::zero();
        for (s, c) in arg.lin.0.iter() {
            let x = map.get(s).cloned().unwrap_or_else(|| Expr::sym(*s));
            v = v.add_scaled(&x, c);
        }
        v = v.add(
            &Arg {
                lin: LinearForm::default(),
                ..arg.clone()
            }
            .to_expr(),
        );
        args.push(v);
    }
    Expr::apply_function(&a.sig, &a.deriv, &args, states).map(Some)
}

/// The chain rule: the terms `(monomial, factor)` of `∂m/∂s` that come from
/// the atoms of `m` (`e·A^(e−1)·Σ_j (∂L_j/∂s)·A_j` for an atom `A` to the
/// power `e`, `A_j` its derivative in argument `j`), pushed on `out`.
pub fn chain_rule(m: &Monomial, s: Sym, out: &mut Vec<(Monomial, Q)>) {
    for (i, (x, e)) in m.0.iter().enumerate() {
        let Some(a) = atom(*x) else {
            continue;
        };
        for (j, arg) in a.args.iter().enumerate() {
            let c = arg.lin.coeff(s);
            if c.is_zero() {
                continue;
            }
            let d = intern(a.derived(j));
            let mut rest = m.clone();
            if *e == 1 {
                rest.0.remove(i);
            } else {
                rest.0[i].1 -= 1;
            }
            let mut one = Monomial::one();
            one.0.push((d, 1));
            // Exponents of a derivative stay far from overflow; on overflow
            // the term is kept as it would be without the factor's merge.
            let merged = rest.mul(&one).unwrap_or(rest);
            out.push((merged, c.mul(&Q::int(i64::from(*e)))));
        }
    }
}

/// A concrete definition `f(s_1, …, s_n) = body` for an unspecified
/// function, with the placeholders as symbols of the body.
pub struct Definition {
    /// The function defined.
    pub sig: Arc<Signature>,
    /// The placeholders, one per argument.
    pub params: Vec<Sym>,
    /// The body, in the placeholders.
    pub body: Expr,
    derivatives: HashMap<SmallVec<[u32; 2]>, Expr>,
}

impl Definition {
    /// A definition; the body's symbols other than the placeholders are
    /// the caller's to check.
    pub fn new(sig: Arc<Signature>, params: Vec<Sym>, body: Expr) -> Definition {
        Definition {
            sig,
            params,
            body,
            derivatives: HashMap::new(),
        }
    }

    /// `∂^α body`.
    fn derivative(&mut self, alpha: &SmallVec<[u32; 2]>) -> Expr {
        if let Some(d) = self.derivatives.get(alpha) {
            return d.clone();
        }
        let mut d = self.body.clone();
        for (p, k) in self.params.iter().zip(alpha) {
            for _ in 0..*k {
                d = d.pd(*p);
            }
        }
        self.derivatives.insert(alpha.clone(), d.clone());
        d
    }

    /// The value of `a` (an atom of this function) under the definition.
    pub fn value(&mut self, a: &Atom, states: &[Sym]) -> CoreResult<Expr> {
        let d = self.derivative(&a.deriv);
        let map: HashMap<Sym, Expr> = self
            .params
            .iter()
            .zip(&a.args)
            .map(|(p, arg)| (*p, arg.to_expr()))
            .collect();
        d.subst(&map, states)
    }
}

impl Expr {
    /// Replaces the function of `def` and every derivative of it by the
    /// concrete definition.
    pub fn plug_definition(&self, def: &mut Definition, states: &[Sym]) -> CoreResult<Expr> {
        let name = def.sig.clone();
        self.subst_atoms(&mut |a: &Atom| {
            if a.sig.name == name.name {
                def.value(a, states).map(Some)
            } else {
                Ok(None)
            }
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sig(name: &str, params: &[&str]) -> Arc<Signature> {
        Arc::new(Signature {
            name: name.to_string(),
            params: params.iter().map(|p| p.to_string()).collect(),
        })
    }

    #[test]
    fn atoms_print_in_the_input_syntax() {
        let (q, p) = (Sym::new("q"), Sym::new("p"));
        let st = [q, p];
        let v = sig("V", &["s"]);
        let j = sig("J", &["a", "b"]);
        let x = Expr::sym(q);
        let y = Expr::sym(p);
        let arg = x
            .scale(&Q::int(2))
            .sub(&y)
            .add(&Expr::sym(Sym::PI).scale(&Q::Small(1, 2)))
            .add(&Expr::int(-1));
        let e = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
        assert_eq!(e.to_string(), "V''(2*q - p - 1 + 1/2*pi)");
        let e = Expr::apply_function(&j, &[1, 2], &[x.clone(), Expr::num(Q::Small(1, 3))], &st)
            .unwrap();
        assert_eq!(e.to_string(), "pd(J, a, b, b)(q, 1/3)");
        let e = Expr::apply_function(&j, &[0, 0], &[x.clone(), Expr::zero()], &st).unwrap();
        assert_eq!(e.to_string(), "J(q, 0)");
    }

    #[test]
    fn the_chain_rule_is_exact() {
        let (q, p) = (Sym::new("q"), Sym::new("p"));
        let st = [q, p];
        let v = sig("V", &["s"]);
        let arg = Expr::sym(q).scale(&Q::int(2)).add(&Expr::sym(p));
        let a = Expr::apply_function(&v, &[0], &[arg.clone()], &st).unwrap();
        let a1 = Expr::apply_function(&v, &[1], &[arg.clone()], &st).unwrap();
        let a2 = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
        assert_eq!(a.pd(q), a1.scale(&Q::int(2)));
        // ∂_p (V^3) = 3 V^2 V'; ∂_q (V'/V) = 2 V''/V − 2 V'^2/V^2.
        assert_eq!(
            a.pow(3).unwrap().pd(p),
            a.pow(2).unwrap().mul(&a1).unwrap().scale(&Q::int(3))
        );
        let quotient = a1.mul(&a.pow(-1).unwrap()).unwrap();
        let expected = a2.mul(&a.pow(-1).unwrap()).unwrap().scale(&Q::int(2)).sub(
            &a1.pow(2)
                .unwrap()
                .mul(&a.pow(-2).unwrap())
                .unwrap()
                .scale(&Q::int(2)),
        );
        assert_eq!(quotient.pd(q), expected);
    }

    #[test]
    fn definitions_and_arguments_substitute() {
        let (q, s) = (Sym::new("q"), Sym::new("fs"));
        let st = [q];
        let v = sig("V", &["s"]);
        let arg = Expr::sym(q).add(&Expr::sym(Sym::PI));
        let a2 = Expr::apply_function(&v, &[2], &[arg], &st).unwrap();
        // V(s) = s^3: V''(q + pi) = 6 q + 6 pi.
        let mut def = Definition::new(v.clone(), vec![s], Expr::sym(s).pow(3).unwrap());
        let got = a2.plug_definition(&mut def, &st).unwrap();
        let want = Expr::sym(q).add(&Expr::sym(Sym::PI)).scale(&Q::int(6));
        assert_eq!(got, want);
        // q = 1/2 - pi evaluates the argument: V''(1/2).
        let map: HashMap<Sym, Expr> = [(q, Expr::num(Q::Small(1, 2)).sub(&Expr::sym(Sym::PI)))]
            .into_iter()
            .collect();
        assert_eq!(a2.subst(&map, &st).unwrap().to_string(), "V''(1/2)");
        // A nonlinear value is refused.
        let sq: HashMap<Sym, Expr> = [(q, Expr::sym(q).pow(2).unwrap())].into_iter().collect();
        assert!(matches!(
            a2.subst(&sq, &st),
            Err(CoreError::FunctionArgument { .. })
        ));
    }
}
