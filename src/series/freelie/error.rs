//! Errors of the free Lie algebra computations.

use std::fmt;

use super::words::{Letter, Word};

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
pub(super) struct WordDisplay<'a>(&'a [Letter]);

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
