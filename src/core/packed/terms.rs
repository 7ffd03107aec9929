//! Keys of terms, packed and unpacked: [`pack_key`], the sort of terms by
//! packed keys, the common denominator of coefficients.

use super::trig::{cmp_wave, PackedTrig};
use super::word::{cmp_mono, lcm_i64, pack_mono, unpack_mono};
use crate::core::num::Q;
use crate::core::term::{Key, LinearForm, TimeFactor, TrigFactor};

/// The least common denominator of the coefficients, when they all fit
/// machine words and it does too.
pub fn common_denominator(terms: &[(Key, Q)]) -> Option<i64> {
    let mut denom: i64 = 1;
    for (_, c) in terms {
        let (_, d) = c.as_small()?;
        denom = lcm_i64(denom, d)?;
    }
    Some(denom)
}

/// The packed monomial, trigonometric factor, frequency and parity of a
/// term's key, when it fits (see [`Packed`]).
pub fn pack_key(k: &Key) -> Option<(u128, PackedTrig, i64, bool)> {
    if !k.exp.is_zero() {
        return None;
    }
    let wave = PackedTrig::pack(&k.wave)?;
    let (freq, odd) = match &k.beat {
        TimeFactor::One => (0, false),
        TimeFactor::Cos(h) => (h.is_integer().then(|| h.to_i64())??, false),
        TimeFactor::Sin(h) => (h.is_integer().then(|| h.to_i64())??, true),
    };
    Some((pack_mono(&k.mono)?, wave, freq, odd))
}

/// Sorts terms by key (the order of [`Key`]). When every key packs (see
/// [`pack_key`]), the terms are sorted by their packed keys and then moved
/// once into place: comparing two packed keys is a few word operations, and
/// the sort moves small entries instead of whole terms (a term is several
/// times larger). Otherwise the keys are compared directly.
pub fn sort_terms(terms: &mut Vec<(Key, Q)>) {
    // Small sorts gain nothing from packing.
    if terms.len() < 32 {
        terms.sort_unstable_by(|a, b| a.0.cmp(&b.0));
        return;
    }
    let mut order: Vec<(u128, PackedTrig, u8, i64, u32)> = Vec::with_capacity(terms.len());
    for (i, (k, _)) in terms.iter().enumerate() {
        let Some((m, w, freq, odd)) = pack_key(k) else {
            terms.sort_unstable_by(|a, b| a.0.cmp(&b.0));
            return;
        };
        // The order of `TimeFactor`: none, `cos`, `sin`, then the frequency.
        let kind = if freq == 0 { 0 } else { 1 + odd as u8 };
        order.push((m, w, kind, freq, i as u32));
    }
    order.sort_unstable_by(|a, b| {
        cmp_mono(a.0, b.0)
            .then_with(|| cmp_wave(a.1, b.1))
            .then(a.2.cmp(&b.2))
            .then(a.3.cmp(&b.3))
    });
    let mut slots: Vec<Option<(Key, Q)>> = terms.drain(..).map(Some).collect();
    terms.extend(order.iter().filter_map(|e| slots[e.4 as usize].take()));
}

/// The time factor `cos(f t)` (`sin(f t)` when `odd`, 1 when `f = 0`).
pub(super) fn beat_of(freq: i64, odd: bool) -> TimeFactor {
    if freq == 0 {
        TimeFactor::One
    } else if odd {
        TimeFactor::Sin(Q::int(freq))
    } else {
        TimeFactor::Cos(Q::int(freq))
    }
}

/// The key of a packed monomial with factors `wave` and `beat`.
pub(super) fn key_of(m: u128, wave: TrigFactor, beat: &TimeFactor) -> Key {
    Key {
        mono: unpack_mono(m),
        exp: LinearForm::default(),
        wave,
        beat: beat.clone(),
    }
}
