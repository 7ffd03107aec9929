//! The trigonometric factor in the state, `1`, `cos L` or `sin L`, with `L`
//! of positive leading coefficient, and the product-to-sum identities.

use smallvec::SmallVec;

use crate::core::num::Q;

use super::linear::LinearForm;

/// The trigonometric factor in the state variables.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub enum TrigFactor {
    /// No trigonometric factor.
    One,
    /// `cos(L)`, `L` with positive leading coefficient.
    Cos(LinearForm),
    /// `sin(L)`, `L` with positive leading coefficient.
    Sin(LinearForm),
}

/// `cos(L)` as (sign, wave) in canonical form; `None` when `L = 0` means 1.
pub(crate) fn cos_wave(l: LinearForm) -> TrigFactor {
    if l.is_zero() {
        TrigFactor::One
    } else if l.is_negative() {
        TrigFactor::Cos(l.neg())
    } else {
        TrigFactor::Cos(l)
    }
}

/// `sin(L)` in canonical form: (negated?, wave); `None` when `L = 0` (zero).
pub(crate) fn sin_wave(l: LinearForm) -> Option<(bool, TrigFactor)> {
    if l.is_zero() {
        None
    } else if l.is_negative() {
        Some((true, TrigFactor::Sin(l.neg())))
    } else {
        Some((false, TrigFactor::Sin(l)))
    }
}

/// `c·f` for a factor of the product-to-sum identities (1 or ±1/2).
pub(crate) fn times_factor(c: Q, f: &Q) -> Q {
    match f.as_small() {
        Some((1, 1)) => c,
        Some((1, 2)) => c.half(),
        Some((-1, 2)) => c.half().neg(),
        _ => c.mul(f),
    }
}

/// Product of two waves as at most two (coefficient factor, wave) pairs.
pub(crate) fn wave_mul(a: &TrigFactor, b: &TrigFactor) -> SmallVec<[(Q, TrigFactor); 2]> {
    let half = Q::HALF;
    let mut out = SmallVec::new();
    match (a, b) {
        (TrigFactor::One, w) | (w, TrigFactor::One) => out.push((Q::ONE, w.clone())),
        (TrigFactor::Cos(x), TrigFactor::Cos(y)) => {
            // cos x cos y = (cos(x-y) + cos(x+y))/2
            out.push((half.clone(), cos_wave(x.add_signed(y, true))));
            out.push((half, cos_wave(x.add_signed(y, false))));
        }
        (TrigFactor::Sin(x), TrigFactor::Sin(y)) => {
            // sin x sin y = (cos(x-y) - cos(x+y))/2
            out.push((half.clone(), cos_wave(x.add_signed(y, true))));
            out.push((half.neg(), cos_wave(x.add_signed(y, false))));
        }
        (TrigFactor::Sin(x), TrigFactor::Cos(y)) | (TrigFactor::Cos(y), TrigFactor::Sin(x)) => {
            // sin x cos y = (sin(x+y) + sin(x-y))/2
            if let Some((neg, w)) = sin_wave(x.add_signed(y, false)) {
                out.push((if neg { half.neg() } else { half.clone() }, w));
            }
            if let Some((neg, w)) = sin_wave(x.add_signed(y, true)) {
                out.push((if neg { half.neg() } else { half }, w));
            }
        }
    }
    out
}
