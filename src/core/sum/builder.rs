//! [`SumBuilder`]: sums of products collected in one hash map (and the
//! packed fast path) and put in normal form once.

use rustc_hash::FxHashMap;

use super::part::*;
use crate::core::error::{CoreError, CoreResult, LimitKind};
use crate::core::expr::coeff_words;
use crate::core::expr::Expr;
use crate::core::limits;
use crate::core::num::Q;
use crate::core::packed::{self, Packed, PackedKeep, PackedSum, ProductRoute};
use crate::core::term::{Key, TimeFactor};

/// Term-count products from which [`Expr::mul`] splits its factors by time
/// factor to multiply plain parts packed (below, splitting costs more than
/// it saves).
pub(crate) const PACKED_PRODUCT: usize = 256;

/// A sum of products under construction: every term product goes straight
/// into one hash map and the normal form (sorting) is built once, by
/// [`SumBuilder::finish`]. Sums of many products (Lie derivatives, brackets, sums
/// of brackets) cost the products only, not a sorted intermediate and a
/// merge per product.
///
/// Limits are those of [`Expr::mul`]: each product counts `|a|·|b|` units of
/// work, and the accumulated terms plus the size of large coefficients are
/// checked against the term budget after every row of a product.
#[derive(Debug, Default)]
pub struct SumBuilder {
    pub(crate) map: FxHashMap<Key, Q>,
    pub(crate) big_words: usize,
    /// With [`Keep::UpToWithSines`]: `Σ c/h` over the dropped terms
    /// `c·sin(h t)`, keyed without their time factor.
    pub(crate) sines: FxHashMap<Key, Q>,
    /// Products of packed parts (see [`crate::core::packed`]), merged at the end.
    pub(crate) packed: PackedSum,
    /// Small packed products since the last check of the term budget.
    pub(crate) unchecked: u32,
}

/// Which terms of a product an accumulator keeps, by time frequency.
#[derive(Clone, Copy, Debug)]
pub enum Keep<'a> {
    /// Every term.
    All,
    /// The terms of frequency at most the cap.
    UpTo(&'a Q),
    /// The terms of frequency at most the cap; of the others, the
    /// constant `Σ c/h` that the terms `c·sin(h t)` give to an integral
    /// from 0 (`∫_0^t sin(h s) ds = (1 − cos(h t))/h`), see
    /// [`SumBuilder::finish_with_sines`].
    UpToWithSines(&'a Q),
}

impl Keep<'_> {
    pub(crate) fn cap(&self) -> Option<&Q> {
        match self {
            Keep::All => None,
            Keep::UpTo(c) | Keep::UpToWithSines(c) => Some(c),
        }
    }
}

impl SumBuilder {
    /// An empty sum.
    pub fn new() -> SumBuilder {
        SumBuilder::default()
    }

    /// An empty sum with room for about `n` terms.
    pub fn with_capacity(n: usize) -> SumBuilder {
        SumBuilder {
            map: FxHashMap::with_capacity_and_hasher(n.min(1 << 16), Default::default()),
            big_words: 0,
            sines: FxHashMap::default(),
            packed: PackedSum::default(),
            unchecked: 0,
        }
    }

    pub(crate) fn insert(&mut self, k: Key, c: Q) {
        match self.map.entry(k) {
            std::collections::hash_map::Entry::Occupied(mut e) => {
                let v = e.get().add(&c);
                self.big_words = self.big_words.saturating_sub(coeff_words(e.get()));
                self.big_words += coeff_words(&v);
                *e.get_mut() = v;
            }
            std::collections::hash_map::Entry::Vacant(e) => {
                self.big_words += coeff_words(&c);
                e.insert(c);
            }
        }
    }

    /// The packed sums and the way terms that leave them come back: exact
    /// terms into the general sum (or the sine constants).
    pub(crate) fn packed_and_spill(&mut self) -> (&mut PackedSum, impl FnMut(Key, Q, bool) + '_) {
        let (map, sines, big_words) = (&mut self.map, &mut self.sines, &mut self.big_words);
        let spill = move |k: Key, c: Q, to_sines: bool| {
            if to_sines {
                add_into(sines, k, c);
            } else {
                *big_words += coeff_words(&c);
                add_into(map, k, c);
            }
        };
        (&mut self.packed, spill)
    }

