//! [`Key`]: everything of a term but its coefficient; products of keys and
//! their factors in the input syntax.

use crate::core::error::CoreResult;
use crate::core::num::Q;

use super::linear::{fmt_lin, LinearForm};
use super::monomial::Monomial;
use super::time::{beat_mul, fmt_freq, TimeFactor};
use super::trig::{times_factor, wave_mul, TrigFactor};

/// Everything of a term but its coefficient.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub struct Key {
    /// Powers of symbols (parameters, states, `t`, `pi`).
    pub mono: Monomial,
    /// The exponential factor's argument (empty: no factor).
    pub exp: LinearForm,
    /// The trigonometric factor in the state.
    pub wave: TrigFactor,
    /// The trigonometric factor in time.
    pub beat: TimeFactor,
}

impl Key {
    /// The key of the constant 1.
    pub fn one() -> Key {
        Key {
            mono: Monomial::one(),
            exp: LinearForm::default(),
            wave: TrigFactor::One,
            beat: TimeFactor::One,
        }
    }

    /// True if and only if this is the key of a plain number.
    pub fn is_one(&self) -> bool {
        self.mono.0.is_empty()
            && self.exp.is_zero()
            && self.wave == TrigFactor::One
            && self.beat == TimeFactor::One
    }

    /// Multiplies two terms `ca·self` and `cb·other`, pushing up to four
    /// resulting terms (product-to-sum of the trigonometric factors).
    pub fn mul_into(
        &self,
        ca: &Q,
        other: &Key,
        cb: &Q,
        out: &mut impl FnMut(Key, Q),
    ) -> CoreResult<()> {
        let mono = self.mono.mul(&other.mono)?;
        let exp = if self.exp.is_zero() {
            other.exp.clone()
        } else if other.exp.is_zero() {
            self.exp.clone()
        } else {
            self.exp.add_signed(&other.exp, false)
        };
        let c = ca.mul(cb);
        let mut waves = wave_mul(&self.wave, &other.wave);
        let mut beats = beat_mul(&self.beat, &other.beat);
        if waves.len() == 1 && beats.len() == 1 {
            // The common case: move everything, no clones.
            let (cw, wave) = waves.swap_remove(0);
            let (cbt, beat) = beats.swap_remove(0);
            let cc = times_factor(times_factor(c, &cw), &cbt);
            out(
                Key {
                    mono,
                    exp,
                    wave,
                    beat,
                },
                cc,
            );
            return Ok(());
        }
        for (cw, w) in &waves {
            for (cbt, bt) in &beats {
                let cc = times_factor(times_factor(c.clone(), cw), cbt);
                out(
                    Key {
                        mono: mono.clone(),
                        exp: exp.clone(),
                        wave: w.clone(),
                        beat: bt.clone(),
                    },
                    cc,
                );
            }
        }
        Ok(())
    }

    /// The factors of the term (without coefficient), in input syntax;
    /// empty for the constant key.
    pub fn factors(&self) -> Vec<String> {
        let mut f = Vec::new();
        for (s, e) in &self.mono.0 {
            if *e == 1 {
                f.push(s.name());
            } else {
                f.push(format!("{}^{}", s.name(), e));
            }
        }
        if !self.exp.is_zero() {
            f.push(format!("exp({})", fmt_lin(&self.exp)));
        }
        match &self.wave {
            TrigFactor::One => {}
            TrigFactor::Cos(l) => f.push(format!("cos({})", fmt_lin(l))),
            TrigFactor::Sin(l) => f.push(format!("sin({})", fmt_lin(l))),
        }
        match &self.beat {
            TimeFactor::One => {}
            TimeFactor::Cos(k) => f.push(format!("cos({})", fmt_freq(k))),
            TimeFactor::Sin(k) => f.push(format!("sin({})", fmt_freq(k))),
        }
        f
    }
}
