//! Packed state-trigonometric factors ([`PackedTrig`]): linear forms in
//! signed byte lanes, lane arithmetic, their order and product-to-sum.

use std::cmp::Ordering;
use std::sync::Arc;

use rustc_hash::FxHashMap;

use super::super::expr::{LinearForm, TrigFactor};
use super::super::num::Q;
use super::super::symbol::Sym;
use super::word::{cmp_lanes_by, SLOTS};

/// Largest coefficient of a packed linear form in absolute value (a lane
/// is a signed byte; −128 is left out so that every lane can be negated).
pub(super) const MAX_LANE: i16 = 127;

/// A packed state-trigonometric factor (see [`TrigFactor`]): none, `cos L` or
/// `sin L`, with `L`'s integer coefficients in signed byte lanes (symbol
/// `s` in byte `s`) and its first nonzero lane positive (the normal form's
/// canonical sign). One word: lane 0 (time, never in a state form) holds
/// the kind, 0 for none, 1 for `cos`, 2 for `sin` (the order of [`TrigFactor`]'s
/// variants).
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct PackedTrig(u128);

impl PackedTrig {
    /// No trigonometric factor.
    pub const ONE: PackedTrig = PackedTrig(0);

    pub(super) fn new(kind: u8, lanes: u128) -> PackedTrig {
        PackedTrig(lanes & !0xff | u128::from(kind))
    }

    /// 0: none, 1: `cos`, 2: `sin`.
    pub(super) fn kind(self) -> u8 {
        self.0 as u8
    }

    /// The linear form (lane 0 empty).
    pub(super) fn lanes(self) -> u128 {
        self.0 & !0xff
    }

    /// The packed copy of `w`, `None` when it does not fit.
    pub fn pack(w: &TrigFactor) -> Option<PackedTrig> {
        let (kind, l) = match w {
            TrigFactor::One => return Some(PackedTrig::ONE),
            TrigFactor::Cos(l) => (1, l),
            TrigFactor::Sin(l) => (2, l),
        };
        let mut lanes = 0u128;
        for (s, c) in l.0.iter() {
            let Q::Small(n, 1) = c else {
                return None;
            };
            // Lane 0 (time, never in a state form) holds the kind.
            if s.0 == 0 || s.0 >= SLOTS || n.unsigned_abs() > MAX_LANE as u64 {
                return None;
            }
            lanes |= u128::from(*n as i8 as u8) << (8 * s.0);
        }
        Some(PackedTrig::new(kind, lanes))
    }

    /// The factor in normal form.
    pub fn unpack(self) -> TrigFactor {
        if self.kind() == 0 {
            return TrigFactor::One;
        }
        let mut pairs = Vec::new();
        let (mut rest, mut s) = (self.lanes(), 0u32);
        while rest != 0 {
            let c = lane(rest, 0);
            if c != 0 {
                pairs.push((Sym(s), Q::int(i64::from(c))));
            }
            rest >>= 8;
            s += 1;
        }
        let l = LinearForm(Arc::from(pairs));
        if self.kind() == 1 {
            TrigFactor::Cos(l)
        } else {
            TrigFactor::Sin(l)
        }
    }

    /// The factor as one word.
    pub(super) fn code(self) -> u128 {
        self.0
    }

    /// The factor of [`PackedTrig::code`].
    pub(super) fn from_code(code: u128) -> PackedTrig {
        PackedTrig(code)
    }

    /// The coefficient of `s` in the linear form.
    pub(super) fn coeff(self, s: Sym) -> i64 {
        if s.0 >= SLOTS {
            0
        } else {
            i64::from(lane(self.lanes(), 8 * s.0))
        }
    }

    /// True for a trigonometric factor (not 1).
    pub(super) fn is_wave(self) -> bool {
        self.kind() != 0
    }
}

/// The signed lane of `lanes` at bit `shift`.
pub(super) fn lane(lanes: u128, shift: u32) -> i8 {
    (lanes >> shift) as u8 as i8
}

/// The largest coefficient of a packed linear form in absolute value.
pub(super) fn max_lane(lanes: u128) -> u8 {
    lanes
        .to_le_bytes()
        .iter()
        .map(|b| (*b as i8).unsigned_abs())
        .max()
        .unwrap_or(0)
}

/// The low seven bits of every lane.
pub(super) const LOW7: u128 = u128::from_ne_bytes([0x7f; 16]);
/// The sign bit of every lane.
pub(super) const SIGNS: u128 = u128::from_ne_bytes([0x80; 16]);
/// One in every lane.
pub(super) const ONES: u128 = u128::from_ne_bytes([0x01; 16]);

