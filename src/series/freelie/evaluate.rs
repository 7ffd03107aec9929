//! Evaluation of Lie polynomials with concrete values.

use std::collections::HashMap;

use super::error::FreeLieError;
use super::lyndon_basis::LiePoly;
use super::coeff::Coeff;
use super::words::{standard_factorization, Letter, Word};

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
