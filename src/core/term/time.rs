//! The trigonometric factor in time, `1`, `cos(k t)` or `sin(k t)` with `k
//! > 0`, products of two, and `∫ t^n · factor dt`.

use smallvec::SmallVec;

use crate::core::error::{CoreError, CoreResult};
use crate::core::num::Q;

/// The trigonometric factor in time: `cos(k t)` or `sin(k t)` with `k > 0`.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub enum TimeFactor {
    /// No time oscillation.
    One,
    /// `cos(k t)`.
    Cos(Q),
    /// `sin(k t)`.
    Sin(Q),
}

pub(crate) fn cos_beat(k: Q) -> TimeFactor {
    if k.is_zero() {
        TimeFactor::One
    } else {
        TimeFactor::Cos(k.abs())
    }
}

pub(crate) fn sin_beat(k: Q) -> Option<(bool, TimeFactor)> {
    if k.is_zero() {
        None
    } else if k.is_negative() {
        Some((true, TimeFactor::Sin(k.neg())))
    } else {
        Some((false, TimeFactor::Sin(k)))
    }
}

/// Product of two beats, as `wave_mul` does for waves.
pub(crate) fn beat_mul(a: &TimeFactor, b: &TimeFactor) -> SmallVec<[(Q, TimeFactor); 2]> {
    let half = Q::HALF;
    let mut out = SmallVec::new();
    match (a, b) {
        (TimeFactor::One, w) | (w, TimeFactor::One) => out.push((Q::ONE, w.clone())),
        (TimeFactor::Cos(x), TimeFactor::Cos(y)) => {
            out.push((half.clone(), cos_beat(x.sub(y))));
            out.push((half, cos_beat(x.add(y))));
        }
        (TimeFactor::Sin(x), TimeFactor::Sin(y)) => {
            out.push((half.clone(), cos_beat(x.sub(y))));
            out.push((half.neg(), cos_beat(x.add(y))));
        }
        (TimeFactor::Sin(x), TimeFactor::Cos(y)) | (TimeFactor::Cos(y), TimeFactor::Sin(x)) => {
            if let Some((neg, w)) = sin_beat(x.add(y)) {
                out.push((if neg { half.neg() } else { half.clone() }, w));
            }
            if let Some((neg, w)) = sin_beat(x.sub(y)) {
                out.push((if neg { half.neg() } else { half }, w));
            }
        }
    }
    out
}

impl TimeFactor {
    /// The frequency `k` of `cos(k t)`/`sin(k t)`; 0 for no time factor.
    pub fn frequency(&self) -> Q {
        match self {
            TimeFactor::One => Q::ZERO,
            TimeFactor::Cos(k) | TimeFactor::Sin(k) => k.clone(),
        }
    }
}

pub(crate) fn fmt_freq(k: &Q) -> String {
    if k.is_one() {
        "t".to_string()
    } else {
        format!("{k}*t")
    }
}

/// `∫ t^n · beat dt` as a list of `(power, beat, coefficient)`.
pub(crate) fn integrate_time_monomial(
    n: i32,
    beat: &TimeFactor,
) -> CoreResult<Vec<(i32, TimeFactor, Q)>> {
    match beat {
        TimeFactor::One => Ok(vec![(
            n.checked_add(1).ok_or(CoreError::Limit {
                kind: crate::core::error::LimitKind::Exponent,
                limit: i32::MAX as u64,
            })?,
            TimeFactor::One,
            Q::ratio(1, n as i64 + 1).unwrap_or(Q::ZERO),
        )]),
        TimeFactor::Cos(k) | TimeFactor::Sin(k) => {
            // I_c(n) = t^n sin/k - (n/k) I_s(n-1); I_s(n) = -t^n cos/k + (n/k) I_c(n-1).
            // That is n + 1 terms with coefficients up to n!/k^n: ask the
            // limits before building them (`t^1000000000*cos(t)`).
            crate::core::limits::check_terms(usize::try_from(n).unwrap_or(0).saturating_add(1))?;
            let mut out = Vec::new();
            let mut size = 0usize;
            let mut is_sin = matches!(beat, TimeFactor::Sin(_));
            let mut factor = Q::ONE;
            let mut p = n;
            let inv_k = k.recip().unwrap_or(Q::ZERO);
            loop {
                if is_sin {
                    out.push((p, TimeFactor::Cos(k.clone()), factor.mul(&inv_k).neg()));
                    factor = factor.mul(&Q::int(p as i64)).mul(&inv_k);
                } else {
                    out.push((p, TimeFactor::Sin(k.clone()), factor.mul(&inv_k)));
                    factor = factor.mul(&Q::int(p as i64)).mul(&inv_k).neg();
                }
                if p == 0 {
                    break;
                }
                // The budget counts the coefficients' size too: n!/k^n has
                // many digits long before n reaches the budget in terms.
                size =
                    size.saturating_add(1 + crate::core::limits::coefficient_terms(factor.bits()));
                if p % 64 == 0 {
                    crate::core::limits::poll()?;
                    crate::core::limits::check_bits(factor.bits())?;
                    crate::core::limits::check_terms(size)?;
                }
                p -= 1;
                is_sin = !is_sin;
            }
            Ok(out)
        }
    }
}
