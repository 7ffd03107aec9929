//! The free Lie algebra over a generic coefficient ring: words and truncated
//! tensor series, Lyndon words with their standard bracketing, projection of
//! Lie elements onto the Lyndon basis, the truncated exponential and
//! logarithm, the Baker–Campbell–Hausdorff series and the evaluation of Lie
//! polynomials with concrete values (fields, matrices, ...).
//!
//! This module owns the structural side of the chronological logarithm
//! (DESIGN §2.5, §2.7). It must not know about anything else in ordex:
//! coefficients enter through the [`Coeff`] trait (implemented here for
//! [`BigRational`], and by the caller for its exact expressions), and
//! concrete values enter only through the closures given to [`evaluate`].
//!
//! # Conventions
//! - A letter is a `u16`; letters `0..m` form an [`Alphabet`] in which every
//!   letter carries a positive integer weight (for ordex: the power of eps it
//!   brings). Truncation is by total weight: a word of weight above the
//!   bound is dropped. With all weights 1 this is truncation by length.
//! - A word `a1 a2 … ak` stands for the composition `X_a1 ∘ X_a2 ∘ … ∘ X_ak`
//!   of operators on functions, so the product of the tensor algebra is
//!   concatenation and the commutator is `[u, v] = uv − vu`. For vector
//!   fields acting as derivations this is exactly the Lie bracket
//!   `[X, Y](h) = X(Y(h)) − Y(X(h))`.
//! - In a Chen series the earliest time acts outermost: the earliest letter
//!   is the leftmost one in the word.
//! - Lyndon words are taken for the letter order `0 < 1 < 2 < …`; the
//!   standard factorisation of a Lyndon word `w` of length at least 2 is
//!   `w = uv` with `v` its longest proper Lyndon suffix, and the standard
//!   bracketing `P_w = [P_u, P_v]` gives the Lyndon basis of the free Lie
//!   algebra. `P_w` is `w` plus words of the same length that are
//!   lexicographically larger, which makes the projection onto the basis a
//!   triangular elimination.

use std::collections::{BTreeMap, HashMap};
use std::fmt;
use std::num::NonZeroU64;
use std::rc::Rc;

use num_bigint::BigInt;
use num_rational::BigRational;

/// The denominator 1 for [`Coeff::scale`].
const ONE: NonZeroU64 = NonZeroU64::MIN;

/// A letter: an index into an [`Alphabet`].
pub type Letter = u16;

/// A word: a sequence of letters, read as the composition of the letters'
/// operators from left (outermost) to right (innermost).
pub type Word = Vec<Letter>;

/// The coefficient ring of tensor series and Lie polynomials.
///
/// Implementations must be exact: `is_zero` must recognise every value that
/// equals zero (the projection onto the Lyndon basis relies on it to decide
/// whether an element is a Lie element), and `==` must be equality of
/// values. Coefficients may be large, so the algorithms of this module keep
/// the number of calls to [`Coeff::mul`] low and use [`Coeff::scale`] for
/// integer and rational factors.
pub trait Coeff: Clone + PartialEq + fmt::Debug {
    /// The additive identity.
    fn zero() -> Self;
    /// The multiplicative identity.
    fn one() -> Self;
    /// Returns true if and only if the value is zero.
    fn is_zero(&self) -> bool;
    /// The sum `self + other`.
    fn add(&self, other: &Self) -> Self;
    /// The difference `self − other`.
    fn sub(&self, other: &Self) -> Self;
    /// The product `self · other`.
    fn mul(&self, other: &Self) -> Self;
    /// The negation `−self`.
    fn neg(&self) -> Self;
    /// The product of `self` with the rational number `num / den`.
    fn scale(&self, num: i64, den: NonZeroU64) -> Self;

    /// Asked by the long loops of this module with the number of terms of
    /// the series being built; `false` stops the computation with
    /// [`FreeLieError::Stopped`]. This is how a caller imposes a size
    /// budget or cancellation (the number of words grows exponentially
    /// with the weight). The default never stops.
    fn keep_going(_n_terms: usize) -> bool {
        true
    }
}

impl Coeff for BigRational {
    fn zero() -> Self {
        <BigRational as num_traits::Zero>::zero()
    }

    fn one() -> Self {
        <BigRational as num_traits::One>::one()
    }

    fn is_zero(&self) -> bool {
        num_traits::Zero::is_zero(self)
    }

    fn add(&self, other: &Self) -> Self {
        self + other
    }

    fn sub(&self, other: &Self) -> Self {
        self - other
    }

    fn mul(&self, other: &Self) -> Self {
        self * other
    }

    fn neg(&self) -> Self {
        -self
    }

    fn scale(&self, num: i64, den: NonZeroU64) -> Self {
        let factor = BigRational::new(BigInt::from(num), BigInt::from(den.get()));
        self * factor
    }
}

/// Errors of the free Lie algebra computations.
#[derive(Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum FreeLieError {
    /// A letter was given weight 0 (weights must be at least 1 so that
    /// truncation by weight leaves finitely many words).
    ZeroWeight {
        /// The letter with weight 0.
        letter: Letter,
    },
    /// An alphabet with more letters than a `u16` can name.
    TooManyLetters {
        /// The number of letters asked for.
        n_letters: usize,
    },
    /// A word uses a letter outside the alphabet.
    UnknownLetter {
        /// The offending letter.
        letter: Letter,
        /// The number of letters of the alphabet.
        n_letters: usize,
    },
    /// The element is not a Lie element: after eliminating the Lyndon basis
    /// the term on `word` is left over (the empty word for a nonzero
    /// constant term).
    NotLieElement {
        /// The smallest word carrying a leftover coefficient.
        word: Word,
    },
    /// A word that had to be a Lyndon word is not one.
    NotLyndon {
        /// The offending word.
        word: Word,
    },
    /// The logarithm was asked of a series whose constant term is not 1.
    ConstantTermNotOne,
    /// The exponential was asked of a series with a nonzero constant term.
    ConstantTermNotZero,
    /// An integer coefficient of a bracket expansion overflowed `i64`.
    Overflow {
        /// The Lyndon word whose expansion overflowed.
        word: Word,
    },
    /// [`Coeff::keep_going`] asked to stop (a size budget or a
    /// cancellation of the caller).
    Stopped {
        /// The number of terms when it stopped.
        n_terms: usize,
    },
}

impl fmt::Display for FreeLieError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FreeLieError::ZeroWeight { letter } => write!(
                f,
                "letter {letter} has weight 0, but letter weights must be at least 1"
            ),
            FreeLieError::TooManyLetters { n_letters } => write!(
                f,
                "an alphabet has at most 65536 letters, not {n_letters}"
            ),
            FreeLieError::UnknownLetter { letter, n_letters } => write!(
                f,
                "letter {letter} is outside the alphabet of {n_letters} letters"
            ),
            FreeLieError::NotLieElement { word } if word.is_empty() => {
                write!(f, "not a Lie element: the constant term is nonzero")
            }
            FreeLieError::NotLieElement { word } => write!(
                f,
                "not a Lie element: the term on word '{}' is left after projection onto the Lyndon basis",
                WordDisplay(word)
            ),
            FreeLieError::NotLyndon { word } => {
                write!(f, "word '{}' is not a Lyndon word", WordDisplay(word))
            }
            FreeLieError::ConstantTermNotOne => {
                write!(f, "the logarithm needs a series with constant term 1")
            }
            FreeLieError::ConstantTermNotZero => write!(
                f,
                "the exponential needs a series with zero constant term"
            ),
            FreeLieError::Overflow { word } => write!(
                f,
                "integer overflow while expanding the bracket of word '{}'",
                WordDisplay(word)
            ),
            FreeLieError::Stopped { n_terms } => {
                write!(f, "stopped at {n_terms} terms by the caller's limits")
            }
        }
    }
}

impl std::error::Error for FreeLieError {}

/// Formats a word as its letters separated by spaces.
struct WordDisplay<'a>(&'a [Letter]);

impl fmt::Display for WordDisplay<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for (idx, letter) in self.0.iter().enumerate() {
            if idx > 0 {
                write!(f, " ")?;
            }
            write!(f, "{letter}")?;
        }
        Ok(())
    }
}

