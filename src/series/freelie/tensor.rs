//! Truncated tensor series: products, exponential and logarithm, and the
//! expansion of bracket monomials.

use std::collections::BTreeMap;

use super::coeff::{Coeff, ONE};
use std::num::NonZeroU64;
use super::error::FreeLieError;
use super::words::{Alphabet, Bracket, Letter, Word};

/// A tensor series (or polynomial): a finite sparse combination of words
/// with coefficients, the empty word standing for the constant term.
///
/// Terms with a zero coefficient are never stored, and terms are kept in
/// lexicographic order of their words, so iteration is deterministic.
#[derive(Clone, Debug, PartialEq)]
pub struct Tensor<C> {
    pub(super) terms: BTreeMap<Word, C>,
}

impl<C: Coeff> Default for Tensor<C> {
    fn default() -> Self {
        Tensor::zero()
    }
}

impl<C: Coeff> Tensor<C> {
    /// The zero series.
    pub fn zero() -> Self {
        Tensor {
            terms: BTreeMap::new(),
        }
    }

    /// The constant series 1 (the empty word).
    pub fn one() -> Self {
        Tensor::monomial(Word::new(), C::one())
    }

    /// The series consisting of one letter with coefficient 1.
    pub fn letter(letter: Letter) -> Self {
        Tensor::monomial(vec![letter], C::one())
    }

    /// The series `coeff · word` (zero if `coeff` is zero).
    pub fn monomial(word: Word, coeff: C) -> Self {
        let mut terms = BTreeMap::new();
        if !coeff.is_zero() {
            terms.insert(word, coeff);
        }
        Tensor { terms }
    }

    /// The sum of the given terms; repeated words are added up and zero
    /// coefficients dropped.
    pub fn from_terms<I: IntoIterator<Item = (Word, C)>>(terms: I) -> Self {
        let mut map = BTreeMap::new();
        for (word, coeff) in terms {
            accumulate(&mut map, word, coeff);
        }
        map.retain(|_, coeff: &mut C| !coeff.is_zero());
        Tensor { terms: map }
    }

    /// Returns true if and only if the series has no term.
    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    /// The number of (nonzero) terms.
    pub fn n_terms(&self) -> usize {
        self.terms.len()
    }

    /// The coefficient of a word, or `None` if it is zero.
    pub fn coeff(&self, word: &[Letter]) -> Option<&C> {
        self.terms.get(word)
    }