    pub(crate) fn check_budget(&mut self) -> CoreResult<()> {
        let max_terms = limits::limits().max_terms;
        // Before the table of terms doubles, ask for the room: a machine
        // out of memory then gives an error, not an abort.
        let (len, capacity) = (self.map.len(), self.map.capacity());
        if len >= 1 << 16 && len.saturating_mul(8) >= capacity.saturating_mul(7) {
            self.map.try_reserve(len).map_err(|_| CoreError::Limit {
                kind: LimitKind::Memory,
                limit: (len as u64).saturating_mul(std::mem::size_of::<(Key, Q)>() as u64 + 1),
            })?;
        }
        let held = self.map.len() + self.sines.len() + self.packed.held();
        if held.saturating_add(self.big_words) > max_terms {
            return Err(CoreError::Limit {
                kind: LimitKind::Terms,
                limit: max_terms as u64,
            });
        }
        Ok(())
    }

    /// `self += ±a·b`.
    pub fn add_product(&mut self, a: &Expr, b: &Expr, negate: bool) -> CoreResult<()> {
        self.product(a, b, negate, Keep::All)
    }

    /// `self += q·e`, keeping the terms `keep` asks for (with
    /// [`Keep::UpToWithSines`], each dropped `c·sin(h t)` adds `c/h` to the
    /// sine constants).
    pub fn add_scaled(&mut self, e: &Expr, q: &Q, keep: Keep) -> CoreResult<()> {
        if q.is_zero() {
            return Ok(());
        }
        let with_sines = matches!(keep, Keep::UpToWithSines(_));
        for (k, c) in e.terms() {
            let mut c = c.mul(q);
            let mut to_sines = false;
            if let Some(cap) = keep.cap() {
                let h = k.beat.frequency();
                if h > *cap {
                    if !(with_sines && matches!(k.beat, TimeFactor::Sin(_))) {
                        continue;
                    }
                    c = c.div(&h).unwrap_or(Q::ZERO);
                    to_sines = true;
                }
            }
            let packed_key = packed::pack_key(k);
            if let (Some((m, wave, freq, odd)), Some((n, d))) = (packed_key, c.as_small()) {
                let (freq, odd) = if to_sines { (0, false) } else { (freq, odd) };
                let (packed, mut spill) = self.packed_and_spill();
                if packed.add_terms(
                    &[(m, n)],
                    d,
                    &ProductRoute::new(freq, odd, to_sines, 1, 1),
                    wave,
                    &mut spill,
                ) {
                    continue;
                }
            }
            let mut key = k.clone();
            if to_sines {
                key.beat = TimeFactor::One;
                add_into(&mut self.sines, key, c);
            } else {
                self.big_words += coeff_words(&c);
                add_into(&mut self.map, key, c);
            }
        }
        self.check_budget()
    }

    /// `self += ±a·b` for expressions split by time factor, keeping the
    /// terms `keep` asks for. Pairs of parts that cannot give such a term
    /// are skipped without multiplying: `cos(h₁t)cos(h₂t)` and
    /// `sin(h₁t)sin(h₂t)` have frequencies `|h₁ − h₂|` and `h₁ + h₂` (cosines),
    /// `sin(h₁t)cos(h₂t)` the same frequencies as sines, and `sin(0) = 0`.
    pub fn add_product_harmonics(
        &mut self,
        a: &[TimePart],
        b: &[TimePart],
        negate: bool,
        keep: Keep,
    ) -> CoreResult<()> {
        limits::poll()?;
        if keep.cap().is_some() {
            // Skipped pairs cost a test each: count them as work too.
            limits::add_work((a.len() as u64).saturating_mul(b.len() as u64))?;
        }
        // The cut for packed parts (integer frequencies: at most the floor).
        let cut = PackedKeep {
            cap: keep.cap().map(|c| c.floor().to_i64().unwrap_or(i64::MAX)),
            sines: matches!(keep, Keep::UpToWithSines(_)),
        };
        let mut work = 0u64;
        let result = self.product_parts(a, b, negate, keep, cut, &mut work);
        limits::add_work(work)?;
        result
    }

