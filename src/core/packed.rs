//! Packed products of polynomial and state-trigonometric parts: the inner
//! loop of brackets.
//!
//! Owns: a compact copy of the terms of one time part (see
//! [`super::expr::TimePart`]) when every term is a monomial in the first
//! [`SLOTS`] symbols, with exponents from 0 to 127 and word-sized
//! coefficients, times at most a state-trigonometric factor `cos L` or
//! `sin L` whose linear form has integer coefficients from −127 to 127 in
//! those symbols (no exponential factor). Each monomial is one `u128`,
//! eight bits per symbol, so the monomial of a product is one addition (two
//! exponents of at most 127 cannot carry into the next symbol); the terms
//! are grouped by trigonometric factor ([`PackedTrig`], the linear form in signed
//! byte lanes), so that product-to-sum runs once per pair of groups and the
//! loop over pairs of terms only adds monomials; the coefficients are
//! integer numerators over one common denominator, so products and their
//! sums need no gcd. [`PackedSum`] accumulates products of packed parts by
//! the time and trigonometric factor of the result and gives back exact
//! terms at the end; whatever does not fit its machine integers is handed
//! to the caller as an exact term instead (the caller adds it to its
//! general sum).
//!
//! Must not know: fields, brackets, budgets or the recursions that use it.

use std::cmp::Ordering;
use std::sync::Arc;

use rustc_hash::FxHashMap;
use smallvec::SmallVec;

use super::expr::{Expr, Key, LinearForm, Monomial, TimeFactor, TrigFactor};
use super::num::Q;
use super::symbol::Sym;

/// Symbols that fit a packed monomial (those numbered below this).
pub const SLOTS: u32 = 16;
/// Frequencies below this find their sums by direct indexing.
const SMALL_FREQ: usize = 1024;
/// Largest exponent of a packed factor: the sum of two stays below 256.
const MAX_EXP: i32 = 127;
/// Largest coefficient of a packed linear form in absolute value (a lane
/// is a signed byte; −128 is left out so that every lane can be negated).
const MAX_LANE: i16 = 127;

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

    fn new(kind: u8, lanes: u128) -> PackedTrig {
        PackedTrig(lanes & !0xff | u128::from(kind))
    }

    /// 0: none, 1: `cos`, 2: `sin`.
    fn kind(self) -> u8 {
        self.0 as u8
    }

    /// The linear form (lane 0 empty).
    fn lanes(self) -> u128 {
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
    fn code(self) -> u128 {
        self.0
    }

    /// The factor of [`PackedTrig::code`].
    fn from_code(code: u128) -> PackedTrig {
        PackedTrig(code)
    }

    /// The coefficient of `s` in the linear form.
    fn coeff(self, s: Sym) -> i64 {
        if s.0 >= SLOTS {
            0
        } else {
            i64::from(lane(self.lanes(), 8 * s.0))
        }
    }

    /// True for a trigonometric factor (not 1).
    fn is_wave(self) -> bool {
        self.kind() != 0
    }
}

/// The signed lane of `lanes` at bit `shift`.
fn lane(lanes: u128, shift: u32) -> i8 {
    (lanes >> shift) as u8 as i8
}

/// The largest coefficient of a packed linear form in absolute value.
fn max_lane(lanes: u128) -> u8 {
    lanes
        .to_le_bytes()
        .iter()
        .map(|b| (*b as i8).unsigned_abs())
        .max()
        .unwrap_or(0)
}

/// The low seven bits of every lane.
const LOW7: u128 = u128::from_ne_bytes([0x7f; 16]);
/// The sign bit of every lane.
const SIGNS: u128 = u128::from_ne_bytes([0x80; 16]);
/// One in every lane.
const ONES: u128 = u128::from_ne_bytes([0x01; 16]);

/// Lane-wise wrapping addition (no carry between lanes).
fn wrapping_add_lanes(a: u128, b: u128) -> u128 {
    ((a & LOW7) + (b & LOW7)) ^ ((a ^ b) & SIGNS)
}

/// Lane-wise negation (`−x = !x + 1` in every lane; zero lanes stay 0).
fn negate_lanes(a: u128) -> u128 {
    wrapping_add_lanes(!a, ONES)
}

/// `a + b` (`a − b` when `negate`) lane by lane, for forms whose largest
/// coefficients sum to at most 127 (see [`Packed::lanes_fit`]): then no
/// lane wraps.
fn add_lanes(a: u128, b: u128, negate: bool) -> u128 {
    wrapping_add_lanes(a, if negate { negate_lanes(b) } else { b })
}

