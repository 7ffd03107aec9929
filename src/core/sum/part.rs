//! [`TimePart`]: the terms of an expression with one time factor, packed
//! when they fit; an expression split by time factor.

use crate::core::error::CoreResult;
use crate::core::expr::Expr;
use crate::core::num::Q;
use crate::core::packed::{self, Packed};
use crate::core::symbol::Sym;
use crate::core::term::{Key, TimeFactor};

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
    pub(crate) expr: std::sync::OnceLock<Expr>,
    /// The terms packed for fast products, when they fit.
    pub(crate) packed: Option<Packed>,
}

impl TimePart {
    /// The terms.
    pub fn expr(&self) -> &Expr {
        self.expr.get_or_init(|| {
            self.packed
                .as_ref()
                .map_or_else(Expr::zero, |p| Expr::from_sorted_terms(p.unpack()))
        })
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
                .terms()
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

    /// True when the part has a packed copy (see [`crate::core::packed`]).
    pub fn is_packed(&self) -> bool {
        self.packed.is_some()
    }

    /// The packed copy, when there is one (for tests of the packed path).
    #[cfg(test)]
    pub(crate) fn packed(&self) -> Option<&Packed> {
        self.packed.as_ref()
    }
}

/// An expression split by its time factor into nonzero [`TimePart`]s, by
/// increasing frequency, cosines before sines (see
/// [`Expr::into_by_frequency`]).
pub type TimeParts = Vec<TimePart>;

impl Expr {
    /// The expression split by its time factor: the terms with `cos(h t)`
    /// (or none, `h = 0`) and those with `sin(h t)` for each frequency `h`;
    /// the parts sum to `self`.
    pub fn into_by_frequency(self) -> TimeParts {
        // One denominator for all packed parts (when it fits a word).
        let denom = packed::common_denominator(self.terms());
        let mut parts: std::collections::BTreeMap<(Q, bool), Vec<(Key, Q)>> = Default::default();
        for (k, c) in self.into_terms() {
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
                expr: std::sync::OnceLock::from(Expr::from_sorted_terms(terms)),
            })
            .collect()
    }
}
