//! Unspecified functions: arguments as expressions, application,
//! substitution of arguments and definitions, the chain rule.

use std::collections::HashMap;
use std::rc::Rc;
use std::sync::Arc;

use smallvec::SmallVec;

use crate::core::error::{CoreError, CoreResult};
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{any, atom, intern, show_call};
use crate::core::term::{Arg, Atom, Key, LinearForm, Monomial, Signature, TimeFactor, TrigFactor};

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
}

pub(crate) fn key_of_sym(s: Sym) -> Key {
    let mut k = Key::one();
    k.mono.0.push((s, 1));
    k
}

pub(crate) fn bad_argument(call: String, reason: String) -> CoreError {
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
            crate::core::limits::poll()?;
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
        crate::core::limits::check_terms(out.len())?;
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
    pub(crate) derivatives: HashMap<SmallVec<[u32; 2]>, Expr>,
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
    pub(crate) fn derivative(&mut self, alpha: &SmallVec<[u32; 2]>) -> Expr {
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