/// Lane-wise wrapping addition (no carry between lanes).
pub(super) fn wrapping_add_lanes(a: u128, b: u128) -> u128 {
    ((a & LOW7) + (b & LOW7)) ^ ((a ^ b) & SIGNS)
}

/// Lane-wise negation (`−x = !x + 1` in every lane; zero lanes stay 0).
pub(super) fn negate_lanes(a: u128) -> u128 {
    wrapping_add_lanes(!a, ONES)
}

/// `a + b` (`a − b` when `negate`) lane by lane, for forms whose largest
/// coefficients sum to at most 127 (see [`Packed::lanes_fit`]): then no
/// lane wraps.
pub(super) fn add_lanes(a: u128, b: u128, negate: bool) -> u128 {
    wrapping_add_lanes(a, if negate { negate_lanes(b) } else { b })
}

/// The linear form with its first nonzero lane made positive, and whether
/// it was negated.
pub(super) fn canonical_lanes(l: u128) -> (u128, bool) {
    if l == 0 || lane(l, l.trailing_zeros() / 8 * 8) > 0 {
        return (l, false);
    }
    (negate_lanes(l), true)
}

/// The trigonometric factors of a product of two groups with their
/// factors `p/2` (product-to-sum: `cos a cos b = (cos(a−b) + cos(a+b))/2`,
/// `sin a sin b = (cos(a−b) − cos(a+b))/2`, `sin a cos b = (sin(a+b) +
/// sin(a−b))/2`, `cos a sin b = (sin(a+b) − sin(a−b))/2`; 1 as `2/2`),
/// in canonical form (`cos(−L) = cos L`, `sin(−L) = −sin L`, `cos 0 = 1`,
/// `sin 0 = 0`). The factors' largest coefficients must sum to at most 127
/// (see [`Packed::lanes_fit`]).
pub(super) fn wave_routes(a: PackedTrig, b: PackedTrig) -> WaveRoutes {
    let mut out = WaveRoutes::default();
    if !a.is_wave() {
        out.push(b, 2);
        return out;
    }
    if !b.is_wave() {
        out.push(a, 2);
        return out;
    }
    let diff = add_lanes(a.lanes(), b.lanes(), true);
    let sum = add_lanes(a.lanes(), b.lanes(), false);
    let mut push = |kind: u8, lanes: u128, p: i64| {
        let (lanes, negated) = canonical_lanes(lanes);
        if lanes == 0 {
            if kind == 1 {
                out.push(PackedTrig::ONE, p);
            }
            return;
        }
        let p = if negated && kind == 2 { -p } else { p };
        out.push(PackedTrig::new(kind, lanes), p);
    };
    match (a.kind(), b.kind()) {
        (1, 1) => {
            push(1, diff, 1);
            push(1, sum, 1);
        }
        (2, 2) => {
            push(1, diff, 1);
            push(1, sum, -1);
        }
        (2, _) => {
            push(2, sum, 1);
            push(2, diff, 1);
        }
        _ => {
            push(2, sum, 1);
            push(2, diff, -1);
        }
    }
    out
}

/// The at most two trigonometric factors of a product of two groups, each
/// with its factor `p/2`.
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct WaveRoutes {
    pub(super) routes: [(PackedTrig, i64); 2],
    pub(super) len: usize,
}

impl WaveRoutes {
    pub(super) fn push(&mut self, w: PackedTrig, p: i64) {
        if let Some(slot) = self.routes.get_mut(self.len) {
            *slot = (w, p);
            self.len += 1;
        }
    }

    pub(super) fn as_slice(&self) -> &[(PackedTrig, i64)] {
        &self.routes[..self.len]
    }
}

/// The order of [`LinearForm`] (sorted `(symbol, coefficient)` pairs compared
/// lexicographically) on packed linear forms: as [`cmp_mono`], with the
/// lanes compared as signed numbers.
pub(super) fn cmp_lanes(a: u128, b: u128) -> Ordering {
    cmp_lanes_by(a, b, |m, shift| i16::from(lane(m, shift)))
}

/// The order of [`TrigFactor`] on packed factors: none, then `cos`, then `sin`,
/// each by linear form.
pub(super) fn cmp_wave(a: PackedTrig, b: PackedTrig) -> Ordering {
    a.kind()
        .cmp(&b.kind())
        .then_with(|| cmp_lanes(a.lanes(), b.lanes()))
}

/// The trigonometric factors of packed terms in normal form, each made
/// once.
#[derive(Default)]
pub(super) struct WaveCache(FxHashMap<PackedTrig, TrigFactor>);

impl WaveCache {
    pub(super) fn get(&mut self, w: PackedTrig) -> TrigFactor {
        if w == PackedTrig::ONE {
            return TrigFactor::One;
        }
        self.0.entry(w).or_insert_with(|| w.unpack()).clone()
    }
}