    /// The loop of [`SumBuilder::add_product_harmonics`]: packed products add their
    /// work to `work`.
    pub(crate) fn product_parts(
        &mut self,
        a: &[TimePart],
        b: &[TimePart],
        negate: bool,
        keep: Keep,
        cut: PackedKeep,
        work: &mut u64,
    ) -> CoreResult<()> {
        for pa in a {
            for pb in b {
                if let (Some(qa), Some(qb)) = (&pa.packed, &pb.packed) {
                    let fast = {
                        let (packed, mut spill) = self.packed_and_spill();
                        packed.add_small_product(qa, qb, negate, cut, &mut spill)
                    };
                    let done = match fast {
                        Some(routes) => {
                            if routes > 0 {
                                *work = work.saturating_add((qa.len() * qb.len()) as u64);
                                self.count_small_product()?;
                            }
                            true
                        }
                        None => self.packed_product(qa, qb, negate, cut, work)?,
                    };
                    // Long runs of packed products count their work as they
                    // go, so that the work budget stops them in time.
                    if *work >= 1 << 16 {
                        limits::add_work(std::mem::take(work))?;
                    }
                    if done {
                        continue;
                    }
                }
                let Some(cap) = keep.cap() else {
                    self.product(pa.expr(), pb.expr(), negate, keep)?;
                    continue;
                };
                let odd = pa.odd != pb.odd;
                let sum = pa.freq.add(&pb.freq);
                let diff = pa.freq.sub(&pb.freq).abs();
                let kept = sum <= *cap || (diff <= *cap && (!odd || !diff.is_zero()));
                let sines = matches!(keep, Keep::UpToWithSines(_)) && odd && sum > *cap;
                if !kept && !sines {
                    continue;
                }
                let keep = if sum <= *cap { Keep::All } else { keep };
                self.product(pa.expr(), pb.expr(), negate, keep)?;
            }
        }
        Ok(())
    }

    /// `self += ±a·b` for two packed parts, with every pair of terms routed
    /// once by its time factors (product-to-sum, then keep, drop or take
    /// the sine constant). False when the product must go the general way
    /// (nothing added then).
    pub(crate) fn packed_product(
        &mut self,
        a: &Packed,
        b: &Packed,
        negate: bool,
        cut: PackedKeep,
        work: &mut u64,
    ) -> CoreResult<bool> {
        let Some(routes) = packed::routes(a, b, cut) else {
            return Ok(false);
        };
        if routes.is_empty() || a.is_empty() || b.is_empty() {
            return Ok(true);
        }
        // The work is counted by the caller, in one call per sum of
        // products (small products would otherwise pay more for counting
        // than for multiplying).
        *work = work.saturating_add((a.len() as u64).saturating_mul(b.len() as u64));
        let max_terms = limits::limits().max_terms;
        let general = self.map.len() + self.sines.len() + self.big_words;
        // Large products poll and watch the term budget as they go.
        let mut check = |held: usize| -> CoreResult<()> {
            limits::poll()?;
            if general.saturating_add(held) > max_terms {
                return Err(CoreError::Limit {
                    kind: LimitKind::Terms,
                    limit: max_terms as u64,
                });
            }
            Ok(())
        };
        let done = {
            let (packed, mut spill) = self.packed_and_spill();
            packed.add_product(a, b, negate, routes.as_slice(), &mut spill, &mut check)?
        };
        if !done {
            return Ok(false);
        }
        if a.len().saturating_mul(b.len()) >= 256 {
            self.unchecked = 0;
            self.check_budget()?;
        } else {
            self.count_small_product()?;
        }
        Ok(true)
    }

