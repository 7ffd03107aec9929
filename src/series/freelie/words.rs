//! Words and Lyndon words: letters, alphabets with weights, the standard
//! factorisation and bracketing, and the generation of Lyndon words.

use std::fmt;

use super::error::FreeLieError;

/// A letter: an index into an [`Alphabet`].
pub type Letter = u16;

/// A word: a sequence of letters, read as the composition of the letters'
/// operators from left (outermost) to right (innermost).
pub type Word = Vec<Letter>;

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