/// The linear form with its first nonzero lane made positive, and whether
/// it was negated.
fn canonical_lanes(l: u128) -> (u128, bool) {
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
fn wave_routes(a: PackedTrig, b: PackedTrig) -> WaveRoutes {
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
struct WaveRoutes {
    routes: [(PackedTrig, i64); 2],
    len: usize,
}

impl WaveRoutes {
    fn push(&mut self, w: PackedTrig, p: i64) {
        if let Some(slot) = self.routes.get_mut(self.len) {
            *slot = (w, p);
            self.len += 1;
        }
    }

    fn as_slice(&self) -> &[(PackedTrig, i64)] {
        &self.routes[..self.len]
    }
}

/// The order of [`LinearForm`] (sorted `(symbol, coefficient)` pairs compared
/// lexicographically) on packed linear forms: as [`cmp_mono`], with the
/// lanes compared as signed numbers.
fn cmp_lanes(a: u128, b: u128) -> Ordering {
    cmp_lanes_by(a, b, |m, shift| i16::from(lane(m, shift)))
}

/// The order of [`TrigFactor`] on packed factors: none, then `cos`, then `sin`,
/// each by linear form.
fn cmp_wave(a: PackedTrig, b: PackedTrig) -> Ordering {
    a.kind()
        .cmp(&b.kind())
        .then_with(|| cmp_lanes(a.lanes(), b.lanes()))
}

/// A packed term with its trigonometric factor (before grouping).
type WaveTerm = (PackedTrig, u128, i64);

/// The terms of one part, packed: `Σ terms[i].1 · x^terms[i].0 / denom`
/// times the group's trigonometric factor, times `cos(freq·t)`
/// (`sin(freq·t)` when `odd`; 1 when `freq = 0`).
#[derive(Clone, Debug, Default)]
pub struct Packed {
    /// The time frequency (an integer: parts with other frequencies are
    /// not packed).
    freq: i64,
    /// True for `sin(freq·t)`.
    odd: bool,
    /// Positive common denominator.
    denom: i64,
    /// Packed monomial and integer numerator, group after group.
    terms: Vec<(u128, i64)>,
    /// The groups: trigonometric factor and the end of its terms (those
    /// from the previous group's end); distinct factors, monomials distinct
    /// within a group.
    groups: SmallVec<[(PackedTrig, usize); 1]>,
    /// True when some group has a trigonometric factor.
    waves: bool,
    /// The largest coefficient of the groups' linear forms in absolute
    /// value.
    max_lane: u8,
    /// The largest numerator in absolute value (bounds products).
    max_abs: u64,
}

impl Packed {
    /// Terms without trigonometric factor.
    fn new(freq: i64, odd: bool, denom: i64, terms: Vec<(u128, i64)>) -> Packed {
        let groups = if terms.is_empty() {
            SmallVec::new()
        } else {
            SmallVec::from_elem((PackedTrig::ONE, terms.len()), 1)
        };
        Packed::with_groups(freq, odd, denom, terms, groups)
    }

    fn with_groups(
        freq: i64,
        odd: bool,
        denom: i64,
        terms: Vec<(u128, i64)>,
        groups: SmallVec<[(PackedTrig, usize); 1]>,
    ) -> Packed {
        let max_abs = terms
            .iter()
            .map(|(_, n)| n.unsigned_abs())
            .max()
            .unwrap_or(0);
        let waves = groups.iter().any(|(w, _)| w.is_wave());
        let max_lane = if waves {
            groups
                .iter()
                .map(|(w, _)| max_lane(w.lanes()))
                .max()
                .unwrap_or(0)
        } else {
            0
        };
        Packed {
            freq,
            odd,
            denom,
            terms,
            groups,
            waves,
            max_lane,
            max_abs,
        }
    }

    /// True when the linear forms of every product of a group of `a` and
    /// one of `b` fit the lanes (`|x ± y| ≤ |x| + |y|`).
    fn lanes_fit(a: &Packed, b: &Packed) -> bool {
        i16::from(a.max_lane) + i16::from(b.max_lane) <= MAX_LANE
    }

    /// Terms with their factors, grouped (sorted by factor and monomial;
    /// with `merge`, equal pairs are summed and zeros dropped). `None` when
    /// a sum overflows.
    fn from_wave_terms(
        freq: i64,
        odd: bool,
        denom: i64,
        mut v: Vec<WaveTerm>,
        merge: bool,
    ) -> Option<Packed> {
        v.sort_unstable_by_key(|&(w, m, _)| (w, m));
        if merge {
            // Equal pairs summed in place (they are adjacent), then zeros
            // dropped.
            let mut kept = 0usize;
            for i in 0..v.len() {
                let (w, m, n) = v[i];
                match kept.checked_sub(1).map(|j| &mut v[j]) {
                    Some(last) if last.0 == w && last.1 == m => last.2 = last.2.checked_add(n)?,
                    _ => {
                        v[kept] = (w, m, n);
                        kept += 1;
                    }
                }
            }
            v.truncate(kept);
            v.retain(|t| t.2 != 0);
        }
        let mut terms: Vec<(u128, i64)> = Vec::with_capacity(v.len());
        let n_groups = 1 + v.windows(2).filter(|p| p[0].0 != p[1].0).count();
        let mut groups: SmallVec<[(PackedTrig, usize); 1]> = SmallVec::with_capacity(n_groups);
        for (w, m, n) in v {
            if groups.last().map(|g| g.0) != Some(w) {
                groups.push((w, 0));
            }
            terms.push((m, n));
            if let Some(g) = groups.last_mut() {
                g.1 = terms.len();
            }
        }
        Some(Packed::with_groups(freq, odd, denom, terms, groups))
    }

    /// The groups: trigonometric factor and terms.
    fn groups(&self) -> impl Iterator<Item = (PackedTrig, &[(u128, i64)])> + '_ {
        let mut start = 0;
        self.groups.iter().map(move |&(w, end)| {
            let g = &self.terms[start..end];
            start = end;
            (w, g)
        })
    }

    /// The packed copy of `terms` (all with time factor `cos(freq·t)`, or
    /// `sin(freq·t)` when `odd`), or `None` when some term does not fit.
    pub fn pack(terms: &[(Key, Q)], freq: &Q, odd: bool) -> Option<Packed> {
        Packed::pack_over(terms, freq, odd, common_denominator(terms)?)
    }

    /// [`Packed::pack`] over a given common denominator (a multiple of
    /// every coefficient's denominator, see [`common_denominator`]): the
    /// parts of one expression share one, so that their products land on
    /// sums with equal denominators.
    pub fn pack_over(terms: &[(Key, Q)], freq: &Q, odd: bool, denom: i64) -> Option<Packed> {
        let freq = if freq.is_integer() {
            freq.to_i64()?
        } else {
            return None;
        };
        let mut plain = Vec::with_capacity(terms.len());
        let mut waves: Vec<WaveTerm> = Vec::new();
        for (k, c) in terms {
            if !k.exp.is_zero() {
                return None;
            }
            let Q::Small(n, d) = c else {
                return None;
            };
            if denom % d != 0 {
                return None;
            }
            let term = (pack_mono(&k.mono)?, n.checked_mul(denom / d)?);
            if k.wave == TrigFactor::One && waves.is_empty() {
                plain.push(term);
            } else {
                if waves.is_empty() {
                    waves.extend(plain.drain(..).map(|(m, n)| (PackedTrig::ONE, m, n)));
                }
                waves.push((PackedTrig::pack(&k.wave)?, term.0, term.1));
            }
        }
        if waves.is_empty() {
            Some(Packed::new(freq, odd, denom, plain))
        } else {
            Packed::from_wave_terms(freq, odd, denom, waves, false)
        }
    }

    /// `∂/∂s`, `None` when a coefficient overflows: `∂(m cos L) = ∂m cos L
    /// − L_s m sin L`, `∂(m sin L) = ∂m sin L + L_s m cos L`.
    pub fn derivative(&self, s: Sym) -> Option<Packed> {
        // Unspecified functions (see [`super::func`]) need the chain rule:
        // the general path takes parts that hold them.
        let atoms = super::func::packed_lanes();
        if atoms != 0 && self.terms.iter().any(|(m, _)| m & atoms != 0) {
            return None;
        }
        if s.0 >= SLOTS {
            return Some(Packed::new(self.freq, self.odd, self.denom, Vec::new()));
        }
        let shift = 8 * s.0;
        let has = |m: &u128| (m >> shift) & 0xff != 0;
        if !self.waves {
            let mut terms = Vec::new();
            // Counted first: no allocation when `s` is absent.
            terms.reserve_exact(self.terms.iter().filter(|(m, _)| has(m)).count());
            for (m, n) in &self.terms {
                let e = ((m >> shift) & 0xff) as i64;
                if e != 0 {
                    terms.push((m - (1u128 << shift), n.checked_mul(e)?));
                }
            }
            return Some(Packed::new(self.freq, self.odd, self.denom, terms));
        }
        let mut v: Vec<WaveTerm> = Vec::new();
        for (w, g) in self.groups() {
            let c = w.coeff(s);
            for (m, n) in g {
                let e = ((m >> shift) & 0xff) as i64;
                if e != 0 {
                    v.push((w, m - (1u128 << shift), n.checked_mul(e)?));
                }
                if c != 0 {
                    let (kind, f) = if w.kind() == 1 { (2, -c) } else { (1, c) };
                    v.push((PackedTrig::new(kind, w.lanes()), *m, n.checked_mul(f)?));
                }
            }
        }
        Packed::from_wave_terms(self.freq, self.odd, self.denom, v, true)
    }

    /// The terms as an expression.
    pub fn unpack(&self) -> Expr {
        let beat = beat_of(self.freq, self.odd);
        if !self.waves {
            // One time factor: the order of keys is the order of monomials.
            let mut terms: Vec<(u128, i64)> = self
                .terms
                .iter()
                .copied()
                .filter(|(_, n)| *n != 0)
                .collect();
            terms.sort_unstable_by(|a, b| cmp_mono(a.0, b.0));
            return Expr::from_sorted_terms(
                terms
                    .into_iter()
                    .map(|(m, n)| {
                        (
                            key_of(m, TrigFactor::One, &beat),
                            Q::from_i128(n as i128, self.denom as i128),
                        )
                    })
                    .collect(),
            );
        }
        // By monomial, then trigonometric factor (the order of keys).
        let waves: Vec<(PackedTrig, TrigFactor)> =
            self.groups.iter().map(|(w, _)| (*w, w.unpack())).collect();
        let mut terms: Vec<(u128, usize, i64)> = Vec::with_capacity(self.terms.len());
        for (i, (_, g)) in self.groups().enumerate() {
            terms.extend(g.iter().filter(|(_, n)| *n != 0).map(|&(m, n)| (m, i, n)));
        }
        terms.sort_unstable_by(|a, b| {
            cmp_mono(a.0, b.0).then_with(|| cmp_wave(waves[a.1].0, waves[b.1].0))
        });
        Expr::from_sorted_terms(
            terms
                .into_iter()
                .map(|(m, i, n)| {
                    (
                        key_of(m, waves[i].1.clone(), &beat),
                        Q::from_i128(n as i128, self.denom as i128),
                    )
                })
                .collect(),
        )
    }

    /// The largest numerator in absolute value.
    fn max_abs(&self) -> u64 {
        self.max_abs
    }

    /// Number of terms.
    pub fn len(&self) -> usize {
        self.terms.len()
    }

    /// True when some term has a power of `t` (symbol 0).
    pub fn has_time_power(&self) -> bool {
        debug_assert_eq!(Sym::T.0, 0);
        self.terms.iter().any(|(m, _)| m & 0xff != 0)
    }

    /// `∫_0^t` of a part with a time factor and no power of `t`:
    /// `cos(h t) → sin(h t)/h` and `sin(h t) → (1 − cos(h t))/h`, as the
    /// oscillating part and, for sines, the constant part (the state
    /// factors do not depend on `t`). `None` when the part has no time
    /// factor or a power of `t`, or a number overflows.
    pub fn integral_from_zero(&self) -> Option<(Packed, Option<Packed>)> {
        if self.freq == 0 || self.has_time_power() {
            return None;
        }
        let denom = self.denom.checked_mul(self.freq)?;
        let like = |odd: bool, freq: i64, terms: Vec<(u128, i64)>| {
            Packed::with_groups(freq, odd, denom, terms, self.groups.clone())
        };
        if !self.odd {
            return Some((like(true, self.freq, self.terms.clone()), None));
        }
        let mut negated = Vec::with_capacity(self.terms.len());
        for (m, n) in &self.terms {
            negated.push((*m, n.checked_neg()?));
        }
        Some((
            like(false, self.freq, negated),
            Some(like(false, 0, self.terms.clone())),
        ))
    }

    /// The time frequency.
    pub fn freq(&self) -> i64 {
        self.freq
    }

    /// True for `sin(freq·t)`.
    pub fn odd(&self) -> bool {
        self.odd
    }

    /// True when there are no terms.
    pub fn is_empty(&self) -> bool {
        self.terms.is_empty()
    }
}

/// The least common denominator of the coefficients, when they all fit
/// machine words and it does too.
pub fn common_denominator(terms: &[(Key, Q)]) -> Option<i64> {
    let mut denom: i64 = 1;
    for (_, c) in terms {
        let Q::Small(_, d) = c else {
            return None;
        };
        denom = lcm_i64(denom, *d)?;
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

/// `n / d` when `d` (positive) divides `n` (positive), in machine words
/// when both fit (a division of 128-bit integers is a slow library call).
fn exact_quotient(n: i128, d: i128) -> Option<i128> {
    if let (Ok(n), Ok(d)) = (u64::try_from(n), u64::try_from(d)) {
        return (n % d == 0).then(|| (n / d) as i128);
    }
    (n % d == 0).then(|| n / d)
}

fn gcd_u128(mut a: u128, mut b: u128) -> u128 {
    while b != 0 {
        (a, b) = (b, a % b);
    }
    a
}

fn lcm_i64(a: i64, b: i64) -> Option<i64> {
    let g = gcd_u128(a.unsigned_abs() as u128, b.unsigned_abs() as u128) as i64;
    (a / g).checked_mul(b)
}

fn lcm_i128(a: i128, b: i128) -> Option<i128> {
    let g = gcd_u128(a.unsigned_abs(), b.unsigned_abs()) as i128;
    (a / g).checked_mul(b)
}

fn pack_mono(m: &Monomial) -> Option<u128> {
    let mut out = 0u128;
    for (s, e) in &m.0 {
        if s.0 >= SLOTS || !(0..=MAX_EXP).contains(e) {
            return None;
        }
        out |= (*e as u128) << (8 * s.0);
    }
    Some(out)
}

fn unpack_mono(mut m: u128) -> Monomial {
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
fn cmp_mono(a: u128, b: u128) -> Ordering {
    cmp_lanes_by(a, b, |m, shift| ((m >> shift) & 0xff) as i16)
}

/// The order of sorted `(symbol, value)` lists compared lexicographically,
/// on lanes (`value` reads a lane, 0 meaning absent): at the lowest lane
/// where they differ, two present values compare as numbers; where one is
/// absent, that one's next pair has a later symbol (it is greater) unless it
/// has none left (it is a prefix, so smaller).
#[inline]
fn cmp_lanes_by(a: u128, b: u128, value: impl Fn(u128, u32) -> i16) -> Ordering {
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

/// The time factor `cos(f t)` (`sin(f t)` when `odd`, 1 when `f = 0`).
fn beat_of(freq: i64, odd: bool) -> TimeFactor {
    if freq == 0 {
        TimeFactor::One
    } else if odd {
        TimeFactor::Sin(Q::int(freq))
    } else {
        TimeFactor::Cos(Q::int(freq))
    }
}

/// The key of a packed monomial with factors `wave` and `beat`.
fn key_of(m: u128, wave: TrigFactor, beat: &TimeFactor) -> Key {
    Key {
        mono: unpack_mono(m),
        exp: LinearForm::default(),
        wave,
        beat: beat.clone(),
    }
}

/// Which products a [`PackedSum`] keeps, by time frequency of the result
/// (the integer form of [`super::expr::Keep`]).
#[derive(Clone, Copy, Debug)]
pub struct PackedKeep {
    /// Highest frequency kept (`None`: all).
    pub cap: Option<i64>,
    /// Of the dropped `c·sin(h t)`, keep the constant `c/h` apart.
    pub sines: bool,
}

/// One piece of what a term's power of `t` becomes (see
/// [`PackedSum::add_time_pieces`]): `t^power` with the time factor
/// `(freq, odd)` and the factor `num/den` (`den > 0`).
#[derive(Clone, Copy, Debug)]
pub struct TimePiece {
    pub power: i32,
    pub freq: i64,
    pub odd: bool,
    pub num: i64,
    pub den: i64,
}

/// Where the products of one pair of parts go: the sum of terms with time
/// factor `(freq, odd)` or, with `sines`, the constants of dropped sines;
/// each product takes the factor `p/q` on the way.
#[derive(Clone, Copy, Debug, Default)]
pub struct ProductRoute {
    freq: i64,
    odd: bool,
    sines: bool,
    p: i64,
    q: i64,
}

impl ProductRoute {
    /// The route to the sum of time factor `(freq, odd)` (or, with
    /// `sines`, of sine constants) with the factor `p/q` (`q > 0`).
    pub fn new(freq: i64, odd: bool, sines: bool, p: i64, q: i64) -> ProductRoute {
        ProductRoute {
            freq,
            odd,
            sines,
            p,
            q,
        }
    }
}

/// The routes of the products of parts `a` and `b` (product-to-sum:
/// `cos a cos b = (cos(a−b) + cos(a+b))/2`, `sin a sin b = (cos(a−b) −
/// cos(a+b))/2`, `sin a cos b = (sin(a+b) + sin(a−b))/2`), after `cut`
/// (`∫_0^t sin(h s) ds = (1 − cos(h t))/h` for the sine constants).
/// `None` when a frequency overflows.
pub fn routes(a: &Packed, b: &Packed, cut: PackedKeep) -> Option<ProductRoutes> {
    let mut out = ProductRoutes::default();
    let mut push = |f: Option<i64>, odd: bool, p: i64, q: i64| -> Option<()> {
        let f = f?;
        // sin(−h t) = −sin(h t), cos(−h t) = cos(h t), sin(0) = 0.
        let (f, p) = if f < 0 {
            (f.checked_neg()?, if odd { -p } else { p })
        } else {
            (f, p)
        };
        if odd && f == 0 {
            return Some(());
        }
        match cut.cap {
            Some(c) if f > c => {
                if cut.sines && odd {
                    out.push(ProductRoute {
                        freq: 0,
                        odd: false,
                        sines: true,
                        p,
                        q: q.checked_mul(f)?,
                    });
                }
            }
            _ => out.push(ProductRoute {
                freq: f,
                odd,
                sines: false,
                p,
                q,
            }),
        }
        Some(())
    };
    let (fa, fb) = (a.freq, b.freq);
    // Every route scales by halves (1 = 2/2): one denominator for the
    // products of two parts, whatever their frequencies, so that the
    // targets' last quotient serves again.
    if fa == 0 {
        push(Some(fb), b.odd, 2, 2)?;
    } else if fb == 0 {
        push(Some(fa), a.odd, 2, 2)?;
    } else {
        let (sum, diff) = (fa.checked_add(fb), fa.checked_sub(fb));
        match (a.odd, b.odd) {
            (false, false) => {
                push(diff, false, 1, 2)?;
                push(sum, false, 1, 2)?;
            }
            (true, true) => {
                push(diff, false, 1, 2)?;
                push(sum, false, -1, 2)?;
            }
            (true, false) => {
                push(sum, true, 1, 2)?;
                push(diff, true, 1, 2)?;
            }
            (false, true) => {
                push(sum, true, 1, 2)?;
                push(diff.and_then(i64::checked_neg), true, 1, 2)?;
            }
        }
    }
    Some(out)
}

/// The at most two routes of a pair of parts (a fixed array: no length
/// checks or spills in the product's setup).
#[derive(Clone, Copy, Debug, Default)]
pub struct ProductRoutes {
    routes: [ProductRoute; 2],
    len: usize,
}

impl ProductRoutes {
    fn push(&mut self, r: ProductRoute) {
        if let Some(slot) = self.routes.get_mut(self.len) {
            *slot = r;
            self.len += 1;
        }
    }

    /// The routes, in order.
    pub fn as_slice(&self) -> &[ProductRoute] {
        &self.routes[..self.len]
    }

    pub fn is_empty(&self) -> bool {
        self.len == 0
    }
}

/// Puts `parts` over one denominator when every numerator still fits a
/// word: products of two such lists then share one denominator, and the
/// sums they feed find it again without dividing.
fn common_denominator_of_parts(parts: &mut [Packed]) {
    let Some(first) = parts.first().map(|p| p.denom) else {
        return;
    };
    if parts.iter().all(|p| p.denom == first) {
        return;
    }
    let Some(l) = parts.iter().try_fold(1i64, |l, p| lcm_i64(l, p.denom)) else {
        return;
    };
    let fits = parts.iter().all(|p| {
        let f = (l / p.denom).unsigned_abs();
        p.max_abs
            .checked_mul(f)
            .is_some_and(|m| m <= i64::MAX as u64)
    });
    if !fits {
        return;
    }
    for p in parts.iter_mut() {
        let f = l / p.denom;
        if f != 1 {
            for (_, n) in &mut p.terms {
                *n *= f;
            }
            p.max_abs *= f.unsigned_abs();
            p.denom = l;
        }
    }
}

/// A key of a [`KeyMap`]: a packed monomial, or a packed monomial with a
/// packed trigonometric factor ([`PackedTrig::code`]).
trait SlotKey: Copy + Eq + std::fmt::Debug {
    /// No key: a monomial has exponents of at most 127 in every lane.
    const VACANT: Self;
    /// The key folded to one word before mixing.
    fn fold(self) -> u128;
}

impl SlotKey for u128 {
    const VACANT: u128 = u128::MAX;
    fn fold(self) -> u128 {
        self
    }
}

impl SlotKey for (u128, u128) {
    const VACANT: (u128, u128) = (u128::MAX, 0);
    fn fold(self) -> u128 {
        self.0 ^ self.1.rotate_left(40)
    }
}

/// Numerators by packed monomial: an open-addressing table with linear
/// probing, made for this loop (one multiply to hash a key, one compare of
/// two words to find it; the general hash map costs several times that per
/// product of terms). Entries are never removed; sums that cancel stay as
/// zeros until the terms are taken out.
#[derive(Debug)]
struct KeyMap<K> {
    slots: Vec<(K, i128)>,
    len: usize,
}

/// Numerators by monomial (terms without trigonometric factor).
type MonoMap = KeyMap<u128>;
/// Numerators by monomial and trigonometric factor.
type WaveMap = KeyMap<(u128, u128)>;

impl<K> Default for KeyMap<K> {
    fn default() -> Self {
        KeyMap {
            slots: Vec::new(),
            len: 0,
        }
    }
}

impl<K: SlotKey> KeyMap<K> {
    fn len(&self) -> usize {
        self.len
    }

    /// The home slot of `m` in a table of `mask + 1` slots. The key is
    /// mixed (shift, multiply, shift) so that every lane reaches the low
    /// bits: the bits of a bare product see only the key's lower bits, and
    /// the lanes of higher-numbered symbols would then collide (measured:
    /// 25% slower averaging once two other names were declared first).
    fn index(m: K, mask: usize) -> usize {
        let m = m.fold();
        let mut x = (m as u64) ^ ((m >> 64) as u64).rotate_left(32);
        x ^= x >> 29;
        x = x.wrapping_mul(0xBF58_476D_1CE4_E5B9);
        x ^= x >> 32;
        x as usize & mask
    }

    /// The numerator of `m`, inserted as 0 when absent.
    fn slot(&mut self, m: K) -> &mut i128 {
        if (self.len + 1) * 2 > self.slots.len() {
            self.grow();
        }
        let mask = self.slots.len() - 1;
        let mut i = Self::index(m, mask);
        loop {
            let k = self.slots[i].0;
            if k == m {
                break;
            }
            if k == K::VACANT {
                self.slots[i].0 = m;
                self.len += 1;
                break;
            }
            i = (i + 1) & mask;
        }
        &mut self.slots[i].1
    }

    fn grow(&mut self) {
        let size = (self.slots.len() * 2).max(16);
        let old = std::mem::replace(&mut self.slots, vec![(K::VACANT, 0); size]);
        let mask = size - 1;
        for (m, n) in old.into_iter().filter(|(m, _)| *m != K::VACANT) {
            let mut i = Self::index(m, mask);
            while self.slots[i].0 != K::VACANT {
                i = (i + 1) & mask;
            }
            self.slots[i] = (m, n);
        }
    }

    fn iter(&self) -> impl Iterator<Item = (K, i128)> + '_ {
        self.slots.iter().copied().filter(|(m, _)| *m != K::VACANT)
    }

    fn values(&self) -> impl Iterator<Item = i128> + '_ {
        self.iter().map(|(_, n)| n)
    }

    fn values_mut(&mut self) -> impl Iterator<Item = &mut i128> + '_ {
        self.slots
            .iter_mut()
            .filter(|(m, _)| *m != K::VACANT)
            .map(|(_, n)| n)
    }

    /// The mean distance of the entries from their home slots (1 when
    /// every key sits at home).
    #[cfg(test)]
    fn mean_probe(&self) -> f64 {
        let mask = self.slots.len().saturating_sub(1);
        let total: usize = self
            .slots
            .iter()
            .enumerate()
            .filter(|(_, (m, _))| *m != K::VACANT)
            .map(|(i, (m, _))| (i.wrapping_sub(Self::index(*m, mask)) & mask) + 1)
            .sum();
        total as f64 / self.len.max(1) as f64
    }

    /// Empties the table, handing back its entries.
    fn take(&mut self) -> Vec<(K, i128)> {
        self.len = 0;
        let mut out = std::mem::take(&mut self.slots);
        out.retain(|(m, _)| *m != K::VACANT);
        out
    }
}

/// One sum of packed terms with a common time factor: numerators over
/// `denom`, by monomial (terms without trigonometric factor) and by
/// monomial and trigonometric factor.
#[derive(Debug)]
struct TimeSum {
    freq: i64,
    odd: bool,
    sines: bool,
    denom: i128,
    /// The last `d` that divided `denom`, with `denom / d`.
    last: (i128, i128),
    map: MonoMap,
    waves: WaveMap,
}

impl TimeSum {
    fn beat(&self) -> TimeFactor {
        beat_of(self.freq, self.odd)
    }

    /// The key of monomial `m` with factor `wave` in this sum.
    fn key(&self, m: u128, wave: PackedTrig) -> Key {
        key_of(m, wave.unpack(), &self.beat())
    }

    /// Number of terms held.
    fn held(&self) -> usize {
        self.map.len() + self.waves.len()
    }

    /// Every numerator.
    fn values(&self) -> impl Iterator<Item = i128> + '_ {
        self.map.values().chain(self.waves.values())
    }

    /// `self += m_a·row_n · b` times the factor `wave` (see
    /// [`TimeSum::add_row`]).
    fn add_wave_row(
        &mut self,
        ma: u128,
        wave: PackedTrig,
        row_n: i128,
        b: &[(u128, i64)],
        spill: &mut impl FnMut(Key, Q, bool),
    ) {
        let code = wave.code();
        for (mb, nb) in b {
            let v = row_n * (*nb as i128);
            let e = self.waves.slot((ma + mb, code));
            match e.checked_add(v) {
                Some(s) => *e = s,
                None => {
                    let c = Q::from_i128(v, self.denom);
                    spill(self.key(ma + mb, wave), c, self.sines);
                }
            }
        }
    }

    /// `self += m_a·row_n · b`: one row of a product, `row_n` the row's
    /// numerator times the route's scale (a word when `small`, so that each
    /// product is one widening multiply). Every product must fit 127 bits;
    /// a sum that would leave i128 takes the product apart, exactly.
    #[inline(always)]
    fn add_row(
        &mut self,
        ma: u128,
        row_n: i128,
        small: bool,
        b: &[(u128, i64)],
        spill: &mut impl FnMut(Key, Q, bool),
    ) {
        let mut add = |mb: &u128, v: i128| {
            let e = self.map.slot(ma + mb);
            match e.checked_add(v) {
                Some(s) => *e = s,
                None => {
                    let c = Q::from_i128(v, self.denom);
                    spill(self.key(ma + mb, PackedTrig::ONE), c, self.sines);
                }
            }
        };
        if small {
            let row_n = row_n as i64;
            for (mb, nb) in b {
                add(mb, (row_n as i128) * (*nb as i128));
            }
        } else {
            for (mb, nb) in b {
                add(mb, row_n * (*nb as i128));
            }
        }
    }

    /// `self += scale · a·b` times the factor `wave`, every product and
    /// sum checked (for products that may not fit 127 bits); what does not
    /// fit is spilled exactly.
    fn add_checked(
        &mut self,
        a: &[(u128, i64)],
        b: &[(u128, i64)],
        wave: PackedTrig,
        scale: i128,
        spill: &mut impl FnMut(Key, Q, bool),
    ) {
        for (ma, na) in a {
            for (mb, nb) in b {
                let m = ma + mb;
                let v = (*na as i128) * (*nb as i128);
                let added = v
                    .checked_mul(scale)
                    .is_some_and(|v| self.try_add(m, wave, v));
                if !added {
                    // Exact: v·scale/denom, through rationals.
                    let c = Q::from_i128(v, 1).mul(&Q::from_i128(scale, self.denom));
                    spill(self.key(m, wave), c, self.sines);
                }
            }
        }
    }

    /// `self += v · m` times the factor `wave`, unless the sum overflows
    /// (then nothing is added and the result is false).
    fn try_add(&mut self, m: u128, wave: PackedTrig, v: i128) -> bool {
        let e = if wave == PackedTrig::ONE {
            self.map.slot(m)
        } else {
            self.waves.slot((m, wave.code()))
        };
        match e.checked_add(v) {
            Some(s) => {
                *e = s;
                true
            }
            None => false,
        }
    }

    /// Multiplies every numerator by `f` (which must not overflow).
    fn rescale(&mut self, f: i128) {
        for n in self.map.values_mut() {
            *n *= f;
        }
        for n in self.waves.values_mut() {
            *n *= f;
        }
    }

    /// Empties the sum, handing every term to `spill`.
    fn spill_all(&mut self, spill: &mut impl FnMut(Key, Q, bool)) {
        for (m, n) in self.map.take() {
            spill(
                self.key(m, PackedTrig::ONE),
                Q::from_i128(n, self.denom),
                self.sines,
            );
        }
        for ((m, w), n) in self.waves.take() {
            let c = Q::from_i128(n, self.denom);
            spill(self.key(m, PackedTrig::from_code(w)), c, self.sines);
        }
    }

    /// The nonzero terms: monomial, factor, numerator.
    fn take_terms(&mut self) -> impl Iterator<Item = (u128, PackedTrig, i128)> {
        let plain = self
            .map
            .take()
            .into_iter()
            .map(|(m, n)| (m, PackedTrig::ONE, n));
        let waves = self
            .waves
            .take()
            .into_iter()
            .map(|((m, w), n)| (m, PackedTrig::from_code(w), n));
        plain.chain(waves).filter(|t| t.2 != 0)
    }
}

/// Terms of an expression: keys and coefficients.
pub type Terms = Vec<(Key, Q)>;

/// A drained term: monomial, trigonometric factor, time factor kind (0:
/// 1, 1: cos, 2: sin), frequency, numerator, denominator.
type Drained = (u128, PackedTrig, u8, i64, i128, i128);

/// The trigonometric factors of packed terms in normal form, each made
/// once.
#[derive(Default)]
struct WaveCache(FxHashMap<PackedTrig, TrigFactor>);

impl WaveCache {
    fn get(&mut self, w: PackedTrig) -> TrigFactor {
        if w == PackedTrig::ONE {
            return TrigFactor::One;
        }
        self.0.entry(w).or_insert_with(|| w.unpack()).clone()
    }
}

/// A sum of products of packed parts, by time factor of the result.
#[derive(Debug, Default)]
pub struct PackedSum {
    targets: Vec<TimeSum>,
    /// TimeSum by (frequency, kind) for small frequencies: kind 0 for
    /// `cos`/1, 1 for `sin`, 2 for sine constants; `usize::MAX` for none.
    small: Vec<[usize; 3]>,
    /// TimeSum by (frequency, kind) for the others.
    index: FxHashMap<(i64, u8), usize>,
}

impl PackedSum {
    /// Number of terms held (before cancellation).
    pub fn held(&self) -> usize {
        self.targets.iter().map(TimeSum::held).sum()
    }

    /// The target of `r` whose denominator is a multiple of `d`, created
    /// or rescaled as needed; what cannot be rescaled in machine integers
    /// is spilled as exact terms.
    fn target(&mut self, r: &ProductRoute, d: i128, spill: &mut impl FnMut(Key, Q, bool)) -> usize {
        let kind = if r.sines { 2 } else { r.odd as u8 };
        let found = match usize::try_from(r.freq) {
            Ok(f) if f < SMALL_FREQ => self
                .small
                .get(f)
                .map(|k| k[kind as usize])
                .filter(|i| *i != usize::MAX),
            _ => self.index.get(&(r.freq, kind)).copied(),
        };
        let i = match found {
            Some(i) => i,
            None => {
                self.targets.push(TimeSum {
                    freq: r.freq,
                    odd: r.odd,
                    sines: r.sines,
                    denom: d,
                    last: (d, 1),
                    map: MonoMap::default(),
                    waves: WaveMap::default(),
                });
                let i = self.targets.len() - 1;
                match usize::try_from(r.freq) {
                    Ok(f) if f < SMALL_FREQ => {
                        if self.small.len() <= f {
                            self.small.resize(f + 1, [usize::MAX; 3]);
                        }
                        self.small[f][kind as usize] = i;
                    }
                    _ => {
                        self.index.insert((r.freq, kind), i);
                    }
                }
                return i;
            }
        };
        let t = &mut self.targets[i];
        if t.last.0 == d {
            return i;
        }
        if let Some(quotient) = exact_quotient(t.denom, d) {
            t.last = (d, quotient);
            return i;
        }
        // Rescale in place when every numerator times the factor fits.
        let max = t.values().map(|n| n.unsigned_abs()).max().unwrap_or(0);
        let factor = lcm_i128(t.denom, d)
            .map(|l| (l, l / t.denom))
            .filter(|(_, f)| {
                max.checked_mul(f.unsigned_abs())
                    .is_some_and(|m| m <= i128::MAX as u128)
            });
        match factor {
            Some((l, f)) => {
                t.rescale(f);
                t.denom = l;
                t.last = (d, l / d);
            }
            None => {
                t.spill_all(spill);
                t.denom = d;
                t.last = (d, 1);
            }
        }
        i
    }

    /// `self += ±a·b` along `routes` (see [`routes`]); with trigonometric
    /// factors, pair of groups by pair of groups (see [`wave_routes`]).
    /// Returns false, doing nothing that changes the sum, when a factor
    /// does not fit machine integers: the caller then multiplies the
    /// general way. Products that overflow are spilled exactly. Every 64
    /// rows, `check` is given the number of terms held and may stop the
    /// product with an error (budgets, interruption: the caller's
    /// business); the sum is then incomplete and must be dropped.
    pub fn add_product<E>(
        &mut self,
        a: &Packed,
        b: &Packed,
        negate: bool,
        routes: &[ProductRoute],
        spill: &mut impl FnMut(Key, Q, bool),
        check: &mut impl FnMut(usize) -> Result<(), E>,
    ) -> Result<bool, E> {
        // With trigonometric factors, their products (halves) join the
        // routes' denominators, and their linear forms must fit the lanes.
        let waves = a.waves || b.waves;
        if waves && !Packed::lanes_fit(a, b) {
            return Ok(false);
        }
        let q_wave: i128 = if waves { 2 } else { 1 };
        // The targets of every route first (a later one may rescale an
        // earlier one), then the scales.
        let mut plan = [(0usize, 0i128, 0i128); 2];
        for (slot, r) in plan.iter_mut().zip(routes) {
            let Some(d) = (a.denom as i128)
                .checked_mul(b.denom as i128)
                .and_then(|d| d.checked_mul(q_wave))
                .and_then(|d| d.checked_mul(r.q as i128))
            else {
                return Ok(false);
            };
            *slot = (self.target(r, d, spill), r.p as i128, d);
        }
        let mut scales = [(0usize, 0i128); 2];
        for (slot, &(ti, p, d)) in scales.iter_mut().zip(&plan[..routes.len()]) {
            let t = &self.targets[ti];
            let quotient = if t.last.0 == d {
                t.last.1
            } else if let Some(quotient) = exact_quotient(t.denom, d) {
                // A later route rescaled this target.
                quotient
            } else {
                // A later route spilled and restarted this target.
                return Ok(false);
            };
            let Some(scale) = p.checked_mul(quotient) else {
                return Ok(false);
            };
            let Some(scale) = (if negate {
                scale.checked_neg()
            } else {
                Some(scale)
            }) else {
                return Ok(false);
            };
            *slot = (ti, scale);
        }
        // When no product of numerators times the scale can overflow, the
        // loop multiplies unchecked (only the sums are checked).
        let bits = |n: u128| 128 - n.leading_zeros();
        let product_bits = bits(a.max_abs() as u128) + bits(b.max_abs() as u128);
        let n = routes.len();
        // Rows are checked only in products of 64 rows or more.
        let mut others = [0usize; 2];
        if a.terms.len() >= 64 {
            for (o, &(ti, _)) in others.iter_mut().zip(&scales[..n]) {
                *o = self.held() - self.targets[ti].held();
            }
        }
        let mut rows = 0usize;
        if !waves {
            for (k, &(ti, scale)) in scales[..n].iter().enumerate() {
                let t = &mut self.targets[ti];
                if product_bits + bits(scale.unsigned_abs()) > 126 {
                    // Large coefficients: every product checked, and the
                    // budget every 64 rows as below.
                    for chunk in a.terms.chunks(64) {
                        rows += chunk.len();
                        if rows >= 64 {
                            rows = 0;
                            check(others[k] + t.held())?;
                        }
                        t.add_checked(chunk, &b.terms, PackedTrig::ONE, scale, spill);
                    }
                    continue;
                }
                let small = bits(a.max_abs() as u128) + bits(scale.unsigned_abs()) <= 63;
                for (row, (ma, na)) in a.terms.iter().enumerate() {
                    if row % 64 == 63 {
                        check(others[k] + t.held())?;
                    }
                    t.add_row(*ma, *na as i128 * scale, small, &b.terms, spill);
                }
            }
            return Ok(true);
        }
        self.add_groups(a, b, &scales[..n], others, spill, check)?;
        Ok(true)
    }

    /// The products of parts with trigonometric factors, pair of groups by
    /// pair of groups (see [`wave_routes`]), into the targets of `scales`
    /// (target and scale of each time route; `others`: the terms held
    /// elsewhere, for `check`, see [`PackedSum::add_product`]). The parts'
    /// forms must fit the lanes (see [`Packed::lanes_fit`]).
    fn add_groups<E>(
        &mut self,
        a: &Packed,
        b: &Packed,
        scales: &[(usize, i128)],
        others: [usize; 2],
        spill: &mut impl FnMut(Key, Q, bool),
        check: &mut impl FnMut(usize) -> Result<(), E>,
    ) -> Result<(), E> {
        let bits = |n: u128| 128 - n.leading_zeros();
        let product_bits = bits(a.max_abs() as u128) + bits(b.max_abs() as u128);
        let mut rows = 0usize;
        for (wa, ga) in a.groups() {
            for (wb, gb) in b.groups() {
                let factors = wave_routes(wa, wb);
                for (k, &(ti, scale)) in scales.iter().enumerate() {
                    let t = &mut self.targets[ti];
                    for &(w, pw) in factors.as_slice() {
                        // The factor's p (its halves are in the denominator).
                        let Some(scale) = scale.checked_mul(pw as i128) else {
                            // Exact, term by term, through rationals.
                            let f = Q::from_i128(scale, t.denom).mul(&Q::int(pw));
                            for (ma, na) in ga {
                                for (mb, nb) in gb {
                                    let v = Q::from_i128(*na as i128 * *nb as i128, 1);
                                    spill(t.key(ma + mb, w), v.mul(&f), t.sines);
                                }
                            }
                            continue;
                        };
                        if product_bits + bits(scale.unsigned_abs()) > 126 {
                            for chunk in ga.chunks(64) {
                                rows += chunk.len();
                                if rows >= 64 {
                                    rows = 0;
                                    check(others[k] + t.held())?;
                                }
                                t.add_checked(chunk, gb, w, scale, spill);
                            }
                            continue;
                        }
                        let small = bits(a.max_abs() as u128) + bits(scale.unsigned_abs()) <= 63;
                        for (ma, na) in ga {
                            rows += 1;
                            if rows.is_multiple_of(64) {
                                check(others[k] + t.held())?;
                            }
                            if w == PackedTrig::ONE {
                                t.add_row(*ma, *na as i128 * scale, small, gb, spill);
                            } else {
                                t.add_wave_row(*ma, w, *na as i128 * scale, gb, spill);
                            }
                        }
                    }
                }
            }
        }
        Ok(())
    }

    /// The common case of [`PackedSum::add_product`], with its set-up cut
    /// to a few instructions: a product of fewer than 64 rows of parts
    /// without trigonometric factors in the state, without sine constants,
    /// whose routes all go to existing sums with denominators
    /// that are multiples of its own, and whose products of terms fit 127
    /// bits (a sum that would leave i128 takes its product apart, exactly,
    /// as in `add_product`). Returns the routes taken (0 when every term
    /// was cut), or `None` having added nothing: the caller then takes the
    /// general path.
    #[inline]
    pub fn add_small_product(
        &mut self,
        a: &Packed,
        b: &Packed,
        negate: bool,
        cut: PackedKeep,
        spill: &mut impl FnMut(Key, Q, bool),
    ) -> Option<usize> {
        if a.terms.len() >= 64 || a.waves || b.waves {
            return None;
        }
        // The routes (see [`routes`]) as (frequency, kind, p) over the
        // common q = 2. Written out rather than calling `routes`, whose
        // checked arithmetic and route list made averaging 8% slower at
        // order 6; `split_products_agree_with_the_product` checks that both
        // paths give the product.
        let mut plan = [(0i64, 0usize, 0i64); 2];
        let mut len = 0;
        let (fa, fb) = (a.freq, b.freq);
        let mut push = |f: i64, odd: bool, p: i64| -> bool {
            let (f, p) = if f < 0 {
                (-f, if odd { -p } else { p })
            } else {
                (f, p)
            };
            if odd && f == 0 {
                return true;
            }
            if cut.cap.is_some_and(|c| f > c) {
                // Dropped, or a sine constant: the general path.
                return !(cut.sines && odd);
            }
            plan[len] = (f, odd as usize, p);
            len += 1;
            true
        };
        // Frequencies are far below i64::MAX / 2 here: packing keeps them
        // small (see `Packed::pack`); the general path checks them.
        if fa.unsigned_abs() >= 1 << 40 || fb.unsigned_abs() >= 1 << 40 {
            return None;
        }
        let ok = if fa == 0 {
            push(fb, b.odd, 2)
        } else if fb == 0 {
            push(fa, a.odd, 2)
        } else {
            let (sum, diff) = (fa + fb, fa - fb);
            match (a.odd, b.odd) {
                (false, false) => push(diff, false, 1) && push(sum, false, 1),
                (true, true) => push(diff, false, 1) && push(sum, false, -1),
                (true, false) => push(sum, true, 1) && push(diff, true, 1),
                (false, true) => push(sum, true, 1) && push(-diff, true, 1),
            }
        };
        if !ok {
            return None;
        }
        let d = (a.denom as i128)
            .checked_mul(b.denom as i128)?
            .checked_mul(2)?;
        let bits = |n: u128| 128 - n.leading_zeros();
        let (bits_a, bits_b) = (bits(a.max_abs() as u128), bits(b.max_abs() as u128));
        // Every route's target and scale first: nothing is added unless all
        // are ready.
        let mut scales = [(0usize, 0i128); 2];
        for (slot, &(f, kind, p)) in scales.iter_mut().zip(&plan[..len]) {
            let ti = *self.small.get(f as usize)?.get(kind)?;
            let t = self.targets.get_mut(ti)?;
            if t.last.0 != d {
                t.last = (d, exact_quotient(t.denom, d)?);
            }
            let scale = (p as i128).checked_mul(t.last.1)?;
            let scale = if negate { scale.checked_neg()? } else { scale };
            if bits_a + bits_b + bits(scale.unsigned_abs()) > 126 {
                return None;
            }
            *slot = (ti, scale);
        }
        for &(ti, scale) in &scales[..len] {
            let t = &mut self.targets[ti];
            let small = bits_a + bits(scale.unsigned_abs()) <= 63;
            for (ma, na) in &a.terms {
                t.add_row(*ma, *na as i128 * scale, small, &b.terms, spill);
            }
        }
        Some(len)
    }

    /// The kept sums as packed parts sorted by frequency, cosines first
    /// (the order of [`super::expr::Expr::into_by_frequency`]), without
    /// the sine constants; `None` when a numerator or denominator does not
    /// fit a word even after reduction (nothing is consumed then).
    pub fn to_parts(&self) -> Option<Vec<Packed>> {
        let mut out = Vec::with_capacity(self.targets.len());
        for t in self.targets.iter().filter(|t| !t.sines) {
            let fits = |n: i128| i64::try_from(n).is_ok();
            let g = if fits(t.denom) && t.values().all(fits) {
                1
            } else {
                t.values()
                    .fold(t.denom.unsigned_abs(), |g, n| gcd_u128(g, n.unsigned_abs()))
                    as i128
            };
            let denom = i64::try_from(t.denom / g).ok()?;
            let reduce = |n: i128| i64::try_from(if g == 1 { n } else { n / g }).ok();
            if t.waves.len() == 0 {
                let mut terms = Vec::with_capacity(t.map.len());
                for (m, n) in t.map.iter() {
                    if n != 0 {
                        terms.push((m, reduce(n)?));
                    }
                }
                if !terms.is_empty() {
                    out.push(Packed::new(t.freq, t.odd, denom, terms));
                }
                continue;
            }
            let mut terms: Vec<WaveTerm> = Vec::with_capacity(t.held());
            for (m, n) in t.map.iter() {
                if n != 0 {
                    terms.push((PackedTrig::ONE, m, reduce(n)?));
                }
            }
            for ((m, w), n) in t.waves.iter() {
                if n != 0 {
                    terms.push((PackedTrig::from_code(w), m, reduce(n)?));
                }
            }
            if !terms.is_empty() {
                out.push(Packed::from_wave_terms(t.freq, t.odd, denom, terms, false)?);
            }
        }
        out.sort_unstable_by_key(|p| (p.freq, p.odd));
        common_denominator_of_parts(&mut out);
        Some(out)
    }

    /// `self += a` along route `r` (see [`PackedSum::add_terms`]), group
    /// by group.
    pub fn add_packed(
        &mut self,
        a: &Packed,
        r: &ProductRoute,
        spill: &mut impl FnMut(Key, Q, bool),
    ) -> bool {
        if (a.denom as i128).checked_mul(r.q as i128).is_none() {
            return false;
        }
        for (w, g) in a.groups() {
            // Cannot decline: the denominator fits (checked above).
            self.add_terms(g, a.denom, r, w, spill);
        }
        true
    }

    /// `self += Σ n/denom · m·W` with each term's power of `t` replaced by
    /// the `pieces` of its exponent (each piece: a power of `t`, a time
    /// factor and a factor; `∫_0^t` of a part is built this way). False,
    /// adding nothing, when `pieces` declines an exponent or a piece's
    /// power leaves the packed range.
    pub fn add_time_pieces(
        &mut self,
        a: &Packed,
        pieces: &mut impl FnMut(i32) -> Option<Vec<TimePiece>>,
        spill: &mut impl FnMut(Key, Q, bool),
    ) -> bool {
        debug_assert_eq!(Sym::T.0, 0);
        let mut table: SmallVec<[(i32, Vec<TimePiece>); 4]> = SmallVec::new();
        for (m, _) in &a.terms {
            let p = (m & 0xff) as i32;
            if table.iter().any(|(q, _)| *q == p) {
                continue;
            }
            let Some(list) = pieces(p) else {
                return false;
            };
            if list
                .iter()
                .any(|pc| !(0..=MAX_EXP).contains(&pc.power) || pc.den <= 0)
            {
                return false;
            }
            table.push((p, list));
        }
        // The terms of each piece, gathered per group so that each piece
        // finds its sum once.
        let mut gathered: Vec<Vec<Vec<(u128, i64)>>> = table
            .iter()
            .map(|(_, list)| vec![Vec::new(); list.len()])
            .collect();
        for (w, g) in a.groups() {
            for (m, n) in g {
                let p = (m & 0xff) as i32;
                let Some(ti) = table.iter().position(|(q, _)| *q == p) else {
                    continue;
                };
                let base = m & !0xff;
                for (pc, out) in table[ti].1.iter().zip(gathered[ti].iter_mut()) {
                    out.push((base | pc.power as u128, *n));
                }
            }
            for ((_, list), outs) in table.iter().zip(gathered.iter_mut()) {
                for (pc, out) in list.iter().zip(outs.iter_mut()) {
                    if out.is_empty() {
                        continue;
                    }
                    let r = ProductRoute::new(pc.freq, pc.odd, false, pc.num, pc.den);
                    // Cannot decline: `denom·den` fits 128 bits.
                    self.add_terms(out, a.denom, &r, w, spill);
                    out.clear();
                }
            }
        }
        true
    }

    /// `self += (p/q)·Σ n/denom · m` times the factor `wave`, along route
    /// `r` (`denom`, `q` > 0). False, doing nothing, when the route's
    /// denominator does not fit machine integers; sums that overflow are
    /// spilled.
    pub fn add_terms(
        &mut self,
        terms: &[(u128, i64)],
        denom: i64,
        r: &ProductRoute,
        wave: PackedTrig,
        spill: &mut impl FnMut(Key, Q, bool),
    ) -> bool {
        let Some(d) = (denom as i128).checked_mul(r.q as i128) else {
            return false;
        };
        let ti = self.target(r, d, spill);
        let t = &mut self.targets[ti];
        // The target's denominator is a multiple of `d` (see `target`).
        let scale = exact_quotient(t.denom, d).and_then(|q| (r.p as i128).checked_mul(q));
        let Some(scale) = scale else {
            let f = Q::from_i128(r.p as i128, d);
            for (m, n) in terms {
                spill(t.key(*m, wave), Q::int(*n).mul(&f), t.sines);
            }
            return true;
        };
        for (m, n) in terms {
            let added = (*n as i128)
                .checked_mul(scale)
                .is_some_and(|v| t.try_add(*m, wave, v));
            if !added {
                let c = Q::from_i128(*n as i128, 1).mul(&Q::from_i128(scale, t.denom));
                spill(t.key(*m, wave), c, t.sines);
            }
        }
        true
    }

    /// The sine constants, sorted by key (see [`PackedSum::into_sorted`]).
    pub fn into_sorted_sines(mut self) -> Terms {
        self.targets.retain(|t| t.sines);
        self.into_sorted().1
    }

    /// The nonzero terms as (kept, sine constants), each sorted by key:
    /// the order of [`Key`] (monomial, then trigonometric factor, then
    /// time factor) computed on the packed form, which is much cheaper
    /// than comparing keys.
    pub fn into_sorted(self) -> (Terms, Terms) {
        let mut kept: Vec<Drained> = Vec::new();
        let mut sines: Vec<Drained> = Vec::new();
        for mut t in self.targets {
            let kind = if t.freq == 0 {
                0
            } else if t.odd {
                2
            } else {
                1
            };
            let (freq, denom) = (t.freq, t.denom);
            let out = if t.sines { &mut sines } else { &mut kept };
            out.extend(t.take_terms().map(|(m, w, n)| (m, w, kind, freq, n, denom)));
        }
        let mut cache = WaveCache::default();
        let mut build = |mut v: Vec<Drained>| -> Terms {
            v.sort_unstable_by(|a, b| {
                cmp_mono(a.0, b.0)
                    .then_with(|| cmp_wave(a.1, b.1))
                    .then(a.2.cmp(&b.2))
                    .then(a.3.cmp(&b.3))
            });
            v.into_iter()
                .map(|(m, w, kind, freq, n, d)| {
                    (
                        key_of(m, cache.get(w), &beat_of(freq, kind == 2)),
                        Q::from_i128(n, d),
                    )
                })
                .collect()
        };
        let kept = build(kept);
        (kept, build(sines))
    }

    /// Hands every nonzero term to `out` as (key, coefficient, sines).
    pub fn drain(self, out: &mut impl FnMut(Key, Q, bool)) {
        let mut cache = WaveCache::default();
        for mut t in self.targets {
            let (beat, denom, sines) = (t.beat(), t.denom, t.sines);
            for (m, w, n) in t.take_terms() {
                out(
                    key_of(m, cache.get(w), &beat),
                    Q::from_i128(n, denom),
                    sines,
                );
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::core::expr::{Keep, SumBuilder};

    #[test]
    fn products_of_parts_with_denominators_near_a_word_stay_exact() {
        // Denominators just under 2^63: the routes' common denominator (the
        // product of two of them times 2) sits near the top of i128, the
        // sums' denominators cannot take the lcm of two such routes, and
        // the scales of small products are near their limit; repeated
        // products, some negated, into the same sums.
        let (x, y) = (Expr::sym(Sym::new("qx")), Expr::sym(Sym::new("qy")));
        let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &[]).expect("cos t");
        let sin_2t = Expr::sin_of(&Expr::sym(Sym::T).scale(&Q::int(2)), &[]).expect("sin 2t");
        let d1 = Q::Small(1, i64::MAX - 24);
        let d2 = Q::Small(3, i64::MAX - 26);
        let a = x.mul(&cos_t).expect("a").scale(&d1).add(&y.scale(&d2));
        let b = y
            .mul(&sin_2t)
            .expect("b")
            .scale(&d2)
            .add(&x.mul(&cos_t).expect("x cos t").scale(&d1))
            .add(&x.scale(&Q::Small(2, 5)));
        let (pa, pb) = (a.clone().into_by_frequency(), b.clone().into_by_frequency());
        assert!(pa.iter().chain(&pb).all(|p| p.is_packed()));
        let mut acc = SumBuilder::new();
        for negate in [false, false, true, false] {
            acc.add_product_harmonics(&pa, &pb, negate, Keep::All)
                .expect("product");
        }
        let expected = a.mul(&b).expect("ab").scale(&Q::int(2));
        assert_eq!(acc.finish(), expected);
    }

    #[test]
    fn sums_beyond_machine_integers_stay_exact() {
        let (x, y) = (Expr::sym(Sym::new("px")), Expr::sym(Sym::new("py")));
        let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &[]).expect("cos t");
        let big = Q::int(i64::MAX / 2);
        let a = x.mul(&cos_t).expect("product").scale(&big);
        let b = y
            .mul(&cos_t)
            .expect("product")
            .scale(&big)
            .add(&y.scale(&Q::Small(1, 3)));
        let c = x.scale(&Q::Small(1, 7));
        let (pa, pb, pc) = (
            a.clone().into_by_frequency(),
            b.clone().into_by_frequency(),
            c.clone().into_by_frequency(),
        );
        assert!(pa.iter().chain(&pb).chain(&pc).all(|p| p.is_packed()));
        // 40 products of about 2^124 each overflow an i128 sum; then a
        // denominator 7 asks to rescale the sums that hold them.
        let mut acc = SumBuilder::new();
        for _ in 0..40 {
            acc.add_product_harmonics(&pa, &pb, false, Keep::All)
                .expect("product");
        }
        acc.add_product_harmonics(&pc, &pb, true, Keep::All)
            .expect("product");
        let expected = a
            .mul(&b)
            .expect("ab")
            .scale(&Q::int(40))
            .sub(&c.mul(&b).expect("cb"));
        assert!(expected.max_coeff_bits() > 127);
        assert_eq!(acc.finish(), expected);
    }

    /// A linear form from `(symbol, coefficient)` pairs.
    fn lin(pairs: &[(u32, i64)]) -> LinearForm {
        LinearForm(
            pairs
                .iter()
                .filter(|(_, c)| *c != 0)
                .map(|(s, c)| (Sym(*s), Q::int(*c)))
                .collect(),
        )
    }

    #[test]
    fn packed_order_of_linear_forms_is_the_order_of_lin() {
        // Every form in slots 2, 3 and 15 with coefficients from -2 to 2,
        // as cosines and sines.
        let mut all = Vec::new();
        for code in 0..125i64 {
            let c = [code % 5 - 2, code / 5 % 5 - 2, code / 25 - 2];
            let l = lin(&[(2, c[0]), (3, c[1]), (15, c[2])]);
            all.push(TrigFactor::Cos(l.clone()));
            all.push(TrigFactor::Sin(l));
        }
        all.push(TrigFactor::One);
        for a in &all {
            let pa = PackedTrig::pack(a).expect("fits");
            assert_eq!(&pa.unpack(), a);
            for b in &all {
                let pb = PackedTrig::pack(b).expect("fits");
                assert_eq!(cmp_wave(pa, pb), a.cmp(b), "{a:?} vs {b:?}");
            }
        }
    }

    #[test]
    fn linear_forms_pack_only_when_they_fit_signed_bytes() {
        assert!(PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 127), (15, -127)]))).is_some());
        assert!(PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 128)]))).is_none());
        assert!(PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1), (4, -128)]))).is_none());
        assert!(PackedTrig::pack(&TrigFactor::Cos(lin(&[(16, 1)]))).is_none());
        let half = LinearForm(vec![(Sym(3), Q::Small(1, 2))].into());
        assert!(PackedTrig::pack(&TrigFactor::Cos(half)).is_none());
        // Products whose forms could leave the lanes (100 + 100 > 127)
        // decline; the general path takes them, exactly.
        let st = [Sym::new("lq")];
        let e = Expr::cos_of(&Expr::sym(st[0]).scale(&Q::int(100)), &st)
            .expect("cos")
            .mul(&Expr::sym(st[0]))
            .expect("product");
        let parts = e.clone().into_by_frequency();
        let packed = parts[0].packed().expect("packed");
        assert!(!Packed::lanes_fit(packed, packed));
        let mut acc = SumBuilder::new();
        acc.add_product_harmonics(&parts, &parts, false, Keep::All)
            .expect("product");
        assert_eq!(acc.finish(), e.mul(&e).expect("square"));
    }

    #[test]
    fn lanes_add_and_negate_one_by_one() {
        let mut x = 0x2545_f491_4f6c_dd1du64;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            x
        };
        for _ in 0..2000 {
            // Coefficients from -63 to 63, some lanes zero.
            let mut lanes = [[0i8; 16]; 2];
            for l in lanes.iter_mut() {
                for c in l.iter_mut() {
                    let r = next();
                    *c = if r % 3 == 0 { 0 } else { (r % 127) as i8 - 63 };
                }
            }
            let pack = |l: &[i8; 16]| {
                l.iter()
                    .enumerate()
                    .fold(0u128, |acc, (i, c)| acc | u128::from(*c as u8) << (8 * i))
            };
            let (a, b) = (pack(&lanes[0]), pack(&lanes[1]));
            for negate in [false, true] {
                let sum = add_lanes(a, b, negate);
                for (i, (p, q)) in lanes[0].iter().zip(&lanes[1]).enumerate() {
                    let want = if negate { p - q } else { p + q };
                    assert_eq!(lane(sum, 8 * i as u32), want);
                }
            }
            let n = negate_lanes(a);
            for (i, c) in lanes[0].iter().enumerate() {
                assert_eq!(lane(n, 8 * i as u32), -c);
            }
        }
    }

    #[test]
    fn products_of_waves_follow_product_to_sum() {
        // cos(q + r)·sin(2q − r) = (sin(3q) − sin(−q + 2r))/2
        //                       = (sin(3q) + sin(q − 2r))/2.
        let a = PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1), (4, 1)]))).expect("a");
        let b = PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 2), (4, -1)]))).expect("b");
        let got: Vec<(TrigFactor, i64)> = wave_routes(a, b)
            .as_slice()
            .iter()
            .map(|(w, p)| (w.unpack(), *p))
            .collect();
        assert_eq!(
            got,
            vec![
                (TrigFactor::Sin(lin(&[(3, 3)])), 1),
                (TrigFactor::Sin(lin(&[(3, 1), (4, -2)])), 1),
            ]
        );
        // sin(q)·sin(q) = (1 − cos(2q))/2; sin(q)·cos(q) = sin(2q)/2.
        let s = PackedTrig::pack(&TrigFactor::Sin(lin(&[(3, 1)]))).expect("s");
        let c = PackedTrig::pack(&TrigFactor::Cos(lin(&[(3, 1)]))).expect("c");
        let ss: Vec<(PackedTrig, i64)> = wave_routes(s, s).as_slice().to_vec();
        assert_eq!(ss[0], (PackedTrig::ONE, 1));
        assert_eq!(ss[1].1, -1);
        assert_eq!(ss[1].0.unpack(), TrigFactor::Cos(lin(&[(3, 2)])));
        let sc: Vec<(PackedTrig, i64)> = wave_routes(s, c).as_slice().to_vec();
        assert_eq!(sc.len(), 1);
        assert_eq!(
            (sc[0].0.unpack(), sc[0].1),
            (TrigFactor::Sin(lin(&[(3, 2)])), 1)
        );
    }

    #[test]
    fn derivatives_of_trigonometric_parts_agree_with_the_normal_form() {
        let st = [Sym::new("wq"), Sym::new("wp")];
        let (q, p) = (Expr::sym(st[0]), Expr::sym(st[1]));
        let arg = q.scale(&Q::int(2)).sub(&p);
        let cos_t = Expr::cos_of(&Expr::sym(Sym::T), &st).expect("cos t");
        let e = Expr::sin_of(&arg, &st)
            .expect("sin")
            .mul(&p.mul(&p).expect("p^2"))
            .expect("product")
            .add(&Expr::cos_of(&q, &st).expect("cos").scale(&Q::Small(3, 7)))
            .add(&q.mul(&p).expect("qp").mul(&cos_t).expect("qp cos t"))
            .add(
                &Expr::cos_of(&arg, &st)
                    .expect("cos")
                    .mul(&q)
                    .expect("q cos")
                    .mul(&cos_t)
                    .expect("with cos t"),
            );
        let parts = e.clone().into_by_frequency();
        assert!(parts.iter().all(|p| p.is_packed()));
        for s in [st[0], st[1], Sym::new("wz")] {
            let want = e.pd(s);
            let mut got = Expr::zero();
            for part in &parts {
                if let Some(d) = part.derivative(s) {
                    assert!(d.is_packed());
                    got = got.add(d.expr());
                }
            }
            assert_eq!(got, want, "d/d{}", s.name());
        }
    }

    /// `∫_0^t` of packed parts with powers of `t`, several frequencies,
    /// sines and cosines, trigonometric factors in the state and fractions,
    /// built packed, equals the normal form's integral (integration by
    /// parts on `t^p cos(h t)` and `t^p sin(h t)`, minus the value at 0).
    #[test]
    fn packed_time_integrals_agree_with_the_normal_form() {
        let st = [Sym::new("iq"), Sym::new("ip")];
        let (q, p, t) = (Expr::sym(st[0]), Expr::sym(st[1]), Expr::sym(Sym::T));
        let time = |k: i64, sin: bool| {
            let arg = t.scale(&Q::int(k));
            if sin {
                Expr::sin_of(&arg, &st).expect("sin")
            } else {
                Expr::cos_of(&arg, &st).expect("cos")
            }
        };
        let wave = Expr::cos_of(&q.sub(&p.scale(&Q::int(2))), &st).expect("cos");
        let mut checked = 0;
        for k in 0..4i64 {
            for sin in [false, true] {
                let factor = if k == 0 { Expr::int(1) } else { time(k, sin) };
                let e = q
                    .mul(&t.pow(3).expect("t^3"))
                    .expect("q t^3")
                    .scale(&Q::Small(5, 3))
                    .add(&p.mul(&p).expect("p^2").mul(&t).expect("p^2 t"))
                    .add(&wave.mul(&t.pow(2).expect("t^2")).expect("wave t^2"))
                    .add(&wave.mul(&q).expect("q wave").scale(&Q::Small(-2, 7)))
                    .add(&Expr::int(4))
                    .mul(&factor)
                    .expect("with time factor");
                let want = e.integral_from_zero().expect("normal form");
                let mut acc = SumBuilder::new();
                for part in e.clone().into_by_frequency() {
                    assert!(part.is_packed(), "{e}");
                    acc.add_integral_from_zero(&part).expect("packed");
                }
                assert_eq!(acc.finish(), want, "integral of {e}");
                checked += 1;
            }
        }
        assert_eq!(checked, 8);
    }

    #[test]
    fn sorting_by_packed_keys_gives_the_order_of_keys() {
        // Terms with monomials, trigonometric factors and time factors
        // drawn from small sets (with repeats), in a scrambled order.
        let monos: Vec<Monomial> = [
            vec![],
            vec![(0, 1)],
            vec![(2, 1)],
            vec![(0, 2), (3, 1)],
            vec![(3, 2), (15, 1)],
        ]
        .into_iter()
        .map(|p| Monomial(p.into_iter().map(|(s, e)| (Sym(s), e)).collect()))
        .collect();
        let waves = [
            TrigFactor::One,
            TrigFactor::Cos(lin(&[(2, 1)])),
            TrigFactor::Sin(lin(&[(2, 1), (3, -2)])),
            TrigFactor::Cos(lin(&[(3, 1)])),
        ];
        let beats = [
            TimeFactor::One,
            TimeFactor::Cos(Q::int(1)),
            TimeFactor::Sin(Q::int(1)),
            TimeFactor::Cos(Q::int(3)),
        ];
        let mut terms = Vec::new();
        let mut x = 7u64;
        for i in 0..200u64 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let pick = |n: usize, shift: u32| (x >> shift) as usize % n;
            let key = Key {
                mono: monos[pick(monos.len(), 20)].clone(),
                exp: LinearForm::default(),
                wave: waves[pick(waves.len(), 30)].clone(),
                beat: beats[pick(beats.len(), 40)].clone(),
            };
            terms.push((key, Q::int(i as i64 + 1)));
        }
        let mut want = terms.clone();
        want.sort_by(|a, b| a.0.cmp(&b.0));
        let mut got = terms.clone();
        sort_terms(&mut got);
        let keys = |v: &[(Key, Q)]| v.iter().map(|(k, _)| k.clone()).collect::<Vec<_>>();
        assert_eq!(keys(&got), keys(&want));
        assert_eq!(got.len(), terms.len());
        // A key that does not pack (a rational frequency): the direct sort.
        let mut mixed = terms;
        mixed[17].0.beat = TimeFactor::Sin(Q::Small(1, 2));
        let mut want = mixed.clone();
        want.sort_by(|a, b| a.0.cmp(&b.0));
        sort_terms(&mut mixed);
        assert_eq!(keys(&mixed), keys(&want));
    }

    #[test]
    fn packed_order_is_the_order_of_monomials() {
        // Every monomial in slots 0, 1, 2 and 15 with exponents up to 2.
        let mut all = Vec::new();
        for code in 0..81u32 {
            let e = [code % 3, code / 3 % 3, code / 9 % 3, code / 27 % 3];
            let mut pairs = Vec::new();
            for (slot, e) in [0u32, 1, 2, 15].into_iter().zip(e) {
                if e > 0 {
                    pairs.push((Sym(slot), e as i32));
                }
            }
            all.push(Monomial(SmallVec::from_vec(pairs)));
        }
        for a in &all {
            for b in &all {
                let (pa, pb) = (pack_mono(a).expect("fits"), pack_mono(b).expect("fits"));
                assert_eq!(cmp_mono(pa, pb), a.cmp(b), "{a:?} vs {b:?}");
            }
        }
    }

    #[test]
    fn monomials_round_trip_and_multiply_by_addition() {
        let m = Monomial(SmallVec::from_vec(vec![
            (Sym(0), 3),
            (Sym(5), 127),
            (Sym(15), 1),
        ]));
        let p = pack_mono(&m).expect("fits");
        assert_eq!(unpack_mono(p), m);
        let sq = unpack_mono(p + p);
        assert_eq!(sq.0.as_slice(), &[(Sym(0), 6), (Sym(5), 254), (Sym(15), 2)]);
        assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(16), 1)]))).is_none());
        assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(2), 128)]))).is_none());
        assert!(pack_mono(&Monomial(SmallVec::from_vec(vec![(Sym(2), -1)]))).is_none());
    }

    #[test]
    fn the_monomial_table_sums_like_an_ordered_map() {
        // Keys that share low lanes (collisions after masking), the
        // constant monomial 0 and keys in the high word; sums that cancel.
        let mut table = MonoMap::default();
        let mut reference = std::collections::BTreeMap::new();
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        for i in 0..5000u64 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let lane = |v: u64| u128::from(v % 128);
            let m = lane(x) | lane(x >> 8) << 16 | lane(x >> 16) << 120;
            let m = if i % 97 == 0 { 0 } else { m };
            let n = (x % 19) as i128 - 9;
            *table.slot(m) += n;
            *reference.entry(m).or_insert(0i128) += n;
        }
        assert_eq!(table.len(), reference.len());
        let mut got: Vec<(u128, i128)> = table.iter().collect();
        got.sort_unstable();
        let want: Vec<(u128, i128)> = reference.into_iter().collect();
        assert_eq!(got, want);
        let taken = table.take();
        assert_eq!(taken.len(), want.len());
        assert_eq!(table.len(), 0);
        assert_eq!(table.iter().count(), 0);
    }

    #[test]
    fn monomials_spread_over_the_table_whichever_lanes_they_use() {
        // Every monomial of degree up to 5 in three symbols, placed in low,
        // middle and high lanes: a hash that sees only some lanes piles
        // them up (long probe runs); a good one keeps runs short.
        for first in [0u32, 5, 10, 13] {
            let mut table = MonoMap::default();
            for e in 0..216u32 {
                let (a, b, c) = (e % 6, e / 6 % 6, e / 36);
                if a + b + c > 5 {
                    continue;
                }
                let m = u128::from(a) << (8 * first)
                    | u128::from(b) << (8 * (first + 1))
                    | u128::from(c) << (8 * (first + 2));
                *table.slot(m) += 1;
            }
            assert_eq!(table.len(), 56);
            assert!(
                table.mean_probe() < 2.0,
                "lanes from {first}: mean probe {}",
                table.mean_probe()
            );
        }
    }
}
