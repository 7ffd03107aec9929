//! Expressions in the canonical normal form.
//!
//! An expression is a finite sum of terms
//! `coeff · monomial · exp(M) · {1 | cos(L) | sin(L)} · {1 | cos(k t) | sin(k t)}`
//! where the monomial has integer exponents over parameters, state
//! coordinates, `t` (non-negative powers) and `pi`; `L`, `M` are linear forms
//! with rational coefficients in the state coordinates; `k > 0` is rational.
//! Products of trigonometric factors are reduced with the product-to-sum
//! identities and the argument of every `cos`/`sin` has a positive leading
//! coefficient, so two expressions are equal if and only if their term lists
//! are identical. Time is kept in its own factor (`t^n`, `cos(k t)`,
//! `sin(k t)`), which makes a time-varying expression separate as
//! `Σ c_k(t) g_k(x)`.
//!
//! This module knows nothing of parsing, sessions or printing styles beyond
//! the plain input syntax used by `Display`.

use rustc_hash::FxHashMap;
use smallvec::SmallVec;
use std::fmt;
use std::sync::Arc;

use super::error::{CoreError, CoreResult, LimitKind};
use super::limits;
use super::num::Q;
use super::packed::{self, Packed, PackedKeep, PackedSum, ProductRoute};
use super::symbol::Sym;

/// A monomial: sorted `(symbol, exponent)` pairs with nonzero exponents.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct Monomial(pub SmallVec<[(Sym, i32); 4]>);

/// A linear form without constant: sorted `(symbol, coefficient)` pairs with
/// nonzero coefficients. Shared (reference-counted): terms are copied far
/// more often than their arguments change, and a small key keeps products
/// and hashing cheap.
#[derive(Clone, PartialEq, Eq, Hash, PartialOrd, Ord, Debug, Default)]
pub struct LinearForm(pub Arc<[(Sym, Q)]>);

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

/// An expression in normal form: terms sorted by key, no zero coefficients.
#[derive(Clone, PartialEq, Eq, Hash, Default)]
pub struct Expr {
    terms: Vec<(Key, Q)>,
}

impl Monomial {
    /// The constant monomial 1.
    pub fn one() -> Monomial {
        Monomial(SmallVec::new())
    }

    /// Exponent of `s`.
    pub fn power_of(&self, s: Sym) -> i32 {
        self.0.iter().find(|(x, _)| *x == s).map_or(0, |(_, e)| *e)
    }

    /// Product (exponents add); fails on exponent overflow.
    pub fn mul(&self, other: &Monomial) -> CoreResult<Monomial> {
        let mut out: SmallVec<[(Sym, i32); 4]> = SmallVec::new();
        let (a, b) = (&self.0, &other.0);
        let (mut i, mut j) = (0, 0);
        while i < a.len() && j < b.len() {
            let (sa, ea) = a[i];
            let (sb, eb) = b[j];
            if sa < sb {
                out.push((sa, ea));
                i += 1;
            } else if sb < sa {
                out.push((sb, eb));
                j += 1;
            } else {
                let e = ea.checked_add(eb).ok_or(exp_overflow())?;
                if e != 0 {
                    out.push((sa, e));
                }
                i += 1;
                j += 1;
            }
        }
        out.extend_from_slice(&a[i..]);
        out.extend_from_slice(&b[j..]);
        Ok(Monomial(out))
    }

    /// Total degree in the given symbols.
    pub fn degree_in(&self, syms: &[Sym]) -> i64 {
        self.0
            .iter()
            .filter(|(s, _)| syms.contains(s))
            .map(|(_, e)| *e as i64)
            .sum()
    }
}

/// What a coefficient adds to the term budget beyond its term (see
/// [`limits::coefficient_terms`]); nothing when it fits machine words.
fn coeff_words(c: &Q) -> usize {
    match c {
        Q::Small(..) => 0,
        Q::Big(_) => limits::coefficient_terms(c.bits()),
    }
}

/// log2 of the larger of |numerator| and denominator (0 for 1 and -1).
fn log2_size(c: &Q) -> f64 {
    match c {
        Q::Small(n, d) => (n.unsigned_abs() as f64)
            .log2()
            .max((*d as f64).log2())
            .max(0.0),
        Q::Big(_) => c.bits() as f64,
    }
}

/// Term-count products from which [`Expr::mul`] splits its factors by time
/// factor to multiply plain parts packed (below, splitting costs more than
/// it saves).
const PACKED_PRODUCT: usize = 256;

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
    map: FxHashMap<Key, Q>,
    big_words: usize,
    /// With [`Keep::UpToWithSines`]: `Σ c/h` over the dropped terms
    /// `c·sin(h t)`, keyed without their time factor.
    sines: FxHashMap<Key, Q>,
    /// Products of packed parts (see [`super::packed`]), merged at the end.
    packed: PackedSum,
    /// Small packed products since the last check of the term budget.
    unchecked: u32,
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
    fn cap(&self) -> Option<&Q> {
        match self {
            Keep::All => None,
            Keep::UpTo(c) | Keep::UpToWithSines(c) => Some(c),
        }
    }
}

/// One part of an expression split by time factor: the terms with
/// `cos(h t)` (or none, for `h = 0`) or with `sin(h t)` (`odd`).
#[derive(Clone, Debug, Default)]
pub struct TimePart {
    /// The frequency `h` (0 for terms without a time factor).
    pub freq: Q,
    /// True for the `sin(h t)` terms.
    pub odd: bool,
    /// The terms (made from the packed copy when first asked for, for
    /// parts computed packed).
    expr: std::sync::OnceLock<Expr>,
    /// The terms packed for fast products, when they fit.
    packed: Option<Packed>,
}

impl TimePart {
    /// The terms.
    pub fn expr(&self) -> &Expr {
        self.expr
            .get_or_init(|| self.packed.as_ref().map_or_else(Expr::zero, Packed::unpack))
    }