    /// The terms in lexicographic order of their words.
    pub fn terms(&self) -> impl Iterator<Item = (&Word, &C)> + '_ {
        self.terms.iter()
    }

    /// The terms, by value, in lexicographic order of their words.
    pub fn into_terms(self) -> impl Iterator<Item = (Word, C)> {
        self.terms.into_iter()
    }

    /// The sum `self + other`.
    pub fn add(&self, other: &Self) -> Self {
        let mut res = self.clone();
        res.add_scaled_assign(other, 1, ONE);
        res
    }

    /// The difference `self − other`.
    pub fn sub(&self, other: &Self) -> Self {
        let mut res = self.clone();
        res.add_scaled_assign(other, -1, ONE);
        res
    }

    /// The negation `−self`.
    pub fn neg(&self) -> Self {
        Tensor {
            terms: self
                .terms
                .iter()
                .map(|(word, coeff)| (word.clone(), coeff.neg()))
                .collect(),
        }
    }

    /// The product of every coefficient with the rational `num / den`.
    pub fn scale(&self, num: i64, den: NonZeroU64) -> Self {
        Tensor::from_terms(
            self.terms
                .iter()
                .map(|(word, coeff)| (word.clone(), coeff.scale(num, den))),
        )
    }

    /// The product of every coefficient with `factor` (on the left).
    pub fn mul_coeff(&self, factor: &C) -> Self {
        Tensor::from_terms(
            self.terms
                .iter()
                .map(|(word, coeff)| (word.clone(), factor.mul(coeff))),
        )
    }

    /// The series without its terms of weight above `max_weight`.
    ///
    /// Fails if a word uses a letter outside the alphabet.
    pub fn truncated(&self, alphabet: &Alphabet, max_weight: u32) -> Result<Self, FreeLieError> {
        let mut terms = BTreeMap::new();
        for (word, coeff) in &self.terms {
            if alphabet.word_weight(word)? <= u64::from(max_weight) {
                terms.insert(word.clone(), coeff.clone());
            }
        }
        Ok(Tensor { terms })
    }

    /// The concatenation product `self · other` truncated at weight
    /// `max_weight`; pairs of terms whose weights add up to more than
    /// `max_weight` are never multiplied.
    ///
    /// Fails if a word uses a letter outside the alphabet.
    pub fn mul_truncated(
        &self,
        other: &Self,
        alphabet: &Alphabet,
        max_weight: u32,
    ) -> Result<Self, FreeLieError> {
        let max_weight = u64::from(max_weight);
        let lhs = self.weighted_terms(alphabet, max_weight)?;
        let mut rhs = other.weighted_terms(alphabet, max_weight)?;
        rhs.sort_by_key(|(_, _, weight)| *weight);
        let mut terms = BTreeMap::new();
        for (left_word, left_coeff, left_weight) in &lhs {
            keep_going::<C>(terms.len())?;
            let budget = max_weight - left_weight;
            for (right_word, right_coeff, right_weight) in &rhs {
                if *right_weight > budget {
                    break;
                }
                let mut word = Vec::with_capacity(left_word.len() + right_word.len());
                word.extend_from_slice(left_word);
                word.extend_from_slice(right_word);
                accumulate(&mut terms, word, left_coeff.mul(right_coeff));
            }
        }
        terms.retain(|_, coeff: &mut C| !coeff.is_zero());
        Ok(Tensor { terms })
    }

    /// The exponential `Σ_k Z^k / k!` of a series `Z` with zero constant
    /// term, truncated at weight `max_weight`.
    ///
    /// Fails if the constant term is nonzero or a word uses a letter outside
    /// the alphabet.
    pub fn exp_truncated(
        &self,
        alphabet: &Alphabet,
        max_weight: u32,
    ) -> Result<Self, FreeLieError> {
        if self.terms.contains_key(&[][..]) {
            return Err(FreeLieError::ConstantTermNotZero);
        }
        let series = self.truncated(alphabet, max_weight)?;
        let mut res = Tensor::one();
        res.add_scaled_assign(&series, 1, ONE);
        // `power` holds Z^k / k!; every factor raises the lowest weight by at
        // least 1, so at most `max_weight` factors contribute.
        let mut power = series.clone();
        for k in 2..=u64::from(max_weight) {
            let Some(den) = NonZeroU64::new(k) else { break };
            // Dividing the short factor Z by k is cheaper than dividing the
            // long product.
            let factor = series.scale(1, den);
            power = power.mul_truncated(&factor, alphabet, max_weight)?;
            if power.is_zero() {
                break;
            }
            res.add_scaled_assign(&power, 1, ONE);
        }
        Ok(res)
    }

    /// The logarithm `Σ_k (−1)^(k+1) Z^k / k` with `Z = self − 1`,
    /// truncated at weight `max_weight`; the powers `Z^k` are built one
    /// factor at a time, each truncated.
    ///
    /// Fails if the constant term is not 1 or a word uses a letter outside
    /// the alphabet.
    pub fn log_truncated(
        &self,
        alphabet: &Alphabet,
        max_weight: u32,
    ) -> Result<Self, FreeLieError> {
        match self.terms.get(&[][..]) {
            Some(constant) if *constant == C::one() => {}
            _ => return Err(FreeLieError::ConstantTermNotOne),
        }
        let mut series = self.truncated(alphabet, max_weight)?;
        series.terms.remove(&[][..]);
        let mut res = series.clone();
        let mut power = series.clone();
        for k in 2..=u64::from(max_weight) {
            let Some(den) = NonZeroU64::new(k) else { break };
            power = power.mul_truncated(&series, alphabet, max_weight)?;
            if power.is_zero() {
                break;
            }
            let sign = if k % 2 == 0 { -1 } else { 1 };
            res.add_scaled_assign(&power, sign, den);
        }
        Ok(res)
    }

    /// Adds `(num / den) · other` to `self` in place.
    fn add_scaled_assign(&mut self, other: &Self, num: i64, den: NonZeroU64) {
        let unit = den.get() == 1 && (num == 1 || num == -1);
        for (word, coeff) in &other.terms {
            let term = if !unit {
                coeff.scale(num, den)
            } else if num == 1 {
                coeff.clone()
            } else {
                coeff.neg()
            };
            add_term(&mut self.terms, word, term);
        }
    }

    /// The terms of weight at most `max_weight`, with their weights.
    fn weighted_terms(
        &self,
        alphabet: &Alphabet,
        max_weight: u64,
    ) -> Result<Vec<(&Word, &C, u64)>, FreeLieError> {
        let mut res = Vec::with_capacity(self.terms.len());
        for (word, coeff) in &self.terms {
            let weight = alphabet.word_weight(word)?;
            if weight <= max_weight {
                res.push((word, coeff, weight));
            }
        }
        Ok(res)
    }

    /// The untruncated product (used for homogeneous bracket expansions).
    pub(super) fn mul_full(&self, other: &Self) -> Self {
        let mut terms = BTreeMap::new();
        for (left_word, left_coeff) in &self.terms {
            for (right_word, right_coeff) in &other.terms {
                let mut word = Vec::with_capacity(left_word.len() + right_word.len());
                word.extend_from_slice(left_word);
                word.extend_from_slice(right_word);
                accumulate(&mut terms, word, left_coeff.mul(right_coeff));
            }
        }
        terms.retain(|_, coeff: &mut C| !coeff.is_zero());
        Tensor { terms }
    }
}

