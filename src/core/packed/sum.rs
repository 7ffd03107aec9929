//! [`PackedSum`]: sums of products of packed parts by time factor of the
//! result, each a [`TimeSum`] of numerators over one denominator.

use rustc_hash::FxHashMap;
use smallvec::SmallVec;

use super::super::expr::{Key, TimeFactor};
use super::super::num::Q;
use super::super::symbol::Sym;
use super::keymap::{MonoMap, WaveMap};
use super::part::{common_denominator_of_parts, Packed, WaveTerm};
use super::route::{PackedKeep, ProductRoute, TimePiece};
use super::terms::{beat_of, key_of};
use super::trig::{cmp_wave, wave_routes, PackedTrig, WaveCache};
use super::word::{cmp_mono, exact_quotient, gcd_u128, lcm_i128, MAX_EXP};

/// Frequencies below this find their sums by direct indexing.
pub(super) const SMALL_FREQ: usize = 1024;

/// One sum of packed terms with a common time factor: numerators over
/// `denom`, by monomial (terms without trigonometric factor) and by
/// monomial and trigonometric factor.
#[derive(Debug)]
pub(super) struct TimeSum {
    pub(super) freq: i64,
    pub(super) odd: bool,
    pub(super) sines: bool,
    pub(super) denom: i128,
    /// The last `d` that divided `denom`, with `denom / d`.
    pub(super) last: (i128, i128),
    pub(super) map: MonoMap,
    pub(super) waves: WaveMap,
}

impl TimeSum {
    pub(super) fn beat(&self) -> TimeFactor {
        beat_of(self.freq, self.odd)
    }

    /// The key of monomial `m` with factor `wave` in this sum.
    pub(super) fn key(&self, m: u128, wave: PackedTrig) -> Key {
        key_of(m, wave.unpack(), &self.beat())
    }

    /// Number of terms held.
    pub(super) fn held(&self) -> usize {
        self.map.len() + self.waves.len()
    }

    /// Every numerator.
    pub(super) fn values(&self) -> impl Iterator<Item = i128> + '_ {
        self.map.values().chain(self.waves.values())
    }

    /// `self += m_a·row_n · b` times the factor `wave` (see
    /// [`TimeSum::add_row`]).
    pub(super) fn add_wave_row(
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
    pub(super) fn add_row(
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
    pub(super) fn add_checked(
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
    pub(super) fn try_add(&mut self, m: u128, wave: PackedTrig, v: i128) -> bool {
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
    pub(super) fn rescale(&mut self, f: i128) {
        for n in self.map.values_mut() {
            *n *= f;
        }
        for n in self.waves.values_mut() {
            *n *= f;
        }
    }

    /// Empties the sum, handing every term to `spill`.
    pub(super) fn spill_all(&mut self, spill: &mut impl FnMut(Key, Q, bool)) {
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
    pub(super) fn take_terms(&mut self) -> impl Iterator<Item = (u128, PackedTrig, i128)> {
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
pub(super) type Drained = (u128, PackedTrig, u8, i64, i128, i128);

/// A sum of products of packed parts, by time factor of the result.
#[derive(Debug, Default)]
pub struct PackedSum {
    pub(super) targets: Vec<TimeSum>,
    /// TimeSum by (frequency, kind) for small frequencies: kind 0 for
    /// `cos`/1, 1 for `sin`, 2 for sine constants; `usize::MAX` for none.
    pub(super) small: Vec<[usize; 3]>,
    /// TimeSum by (frequency, kind) for the others.
    pub(super) index: FxHashMap<(i64, u8), usize>,
}

impl PackedSum {
    /// Number of terms held (before cancellation).
    pub fn held(&self) -> usize {
        self.targets.iter().map(TimeSum::held).sum()
    }

    /// The target of `r` whose denominator is a multiple of `d`, created
    /// or rescaled as needed; what cannot be rescaled in machine integers
    /// is spilled as exact terms.
    pub(super) fn target(
        &mut self,
        r: &ProductRoute,
        d: i128,
        spill: &mut impl FnMut(Key, Q, bool),
    ) -> usize {
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
    pub(super) fn add_groups<E>(
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
    /// (the order of [`super::super::expr::Expr::into_by_frequency`]), without
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
