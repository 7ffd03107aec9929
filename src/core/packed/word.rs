//! Packed monomials: one `u128` with eight bits of exponent per symbol,
//! their order, and the machine-word arithmetic of packed coefficients.

use std::cmp::Ordering;

use smallvec::SmallVec;

use super::super::expr::Monomial;
use super::super::symbol::Sym;

/// Symbols that fit a packed monomial (those numbered below this).
pub const SLOTS: u32 = 16;

/// Largest exponent of a packed factor: the sum of two stays below 256.
pub(super) const MAX_EXP: i32 = 127;

/// `n / d` when `d` (positive) divides `n` (positive), in machine words
/// when both fit (a division of 128-bit integers is a slow library call).
pub(super) fn exact_quotient(n: i128, d: i128) -> Option<i128> {
    if let (Ok(n), Ok(d)) = (u64::try_from(n), u64::try_from(d)) {
        return (n % d == 0).then(|| (n / d) as i128);
    }
    (n % d == 0).then(|| n / d)
}

pub(super) fn gcd_u128(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

pub(super) fn lcm_i64(a: i64, b: i64) -> Option<i64> {
    let g = gcd_u128(a.unsigned_abs() as u128, b.unsigned_abs() as u128) as i64;
    (a / g).checked_mul(b)
}

pub(super) fn lcm_i128(a: i128, b: i128) -> Option<i128> {
    let g = gcd_u128(a.unsigned_abs(), b.unsigned_abs()) as i128;
    (a / g).checked_mul(b)
}

pub(super) fn pack_mono(m: &Monomial) -> Option<u128> {
    let mut out = 0u128;
    for (s, e) in &m.0 {
        if s.0 >= SLOTS || !(0..=MAX_EXP).contains(e) {
            return None;
        }
        out |= (*e as u128) << (8 * s.0);
    }
    Some(out)
}

pub(super) fn unpack_mono(mut m: u128) -> Monomial {
    let mut out = SmallVec::new();
    let mut s = 0u32;
    while m != 0 {
        let e = (m & 0xff) as i32;
        if e != 0 {
            out.push((Sym(s), e));
        }
        m >>= 8;
        s += 1;
    }
    Monomial(out)
}

/// The order of [`Monomial`] (its sorted `(symbol, exponent)` pairs compared
/// lexicographically) on packed monomials (see [`cmp_lanes_by`]).
pub(super) fn cmp_mono(a: u128, b: u128) -> Ordering {
    cmp_lanes_by(a, b, |m, shift| ((m >> shift) & 0xff) as i16)
}

/// The order of sorted `(symbol, value)` lists compared lexicographically,
/// on lanes (`value` reads a lane, 0 meaning absent): at the lowest lane
/// where they differ, two present values compare as numbers; where one is
/// absent, that one's next pair has a later symbol (it is greater) unless it
/// has none left (it is a prefix, so smaller).
#[inline]
pub(super) fn cmp_lanes_by(a: u128, b: u128, value: impl Fn(u128, u32) -> i16) -> Ordering {
    let x = a ^ b;
    if x == 0 {
        return Ordering::Equal;
    }
    let shift = x.trailing_zeros() / 8 * 8;
    let (ea, eb) = (value(a, shift), value(b, shift));
    let rest = |m: u128| shift + 8 < 128 && m >> (shift + 8) != 0;
    if ea != 0 && eb != 0 {
        ea.cmp(&eb)
    } else if ea == 0 {
        if rest(a) {
            Ordering::Greater
        } else {
            Ordering::Less
        }
    } else if rest(b) {
        Ordering::Less
    } else {
        Ordering::Greater
    }
}