/// Asks [`Coeff::keep_going`] and turns a refusal into an error.
pub(super) fn keep_going<C: Coeff>(n_terms: usize) -> Result<(), FreeLieError> {
    if C::keep_going(n_terms) {
        Ok(())
    } else {
        Err(FreeLieError::Stopped { n_terms })
    }
}

/// Adds `value` to the coefficient of `word`, removing the entry if the sum
/// is zero.
pub(super) fn add_term<C: Coeff>(terms: &mut BTreeMap<Word, C>, word: &Word, value: C) {
    match terms.get_mut(word) {
        Some(entry) => {
            let sum = entry.add(&value);
            if sum.is_zero() {
                terms.remove(word);
            } else {
                *entry = sum;
            }
        }
        None => {
            if !value.is_zero() {
                terms.insert(word.clone(), value);
            }
        }
    }
}

/// Adds `value` to the coefficient of `word` (zeros are left in place; the
/// caller removes them).
pub(super) fn accumulate<C: Coeff>(terms: &mut BTreeMap<Word, C>, word: Word, value: C) {
    match terms.entry(word) {
        std::collections::btree_map::Entry::Vacant(entry) => {
            entry.insert(value);
        }
        std::collections::btree_map::Entry::Occupied(mut entry) => {
            let sum = entry.get().add(&value);
            *entry.get_mut() = sum;
        }
    }
}

/// The expansion of a bracket monomial in the tensor algebra, with
/// `[a, b] = ab − ba`.
pub fn expand_bracket<C: Coeff>(bracket: &Bracket) -> Tensor<C> {
    match bracket {
        Bracket::Letter(letter) => Tensor::letter(*letter),
        Bracket::Pair(left, right) => {
            let left = expand_bracket::<C>(left);
            let right = expand_bracket::<C>(right);
            left.mul_full(&right).sub(&right.mul_full(&left))
        }
    }
}