/// The letters `0..m` and their weights (each at least 1).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Alphabet {
    weights: Vec<u32>,
}

impl Alphabet {
    /// An alphabet whose letter `i` has weight `weights[i]`.
    ///
    /// Fails if a weight is 0 or if there are more than 65536 letters.
    pub fn new(weights: Vec<u32>) -> Result<Self, FreeLieError> {
        if weights.len() > usize::from(u16::MAX) + 1 {
            return Err(FreeLieError::TooManyLetters {
                n_letters: weights.len(),
            });
        }
        if let Some(idx) = weights.iter().position(|weight| *weight == 0) {
            let letter = Letter::try_from(idx).unwrap_or(Letter::MAX);
            return Err(FreeLieError::ZeroWeight { letter });
        }
        Ok(Alphabet { weights })
    }

    /// The alphabet of `n_letters` letters of weight 1.
    pub fn uniform(n_letters: u16) -> Self {
        Alphabet {
            weights: vec![1; usize::from(n_letters)],
        }
    }

    /// The number of letters.
    pub fn n_letters(&self) -> usize {
        self.weights.len()
    }

    /// The weights, indexed by letter.
    pub fn weights(&self) -> &[u32] {
        &self.weights
    }

    /// The weight of a letter, or `None` if the letter is not in the
    /// alphabet.
    pub fn weight(&self, letter: Letter) -> Option<u32> {
        self.weights.get(usize::from(letter)).copied()
    }

    /// The total weight of a word (0 for the empty word).
    ///
    /// Fails if the word uses a letter outside the alphabet.
    pub fn word_weight(&self, word: &[Letter]) -> Result<u64, FreeLieError> {
        word.iter().try_fold(0u64, |acc, &letter| {
            let weight = self.weight(letter).ok_or(FreeLieError::UnknownLetter {
                letter,
                n_letters: self.n_letters(),
            })?;
            Ok(acc.saturating_add(u64::from(weight)))
        })
    }
}

