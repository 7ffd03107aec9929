//! Atoms: applications of unspecified functions to linear arguments,
//! interned per thread as symbols of their own, and their printing.

use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;
use std::sync::Arc;

use smallvec::SmallVec;

use crate::core::num::Q;
use crate::core::symbol::Sym;

use super::linear::{fmt_lin, LinearForm};
use super::monomial::SLOTS;

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
pub(crate) struct Table {
    pub(crate) ids: HashMap<Atom, Sym>,
    /// Indexed by symbol number (`None` for names).
    pub(crate) by_sym: Vec<Option<Rc<Atom>>>,
    /// The lanes of packed monomials that hold atoms (see
    /// [`crate::core::packed`]).
    pub(crate) lanes: u128,
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
    pub(crate) fn mentions(&self, s: Sym) -> bool {
        self.lin.0.iter().any(|(x, _)| *x == s)
    }
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
    let mut s = fmt_lin(&a.lin);
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
pub(crate) fn show_call(sig: &Signature, deriv: &[u32], args: &[String]) -> String {
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
