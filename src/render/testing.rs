//! Test helpers for rendering: expressions built from core types over a
//! fixed list of states, and one function that shows an expression both
//! ways (plain and LaTeX), so that each test is data and one snapshot.
//!
//! Only the tests of `render` use this module; it never parses input (the
//! parser lives in the language layer, above `render`).

use std::sync::Arc;

use crate::core::func::Signature;
use crate::core::{Expr, Field, Sym, Q};

use super::{latex, plain};

/// States and builders for one test. Symbols are interned per thread and
/// each test runs on a thread of its own, so the order of terms depends
/// only on the order in which the test names its symbols.
pub(crate) struct Fixture {
    states: Vec<Sym>,
}

impl Fixture {
    /// A fixture whose states are `states`, declared in that order.
    pub(crate) fn new(states: &[&str]) -> Fixture {
        Fixture {
            states: states.iter().map(|s| Sym::new(s)).collect(),
        }
    }

    /// A state or parameter by name.
    pub(crate) fn sym(&self, name: &str) -> Expr {
        Expr::sym(Sym::new(name))
    }

    /// The rational `n/d`.
    pub(crate) fn q(&self, n: i64, d: i64) -> Expr {
        Expr::num(Q::ratio(n, d).expect("nonzero denominator"))
    }

    /// `a · b`.
    pub(crate) fn mul(&self, a: &Expr, b: &Expr) -> Expr {
        a.mul(b).expect("a small product")
    }

    /// `cos(arg)` for an argument linear in the states (and `t`).
    pub(crate) fn cos(&self, arg: &Expr) -> Expr {
        Expr::cos_of(arg, &self.states).expect("a linear argument")
    }

    /// `sin(arg)` for an argument linear in the states (and `t`).
    pub(crate) fn sin(&self, arg: &Expr) -> Expr {
        Expr::sin_of(arg, &self.states).expect("a linear argument")
    }

    /// The derivative `deriv` (one order per argument) of the unspecified
    /// function `name(params…)` applied to `args`.
    pub(crate) fn func(&self, name: &str, params: &[&str], deriv: &[u32], args: &[Expr]) -> Expr {
        let sig = Arc::new(Signature {
            name: name.to_string(),
            params: params.iter().map(|p| p.to_string()).collect(),
        });
        Expr::apply_function(&sig, deriv, args, &self.states).expect("linear arguments")
    }

    /// `e` in the input syntax and in LaTeX, one line each.
    pub(crate) fn show(&self, e: &Expr) -> String {
        format!("plain  {e}\nlatex  {}", latex::expr(e, &self.states))
    }

    /// A field in the input syntax, as a `pmatrix`, and as the `aligned`
    /// block of an averaged result in the small parameter `eps` (its rows
    /// named after the states).
    pub(crate) fn show_field(&self, f: &Field, eps: &str) -> String {
        let names: Vec<String> = self.states.iter().map(|s| s.name()).collect();
        format!(
            "plain  {}\nlatex  {}\n{}",
            plain::field(f),
            latex::field(f, &self.states),
            latex::aligned(f, Sym::new(eps), &self.states, &names)
        )
    }
}