/// A tensor series (or polynomial): a finite sparse combination of words
/// with coefficients, the empty word standing for the constant term.
///
/// Terms with a zero coefficient are never stored, and terms are kept in
/// lexicographic order of their words, so iteration is deterministic.
#[derive(Clone, Debug, PartialEq)]
pub struct Tensor<C> {
    terms: BTreeMap<Word, C>,
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
    fn mul_full(&self, other: &Self) -> Self {
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
fn keep_going<C: Coeff>(n_terms: usize) -> Result<(), FreeLieError> {
    if C::keep_going(n_terms) {
        Ok(())
    } else {
        Err(FreeLieError::Stopped { n_terms })
    }
}

/// Adds `value` to the coefficient of `word`, removing the entry if the sum
/// is zero.
fn add_term<C: Coeff>(terms: &mut BTreeMap<Word, C>, word: &Word, value: C) {
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
fn accumulate<C: Coeff>(terms: &mut BTreeMap<Word, C>, word: Word, value: C) {
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

/// Returns true if and only if `word` is a Lyndon word: nonempty and
/// strictly smaller (lexicographically, letter order `0 < 1 < …`) than each
/// of its proper suffixes.
pub fn is_lyndon(word: &[Letter]) -> bool {
    !word.is_empty() && (1..word.len()).all(|idx| word < &word[idx..])
}

/// The standard factorisation `w = uv` of a Lyndon word of length at least
/// 2: `v` is the longest proper suffix of `w` that is a Lyndon word (for a
/// Lyndon word this is also its lexicographically smallest proper suffix),
/// and `u` is then a Lyndon word too.
///
/// Returns `None` for a word that is not Lyndon or is a single letter.
pub fn standard_factorization(word: &[Letter]) -> Option<(Word, Word)> {
    if word.len() < 2 || !is_lyndon(word) {
        return None;
    }
    let split = (1..word.len()).min_by(|&a, &b| word[a..].cmp(&word[b..]))?;
    Some((word[..split].to_vec(), word[split..].to_vec()))
}

/// A bracket monomial: a letter or the bracket of two bracket monomials.
#[derive(Clone, Debug, PartialEq, Eq, Hash)]
pub enum Bracket {
    /// A single letter.
    Letter(Letter),
    /// The bracket `[left, right]`.
    Pair(Box<Bracket>, Box<Bracket>),
}

impl Bracket {
    /// The bracket `[left, right]`.
    pub fn pair(left: Bracket, right: Bracket) -> Self {
        Bracket::Pair(Box::new(left), Box::new(right))
    }

    /// The letters of the bracket read from left to right.
    pub fn word(&self) -> Word {
        let mut res = Word::new();
        self.collect_letters(&mut res);
        res
    }

    /// The number of letters.
    pub fn degree(&self) -> usize {
        match self {
            Bracket::Letter(_) => 1,
            Bracket::Pair(left, right) => left.degree() + right.degree(),
        }
    }

    /// The bracket written with the given letter names, e.g.
    /// `[X, [X, Y]]`.
    pub fn render(&self, name: &dyn Fn(Letter) -> String) -> String {
        let mut res = String::new();
        self.render_into(name, &mut res);
        res
    }

    fn collect_letters(&self, out: &mut Word) {
        match self {
            Bracket::Letter(letter) => out.push(*letter),
            Bracket::Pair(left, right) => {
                left.collect_letters(out);
                right.collect_letters(out);
            }
        }
    }

    fn render_into(&self, name: &dyn Fn(Letter) -> String, out: &mut String) {
        match self {
            Bracket::Letter(letter) => out.push_str(&name(*letter)),
            Bracket::Pair(left, right) => {
                out.push('[');
                left.render_into(name, out);
                out.push_str(", ");
                right.render_into(name, out);
                out.push(']');
            }
        }
    }
}

impl fmt::Display for Bracket {
    /// Writes the bracket with letters as numbers, e.g. `[0, [0, 1]]`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.render(&|letter| letter.to_string()))
    }
}

/// The standard bracketing `P_w` of a Lyndon word: a letter for a single
/// letter, `[P_u, P_v]` for the standard factorisation `w = uv`.
///
/// Returns `None` if the word is not a Lyndon word.
pub fn standard_bracketing(word: &[Letter]) -> Option<Bracket> {
    match word {
        [] => None,
        [letter] => Some(Bracket::Letter(*letter)),
        _ => {
            let (left, right) = standard_factorization(word)?;
            Some(Bracket::pair(
                standard_bracketing(&left)?,
                standard_bracketing(&right)?,
            ))
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

/// All Lyndon words of weight at most `max_weight`, sorted by weight and,
/// within one weight, lexicographically (letter order `0 < 1 < …`, a proper
/// prefix before its extensions).
///
/// The words are generated by extending prenecklaces (prefixes of Lyndon
/// words) one letter at a time within the weight bound, with an explicit
/// stack rather than recursion; words that are not prefixes of Lyndon words
/// are never built.
pub fn lyndon_words(alphabet: &Alphabet, max_weight: u32) -> Vec<Word> {
    let max_weight = u64::from(max_weight);
    let n_letters = alphabet.n_letters();
    let mut res: Vec<(u64, Word)> = Vec::new();
    if n_letters == 0 {
        return Vec::new();
    }
    let last_letter = n_letters - 1;
    // One frame per letter of the current prefix, plus the root frame for
    // the empty prefix. A frame tries the letters `next..n_letters` as the
    // next letter; `period` is the length of the longest Lyndon prefix of
    // the prefix (0 for the empty prefix), `weight` its weight.
    struct Frame {
        next: usize,
        period: usize,
        weight: u64,
    }
    let mut prefix: Word = Vec::new();
    let mut stack = vec![Frame {
        next: 0,
        period: 0,
        weight: 0,
    }];
    while let Some(frame) = stack.last_mut() {
        if frame.next > last_letter {
            stack.pop();
            prefix.pop();
            continue;
        }
        let candidate = frame.next;
        frame.next += 1;
        let (Ok(letter), Some(letter_weight)) = (
            Letter::try_from(candidate),
            alphabet.weights().get(candidate),
        ) else {
            continue;
        };
        let weight = frame.weight.saturating_add(u64::from(*letter_weight));
        if weight > max_weight {
            continue;
        }
        let len = prefix.len();
        // The letter that keeps the period: prefix[len − period].
        let repeated = len
            .checked_sub(frame.period)
            .and_then(|idx| prefix.get(idx))
            .copied();
        let period = match repeated {
            Some(repeated) if letter == repeated => frame.period,
            _ => len + 1,
        };
        prefix.push(letter);
        if period == prefix.len() {
            res.push((weight, prefix.clone()));
        }
        // Extensions must use a letter at least prefix[len + 1 − period].
        // A prefix made of the last letter only (it then starts with it)
        // has no Lyndon extension: stop there, which also bounds the
        // depth for a one-letter alphabet.
        let next = prefix
            .get(prefix.len() - period)
            .map_or(n_letters, |letter| usize::from(*letter));
        let extensible = prefix
            .first()
            .is_some_and(|first| usize::from(*first) < last_letter);
        if extensible {
            stack.push(Frame {
                next,
                period,
                weight,
            });
        } else {
            prefix.pop();
        }
    }
    res.sort();
    res.into_iter().map(|(_, word)| word).collect()
}

/// Integer expansions `P_w` of standard bracketings, cached by Lyndon word;
/// each is a list of (word, coefficient) sorted by word, starting with `w`
/// itself (coefficient 1).
#[derive(Default)]
struct LyndonExpansions {
    cache: HashMap<Word, Rc<Vec<(Word, i64)>>>,
}

impl LyndonExpansions {
    /// The expansion of `word`; `C` is only asked whether to keep going
    /// (an expansion of a word of length L can hold 2^(L-1) words).
    fn get<C: Coeff>(&mut self, word: &[Letter]) -> Result<Rc<Vec<(Word, i64)>>, FreeLieError> {
        if let Some(found) = self.cache.get(word) {
            return Ok(Rc::clone(found));
        }
        let expansion = if word.len() == 1 {
            vec![(word.to_vec(), 1)]
        } else {
            let (left_word, right_word) =
                standard_factorization(word).ok_or_else(|| FreeLieError::NotLyndon {
                    word: word.to_vec(),
                })?;
            let left = self.get::<C>(&left_word)?;
            let right = self.get::<C>(&right_word)?;
            let overflow = || FreeLieError::Overflow {
                word: word.to_vec(),
            };
            let mut terms: BTreeMap<Word, i64> = BTreeMap::new();
            for (first, second, sign) in [(&left, &right, 1i64), (&right, &left, -1)] {
                for (first_word, first_coeff) in first.iter() {
                    keep_going::<C>(terms.len())?;
                    for (second_word, second_coeff) in second.iter() {
                        let product = first_coeff
                            .checked_mul(*second_coeff)
                            .and_then(|value| value.checked_mul(sign))
                            .ok_or_else(overflow)?;
                        let mut concat = first_word.clone();
                        concat.extend_from_slice(second_word);
                        let entry = terms.entry(concat).or_insert(0);
                        *entry = entry.checked_add(product).ok_or_else(overflow)?;
                    }
                }
            }
            terms.into_iter().filter(|(_, coeff)| *coeff != 0).collect()
        };
        let expansion = Rc::new(expansion);
        self.cache.insert(word.to_vec(), Rc::clone(&expansion));
        Ok(expansion)
    }
}

/// A Lie polynomial in the Lyndon basis: a combination `Σ c_w P_w` of
/// standard bracketings of Lyndon words.
///
/// Terms are ordered by weight, then lexicographically by word; zero
/// coefficients are never stored, and every word is a Lyndon word.
#[derive(Clone, Debug, PartialEq)]
pub struct LiePoly<C> {
    terms: Vec<(Word, C)>,
}

impl<C: Coeff> Default for LiePoly<C> {
    fn default() -> Self {
        LiePoly { terms: Vec::new() }
    }
}

impl<C: Coeff> LiePoly<C> {
    /// The zero Lie polynomial.
    pub fn zero() -> Self {
        LiePoly::default()
    }

    /// The Lie polynomial `Σ c_w P_w` from (Lyndon word, coefficient)
    /// pairs; repeated words are added up and zero coefficients dropped.
    ///
    /// Fails if a word is not a Lyndon word or uses a letter outside the
    /// alphabet.
    pub fn from_terms<I: IntoIterator<Item = (Word, C)>>(
        terms: I,
        alphabet: &Alphabet,
    ) -> Result<Self, FreeLieError> {
        let mut map = BTreeMap::new();
        for (word, coeff) in terms {
            alphabet.word_weight(&word)?;
            if !is_lyndon(&word) {
                return Err(FreeLieError::NotLyndon { word });
            }
            accumulate(&mut map, word, coeff);
        }
        map.retain(|_, coeff: &mut C| !coeff.is_zero());
        Self::sorted_by_weight(map.into_iter().collect(), alphabet)
    }

    /// The Lie polynomial with the given terms, which must already be as
    /// [`LiePoly::terms`] gives them: Lyndon words by weight then
    /// lexicographically, each once, with nonzero coefficients (as
    /// [`super::lyndon::bch`] returns them; checked in debug builds).
    pub fn from_sorted_terms(terms: Vec<(Word, C)>) -> Self {
        debug_assert!(terms
            .iter()
            .all(|(word, coeff)| is_lyndon(word) && !coeff.is_zero()));
        debug_assert!(terms
            .windows(2)
            .all(|pair| (pair[0].0.len(), &pair[0].0) < (pair[1].0.len(), &pair[1].0)));
        LiePoly { terms }
    }

    /// The terms (Lyndon word, coefficient), by weight then
    /// lexicographically.
    pub fn terms(&self) -> &[(Word, C)] {
        &self.terms
    }

    /// The coefficient of `P_w` for a Lyndon word `w`, or `None` if zero.
    pub fn coeff(&self, word: &[Letter]) -> Option<&C> {
        self.terms
            .iter()
            .find(|(term_word, _)| term_word.as_slice() == word)
            .map(|(_, coeff)| coeff)
    }

    /// Returns true if and only if the polynomial has no term.
    pub fn is_zero(&self) -> bool {
        self.terms.is_empty()
    }

    /// The terms (Lyndon word, coefficient), by value, in the order of
    /// [`LiePoly::terms`].
    pub fn into_terms(self) -> Vec<(Word, C)> {
        self.terms
    }

    /// The polynomial with `map` applied to every coefficient (for
    /// instance a division by the period); terms that become zero are
    /// dropped.
    pub fn map_coeffs(self, mut map: impl FnMut(C) -> C) -> Self {
        LiePoly {
            terms: self
                .terms
                .into_iter()
                .map(|(word, coeff)| (word, map(coeff)))
                .filter(|(_, coeff)| !coeff.is_zero())
                .collect(),
        }
    }

    /// The expansion `Σ c_w P_w` in the tensor algebra.
    ///
    /// Fails only if an integer coefficient of some `P_w` overflows `i64`
    /// (words far longer than any computation can reach).
    pub fn to_tensor(&self) -> Result<Tensor<C>, FreeLieError> {
        let mut expansions = LyndonExpansions::default();
        let mut terms = BTreeMap::new();
        for (word, coeff) in &self.terms {
            for (expanded_word, multiple) in expansions.get::<C>(word)?.iter() {
                let term = match *multiple {
                    1 => coeff.clone(),
                    -1 => coeff.neg(),
                    multiple => coeff.scale(multiple, ONE),
                };
                accumulate(&mut terms, expanded_word.clone(), term);
            }
        }
        terms.retain(|_, coeff: &mut C| !coeff.is_zero());
        Ok(Tensor { terms })
    }

    fn sorted_by_weight(terms: Vec<(Word, C)>, alphabet: &Alphabet) -> Result<Self, FreeLieError> {
        let mut keyed = Vec::with_capacity(terms.len());
        for (word, coeff) in terms {
            keyed.push((alphabet.word_weight(&word)?, word, coeff));
        }
        keyed.sort_by(|a, b| (a.0, &a.1).cmp(&(b.0, &b.1)));
        Ok(LiePoly {
            terms: keyed
                .into_iter()
                .map(|(_, word, coeff)| (word, coeff))
                .collect(),
        })
    }
}

/// The coordinates in the Lyndon basis of a Lie element, truncated at
/// weight `max_weight` (terms of higher weight are ignored: every
/// homogeneous part of a Lie element is a Lie element).
///
/// The smallest remaining word `w` (lexicographically) must be a Lyndon word
/// and its coefficient `c` is the coordinate of `P_w`; `c · P_w` is
/// subtracted (it only touches words larger than `w`) and the elimination
/// goes on until nothing is left. Expansions `P_w` are computed once with
/// integer coefficients and only for words with a nonzero coordinate.
///
/// Fails with [`FreeLieError::NotLieElement`] if the element is not a Lie
/// element (a term is left that no Lyndon basis element can remove), and if
/// a word uses a letter outside the alphabet.
pub fn project_lyndon<C: Coeff>(
    lie_element: &Tensor<C>,
    alphabet: &Alphabet,
    max_weight: u32,
) -> Result<LiePoly<C>, FreeLieError> {
    let mut remainder = lie_element.truncated(alphabet, max_weight)?.terms;
    let mut expansions = LyndonExpansions::default();
    let mut found = Vec::new();
    while let Some((word, coeff)) = remainder.pop_first() {
        if coeff.is_zero() {
            continue;
        }
        if !is_lyndon(&word) {
            return Err(FreeLieError::NotLieElement { word });
        }
        keep_going::<C>(remainder.len() + found.len())?;
        let expansion = expansions.get::<C>(&word)?;
        // The first entry is `word` itself with coefficient 1: it is the
        // term just removed.
        for (expanded_word, multiple) in expansion.iter().skip(1) {
            subtract_multiple(&mut remainder, expanded_word, &coeff, *multiple);
        }
        found.push((word, coeff));
    }
    LiePoly::sorted_by_weight(found, alphabet)
}

/// Subtracts `multiple · coeff` from the coefficient of `word`.
fn subtract_multiple<C: Coeff>(
    terms: &mut BTreeMap<Word, C>,
    word: &Word,
    coeff: &C,
    multiple: i64,
) {
    match terms.get_mut(word) {
        Some(entry) => {
            *entry = match multiple {
                1 => entry.sub(coeff),
                -1 => entry.add(coeff),
                _ => entry.sub(&coeff.scale(multiple, ONE)),
            };
        }
        None => {
            let term = match multiple {
                1 => coeff.neg(),
                -1 => coeff.clone(),
                _ => coeff.scale(multiple, ONE).neg(),
            };
            terms.insert(word.clone(), term);
        }
    }
}

/// The logarithm of a group-like series (such as a Chen series of iterated
/// integrals) truncated at weight `max_weight`, in the Lyndon basis.
///
/// Fails if the constant term is not 1, if the logarithm is not a Lie
/// element (the series was not group-like up to that weight), or if a word
/// uses a letter outside the alphabet.
pub fn chronological_log<C: Coeff>(
    chen: &Tensor<C>,
    alphabet: &Alphabet,
    max_weight: u32,
) -> Result<LiePoly<C>, FreeLieError> {
    let log = chen.log_truncated(alphabet, max_weight)?;
    project_lyndon(&log, alphabet, max_weight)
}

/// The Baker–Campbell–Hausdorff series `log(e^X e^Y)` up to degree
/// `max_degree`, on the letters X = 0 and Y = 1, in the Lyndon basis, by
/// the logarithm in the truncated tensor algebra and the projection
/// (cost about 4^N): kept as the tests' independent route;
/// [`super::lyndon::bch`] is the fast one.
///
/// Fails only on an internal inconsistency of the coefficient type (a
/// [`Coeff`] whose `is_zero` misses zeros).
pub fn bch_by_tensor<C: Coeff>(max_degree: u32) -> Result<LiePoly<C>, FreeLieError> {
    let alphabet = Alphabet::uniform(2);
    let exp_x = Tensor::<C>::letter(0).exp_truncated(&alphabet, max_degree)?;
    let exp_y = Tensor::<C>::letter(1).exp_truncated(&alphabet, max_degree)?;
    let product = exp_x.mul_truncated(&exp_y, &alphabet, max_degree)?;
    chronological_log(&product, &alphabet, max_degree)
}

/// Evaluates a Lie polynomial with concrete values: `letter_value` gives the
/// value of a letter, `bracket` the bracket of two values, and `scale_add`
/// adds `coeff · value` to an accumulator (`None` before the first term).
///
/// The value of every standard bracketing is computed once and remembered:
/// the factors of a standard factorisation are Lyndon words, so Lyndon words
/// share their sub-brackets. Returns `Ok(None)` for the zero polynomial.
/// Errors of the closures are passed on; a word that is not a Lyndon word
/// (impossible for a polynomial built by this module) gives
/// [`FreeLieError::NotLyndon`] converted into `E`.
pub fn evaluate<C, V, E>(
    poly: &LiePoly<C>,
    mut letter_value: impl FnMut(Letter) -> Result<V, E>,
    mut bracket: impl FnMut(&V, &V) -> Result<V, E>,
    mut scale_add: impl FnMut(Option<V>, &C, &V) -> Result<V, E>,
) -> Result<Option<V>, E>
where
    C: Coeff,
    E: From<FreeLieError>,
{
    let mut memo: HashMap<Word, V> = HashMap::new();
    let mut acc = None;
    for (word, coeff) in &poly.terms {
        remember_value(word, &mut memo, &mut letter_value, &mut bracket)?;
        let value = memo
            .get(word)
            .ok_or_else(|| E::from(FreeLieError::NotLyndon { word: word.clone() }))?;
        acc = Some(scale_add(acc, coeff, value)?);
    }
    Ok(acc)
}

/// Makes sure `memo` holds the value of the standard bracketing of `word`.
fn remember_value<V, E: From<FreeLieError>>(
    word: &[Letter],
    memo: &mut HashMap<Word, V>,
    letter_value: &mut impl FnMut(Letter) -> Result<V, E>,
    bracket: &mut impl FnMut(&V, &V) -> Result<V, E>,
) -> Result<(), E> {
    if memo.contains_key(word) {
        return Ok(());
    }
    let not_lyndon = || {
        E::from(FreeLieError::NotLyndon {
            word: word.to_vec(),
        })
    };
    let value = if let [letter] = word {
        letter_value(*letter)?
    } else {
        let (left, right) = standard_factorization(word).ok_or_else(not_lyndon)?;
        remember_value(&left, memo, letter_value, bracket)?;
        remember_value(&right, memo, letter_value, bracket)?;
        let (Some(left_value), Some(right_value)) = (memo.get(&left), memo.get(&right)) else {
            return Err(not_lyndon());
        };
        bracket(left_value, right_value)?
    };
    memo.insert(word.to_vec(), value);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    type Q = BigRational;

    const X: Letter = 0;
    const Y: Letter = 1;

    fn q(num: i64, den: i64) -> Q {
        BigRational::new(BigInt::from(num), BigInt::from(den))
    }

    fn letter(letter: Letter) -> Bracket {
        Bracket::Letter(letter)
    }

    fn br(left: Bracket, right: Bracket) -> Bracket {
        Bracket::pair(left, right)
    }

    /// Parses a word over {X, Y} written with the characters 'X' and 'Y'.
    fn xy(text: &str) -> Word {
        text.chars()
            .map(|ch| if ch == 'X' { X } else { Y })
            .collect()
    }

    fn names(letter: Letter) -> String {
        match letter {
            0 => "X".to_string(),
            1 => "Y".to_string(),
            other => format!("Z{other}"),
        }
    }

    /// The Lie polynomial as a sorted list of (word, coefficient), for
    /// readable assertion failures.
    fn degree_part(poly: &LiePoly<Q>, degree: usize) -> Vec<(Word, Q)> {
        poly.terms()
            .iter()
            .filter(|(word, _)| word.len() == degree)
            .cloned()
            .collect()
    }

    fn mobius(n: u64) -> i64 {
        let mut n = n;
        let mut res = 1;
        let mut p = 2;
        while p * p <= n {
            if n.is_multiple_of(p) {
                n /= p;
                if n.is_multiple_of(p) {
                    return 0;
                }
                res = -res;
            }
            p += 1;
        }
        if n > 1 {
            res = -res;
        }
        res
    }

    /// All words over `n_letters` letters of length 1..=max_len.
    fn all_words(n_letters: u16, max_len: usize) -> Vec<Word> {
        let mut res = Vec::new();
        let mut layer: Vec<Word> = vec![Word::new()];
        for _ in 0..max_len {
            let mut next = Vec::new();
            for word in &layer {
                for letter in 0..n_letters {
                    let mut longer = word.clone();
                    longer.push(letter);
                    next.push(longer);
                }
            }
            res.extend(next.iter().cloned());
            layer = next;
        }
        res
    }

    // ---- Lyndon words -------------------------------------------------

    #[test]
    fn lyndon_counts_follow_witts_formula() {
        // Witt's necklace formula (from memory): the number of Lyndon words
        // of length n on m letters is (1/n) Σ_{d | n} μ(d) m^(n/d).
        for m in [2u16, 3] {
            let words = lyndon_words(&Alphabet::uniform(m), 8);
            for n in 1..=8u64 {
                let sum: i64 = (1..=n)
                    .filter(|d| n % d == 0)
                    .map(|d| mobius(d) * i64::from(m).pow((n / d) as u32))
                    .sum();
                let expected = sum / n as i64;
                let count = words.iter().filter(|word| word.len() as u64 == n).count();
                assert_eq!(count as i64, expected, "m = {m}, n = {n}");
            }
        }
    }

    #[test]
    fn lyndon_words_match_brute_force_with_weights_and_order() {
        let alphabet = Alphabet::new(vec![1, 2, 3]).unwrap();
        let max_weight = 7;
        let mut expected: Vec<(u64, Word)> = all_words(3, 7)
            .into_iter()
            .filter(|word| is_lyndon(word))
            .map(|word| (alphabet.word_weight(&word).unwrap(), word))
            .filter(|(weight, _)| *weight <= max_weight)
            .collect();
        expected.sort();
        let expected: Vec<Word> = expected.into_iter().map(|(_, word)| word).collect();
        let words = lyndon_words(&alphabet, max_weight as u32);
        assert_eq!(words, expected);
        assert_eq!(&words[..4], &[vec![0], vec![1], vec![0, 1], vec![2]]);
    }

    #[test]
    fn lyndon_words_of_small_alphabets() {
        assert!(lyndon_words(&Alphabet::uniform(0), 5).is_empty());
        assert_eq!(lyndon_words(&Alphabet::uniform(1), 1000), vec![vec![0]]);
        assert!(lyndon_words(&Alphabet::uniform(2), 0).is_empty());
        assert_eq!(
            lyndon_words(&Alphabet::uniform(2), 3),
            vec![vec![0], vec![1], vec![0, 1], vec![0, 0, 1], vec![0, 1, 1]]
        );
    }

    #[test]
    fn is_lyndon_examples() {
        assert!(is_lyndon(&xy("X")));
        assert!(is_lyndon(&xy("XXYXY")));
        assert!(!is_lyndon(&xy("XYXY")));
        assert!(!is_lyndon(&xy("YX")));
        assert!(!is_lyndon(&[]));
    }

    #[test]
    fn standard_factorization_takes_the_longest_lyndon_suffix() {
        for word in lyndon_words(&Alphabet::uniform(3), 7) {
            if word.len() < 2 {
                assert_eq!(standard_factorization(&word), None);
                continue;
            }
            // The definition: v is the longest proper suffix that is Lyndon.
            let split = (1..word.len())
                .find(|&idx| is_lyndon(&word[idx..]))
                .unwrap();
            let (left, right) = standard_factorization(&word).unwrap();
            assert_eq!(right, word[split..].to_vec(), "word {word:?}");
            assert_eq!(left, word[..split].to_vec());
            assert!(is_lyndon(&left));
        }
        assert_eq!(standard_factorization(&xy("YX")), None);
    }

    #[test]
    fn standard_bracketings_of_short_words() {
        let cases = [
            ("XY", "[X, Y]"),
            ("XXY", "[X, [X, Y]]"),
            ("XYY", "[[X, Y], Y]"),
            ("XXXY", "[X, [X, [X, Y]]]"),
            ("XXYY", "[X, [[X, Y], Y]]"),
            ("XYYY", "[[[X, Y], Y], Y]"),
            ("XXYXY", "[[X, [X, Y]], [X, Y]]"),
            ("XYXYY", "[[X, Y], [[X, Y], Y]]"),
        ];
        for (text, expected) in cases {
            let bracket = standard_bracketing(&xy(text)).unwrap();
            assert_eq!(bracket.render(&names), expected);
            assert_eq!(bracket.word(), xy(text));
            assert_eq!(bracket.degree(), text.len());
        }
        let bracket = standard_bracketing(&[0, 0, 1]).unwrap();
        assert_eq!(bracket.to_string(), "[0, [0, 1]]");
        assert_eq!(standard_bracketing(&xy("YX")), None);
        assert_eq!(standard_bracketing(&[]), None);
    }

    #[test]
    fn lyndon_expansion_starts_with_its_word() {
        // P_w = w + lexicographically larger words of the same length.
        for word in lyndon_words(&Alphabet::uniform(3), 6) {
            let expansion: Tensor<Q> = expand_bracket(&standard_bracketing(&word).unwrap());
            let (first, coeff) = expansion.terms().next().unwrap();
            assert_eq!(first, &word);
            assert_eq!(coeff, &q(1, 1));
            assert!(expansion
                .terms()
                .all(|(other, _)| other.len() == word.len()));
        }
    }

    // ---- tensor arithmetic --------------------------------------------

    #[test]
    fn alphabet_refuses_zero_weights_and_unknown_letters() {
        assert_eq!(
            Alphabet::new(vec![1, 0]),
            Err(FreeLieError::ZeroWeight { letter: 1 })
        );
        let alphabet = Alphabet::uniform(2);
        let err = Tensor::<Q>::letter(2)
            .mul_truncated(&Tensor::letter(0), &alphabet, 3)
            .unwrap_err();
        assert_eq!(
            err,
            FreeLieError::UnknownLetter {
                letter: 2,
                n_letters: 2
            }
        );
        assert_eq!(
            err.to_string(),
            "letter 2 is outside the alphabet of 2 letters"
        );
    }

    #[test]
    fn truncated_product_drops_heavy_words() {
        // X has weight 1 and Y weight 2: (1 + X + Y)^2 up to weight 3.
        let alphabet = Alphabet::new(vec![1, 2]).unwrap();
        let series = Tensor::<Q>::one()
            .add(&Tensor::letter(X))
            .add(&Tensor::letter(Y));
        let square = series.mul_truncated(&series, &alphabet, 3).unwrap();
        let expected = Tensor::from_terms([
            (xy(""), q(1, 1)),
            (xy("X"), q(2, 1)),
            (xy("Y"), q(2, 1)),
            (xy("XX"), q(1, 1)),
            (xy("XY"), q(1, 1)),
            (xy("YX"), q(1, 1)),
        ]);
        assert_eq!(square, expected);
    }

    #[test]
    fn exponential_of_a_letter_has_inverse_factorials() {
        let alphabet = Alphabet::uniform(1);
        let exp = Tensor::<Q>::letter(0).exp_truncated(&alphabet, 5).unwrap();
        let mut factorial = 1;
        for k in 0..=5usize {
            if k > 0 {
                factorial *= k as i64;
            }
            assert_eq!(exp.coeff(&vec![0; k]), Some(&q(1, factorial)));
        }
        assert_eq!(exp.n_terms(), 6);
    }

    #[test]
    fn exponential_and_logarithm_refuse_bad_constant_terms() {
        let alphabet = Alphabet::uniform(2);
        let with_constant = Tensor::<Q>::one().add(&Tensor::letter(X));
        assert_eq!(
            with_constant.exp_truncated(&alphabet, 3),
            Err(FreeLieError::ConstantTermNotZero)
        );
        assert_eq!(
            Tensor::<Q>::letter(X).log_truncated(&alphabet, 3),
            Err(FreeLieError::ConstantTermNotOne)
        );
        let two = Tensor::monomial(Word::new(), q(2, 1));
        assert_eq!(
            two.log_truncated(&alphabet, 3),
            Err(FreeLieError::ConstantTermNotOne)
        );
    }

    // ---- projection onto the Lyndon basis -----------------------------

    fn arb_coeff() -> impl Strategy<Value = Q> {
        (-20i64..=20, 1i64..=6).prop_map(|(num, den)| q(num, den))
    }

    fn arb_bracket() -> impl Strategy<Value = Bracket> {
        let leaf = (0u16..3).prop_map(Bracket::Letter);
        leaf.prop_recursive(4, 6, 2, |inner| {
            (inner.clone(), inner).prop_map(|(left, right)| Bracket::pair(left, right))
        })
    }

    fn lyndon_pool() -> Vec<Word> {
        lyndon_words(&Alphabet::uniform(3), 5)
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(48))]

        #[test]
        fn projection_recovers_lyndon_coordinates(
            picks in proptest::collection::vec((0usize..1000, arb_coeff()), 0..8)
        ) {
            let pool = lyndon_pool();
            let alphabet = Alphabet::uniform(3);
            let poly = LiePoly::from_terms(
                picks.into_iter().map(|(idx, coeff)| (pool[idx % pool.len()].clone(), coeff)),
                &alphabet,
            ).unwrap();
            let tensor = poly.to_tensor().unwrap();
            let projected = project_lyndon(&tensor, &alphabet, 5).unwrap();
            prop_assert_eq!(projected, poly);
        }

        #[test]
        fn random_brackets_are_lie_elements(
            brackets in proptest::collection::vec((arb_bracket(), arb_coeff()), 1..5)
        ) {
            let alphabet = Alphabet::uniform(3);
            let mut tensor = Tensor::<Q>::zero();
            for (bracket, coeff) in &brackets {
                tensor = tensor.add(&expand_bracket::<Q>(bracket).mul_coeff(coeff));
            }
            let max_weight = brackets.iter().map(|(b, _)| b.degree()).max().unwrap() as u32;
            let projected = project_lyndon(&tensor, &alphabet, max_weight).unwrap();
            prop_assert_eq!(projected.to_tensor().unwrap(), tensor);
        }

        #[test]
        fn logarithm_inverts_exponential(
            picks in proptest::collection::vec((0usize..1000, arb_coeff()), 1..6)
        ) {
            let pool = lyndon_pool();
            let alphabet = Alphabet::uniform(3);
            let max_weight = 5;
            let lie = LiePoly::from_terms(
                picks.into_iter().map(|(idx, coeff)| (pool[idx % pool.len()].clone(), coeff)),
                &alphabet,
            ).unwrap();
            let lie_tensor = lie.to_tensor().unwrap();
            let group = lie_tensor.exp_truncated(&alphabet, max_weight).unwrap();
            let log = group.log_truncated(&alphabet, max_weight).unwrap();
            prop_assert_eq!(&log, &lie_tensor);
            prop_assert_eq!(chronological_log(&group, &alphabet, max_weight).unwrap(), lie);
            // And the other way round for the group-like element.
            prop_assert_eq!(log.exp_truncated(&alphabet, max_weight).unwrap(), group);
        }
    }

    #[test]
    fn projection_refuses_non_lie_elements() {
        let alphabet = Alphabet::uniform(2);
        let word_xy = Tensor::monomial(xy("XY"), q(1, 1));
        let err = project_lyndon(&word_xy, &alphabet, 3).unwrap_err();
        assert_eq!(err, FreeLieError::NotLieElement { word: xy("YX") });
        assert_eq!(
            err.to_string(),
            "not a Lie element: the term on word '1 0' is left after projection onto the Lyndon basis"
        );
        let symmetric = Tensor::from_terms([(xy("XY"), q(1, 1)), (xy("YX"), q(1, 1))]);
        assert!(project_lyndon(&symmetric, &alphabet, 3).is_err());
        let square = Tensor::monomial(xy("XX"), q(1, 1));
        assert_eq!(
            project_lyndon(&square, &alphabet, 3),
            Err(FreeLieError::NotLieElement { word: xy("XX") })
        );
        let constant = Tensor::<Q>::one();
        assert_eq!(
            project_lyndon(&constant, &alphabet, 3),
            Err(FreeLieError::NotLieElement { word: Word::new() })
        );
        // A Lie element plus a stray degree-3 word: the stray word is caught
        // even after the Lyndon part is removed.
        let mixed = expand_bracket::<Q>(&br(letter(X), br(letter(X), letter(Y))))
            .add(&Tensor::monomial(xy("XYX"), q(1, 3)));
        assert!(matches!(
            project_lyndon(&mixed, &alphabet, 3),
            Err(FreeLieError::NotLieElement { .. })
        ));
        // Above the truncation weight nothing is examined.
        assert_eq!(project_lyndon(&word_xy, &alphabet, 1), Ok(LiePoly::zero()));
    }

    #[test]
    fn lie_poly_refuses_non_lyndon_words() {
        let alphabet = Alphabet::uniform(2);
        assert_eq!(
            LiePoly::from_terms([(xy("YX"), q(1, 1))], &alphabet),
            Err(FreeLieError::NotLyndon { word: xy("YX") })
        );
        let poly = LiePoly::from_terms(
            [
                (xy("XY"), q(1, 2)),
                (xy("X"), q(1, 1)),
                (xy("XY"), q(-1, 2)),
            ],
            &alphabet,
        )
        .unwrap();
        assert_eq!(poly.terms(), &[(xy("X"), q(1, 1))]);
        let halved = bch_by_tensor::<Q>(2)
            .unwrap()
            .map_coeffs(|coeff| coeff / q(2, 1));
        assert_eq!(halved.coeff(&xy("XY")), Some(&q(1, 4)));
        assert_eq!(halved.coeff(&xy("X")), Some(&q(1, 2)));
        let bracket_only = bch_by_tensor::<Q>(2).unwrap().map_coeffs(|coeff| {
            if coeff == q(1, 1) {
                q(0, 1)
            } else {
                coeff
            }
        });
        assert_eq!(bracket_only.into_terms(), vec![(xy("XY"), q(1, 2))]);
    }

    // ---- Baker–Campbell–Hausdorff -------------------------------------

    /// The series given as bracket monomials with coefficients, projected
    /// onto the Lyndon basis.
    fn project_brackets(terms: &[(Bracket, Q)], max_degree: u32) -> LiePoly<Q> {
        let mut tensor = Tensor::<Q>::zero();
        for (bracket, coeff) in terms {
            tensor = tensor.add(&expand_bracket::<Q>(bracket).mul_coeff(coeff));
        }
        project_lyndon(&tensor, &Alphabet::uniform(2), max_degree).unwrap()
    }

    /// Right-nested bracket [a1, [a2, … [a_{k−1}, a_k]]].
    fn right_nested(text: &str) -> Bracket {
        let word = xy(text);
        let mut iter = word.iter().rev();
        let mut res = letter(*iter.next().unwrap());
        for &next in iter {
            res = br(letter(next), res);
        }
        res
    }

    #[test]
    fn bch_to_degree_four_matches_published_series() {
        // Casas & Murua, "An efficient algorithm for computing the BCH
        // series and some of its applications", J. Math. Phys. 50 (2009)
        // 033513 (CONFIRMED): log(e^X e^Y) = X + Y + ½[X,Y]
        // + (1/12)[X,[X,Y]] − (1/12)[Y,[X,Y]] − (1/24)[Y,[X,[X,Y]]] + …
        let published = project_brackets(
            &[
                (letter(X), q(1, 1)),
                (letter(Y), q(1, 1)),
                (right_nested("XY"), q(1, 2)),
                (right_nested("XXY"), q(1, 12)),
                (right_nested("YXY"), q(-1, 12)),
                (right_nested("YXXY"), q(-1, 24)),
            ],
            4,
        );
        let series = bch_by_tensor::<Q>(4).unwrap();
        assert_eq!(series, published);
        // In the Lyndon basis: [X,Y] = P_XY, [X,[X,Y]] = P_XXY,
        // [Y,[X,Y]] = −[[X,Y],Y] = −P_XYY, and by the Jacobi identity
        // [Y,[X,[X,Y]]] = [X,[Y,[X,Y]]] = −[X,[[X,Y],Y]] = −P_XXYY.
        let expected = LiePoly::from_terms(
            [
                (xy("X"), q(1, 1)),
                (xy("Y"), q(1, 1)),
                (xy("XY"), q(1, 2)),
                (xy("XXY"), q(1, 12)),
                (xy("XYY"), q(1, 12)),
                (xy("XXYY"), q(1, 24)),
            ],
            &Alphabet::uniform(2),
        )
        .unwrap();
        assert_eq!(series, expected);
    }

    #[test]
    fn bch_degrees_five_and_six_in_the_lyndon_basis() {
        // Casas & Murua, J. Math. Phys. 50 (2009) 033513; coefficients in
        // the Lyndon basis with X < Y and standard bracketing (DERIVED).
        let series = bch_by_tensor::<Q>(6).unwrap();
        let degree_five = vec![
            (xy("XXXXY"), q(-1, 720)),
            (xy("XXXYY"), q(1, 180)),
            (xy("XXYXY"), q(1, 360)),
            (xy("XXYYY"), q(1, 180)),
            (xy("XYXYY"), q(1, 120)),
            (xy("XYYYY"), q(-1, 720)),
        ];
        assert_eq!(degree_part(&series, 5), degree_five);
        let degree_six = vec![
            (xy("XXXXYY"), q(-1, 1440)),
            (xy("XXXYXY"), q(1, 720)),
            (xy("XXXYYY"), q(1, 360)),
            (xy("XXYXYY"), q(1, 240)),
            (xy("XXYYYY"), q(-1, 1440)),
        ];
        assert_eq!(degree_part(&series, 6), degree_six);
    }

    #[test]
    fn bch_degree_five_matches_right_nested_form() {
        // The classic right-nested degree-5 term (REFERENCES §2, after
        // Casas & Murua, J. Math. Phys. 50 (2009) 033513; DERIVED):
        // −(1/720)(ad_X⁴Y + ad_Y⁴X) + (1/360)([X,[Y,[Y,[Y,X]]]]
        // + [Y,[X,[X,[X,Y]]]]) + (1/120)([Y,[X,[Y,[X,Y]]]] + [X,[Y,[X,[Y,X]]]]).
        let published = project_brackets(
            &[
                (right_nested("XXXXY"), q(-1, 720)),
                (right_nested("YYYYX"), q(-1, 720)),
                (right_nested("XYYYX"), q(1, 360)),
                (right_nested("YXXXY"), q(1, 360)),
                (right_nested("YXYXY"), q(1, 120)),
                (right_nested("XYXYX"), q(1, 120)),
            ],
            5,
        );
        let series = bch_by_tensor::<Q>(5).unwrap();
        assert_eq!(degree_part(&series, 5), degree_part(&published, 5));
    }

    fn nonzero_counts(series: &LiePoly<Q>, max_degree: usize) -> Vec<usize> {
        (1..=max_degree)
            .map(|degree| degree_part(series, degree).len())
            .collect()
    }

    #[test]
    fn bch_nonzero_coefficient_counts_to_degree_twelve() {
        // Casas & Murua, "An efficient algorithm for computing the BCH
        // series and some of its applications", J. Math. Phys. 50 (2009)
        // 033513 (CONFIRMED): the number of nonzero Lyndon-basis
        // coefficients per degree.
        let series = bch_by_tensor::<Q>(12).unwrap();
        assert_eq!(
            nonzero_counts(&series, 12),
            vec![2, 1, 2, 1, 6, 5, 18, 17, 55, 55, 186, 185]
        );
    }

    // ---- chronological logarithm --------------------------------------

    /// Polynomials in t with rational coefficients (index = power).
    type Poly = Vec<Q>;

    fn poly_mul(a: &Poly, b: &Poly) -> Poly {
        let mut res = vec![q(0, 1); a.len() + b.len() - 1];
        for (i, x) in a.iter().enumerate() {
            for (j, y) in b.iter().enumerate() {
                res[i + j] += x * y;
            }
        }
        res
    }

    fn poly_integral_at(p: &Poly, t: &Q) -> Q {
        // ∫_0^t p(s) ds
        let mut res = q(0, 1);
        let mut power = t.clone();
        for (k, coeff) in p.iter().enumerate() {
            res += coeff * &power / q(k as i64 + 1, 1);
            power = &power * t;
        }
        res
    }

    fn poly_antiderivative(p: &Poly) -> Poly {
        let mut res = vec![q(0, 1)];
        for (k, coeff) in p.iter().enumerate() {
            res.push(coeff / q(k as i64 + 1, 1));
        }
        res
    }

    /// The Chen series of the inputs `inputs[a](t)` on [0, 1], computed
    /// from its definition: the coefficient of the word a1…ak is the
    /// iterated integral over s1 ≤ s2 ≤ … ≤ sk of u_a1(s1)…u_ak(sk) (the
    /// leftmost letter is the earliest time, DESIGN §2.4).
    fn chen_series_on_unit_interval(inputs: &[Poly], max_len: usize) -> Tensor<Q> {
        let mut terms = vec![(Word::new(), q(1, 1))];
        // The running integral of each word as a polynomial in t.
        let mut layer: Vec<(Word, Poly)> = vec![(Word::new(), vec![q(1, 1)])];
        for _ in 0..max_len {
            let mut next = Vec::new();
            for (word, running) in &layer {
                for (a, input) in inputs.iter().enumerate() {
                    let integrand = poly_mul(running, input);
                    let mut longer = word.clone();
                    longer.push(a as Letter);
                    terms.push((longer.clone(), poly_integral_at(&integrand, &q(1, 1))));
                    next.push((longer, poly_antiderivative(&integrand)));
                }
            }
            layer = next;
        }
        Tensor::from_terms(terms)
    }

    #[test]
    fn chronological_log_of_two_constant_pieces_is_bch() {
        // DESIGN §2.5 / REFERENCES §2: for V = X on [0,1] then Y on [1,2],
        // the chronological logarithm is log(e^X e^Y). The Chen coefficient
        // of a word is the volume of {0 ≤ s1 ≤ … ≤ sk ≤ 2} with s_i in the
        // interval of its letter: 1/(i! j!) for X^i Y^j, 0 otherwise.
        let max_degree = 7;
        let mut terms = vec![(Word::new(), q(1, 1))];
        for word in all_words(2, max_degree) {
            let n_x = word.iter().take_while(|&&a| a == X).count();
            if word[n_x..].iter().all(|&a| a == Y) {
                let factorial = |n: usize| (1..=n as i64).product::<i64>();
                terms.push((
                    word.clone(),
                    q(1, factorial(n_x) * factorial(word.len() - n_x)),
                ));
            }
        }
        let chen = Tensor::from_terms(terms);
        let log = chronological_log(&chen, &Alphabet::uniform(2), max_degree as u32).unwrap();
        assert_eq!(log, bch_by_tensor::<Q>(max_degree as u32).unwrap());
    }

    #[test]
    fn chronological_log_matches_magnus_check_values() {
        // Blanes, Casas, Oteo, Ros, "The Magnus expansion and some of its
        // applications", Phys. Rep. 470 (2009), §2, in the vector-field
        // convention of REFERENCES §1 (DERIVED): α = 1 + t, β = t², T = 1
        // gives W2 = (1/10)[X,Y] and
        // W3 = (1/840)[X,[X,Y]] − (19/5040)[Y,[X,Y]].
        let inputs = vec![vec![q(1, 1), q(1, 1)], vec![q(0, 1), q(0, 1), q(1, 1)]];
        let chen = chen_series_on_unit_interval(&inputs, 3);
        let log = chronological_log(&chen, &Alphabet::uniform(2), 3).unwrap();
        let expected = project_brackets(
            &[
                (letter(X), q(3, 2)),
                (letter(Y), q(1, 3)),
                (right_nested("XY"), q(1, 10)),
                (right_nested("XXY"), q(1, 840)),
                (right_nested("YXY"), q(-19, 5040)),
            ],
            3,
        );
        assert_eq!(log, expected);
    }

    #[test]
    fn chronological_log_with_weighted_letters_truncates_by_weight() {
        // With X of weight 1 and Y of weight 2, the log of e^X e^Y up to
        // weight 5 is the part of the BCH series of weight ≤ 5.
        let alphabet = Alphabet::new(vec![1, 2]).unwrap();
        let exp_x = Tensor::<Q>::letter(X).exp_truncated(&alphabet, 5).unwrap();
        let exp_y = Tensor::<Q>::letter(Y).exp_truncated(&alphabet, 5).unwrap();
        let chen = exp_x.mul_truncated(&exp_y, &alphabet, 5).unwrap();
        let log = chronological_log(&chen, &alphabet, 5).unwrap();
        let full = bch_by_tensor::<Q>(5).unwrap();
        let expected = LiePoly::from_terms(
            full.terms()
                .iter()
                .filter(|(word, _)| alphabet.word_weight(word).unwrap() <= 5)
                .cloned(),
            &alphabet,
        )
        .unwrap();
        assert_eq!(log, expected);
        assert!(log.coeff(&xy("XXY")).is_some());
        assert!(log.coeff(&xy("XYY")).is_some());
        assert!(log.coeff(&xy("XXYY")).is_none());
        // Terms come by weight: X (1), Y (2), XY (3), XXY (4), ...
        let weights: Vec<u64> = log
            .terms()
            .iter()
            .map(|(word, _)| alphabet.word_weight(word).unwrap())
            .collect();
        assert!(weights.windows(2).all(|pair| pair[0] <= pair[1]));
    }

    // ---- evaluation -----------------------------------------------------

    type Matrix = Vec<Vec<Q>>;

    fn mat_zero(n: usize) -> Matrix {
        vec![vec![q(0, 1); n]; n]
    }

    fn mat_identity(n: usize) -> Matrix {
        let mut res = mat_zero(n);
        for (i, row) in res.iter_mut().enumerate() {
            row[i] = q(1, 1);
        }
        res
    }

    fn mat_mul(a: &Matrix, b: &Matrix) -> Matrix {
        let n = a.len();
        let mut res = mat_zero(n);
        for i in 0..n {
            for j in 0..n {
                for k in 0..n {
                    res[i][j] += &a[i][k] * &b[k][j];
                }
            }
        }
        res
    }

    fn mat_add_scaled(a: &Matrix, c: &Q, b: &Matrix) -> Matrix {
        a.iter()
            .zip(b)
            .map(|(ra, rb)| ra.iter().zip(rb).map(|(x, y)| x + c * y).collect())
            .collect()
    }

    /// Σ_{k=0}^{n} sign_k c_k N^k for a nilpotent N with N^n = 0.
    fn mat_series(n_mat: &Matrix, coeffs: &[Q]) -> Matrix {
        let size = n_mat.len();
        let mut res = mat_zero(size);
        let mut power = mat_identity(size);
        for coeff in coeffs {
            res = mat_add_scaled(&res, coeff, &power);
            power = mat_mul(&power, n_mat);
        }
        res
    }

    /// log(e^A e^B) for strictly upper triangular n×n matrices, exactly.
    fn exact_log_of_product(a: &Matrix, b: &Matrix) -> Matrix {
        let n = a.len();
        let exp_coeffs: Vec<Q> = (0..n as i64)
            .map(|k| q(1, (1..=k).product::<i64>().max(1)))
            .collect();
        let product = mat_mul(&mat_series(a, &exp_coeffs), &mat_series(b, &exp_coeffs));
        let nilpotent = mat_add_scaled(&product, &q(-1, 1), &mat_identity(n));
        let mut log_coeffs = vec![q(0, 1)];
        for k in 1..n as i64 {
            log_coeffs.push(q(if k % 2 == 1 { 1 } else { -1 }, k));
        }
        mat_series(&nilpotent, &log_coeffs)
    }

    fn strictly_upper(n: usize, seed: i64) -> Matrix {
        let mut res = mat_zero(n);
        let mut state = seed;
        for (i, row) in res.iter_mut().enumerate() {
            for entry in row.iter_mut().skip(i + 1) {
                state = (state * 37 + 11) % 19;
                *entry = q(state - 9, 1 + (state % 3));
            }
        }
        res
    }

    fn evaluate_with_matrices(poly: &LiePoly<Q>, a: &Matrix, b: &Matrix) -> (Matrix, usize) {
        let mut n_brackets = 0;
        let value = evaluate(
            poly,
            |letter| -> Result<Matrix, FreeLieError> {
                Ok(if letter == X { a.clone() } else { b.clone() })
            },
            |left, right| {
                n_brackets += 1;
                let forward = mat_mul(left, right);
                let backward = mat_mul(right, left);
                Ok(mat_add_scaled(&forward, &q(-1, 1), &backward))
            },
            |acc, coeff, value| {
                let acc = acc.unwrap_or_else(|| mat_zero(a.len()));
                Ok(mat_add_scaled(&acc, coeff, value))
            },
        )
        .unwrap()
        .unwrap();
        (value, n_brackets)
    }

    #[test]
    fn evaluated_bch_equals_matrix_logarithm_for_nilpotent_matrices() {
        // For strictly upper triangular n×n matrices every bracket with n
        // letters vanishes, so the BCH series to degree 8 is exact
        // (Baker–Campbell–Hausdorff, with the commutator AB − BA).
        let series = bch_by_tensor::<Q>(8).unwrap();
        for (n, seed) in [(3, 1), (4, 2), (4, 5)] {
            let a = strictly_upper(n, seed);
            let b = strictly_upper(n, seed + 7);
            let (value, n_brackets) = evaluate_with_matrices(&series, &a, &b);
            assert_eq!(value, exact_log_of_product(&a, &b), "n = {n}");
            // Each sub-bracket is computed once: at most one bracket per
            // Lyndon word of length 2..=8 on two letters.
            let n_lyndon = lyndon_words(&Alphabet::uniform(2), 8)
                .iter()
                .filter(|word| word.len() >= 2)
                .count();
            assert!(n_brackets <= n_lyndon, "{n_brackets} brackets");
        }
    }

    #[test]
    fn evaluation_in_the_tensor_algebra_is_the_expansion() {
        let series = bch_by_tensor::<Q>(5).unwrap();
        let value = evaluate(
            &series,
            |letter| -> Result<Tensor<Q>, FreeLieError> { Ok(Tensor::letter(letter)) },
            |left, right| Ok(left.mul_full(right).sub(&right.mul_full(left))),
            |acc, coeff, value| Ok(acc.unwrap_or_default().add(&value.mul_coeff(coeff))),
        )
        .unwrap()
        .unwrap();
        assert_eq!(value, series.to_tensor().unwrap());
        let empty: Option<Tensor<Q>> = evaluate(
            &LiePoly::<Q>::zero(),
            |letter| -> Result<Tensor<Q>, FreeLieError> { Ok(Tensor::letter(letter)) },
            |left, _| Ok(left.clone()),
            |_, _, value| Ok(value.clone()),
        )
        .unwrap();
        assert_eq!(empty, None);
    }

    #[test]
    fn evaluation_passes_on_closure_errors() {
        #[derive(Debug, PartialEq)]
        enum TestError {
            Letter(Letter),
            FreeLie,
        }
        impl From<FreeLieError> for TestError {
            fn from(_: FreeLieError) -> Self {
                TestError::FreeLie
            }
        }
        let series = bch_by_tensor::<Q>(3).unwrap();
        let res: Result<Option<i64>, TestError> = evaluate(
            &series,
            |letter| {
                if letter == Y {
                    Err(TestError::Letter(letter))
                } else {
                    Ok(1)
                }
            },
            |_, _| Ok(0),
            |acc, _, value| Ok(acc.unwrap_or(0) + value),
        );
        assert_eq!(res, Err(TestError::Letter(Y)));
    }
}
