//! Partial derivatives (with the chain rule for unspecified functions).

use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, TimeFactor, TrigFactor};

impl Expr {
    /// Partial derivative with respect to `s` (a state, a parameter or `t`).
    pub fn pd(&self, s: Sym) -> Expr {
        let mut out: Vec<(Key, Q)> = Vec::new();
        let atoms = crate::core::func::any();
        let mut chain = Vec::new();
        for (k, c) in self.terms() {
            // Monomial factor.
            let e = k.mono.power_of(s);
            if e != 0 {
                let mut key = k.clone();
                for (x, ex) in key.mono.0.iter_mut() {
                    if *x == s {
                        *ex -= 1;
                    }
                }
                key.mono.0.retain(|(_, ex)| *ex != 0);
                out.push((key, c.mul(&Q::int(e as i64))));
            }
            // Unspecified functions: the chain rule.
            if atoms {
                chain.clear();
                crate::core::func::chain_rule(&k.mono, s, &mut chain);
                for (m, f) in chain.drain(..) {
                    let key = Key {
                        mono: m,
                        ..k.clone()
                    };
                    out.push((key, c.mul(&f)));
                }
            }
            // Exponential factor.
            let m = k.exp.coeff(s);
            if !m.is_zero() {
                out.push((k.clone(), c.mul(&m)));
            }
            // Trigonometric factor in the state.
            match &k.wave {
                TrigFactor::One => {}
                TrigFactor::Cos(l) => {
                    let a = l.coeff(s);
                    if !a.is_zero() {
                        let key = Key {
                            wave: TrigFactor::Sin(l.clone()),
                            ..k.clone()
                        };
                        out.push((key, c.mul(&a).neg()));
                    }
                }
                TrigFactor::Sin(l) => {
                    let a = l.coeff(s);
                    if !a.is_zero() {
                        let key = Key {
                            wave: TrigFactor::Cos(l.clone()),
                            ..k.clone()
                        };
                        out.push((key, c.mul(&a)));
                    }
                }
            }
            // Trigonometric factor in time.
            if s == Sym::T {
                match &k.beat {
                    TimeFactor::One => {}
                    TimeFactor::Cos(w) => out.push((
                        Key {
                            beat: TimeFactor::Sin(w.clone()),
                            ..k.clone()
                        },
                        c.mul(w).neg(),
                    )),
                    TimeFactor::Sin(w) => out.push((
                        Key {
                            beat: TimeFactor::Cos(w.clone()),
                            ..k.clone()
                        },
                        c.mul(w),
                    )),
                }
            }
        }
        Expr::from_terms(out)
    }
}