    /// The sums' size is checked after large products and every 16 small
    /// ones (counting the terms of every sum costs a pass over them).
    pub(crate) fn count_small_product(&mut self) -> CoreResult<()> {
        self.unchecked += 1;
        if self.unchecked >= 16 {
            self.unchecked = 0;
            self.check_budget()?;
        }
        Ok(())
    }

    /// `self += ±a·b`, keeping the terms `keep` asks for.
    pub(crate) fn product(
        &mut self,
        a: &Expr,
        b: &Expr,
        negate: bool,
        keep: Keep,
    ) -> CoreResult<()> {
        if a.is_zero() || b.is_zero() {
            return Ok(());
        }
        let (a, b) = if a.len() <= b.len() { (a, b) } else { (b, a) };
        // The work: |a|·|b| term products (arithmetic on large coefficients
        // is counted by the numbers themselves). When products collide
        // (trigonometric factors, cancellations) the result can stay within
        // the budget while the work grows with its square: count it too.
        limits::add_work((a.len() as u64).saturating_mul(b.len() as u64))?;
        let mut max_bits = 0u64;
        let cap = keep.cap();
        let with_sines = matches!(keep, Keep::UpToWithSines(_));
        // The budget counts terms plus the size of large coefficients,
        // checked after every row so that a product that would outgrow it
        // stops early instead of running for minutes.
        for (n, (ka, ca)) in a.terms().iter().enumerate() {
            // Rows with large coefficients can take long: check every one.
            if n % 64 == 0 || max_bits > 0 {
                limits::poll()?;
            }
            let ca = if negate { ca.neg() } else { ca.clone() };
            for (kb, cb) in b.terms() {
                ka.mul_into(&ca, kb, cb, &mut |mut k, c| {
                    if !c.is_small() {
                        max_bits = max_bits.max(c.bits());
                    }
                    if let Some(cap) = cap {
                        let h = k.beat.frequency();
                        if h > *cap {
                            if with_sines && matches!(k.beat, TimeFactor::Sin(_)) {
                                k.beat = TimeFactor::One;
                                add_into(&mut self.sines, k, c.div(&h).unwrap_or(Q::ZERO));
                            }
                            return;
                        }
                    }
                    self.insert(k, c);
                })?;
            }
            if self.map.len().saturating_add(self.sines.len()) > limits::limits().max_terms {
                return Err(CoreError::Limit {
                    kind: LimitKind::Terms,
                    limit: limits::limits().max_terms as u64,
                });
            }
            self.check_budget()?;
            limits::check_bits(max_bits)?;
        }
        Ok(())
    }

    /// The kept terms and, with [`Keep::UpToWithSines`], the constant
    /// `Σ c/h` of the dropped sine terms, both in normal form.
    pub fn finish_with_sines(self) -> (Expr, Expr) {
        if self.map.is_empty() && self.sines.is_empty() {
            // Only packed sums: their keys are distinct and sorted there.
            let (kept, sines) = self.packed.into_sorted();
            return (
                Expr::from_sorted_terms(kept),
                Expr::from_sorted_terms(sines),
            );
        }
        let (mut map, mut sines) = (self.map, self.sines);
        self.packed.drain(&mut |k, c, to_sines| {
            add_into(if to_sines { &mut sines } else { &mut map }, k, c)
        });
        (Expr::from_map(map), Expr::from_map(sines))
    }

    /// The sum in normal form.
    pub fn finish(self) -> Expr {
        self.finish_with_sines().0
    }

    /// The kept terms split by time factor, as
    /// [`Expr::into_by_frequency`] would give them (the sine constants are
    /// dropped). When everything was packed the parts stay packed: no
    /// normal form is built until a part's terms are asked for.
    pub fn finish_parts(self) -> TimeParts {
        self.finish_parts_with_sines().0
    }

