//! Elementary functions of linear arguments: `cos`, `sin` and `exp` of an
//! expression linear in the state and time.

use crate::core::error::{CoreError, CoreResult};
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{cos_beat, cos_wave, sin_beat, sin_wave};
use crate::core::term::{Key, LinearForm, TimeFactor, TrigFactor};

/// A linear argument split into its parts: state form, time frequency and a
/// constant (rational number and rational multiple of pi).
pub(crate) struct LinearArg {
    pub(crate) state: Vec<(Sym, Q)>,
    pub(crate) freq: Q,
    pub(crate) pi_multiple: Q,
    pub(crate) constant: Q,
}

pub(crate) fn linear_arg(func: &'static str, arg: &Expr, states: &[Sym]) -> CoreResult<LinearArg> {
    let mut out = LinearArg {
        state: Vec::new(),
        freq: Q::ZERO,
        pi_multiple: Q::ZERO,
        constant: Q::ZERO,
    };
    let nonlinear = || CoreError::NonlinearArgument {
        func,
        arg: arg.to_string(),
    };
    for (k, c) in arg.terms() {
        if !k.exp.is_zero() || k.wave != TrigFactor::One || k.beat != TimeFactor::One {
            return Err(nonlinear());
        }
        match k.mono.0.as_slice() {
            [] => out.constant = c.clone(),
            [(s, 1)] if *s == Sym::T => out.freq = c.clone(),
            [(s, 1)] if *s == Sym::PI => out.pi_multiple = c.clone(),
            [(s, 1)] if states.contains(s) => out.state.push((*s, c.clone())),
            _ => {
                if let Some((p, _)) = k
                    .mono
                    .0
                    .iter()
                    .find(|(s, _)| *s != Sym::T && *s != Sym::PI && !states.contains(s))
                {
                    if crate::core::func::atom(*p).is_some() {
                        return Err(nonlinear());
                    }
                    if k.mono.power_of(Sym::T) != 0 {
                        return Err(CoreError::SymbolicFrequency {
                            arg: arg.to_string(),
                        });
                    }
                    return Err(CoreError::ParameterInArgument {
                        func,
                        name: p.name(),
                    });
                }
                // Distinguish a parameter factor from genuine nonlinearity.
                let has_t = k.mono.power_of(Sym::T) != 0;
                if has_t && k.mono.0.len() >= 2 && k.mono.power_of(Sym::T) == 1 {
                    return Err(CoreError::SymbolicFrequency {
                        arg: arg.to_string(),
                    });
                }
                return Err(nonlinear());
            }
        }
    }
    Ok(out)
}

/// Exact `cos(c·pi)` and `sin(c·pi)` when c is a multiple of 1/2.
pub(crate) fn cos_sin_half_pi(c: &Q) -> Option<(i64, i64)> {
    let two_c = c.mul(&Q::int(2));
    let n = two_c.to_i64()?;
    Some(match n.rem_euclid(4) {
        0 => (1, 0),
        1 => (0, 1),
        2 => (-1, 0),
        _ => (0, -1),
    })
}

/// Exact value of cos or sin at a rational multiple of pi, when rational
/// (Niven: only 0, ±1/2, ±1 occur).
pub(crate) fn trig_at_pi_multiple(is_sin: bool, c: &Q) -> Option<Q> {
    // Reduce c modulo 2 and look it up in sixths.
    let six = c.mul(&Q::int(6));
    let n = six.to_i64()?.rem_euclid(12);
    // cos(n*pi/6) for n = 0..11
    const COS2: [i64; 12] = [2, 99, 1, 0, -1, 99, -2, 99, -1, 0, 1, 99];
    let idx = if is_sin { (n + 9) % 12 } else { n }; // sin(x) = cos(x - pi/2) = cos(x + 3pi/2)
    let v = COS2[idx as usize];
    if v == 99 {
        None
    } else {
        Q::ratio(v, 2)
    }
}

impl Expr {
    /// `cos(arg)` for an argument linear in the state coordinates `states`
    /// and time (plus a multiple of pi/2), split into state and time factors.
    /// Any other symbol in the argument is refused as a parameter.
    pub fn cos_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        Expr::trig_of("cos", arg, states)
    }

    /// `sin(arg)`, as `cos_of`.
    pub fn sin_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        Expr::trig_of("sin", arg, states)
    }

    pub(crate) fn trig_of(func: &'static str, arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        let is_sin = func == "sin";
        let la = linear_arg(func, arg, states)?;
        if !la.constant.is_zero() {
            return Err(CoreError::ConstantInArgument {
                func,
                arg: arg.to_string(),
            });
        }
        let state = LinearForm(la.state.iter().cloned().collect());
        if state.is_zero() && la.freq.is_zero() {
            // A pure constant c*pi.
            return match trig_at_pi_multiple(is_sin, &la.pi_multiple) {
                Some(v) => Ok(Expr::num(v)),
                None => Err(CoreError::Irrational {
                    what: format!("{func}({arg})"),
                }),
            };
        }
        let (cp, sp) =
            cos_sin_half_pi(&la.pi_multiple).ok_or_else(|| CoreError::ConstantInArgument {
                func,
                arg: arg.to_string(),
            })?;
        // X = L + k t; cos(X + c pi) = cos X cp - sin X sp; sin(X + c pi) = sin X cp + cos X sp.
        let cos_l = Expr::term(
            Key {
                wave: cos_wave(state.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let sin_l = match sin_wave(state) {
            Some((neg, w)) => Expr::term(
                Key {
                    wave: w,
                    ..Key::one()
                },
                Q::int(if neg { -1 } else { 1 }),
            ),
            None => Expr::zero(),
        };
        let cos_k = Expr::term(
            Key {
                beat: cos_beat(la.freq.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let sin_k = match sin_beat(la.freq.clone()) {
            Some((neg, b)) => Expr::term(
                Key {
                    beat: b,
                    ..Key::one()
                },
                Q::int(if neg { -1 } else { 1 }),
            ),
            None => Expr::zero(),
        };
        // cos X = cos L cos kt - sin L sin kt; sin X = sin L cos kt + cos L sin kt.
        let cos_x = cos_l.mul(&cos_k)?.sub(&sin_l.mul(&sin_k)?);
        let sin_x = sin_l.mul(&cos_k)?.add(&cos_l.mul(&sin_k)?);
        let (a, b) = if is_sin {
            (&sin_x, &cos_x)
        } else {
            (&cos_x, &sin_x)
        };
        // result = a*cp + (is_sin ? b*sp : -b*sp)
        let s = if is_sin { sp } else { -sp };
        Ok(a.scale(&Q::int(cp)).add(&b.scale(&Q::int(s))))
    }

    /// `exp(arg)` for an argument linear in the state variables.
    pub fn exp_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        let la = linear_arg("exp", arg, states)?;
        if !la.freq.is_zero() {
            return Err(CoreError::TimeInExp {
                arg: arg.to_string(),
            });
        }
        if !la.constant.is_zero() || !la.pi_multiple.is_zero() {
            return Err(CoreError::Irrational {
                what: format!("exp({arg})"),
            });
        }
        Ok(Expr::term(
            Key {
                exp: LinearForm(la.state.into_iter().collect()),
                ..Key::one()
            },
            Q::ONE,
        ))
    }
}
