//! Lie polynomials in the Lyndon basis: expansions of standard
//! bracketings, the projection of Lie elements onto the basis and the
//! logarithm of group-like series.

use std::collections::{BTreeMap, HashMap};
use std::rc::Rc;

use super::coeff::{Coeff, ONE};
use super::error::FreeLieError;
use super::tensor::{accumulate, keep_going, Tensor};
use super::words::{is_lyndon, standard_factorization, Alphabet, Letter, Word};

/// Integer expansions `P_w` of standard bracketings, cached by Lyndon word;
/// each is a list of (word, coefficient) sorted by word, starting with `w`
/// itself (coefficient 1).
#[derive(Default)]
pub(super) struct LyndonExpansions {
    cache: HashMap<Word, Rc<Vec<(Word, i64)>>>,
}

impl LyndonExpansions {
    /// The expansion of `word`; `C` is only asked whether to keep going
    /// (an expansion of a word of length L can hold 2^(L-1) words).
    pub(super) fn get<C: Coeff>(&mut self, word: &[Letter]) -> Result<Rc<Vec<(Word, i64)>>, FreeLieError> {
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
    pub(super) terms: Vec<(Word, C)>,
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
    /// [`super::bch`] returns them; checked in debug builds).
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

    pub(super) fn sorted_by_weight(terms: Vec<(Word, C)>, alphabet: &Alphabet) -> Result<Self, FreeLieError> {
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