    /// `∂/∂s` of the part (the same time factor), `None` when zero.
    pub fn derivative(&self, s: Sym) -> Option<TimePart> {
        if let Some(dp) = self.packed.as_ref().and_then(|p| p.derivative(s)) {
            return (!dp.is_empty()).then(|| TimePart::from_packed(dp));
        }
        let e = self.expr().pd(s);
        (!e.is_zero()).then(|| TimePart {
            freq: self.freq.clone(),
            odd: self.odd,
            packed: Packed::pack(e.terms(), &self.freq, self.odd),
            expr: std::sync::OnceLock::from(e),
        })
    }

    /// A part from its packed terms.
    pub fn from_packed(p: Packed) -> TimePart {
        TimePart {
            freq: Q::int(p.freq()),
            odd: p.odd(),
            expr: std::sync::OnceLock::new(),
            packed: Some(p),
        }
    }

    /// True when some term has a power of `t`.
    pub fn has_time_power(&self) -> bool {
        match &self.packed {
            Some(p) => p.has_time_power(),
            None => self
                .expr()
                .terms
                .iter()
                .any(|(k, _)| k.mono.power_of(Sym::T) != 0),
        }
    }

    /// `∫_0^t` of a part with a time factor and no power of `t`, as parts
    /// (see [`Packed::integral_from_zero`]); computed packed when the part
    /// is, through the normal form otherwise.
    pub fn integral_from_zero(&self) -> CoreResult<TimeParts> {
        if let Some((osc, constant)) = self.packed.as_ref().and_then(Packed::integral_from_zero) {
            let mut out = Vec::with_capacity(2);
            out.extend(constant.map(TimePart::from_packed));
            out.push(TimePart::from_packed(osc));
            return Ok(out);
        }
        Ok(self.expr().integral_from_zero()?.into_by_frequency())
    }

    /// Number of terms.
    #[allow(clippy::len_without_is_empty)] // parts are never empty
    pub fn len(&self) -> usize {
        match &self.packed {
            Some(p) => p.len(),
            None => self.expr().len(),
        }
    }

    /// True when the part has a packed copy (see [`super::packed`]).
    pub fn is_packed(&self) -> bool {
        self.packed.is_some()
    }

