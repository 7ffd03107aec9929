//! [`Packed`]: the terms of one time part packed, grouped by
//! trigonometric factor over one common denominator.

use smallvec::SmallVec;

use super::terms::{beat_of, common_denominator, key_of};
use super::trig::{cmp_wave, max_lane, PackedTrig, MAX_LANE};
use super::word::{cmp_mono, lcm_i64, pack_mono, SLOTS};
use crate::core::num::Q;
use crate::core::symbol::Sym;
use crate::core::term::{Key, TrigFactor};

/// A packed term with its trigonometric factor (before grouping).
pub(super) type WaveTerm = (PackedTrig, u128, i64);

/// The terms of one part, packed: `Σ terms[i].1 · x^terms[i].0 / denom`
/// times the group's trigonometric factor, times `cos(freq·t)`
/// (`sin(freq·t)` when `odd`; 1 when `freq = 0`).
#[derive(Clone, Debug, Default)]
pub struct Packed {
    /// The time frequency (an integer: parts with other frequencies are
    /// not packed).
    pub(super) freq: i64,
    /// True for `sin(freq·t)`.
    pub(super) odd: bool,
    /// Positive common denominator.
    pub(super) denom: i64,
    /// Packed monomial and integer numerator, group after group.
    pub(super) terms: Vec<(u128, i64)>,
    /// The groups: trigonometric factor and the end of its terms (those
    /// from the previous group's end); distinct factors, monomials distinct
    /// within a group.
    pub(super) groups: SmallVec<[(PackedTrig, usize); 1]>,
    /// True when some group has a trigonometric factor.
    pub(super) waves: bool,
    /// The largest coefficient of the groups' linear forms in absolute
    /// value.
    pub(super) max_lane: u8,
    /// The largest numerator in absolute value (bounds products).
    pub(super) max_abs: u64,
}

impl Packed {
    /// Terms without trigonometric factor.
    pub(super) fn new(freq: i64, odd: bool, denom: i64, terms: Vec<(u128, i64)>) -> Packed {
        let groups = if terms.is_empty() {
            SmallVec::new()
        } else {
            SmallVec::from_elem((PackedTrig::ONE, terms.len()), 1)
        };
        Packed::with_groups(freq, odd, denom, terms, groups)
    }

    pub(super) fn with_groups(
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
    pub(super) fn lanes_fit(a: &Packed, b: &Packed) -> bool {
        i16::from(a.max_lane) + i16::from(b.max_lane) <= MAX_LANE
    }

    /// Terms with their factors, grouped (sorted by factor and monomial;
    /// with `merge`, equal pairs are summed and zeros dropped). `None` when
    /// a sum overflows.
    pub(super) fn from_wave_terms(
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
    pub(super) fn groups(&self) -> impl Iterator<Item = (PackedTrig, &[(u128, i64)])> + '_ {
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
            let (n, d) = c.as_small()?;
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
        // Unspecified functions (see [`crate::core::func`]) need the chain rule:
        // the general path takes parts that hold them.
        let atoms = crate::core::term::packed_lanes();
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

    /// The terms in key order (the normal form's), with distinct keys and
    /// nonzero coefficients.
    pub fn unpack(&self) -> Vec<(Key, Q)> {
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
            return terms
                .into_iter()
                .map(|(m, n)| {
                    (
                        key_of(m, TrigFactor::One, &beat),
                        Q::from_i128(n as i128, self.denom as i128),
                    )
                })
                .collect();
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
        terms
            .into_iter()
            .map(|(m, i, n)| {
                (
                    key_of(m, waves[i].1.clone(), &beat),
                    Q::from_i128(n as i128, self.denom as i128),
                )
            })
            .collect()
    }

    /// The largest numerator in absolute value.
    pub(super) fn max_abs(&self) -> u64 {
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

/// Puts `parts` over one denominator when every numerator still fits a
/// word: products of two such lists then share one denominator, and the
/// sums they feed find it again without dividing.
pub(super) fn common_denominator_of_parts(parts: &mut [Packed]) {
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