    /// [`SumBuilder::finish_parts`], with the sine constants (see
    /// [`Keep::UpToWithSines`]) in normal form.
    pub fn finish_parts_with_sines(self) -> (TimeParts, Expr) {
        if self.map.is_empty() && self.sines.is_empty() {
            if let Some(parts) = self.packed.to_parts() {
                let parts = parts.into_iter().map(TimePart::from_packed).collect();
                let sines = self.packed.into_sorted_sines();
                return (parts, Expr::from_sorted_terms(sines));
            }
        }
        let (kept, sines) = self.finish_with_sines();
        (kept.into_by_frequency(), sines)
    }

    /// `self += ∫_0^t part dτ`; packed parts stay packed (each power of
    /// `t` times the part's time factor integrated by parts), others go
    /// through the normal form.
    pub fn add_integral_from_zero(&mut self, part: &TimePart) -> CoreResult<()> {
        if let Some(p) = &part.packed {
            let beat = match (p.freq(), p.odd()) {
                (0, _) => TimeFactor::One,
                (f, false) => TimeFactor::Cos(Q::int(f)),
                (f, true) => TimeFactor::Sin(Q::int(f)),
            };
            let mut pieces = |n: i32| -> Option<Vec<packed::TimePiece>> {
                let list = crate::core::term::integrate_time_monomial(n, &beat).ok()?;
                let mut out = Vec::with_capacity(list.len() + 1);
                for (power, b, q) in list {
                    let (num, den) = q.as_small()?;
                    let (freq, odd) = match &b {
                        TimeFactor::One => (0, false),
                        TimeFactor::Cos(h) => (h.to_i64()?, false),
                        TimeFactor::Sin(h) => (h.to_i64()?, true),
                    };
                    out.push(packed::TimePiece {
                        power,
                        freq,
                        odd,
                        num,
                        den,
                    });
                    // Minus the value at 0: the pieces without a power of
                    // `t` or a sine.
                    if power == 0 && !odd {
                        out.push(packed::TimePiece {
                            power,
                            freq: 0,
                            odd: false,
                            num: num.checked_neg()?,
                            den,
                        });
                    }
                }
                Some(out)
            };
            let done = {
                let (sum, mut spill) = self.packed_and_spill();
                sum.add_time_pieces(p, &mut pieces, &mut spill)
            };
            if done {
                limits::add_work(p.len() as u64)?;
                return self.check_budget();
            }
        }
        self.add_scaled(&part.expr().integral_from_zero()?, &Q::ONE, Keep::All)
    }

    /// `self += q·Σ parts`, keeping the terms `keep` asks for (as
    /// [`SumBuilder::add_scaled`]); packed parts go in whole.
    pub fn add_parts(&mut self, parts: &[TimePart], q: &Q, keep: Keep) -> CoreResult<()> {
        if q.is_zero() {
            return Ok(());
        }
        let with_sines = matches!(keep, Keep::UpToWithSines(_));
        for part in parts {
            if let (Some(p), Some((qn, qd))) = (&part.packed, q.as_small()) {
                // The route of the whole part: kept, dropped or a sine
                // constant (factor 1/h).
                let route = match keep.cap() {
                    Some(cap) if part.freq > *cap => {
                        if !(with_sines && part.odd) {
                            continue;
                        }
                        qd.checked_mul(p.freq()).map(|d| (0, false, true, qn, d))
                    }
                    _ => Some((p.freq(), p.odd(), false, qn, qd)),
                };
                if let Some((freq, odd, to_sines, num, den)) = route {
                    let (packed, mut spill) = self.packed_and_spill();
                    if packed.add_packed(
                        p,
                        &ProductRoute::new(freq, odd, to_sines, num, den),
                        &mut spill,
                    ) {
                        continue;
                    }
                }
            }
            self.add_scaled(part.expr(), q, keep)?;
        }
        self.check_budget()
    }
}

/// `map[k] += c`.
pub(crate) fn add_into(map: &mut FxHashMap<Key, Q>, k: Key, c: Q) {
    match map.entry(k) {
        std::collections::hash_map::Entry::Occupied(mut e) => {
            let s = e.get().add(&c);
            *e.get_mut() = s;
        }
        std::collections::hash_map::Entry::Vacant(e) => {
            e.insert(c);
        }
    }
}