    /// The packed copy, when there is one (for tests of the packed path).
    #[cfg(test)]
    pub(crate) fn packed(&self) -> Option<&Packed> {
        self.packed.as_ref()
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

    fn insert(&mut self, k: Key, c: Q) {
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
    fn packed_and_spill(&mut self) -> (&mut PackedSum, impl FnMut(Key, Q, bool) + '_) {
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

    fn check_budget(&mut self) -> CoreResult<()> {
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
            if let (Some((m, wave, freq, odd)), Q::Small(n, d)) = (packed_key, &c) {
                let (freq, odd) = if to_sines { (0, false) } else { (freq, odd) };
                let (packed, mut spill) = self.packed_and_spill();
                if packed.add_terms(
                    &[(m, *n)],
                    *d,
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
    fn product_parts(
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
    fn packed_product(
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
    fn count_small_product(&mut self) -> CoreResult<()> {
        self.unchecked += 1;
        if self.unchecked >= 16 {
            self.unchecked = 0;
            self.check_budget()?;
        }
        Ok(())
    }

    /// `self += ±a·b`, keeping the terms `keep` asks for.
    fn product(&mut self, a: &Expr, b: &Expr, negate: bool, keep: Keep) -> CoreResult<()> {
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
        for (n, (ka, ca)) in a.terms.iter().enumerate() {
            // Rows with large coefficients can take long: check every one.
            if n % 64 == 0 || max_bits > 0 {
                limits::poll()?;
            }
            let ca = if negate { ca.neg() } else { ca.clone() };
            for (kb, cb) in &b.terms {
                ka.mul_into(&ca, kb, cb, &mut |mut k, c| {
                    if let Q::Big(_) = c {
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
            return (Expr { terms: kept }, Expr { terms: sines });
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
                return (parts, Expr { terms: sines });
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
                let list = super::calc::integrate_time_monomial(n, &beat).ok()?;
                let mut out = Vec::with_capacity(list.len() + 1);
                for (power, b, q) in list {
                    let Q::Small(num, den) = q else {
                        return None;
                    };
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
            if let (Some(p), Q::Small(qn, qd)) = (&part.packed, q) {
                // The route of the whole part: kept, dropped or a sine
                // constant (factor 1/h).
                let route = match keep.cap() {
                    Some(cap) if part.freq > *cap => {
                        if !(with_sines && part.odd) {
                            continue;
                        }
                        qd.checked_mul(p.freq()).map(|d| (0, false, true, *qn, d))
                    }
                    _ => Some((p.freq(), p.odd(), false, *qn, *qd)),
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
fn add_into(map: &mut FxHashMap<Key, Q>, k: Key, c: Q) {
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

fn exp_overflow() -> CoreError {
    CoreError::Limit {
        kind: LimitKind::Exponent,
        limit: i32::MAX as u64,
    }
}

impl LinearForm {
    /// Coefficient of `s`.
    pub fn coeff(&self, s: Sym) -> Q {
        self.0
            .iter()
            .find(|(x, _)| *x == s)
            .map_or(Q::ZERO, |(_, c)| c.clone())
    }

    /// True if and only if the form is zero.
    pub fn is_zero(&self) -> bool {
        self.0.is_empty()
    }

    /// `self + sign·other`.
    pub fn add_signed(&self, other: &LinearForm, negate: bool) -> LinearForm {
        let mut out: SmallVec<[(Sym, Q); 2]> = SmallVec::new();
        let (a, b) = (&self.0, &other.0);
        let (mut i, mut j) = (0, 0);
        let sgn = |q: &Q| if negate { q.neg() } else { q.clone() };
        while i < a.len() && j < b.len() {
            if a[i].0 < b[j].0 {
                out.push(a[i].clone());
                i += 1;
            } else if b[j].0 < a[i].0 {
                out.push((b[j].0, sgn(&b[j].1)));
                j += 1;
            } else {
                let c = if negate {
                    a[i].1.sub(&b[j].1)
                } else {
                    a[i].1.add(&b[j].1)
                };
                if !c.is_zero() {
                    out.push((a[i].0, c));
                }
                i += 1;
                j += 1;
            }
        }
        out.extend(a[i..].iter().cloned());
        out.extend(b[j..].iter().map(|(s, q)| (*s, sgn(q))));
        LinearForm(out.into_iter().collect())
    }

    /// Negation.
    pub fn neg(&self) -> LinearForm {
        LinearForm(self.0.iter().map(|(s, q)| (*s, q.neg())).collect())
    }

    /// Multiplies every coefficient by `q`.
    pub fn scale(&self, q: &Q) -> LinearForm {
        if q.is_zero() {
            return LinearForm::default();
        }
        LinearForm(self.0.iter().map(|(s, c)| (*s, c.mul(q))).collect())
    }

    /// True if and only if the leading coefficient is negative.
    pub fn is_negative(&self) -> bool {
        self.0.first().is_some_and(|(_, q)| q.is_negative())
    }
}

/// `cos(L)` as (sign, wave) in canonical form; `None` when `L = 0` means 1.
fn cos_wave(l: LinearForm) -> TrigFactor {
    if l.is_zero() {
        TrigFactor::One
    } else if l.is_negative() {
        TrigFactor::Cos(l.neg())
    } else {
        TrigFactor::Cos(l)
    }
}

/// `sin(L)` in canonical form: (negated?, wave); `None` when `L = 0` (zero).
fn sin_wave(l: LinearForm) -> Option<(bool, TrigFactor)> {
    if l.is_zero() {
        None
    } else if l.is_negative() {
        Some((true, TrigFactor::Sin(l.neg())))
    } else {
        Some((false, TrigFactor::Sin(l)))
    }
}

fn cos_beat(k: Q) -> TimeFactor {
    if k.is_zero() {
        TimeFactor::One
    } else {
        TimeFactor::Cos(k.abs())
    }
}

fn sin_beat(k: Q) -> Option<(bool, TimeFactor)> {
    if k.is_zero() {
        None
    } else if k.is_negative() {
        Some((true, TimeFactor::Sin(k.neg())))
    } else {
        Some((false, TimeFactor::Sin(k)))
    }
}

/// `c·f` for a factor of the product-to-sum identities (1 or ±1/2).
fn times_factor(c: Q, f: &Q) -> Q {
    match f {
        Q::Small(1, 1) => c,
        Q::Small(1, 2) => c.half(),
        Q::Small(-1, 2) => c.half().neg(),
        _ => c.mul(f),
    }
}

/// Product of two waves as at most two (coefficient factor, wave) pairs.
fn wave_mul(a: &TrigFactor, b: &TrigFactor) -> SmallVec<[(Q, TrigFactor); 2]> {
    let half = Q::Small(1, 2);
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

/// Product of two beats, as `wave_mul` does for waves.
fn beat_mul(a: &TimeFactor, b: &TimeFactor) -> SmallVec<[(Q, TimeFactor); 2]> {
    let half = Q::Small(1, 2);
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

/// An expression split by its time factor into nonzero [`TimePart`]s, by
/// increasing frequency, cosines before sines (see
/// [`Expr::into_by_frequency`]).
pub type TimeParts = Vec<TimePart>;

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
}

impl Expr {
    /// Zero.
    pub fn zero() -> Expr {
        Expr { terms: Vec::new() }
    }

    /// A rational number.
    pub fn num(q: Q) -> Expr {
        if q.is_zero() {
            Expr::zero()
        } else {
            Expr {
                terms: vec![(Key::one(), q)],
            }
        }
    }

    /// The integer `n`.
    pub fn int(n: i64) -> Expr {
        Expr::num(Q::int(n))
    }

    /// A symbol to the first power (state, parameter, `t` or `pi`).
    pub fn sym(s: Sym) -> Expr {
        let mut key = Key::one();
        key.mono.0.push((s, 1));
        Expr {
            terms: vec![(key, Q::ONE)],
        }
    }

    /// A single term.
    pub fn term(key: Key, coeff: Q) -> Expr {
        if coeff.is_zero() {
            Expr::zero()
        } else {
            Expr {
                terms: vec![(key, coeff)],
            }
        }
    }

    /// Builds from unsorted terms with possible repeats (merged) and zeros (dropped).
    pub fn from_terms(mut terms: Vec<(Key, Q)>) -> Expr {
        packed::sort_terms(&mut terms);
        let mut out: Vec<(Key, Q)> = Vec::with_capacity(terms.len());
        for (k, c) in terms {
            match out.last_mut() {
                Some((lk, lc)) if *lk == k => *lc = lc.add(&c),
                _ => {
                    if let Some((_, lc)) = out.last() {
                        if lc.is_zero() {
                            out.pop();
                        }
                    }
                    out.push((k, c));
                }
            }
        }
        if out.last().is_some_and(|(_, c)| c.is_zero()) {
            out.pop();
        }
        Expr { terms: out }
    }

    /// The expression of terms already in key order, with distinct keys
    /// and nonzero coefficients (the packed forms sort on their own, much
    /// more cheaply than keys compare).
    pub(super) fn from_sorted_terms(terms: Vec<(Key, Q)>) -> Expr {
        debug_assert!(terms.windows(2).all(|w| w[0].0 < w[1].0));
        debug_assert!(terms.iter().all(|(_, c)| !c.is_zero()));
        Expr { terms }
    }

    fn from_map(map: FxHashMap<Key, Q>) -> Expr {
        let mut terms: Vec<(Key, Q)> = map.into_iter().filter(|(_, c)| !c.is_zero()).collect();
        packed::sort_terms(&mut terms);
        Expr { terms }
    }

    /// The terms, sorted by key.
    pub fn terms(&self) -> &[(Key, Q)] {
        &self.terms
    }

    /// Number of terms.
    #[allow(clippy::len_without_is_empty)] // `is_zero` is the emptiness test
    pub fn len(&self) -> usize {
        self.terms.len()
    }

    /// True if and only if the expression is zero.
    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    /// The value when the expression is a plain rational number.
    pub fn as_number(&self) -> Option<Q> {
        match self.terms.as_slice() {
            [] => Some(Q::ZERO),
            [(k, c)] if k.is_one() => Some(c.clone()),
            _ => None,
        }
    }

    /// True if and only if some term mentions `s` (in a monomial, an
    /// argument, or time factors for `Sym::T`).
    pub fn mentions(&self, s: Sym) -> bool {
        let atoms = super::func::any();
        self.terms.iter().any(|(k, _)| {
            k.mono.power_of(s) != 0
                || (atoms
                    && k.mono
                        .0
                        .iter()
                        .any(|(a, _)| super::func::atom(*a).is_some_and(|a| a.mentions(s))))
                || !k.exp.coeff(s).is_zero()
                || match &k.wave {
                    TrigFactor::One => false,
                    TrigFactor::Cos(l) | TrigFactor::Sin(l) => !l.coeff(s).is_zero(),
                }
                || (s == Sym::T && k.beat != TimeFactor::One)
        })
    }

    /// All symbols mentioned, sorted (with those of the arguments of
    /// unspecified functions, see [`super::func`]).
    pub fn symbols(&self) -> Vec<Sym> {
        let mut out = Vec::new();
        let atoms = super::func::any();
        for (k, _) in &self.terms {
            out.extend(k.mono.0.iter().map(|(s, _)| *s));
            if atoms {
                for (s, _) in &k.mono.0 {
                    if let Some(a) = super::func::atom(*s) {
                        out.extend(a.arg_syms());
                    }
                }
            }
            out.extend(k.exp.0.iter().map(|(s, _)| *s));
            if let TrigFactor::Cos(l) | TrigFactor::Sin(l) = &k.wave {
                out.extend(l.0.iter().map(|(s, _)| *s));
            }
            if k.beat != TimeFactor::One {
                out.push(Sym::T);
            }
        }
        out.sort();
        out.dedup();
        out
    }

    /// True if and only if the expression depends on time.
    pub fn is_time_varying(&self) -> bool {
        self.mentions(Sym::T)
    }

    /// Sum.
    pub fn add(&self, other: &Expr) -> Expr {
        self.add_scaled(other, &Q::ONE)
    }

    /// `self + q·other`, merging sorted term lists.
    pub fn add_scaled(&self, other: &Expr, q: &Q) -> Expr {
        if q.is_zero() || other.is_zero() {
            return self.clone();
        }
        let (a, b) = (&self.terms, &other.terms);
        let mut out = Vec::with_capacity(a.len() + b.len());
        let (mut i, mut j) = (0, 0);
        let scaled = |c: &Q| if q.is_one() { c.clone() } else { c.mul(q) };
        while i < a.len() && j < b.len() {
            match a[i].0.cmp(&b[j].0) {
                std::cmp::Ordering::Less => {
                    out.push(a[i].clone());
                    i += 1;
                }
                std::cmp::Ordering::Greater => {
                    out.push((b[j].0.clone(), scaled(&b[j].1)));
                    j += 1;
                }
                std::cmp::Ordering::Equal => {
                    let c = a[i].1.add(&scaled(&b[j].1));
                    if !c.is_zero() {
                        out.push((a[i].0.clone(), c));
                    }
                    i += 1;
                    j += 1;
                }
            }
        }
        out.extend(a[i..].iter().cloned());
        out.extend(b[j..].iter().map(|(k, c)| (k.clone(), scaled(c))));
        Expr { terms: out }
    }

    /// In-place `self += q·other`.
    pub fn add_assign_scaled(&mut self, other: &Expr, q: &Q) {
        if other.is_zero() || q.is_zero() {
            return;
        }
        if self.is_zero() {
            *self = other.scale(q);
            return;
        }
        *self = self.add_scaled(other, q);
    }

    /// Difference.
    pub fn sub(&self, other: &Expr) -> Expr {
        self.add_scaled(other, &Q::int(-1))
    }

    /// Negation.
    pub fn neg(&self) -> Expr {
        self.scale(&Q::int(-1))
    }

    /// Multiplies by a rational.
    pub fn scale(&self, q: &Q) -> Expr {
        if q.is_zero() {
            return Expr::zero();
        }
        if q.is_one() {
            return self.clone();
        }
        Expr {
            terms: self
                .terms
                .iter()
                .map(|(k, c)| (k.clone(), c.mul(q)))
                .collect(),
        }
    }

    /// Product, reduced to normal form; checks the term budget and the
    /// coefficient size.
    pub fn mul(&self, other: &Expr) -> CoreResult<Expr> {
        if self.is_zero() || other.is_zero() {
            return Ok(Expr::zero());
        }
        // Fast paths: multiplication by a number.
        if let Some(q) = self.as_number() {
            return other.scale_checked(&q);
        }
        if let Some(q) = other.as_number() {
            return self.scale_checked(&q);
        }
        let mut acc = SumBuilder::with_capacity(
            (2 * (self.len() + other.len())).min(self.len() * other.len()),
        );
        if self.len().saturating_mul(other.len()) >= PACKED_PRODUCT {
            // Large products split both sides by time factor, so that plain
            // polynomial parts multiply packed (the rest term by term).
            let (a, b) = (
                self.clone().into_by_frequency(),
                other.clone().into_by_frequency(),
            );
            acc.add_product_harmonics(&a, &b, false, Keep::All)?;
        } else {
            acc.add_product(self, other, false)?;
        }
        Ok(acc.finish())
    }

    /// Multiplies by a number within the limits (one unit of work per
    /// term, so that many small products count too): a large number adds its
    /// size to every term, which the term budget must allow before anything
    /// is built; the integer-size limit is checked on the result (at most
    /// twice the limit when both factors are within it), so that repeated
    /// products of huge numbers stop.
    fn scale_checked(&self, q: &Q) -> CoreResult<Expr> {
        limits::add_work(self.len() as u64)?;
        let q_words = coeff_words(q);
        if q_words > 0 {
            limits::check_terms(
                self.size()
                    .saturating_add(self.len().saturating_mul(q_words)),
            )?;
        }
        let r = self.scale(q);
        limits::check_bits(r.max_coeff_bits())?;
        Ok(r)
    }

    /// Integer power. Negative powers only for monomials (single terms
    /// without trigonometric factors).
    pub fn pow(&self, e: i64) -> CoreResult<Expr> {
        if e == 0 {
            return Ok(Expr::int(1));
        }
        if self.is_zero() {
            return if e > 0 {
                Ok(Expr::zero())
            } else {
                Err(CoreError::DivisionByZero)
            };
        }
        if e < 0 {
            let inv = self.recip()?;
            return inv.pow(-e);
        }
        if let [(k, c)] = self.terms.as_slice() {
            if k.wave == TrigFactor::One && k.beat == TimeFactor::One {
                let e32 = i32::try_from(e).map_err(|_| exp_overflow())?;
                let mut mono = Monomial::one();
                for (s, x) in &k.mono.0 {
                    mono.0.push((*s, x.checked_mul(e32).ok_or(exp_overflow())?));
                }
                // The coefficient's size grows as e*log2|c| bits (a unit
                // coefficient stays 1 or -1: `x^1000000000` is cheap).
                let bits = (e as f64 * log2_size(c)).ceil();
                limits::check_bits(if bits < u64::MAX as f64 {
                    bits as u64
                } else {
                    u64::MAX
                })?;
                let coeff = c.pow(e).ok_or(CoreError::DivisionByZero)?;
                let exp = k.exp.scale(&Q::int(e));
                return Ok(Expr::term(
                    Key {
                        mono,
                        exp,
                        wave: TrigFactor::One,
                        beat: TimeFactor::One,
                    },
                    coeff,
                ));
            }
        }
        // A sum (or a trigonometric term): the result has at least e+1 terms
        // unless cancellations happen; refuse absurd exponents up front.
        if e as u64 > limits::limits().max_terms as u64 {
            return Err(CoreError::Limit {
                kind: LimitKind::Terms,
                limit: limits::limits().max_terms as u64,
            });
        }
        self.refuse_oversized_power(e)?;
        // Repeated multiplication by the base: every step multiplies by a
        // short factor with small coefficients, far less work than squaring
        // long powers with long coefficients ((x+y+z+w)^60: 2.4 million term
        // products instead of 35 million), and every step checks the budget,
        // so an oversized power stops at the first step that outgrows it.
        let mut acc = self.clone();
        for _ in 1..e {
            acc = acc.mul(self)?;
        }
        Ok(acc)
    }

    /// Refuses `self^e` before any work when its size is known in advance
    /// to break the budget. A polynomial whose m terms have affinely
    /// independent exponent vectors (`1 + q + p`) has exactly
    /// `C(i+m−1, m−1)` terms in its i-th power (the multinomial count: no
    /// two products of terms share a monomial), so the repeated
    /// multiplication of [`Expr::pow`] does `m·(C(e+m−1, m) − 1)` term
    /// products at least; `(1+q+p)^550` needs 83 million and is refused
    /// at once instead of after many seconds of large coefficients.
    fn refuse_oversized_power(&self, e: i64) -> CoreResult<()> {
        let m = self.terms.len() as u64;
        if m < 2 || !self.has_independent_exponents() {
            return Ok(());
        }
        let e = e.unsigned_abs();
        let max = limits::limits().max_terms as u64;
        if binomial(e + m - 1, m - 1) > u128::from(max) {
            return Err(CoreError::Limit {
                kind: LimitKind::Terms,
                limit: max,
            });
        }
        let products = binomial(e + m - 1, m)
            .saturating_sub(1)
            .saturating_mul(u128::from(m));
        if products > u128::from(max.saturating_mul(limits::WORK_PER_TERM)) {
            return Err(CoreError::Limit {
                kind: LimitKind::Work,
                limit: max,
            });
        }
        Ok(())
    }

    /// True when every term is a plain monomial (no `exp`, no trigonometric
    /// factor) and the exponent vectors are affinely independent.
    fn has_independent_exponents(&self) -> bool {
        let plain =
            |k: &Key| k.exp.is_zero() && k.wave == TrigFactor::One && k.beat == TimeFactor::One;
        if !self.terms.iter().all(|(k, _)| plain(k)) {
            return false;
        }
        let mut syms: Vec<Sym> = self
            .terms
            .iter()
            .flat_map(|(k, _)| k.mono.0.iter().map(|(s, _)| *s))
            .collect();
        syms.sort();
        syms.dedup();
        let m = self.terms.len();
        if m - 1 > syms.len() {
            return false;
        }
        let vector = |k: &Key| -> Vec<i128> {
            syms.iter()
                .map(|s| i128::from(k.mono.power_of(*s)))
                .collect()
        };
        let Some((first, rest)) = self.terms.split_first() else {
            return false;
        };
        let origin = vector(&first.0);
        let rows: Vec<Vec<i128>> = rest
            .iter()
            .map(|(k, _)| vector(k).iter().zip(&origin).map(|(a, b)| a - b).collect())
            .collect();
        full_row_rank(rows)
    }

    /// Exact reciprocal of a number or monomial (times `exp(M)`).
    pub fn recip(&self) -> CoreResult<Expr> {
        match self.terms.as_slice() {
            [] => Err(CoreError::DivisionByZero),
            [(k, c)] if k.wave == TrigFactor::One && k.beat == TimeFactor::One => {
                let mut mono = Monomial::one();
                for (s, x) in &k.mono.0 {
                    if *s == Sym::T {
                        return Err(CoreError::DivisionBySum {
                            divisor: self.to_string(),
                        });
                    }
                    mono.0.push((*s, x.checked_neg().ok_or(exp_overflow())?));
                }
                let coeff = c.recip().ok_or(CoreError::DivisionByZero)?;
                Ok(Expr::term(
                    Key {
                        mono,
                        exp: k.exp.neg(),
                        wave: TrigFactor::One,
                        beat: TimeFactor::One,
                    },
                    coeff,
                ))
            }
            _ => Err(CoreError::DivisionBySum {
                divisor: self.to_string(),
            }),
        }
    }

    /// Quotient by a number or monomial.
    pub fn div(&self, other: &Expr) -> CoreResult<Expr> {
        if let Some(q) = other.as_number() {
            let r = q.recip().ok_or(CoreError::DivisionByZero)?;
            return Ok(self.scale(&r));
        }
        self.mul(&other.recip()?)
    }

    /// Keeps the terms satisfying `pred`.
    pub fn filter(&self, mut pred: impl FnMut(&Key, &Q) -> bool) -> Expr {
        Expr {
            terms: self
                .terms
                .iter()
                .filter(|(k, c)| pred(k, c))
                .cloned()
                .collect(),
        }
    }

    /// The expression split by its time factor: the terms with `cos(h t)`
    /// (or none, `h = 0`) and those with `sin(h t)` for each frequency `h`;
    /// the parts sum to `self`.
    pub fn into_by_frequency(self) -> TimeParts {
        // One denominator for all packed parts (when it fits a word).
        let denom = packed::common_denominator(&self.terms);
        let mut parts: std::collections::BTreeMap<(Q, bool), Vec<(Key, Q)>> = Default::default();
        for (k, c) in self.terms {
            let slot = match &k.beat {
                TimeFactor::One => (Q::ZERO, false),
                TimeFactor::Cos(w) => (w.clone(), false),
                TimeFactor::Sin(w) => (w.clone(), true),
            };
            parts.entry(slot).or_default().push((k, c));
        }
        // Each part is a subsequence of sorted terms: still sorted.
        parts
            .into_iter()
            .map(|((freq, odd), terms)| TimePart {
                packed: denom
                    .and_then(|d| Packed::pack_over(&terms, &freq, odd, d))
                    .or_else(|| Packed::pack(&terms, &freq, odd)),
                freq,
                odd,
                expr: std::sync::OnceLock::from(Expr { terms }),
            })
            .collect()
    }

    /// Maps each term to a new (key, coefficient); the keys need not stay
    /// sorted or distinct.
    pub fn map_terms(&self, mut f: impl FnMut(&Key, &Q) -> Option<(Key, Q)>) -> Expr {
        Expr::from_terms(self.terms.iter().filter_map(|(k, c)| f(k, c)).collect())
    }

    /// The coefficient of `s^k` (other powers of `s` dropped).
    pub fn coeff_of_power(&self, s: Sym, k: i32) -> Expr {
        self.map_terms(|key, c| {
            if key.mono.power_of(s) != k {
                return None;
            }
            let mut key = key.clone();
            key.mono.0.retain(|(x, _)| *x != s);
            Some((key, c.clone()))
        })
    }

    /// The range of powers of `s` present (min, max); `None` for zero.
    pub fn power_range(&self, s: Sym) -> Option<(i32, i32)> {
        let mut it = self.terms.iter().map(|(k, _)| k.mono.power_of(s));
        let first = it.next()?;
        Some(it.fold((first, first), |(lo, hi), e| (lo.min(e), hi.max(e))))
    }

    /// Size measure for the budget: number of terms plus the size (in terms)
    /// of large coefficients.
    pub fn size(&self) -> usize {
        self.terms.iter().fold(self.terms.len(), |acc, (_, c)| {
            acc.saturating_add(coeff_words(c))
        })
    }

    /// Bits of the largest coefficient (numerator or denominator).
    pub fn max_coeff_bits(&self) -> u64 {
        self.terms.iter().map(|(_, c)| c.bits()).max().unwrap_or(0)
    }
}

// ---------------------------------------------------------------------------
// Elementary functions of linear arguments.

/// A linear argument split into its parts: state form, time frequency and a
/// constant (rational number and rational multiple of pi).
struct LinearArg {
    state: Vec<(Sym, Q)>,
    freq: Q,
    pi_multiple: Q,
    constant: Q,
}

fn linear_arg(func: &'static str, arg: &Expr, states: &[Sym]) -> CoreResult<LinearArg> {
    let mut out = LinearArg {
        state: Vec::new(),
        freq: Q::ZERO,
        pi_multiple: Q::ZERO,
        constant: Q::ZERO,
    };
    let nonlinear = || CoreError::NonlinearArgument {
        func,
        arg: arg.to_string(),
    };
    for (k, c) in &arg.terms {
        if !k.exp.is_zero() || k.wave != TrigFactor::One || k.beat != TimeFactor::One {
            return Err(nonlinear());
        }
        match k.mono.0.as_slice() {
            [] => out.constant = c.clone(),
            [(s, 1)] if *s == Sym::T => out.freq = c.clone(),
            [(s, 1)] if *s == Sym::PI => out.pi_multiple = c.clone(),
            [(s, 1)] if states.contains(s) => out.state.push((*s, c.clone())),
            _ => {
                if let Some((p, _)) = k
                    .mono
                    .0
                    .iter()
                    .find(|(s, _)| *s != Sym::T && *s != Sym::PI && !states.contains(s))
                {
                    if super::func::atom(*p).is_some() {
                        return Err(nonlinear());
                    }
                    if k.mono.power_of(Sym::T) != 0 {
                        return Err(CoreError::SymbolicFrequency {
                            arg: arg.to_string(),
                        });
                    }
                    return Err(CoreError::ParameterInArgument {
                        func,
                        name: p.name(),
                    });
                }
                // Distinguish a parameter factor from genuine nonlinearity.
                let has_t = k.mono.power_of(Sym::T) != 0;
                if has_t && k.mono.0.len() >= 2 && k.mono.power_of(Sym::T) == 1 {
                    return Err(CoreError::SymbolicFrequency {
                        arg: arg.to_string(),
                    });
                }
                return Err(nonlinear());
            }
        }
    }
    Ok(out)
}

/// Exact `cos(c·pi)` and `sin(c·pi)` when c is a multiple of 1/2.
fn cos_sin_half_pi(c: &Q) -> Option<(i64, i64)> {
    let two_c = c.mul(&Q::int(2));
    let n = two_c.to_i64()?;
    Some(match n.rem_euclid(4) {
        0 => (1, 0),
        1 => (0, 1),
        2 => (-1, 0),
        _ => (0, -1),
    })
}

/// Exact value of cos or sin at a rational multiple of pi, when rational
/// (Niven: only 0, ±1/2, ±1 occur).
fn trig_at_pi_multiple(is_sin: bool, c: &Q) -> Option<Q> {
    // Reduce c modulo 2 and look it up in sixths.
    let six = c.mul(&Q::int(6));
    let n = six.to_i64()?.rem_euclid(12);
    // cos(n*pi/6) for n = 0..11
    const COS2: [i64; 12] = [2, 99, 1, 0, -1, 99, -2, 99, -1, 0, 1, 99];
    let idx = if is_sin { (n + 9) % 12 } else { n }; // sin(x) = cos(x - pi/2) = cos(x + 3pi/2)
    let v = COS2[idx as usize];
    if v == 99 {
        None
    } else {
        Q::ratio(v, 2)
    }
}

impl Expr {
    /// `cos(arg)` for an argument linear in the state coordinates `states`
    /// and time (plus a multiple of pi/2), split into state and time factors.
    /// Any other symbol in the argument is refused as a parameter.
    pub fn cos_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        Expr::trig_of("cos", arg, states)
    }

    /// `sin(arg)`, as `cos_of`.
    pub fn sin_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        Expr::trig_of("sin", arg, states)
    }

    fn trig_of(func: &'static str, arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        let is_sin = func == "sin";
        let la = linear_arg(func, arg, states)?;
        if !la.constant.is_zero() {
            return Err(CoreError::ConstantInArgument {
                func,
                arg: arg.to_string(),
            });
        }
        let state = LinearForm(la.state.iter().cloned().collect());
        if state.is_zero() && la.freq.is_zero() {
            // A pure constant c*pi.
            return match trig_at_pi_multiple(is_sin, &la.pi_multiple) {
                Some(v) => Ok(Expr::num(v)),
                None => Err(CoreError::Irrational {
                    what: format!("{func}({arg})"),
                }),
            };
        }
        let (cp, sp) =
            cos_sin_half_pi(&la.pi_multiple).ok_or_else(|| CoreError::ConstantInArgument {
                func,
                arg: arg.to_string(),
            })?;
        // X = L + k t; cos(X + c pi) = cos X cp - sin X sp; sin(X + c pi) = sin X cp + cos X sp.
        let cos_l = Expr::term(
            Key {
                wave: cos_wave(state.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let sin_l = match sin_wave(state) {
            Some((neg, w)) => Expr::term(
                Key {
                    wave: w,
                    ..Key::one()
                },
                Q::int(if neg { -1 } else { 1 }),
            ),
            None => Expr::zero(),
        };
        let cos_k = Expr::term(
            Key {
                beat: cos_beat(la.freq.clone()),
                ..Key::one()
            },
            Q::ONE,
        );
        let sin_k = match sin_beat(la.freq.clone()) {
            Some((neg, b)) => Expr::term(
                Key {
                    beat: b,
                    ..Key::one()
                },
                Q::int(if neg { -1 } else { 1 }),
            ),
            None => Expr::zero(),
        };
        // cos X = cos L cos kt - sin L sin kt; sin X = sin L cos kt + cos L sin kt.
        let cos_x = cos_l.mul(&cos_k)?.sub(&sin_l.mul(&sin_k)?);
        let sin_x = sin_l.mul(&cos_k)?.add(&cos_l.mul(&sin_k)?);
        let (a, b) = if is_sin {
            (&sin_x, &cos_x)
        } else {
            (&cos_x, &sin_x)
        };
        // result = a*cp + (is_sin ? b*sp : -b*sp)
        let s = if is_sin { sp } else { -sp };
        Ok(a.scale(&Q::int(cp)).add(&b.scale(&Q::int(s))))
    }

    /// `exp(arg)` for an argument linear in the state variables.
    pub fn exp_of(arg: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        let la = linear_arg("exp", arg, states)?;
        if !la.freq.is_zero() {
            return Err(CoreError::TimeInExp {
                arg: arg.to_string(),
            });
        }
        if !la.constant.is_zero() || !la.pi_multiple.is_zero() {
            return Err(CoreError::Irrational {
                what: format!("exp({arg})"),
            });
        }
        Ok(Expr::term(
            Key {
                exp: LinearForm(la.state.into_iter().collect()),
                ..Key::one()
            },
            Q::ONE,
        ))
    }
}

// ---------------------------------------------------------------------------
// Plain rendering in the input syntax.

pub(crate) fn fmt_lin(l: &LinearForm) -> String {
    let mut s = String::new();
    for (i, (sym, c)) in l.0.iter().enumerate() {
        let neg = c.is_negative();
        let a = c.abs();
        if i == 0 {
            if neg {
                s.push('-');
            }
        } else {
            s.push_str(if neg { " - " } else { " + " });
        }
        if !a.is_one() {
            s.push_str(&format!("{a}*"));
        }
        s.push_str(&sym.name());
    }
    s
}

fn fmt_freq(k: &Q) -> String {
    if k.is_one() {
        "t".to_string()
    } else {
        format!("{k}*t")
    }
}

impl Key {
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

impl fmt::Display for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.terms.is_empty() {
            return write!(f, "0");
        }
        for (i, (k, c)) in self.terms.iter().enumerate() {
            let neg = c.is_negative();
            let a = c.abs();
            if i == 0 {
                if neg {
                    write!(f, "-")?;
                }
            } else {
                write!(f, "{}", if neg { " - " } else { " + " })?;
            }
            let factors = k.factors();
            if factors.is_empty() {
                write!(f, "{a}")?;
            } else if a.is_one() {
                write!(f, "{}", factors.join("*"))?;
            } else {
                write!(f, "{a}*{}", factors.join("*"))?;
            }
        }
        Ok(())
    }
}

impl fmt::Debug for Expr {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{self}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn t_times(k: i64) -> Expr {
        Expr::sym(Sym::T).scale(&Q::int(k))
    }

    /// A power whose size is known in advance (terms with affinely
    /// independent exponents: the multinomial count) is refused before
    /// any term product; one whose products share monomials is not.
    #[test]
    fn oversized_powers_are_refused_before_any_work() {
        let (q, p) = (Expr::sym(Sym::new("q")), Expr::sym(Sym::new("p")));
        let base = Expr::int(1).add(&q).add(&p);
        limits::set_limits(limits::Limits::default());
        limits::start_work();
        let refused = base.pow(550);
        assert!(
            matches!(
                refused,
                Err(CoreError::Limit {
                    kind: LimitKind::Work,
                    ..
                })
            ),
            "{refused:?}"
        );
        assert_eq!(limits::work_done(), Some(0));
        // (1 + q + p)^40 has C(42, 2) = 861 terms, as counted.
        assert_eq!(base.pow(40).map(|e| e.terms.len()).ok(), Some(861));
        // 1, q, q^2 are affinely dependent: no early refusal, and
        // (1 + q + q^2)^300 has 601 terms.
        let dependent = Expr::int(1).add(&q).add(&q.mul(&q).unwrap_or_default());
        assert!(!dependent.has_independent_exponents());
        assert_eq!(dependent.pow(300).map(|e| e.terms.len()).ok(), Some(601));
        assert_eq!(binomial(552, 2), 152_076);
        assert_eq!(binomial(5, 7), 0);
    }

    /// Keeping low frequencies, and the constant of the dropped sines, on
    /// a product worked by hand: sin(3t)·(cos t + cos 3t) =
    /// (sin 4t + sin 2t)/2 + (sin 6t)/2 (+ sin 0 = 0).
    #[test]
    fn kept_terms_and_sine_constants_of_a_product() {
        let states: [Sym; 0] = [];
        let a = Expr::sin_of(&t_times(3), &states).unwrap();
        let b = Expr::cos_of(&t_times(1), &states)
            .unwrap()
            .add(&Expr::cos_of(&t_times(3), &states).unwrap());
        let full = a.mul(&b).unwrap();
        let (pa, pb) = (a.into_by_frequency(), b.into_by_frequency());

        let mut acc = SumBuilder::new();
        acc.add_product_harmonics(&pa, &pb, false, Keep::All)
            .unwrap();
        assert_eq!(acc.finish(), full);

        // Up to frequency 2: only sin(2t)/2 is kept; the constants are
        // 1/2·(1/4) + 1/2·(1/6) = 5/24.
        let mut acc = SumBuilder::new();
        acc.add_product_harmonics(&pa, &pb, false, Keep::UpToWithSines(&Q::int(2)))
            .unwrap();
        let (kept, sines) = acc.finish_with_sines();
        assert_eq!(
            kept,
            Expr::sin_of(&t_times(2), &states)
                .unwrap()
                .scale(&Q::Small(1, 2))
        );
        assert_eq!(sines, Expr::num(Q::Small(5, 24)));

        // The mean (cap 0): sine times cosine has none, and is not formed.
        limits::start_work();
        let mut acc = SumBuilder::new();
        acc.add_product_harmonics(&pa, &pb, false, Keep::UpTo(&Q::ZERO))
            .unwrap();
        assert!(acc.finish().is_zero());
        // Two pairs of parts tested (one unit each), no term product.
        assert_eq!(limits::work_done(), Some(2));
    }
}

/// `C(n, k)`, saturating at `u128::MAX`.
fn binomial(n: u64, k: u64) -> u128 {
    if k > n {
        return 0;
    }
    let k = k.min(n - k);
    let mut r: u128 = 1;
    for j in 1..=u128::from(k) {
        let factor = u128::from(n - k) + j;
        match r.checked_mul(factor) {
            Some(p) => r = p / j,
            None => return u128::MAX,
        }
    }
    r
}

/// True when the integer rows are linearly independent (fraction-free
/// elimination; an overflow counts as "not known", false).
fn full_row_rank(mut rows: Vec<Vec<i128>>) -> bool {
    let n_rows = rows.len();
    let n_cols = rows.first().map_or(0, Vec::len);
    let mut rank = 0;
    for col in 0..n_cols {
        let Some(pivot) = (rank..n_rows).find(|&r| rows[r][col] != 0) else {
            continue;
        };
        rows.swap(rank, pivot);
        let p = rows[rank][col];
        for r in rank + 1..n_rows {
            let f = rows[r][col];
            if f == 0 {
                continue;
            }
            for c in 0..n_cols {
                let Some(v) = rows[r][c]
                    .checked_mul(p)
                    .and_then(|a| rows[rank][c].checked_mul(f).and_then(|b| a.checked_sub(b)))
                else {
                    return false;
                };
                rows[r][c] = v;
            }
            // Keep the entries small: divide the row by its gcd.
            let g = rows[r].iter().fold(0i128, |g, &v| gcd_i128(g, v));
            if g > 1 {
                for v in &mut rows[r] {
                    *v /= g;
                }
            }
        }
        rank += 1;
        if rank == n_rows {
            break;
        }
    }
    rank == n_rows
}

fn gcd_i128(a: i128, b: i128) -> i128 {
    let (mut a, mut b) = (a.unsigned_abs(), b.unsigned_abs());
    while b != 0 {
        (a, b) = (b, a % b);
    }
    i128::try_from(a).unwrap_or(i128::MAX)
}
