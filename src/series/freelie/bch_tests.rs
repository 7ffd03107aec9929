//! Tests of the Lyndon-word route of the BCH series.

use super::*;
use crate::series::freelie::{self, Alphabet, LiePoly};
use proptest::prelude::*;

fn go(n: u32) -> Vec<(Word, BigRational)> {
    bch(n, 2, &mut |_| true, &|| false).unwrap()
}

fn q(num: i64, den: i64) -> BigRational {
    BigRational::new(BigInt::from(num), BigInt::from(den))
}

fn xy(text: &str) -> Word {
    text.chars().map(|ch| Letter::from(ch == 'Y')).collect()
}

/// The old route (logarithm in the truncated tensor algebra, then
/// elimination with expanded standard bracketings) is the oracle.
#[test]
fn agrees_with_the_tensor_route_to_degree_ten() {
    let new = go(10);
    let old = freelie::bch_by_tensor::<BigRational>(10).unwrap();
    assert_eq!(new, old.into_terms());
}

#[test]
fn lyndon_words_and_factorisations_match_the_general_generator() {
    let lyn = Lyndon::new(12, &mut |_| true).unwrap();
    let words: Vec<Word> = lyn.words.iter().map(|b| b.letters()).collect();
    assert_eq!(words, freelie::lyndon_words(&Alphabet::uniform(2), 12));
    assert_eq!(lyn.words.len(), witt_total(12));
    for (i, b) in lyn.words.iter().enumerate().filter(|(_, b)| b.len > 1) {
        let (u, v) = freelie::standard_factorization(&b.letters()).unwrap();
        assert_eq!(lyn.words[lyn.left[i] as usize].letters(), u);
        assert_eq!(lyn.words[lyn.right[i] as usize].letters(), v);
    }
}

#[test]
fn published_low_degree_terms() {
    // Casas & Murua, J. Math. Phys. 50 (2009) 033513 (degree <= 4
    // CONFIRMED; degrees 5-6 DERIVED, REFERENCES §2).
    let series = go(6);
    let coeff = |w: &str| {
        series
            .iter()
            .find(|(word, _)| *word == xy(w))
            .map(|(_, c)| c.clone())
            .unwrap_or_else(BigRational::zero)
    };
    assert_eq!(coeff("XY"), q(1, 2));
    assert_eq!(coeff("XXY"), q(1, 12));
    assert_eq!(coeff("XYY"), q(1, 12)); // [[X, Y], Y] = −[Y, [X, Y]]
    assert_eq!(coeff("XXYY"), q(1, 24)); // [X, [[X, Y], Y]]
    assert_eq!(coeff("XXXY"), BigRational::zero());
    for (w, c) in [
        ("XXXXY", q(-1, 720)),
        ("XXXYY", q(1, 180)),
        ("XXYXY", q(1, 360)),
        ("XXYYY", q(1, 180)),
        ("XYXYY", q(1, 120)),
        ("XYYYY", q(-1, 720)),
        ("XXXXYY", q(-1, 1440)),
        ("XXXYXY", q(1, 720)),
        ("XXXYYY", q(1, 360)),
        ("XXYXYY", q(1, 240)),
        ("XXYYYY", q(-1, 1440)),
    ] {
        assert_eq!(coeff(w), c, "{w}");
    }
}

#[test]
fn nonzero_counts_match_the_published_list() {
    // Casas & Murua (2009), nonzero Lyndon-basis coefficients per
    // degree 1..12 (REFERENCES §2, CONFIRMED).
    let series = go(12);
    let counts: Vec<usize> = (1..=12)
        .map(|n| series.iter().filter(|(w, _)| w.len() == n).count())
        .collect();
    assert_eq!(counts, vec![2, 1, 2, 1, 6, 5, 18, 17, 55, 55, 186, 185]);
}

#[test]
fn nonzero_counts_to_degree_sixteen_match_the_listed_sequence() {
    // Nonzero Lyndon-basis coefficients per degree 13..22 as listed by
    // D. Bar-Natan, "The BCH series in terms of Lyndon words", MathOverflow
    // question 116137 (2012): 630, 629, 2181, 2181, 7710, 7709, 27594,
    // 27593, 99857, 99857 (not in the vetted references; checked here to
    // degree 16).
    let series = go(16);
    let counts: Vec<usize> = (13..=16)
        .map(|n| series.iter().filter(|(w, _)| w.len() == n).count())
        .collect();
    assert_eq!(counts, vec![630, 629, 2181, 2181]);
}

#[test]
fn big_integer_route_gives_the_same_numerators() {
    // The i128 and the big-integer solve agree (the big one runs only
    // on overflow, so it is checked here directly).
    let lyn = Lyndon::new(11, &mut |_| true).unwrap();
    for n in 2..=11u8 {
        let lcm = lcm_upto(u64::from(n));
        let (lo, hi) = (lyn.first[usize::from(n)], lyn.first[usize::from(n) + 1]);
        let parts: Vec<Vec<u8>> = (lo..hi).map(|i| partition(lyn.words[i])).collect();
        let small: Vec<i128> = parts
            .iter()
            .map(|p| goldberg_small(p, i128::try_from(&lcm).unwrap()).unwrap())
            .collect();
        let big: Vec<BigInt> = parts.iter().map(|p| goldberg_big(p, &lcm)).collect();
        let degree = Degree {
            lyn: &lyn,
            n,
            threads: 2,
            stop: &|| false,
        };
        let a = degree.solve::<i128>(&small).unwrap().unwrap();
        let b = degree.solve::<BigInt>(&big).unwrap().unwrap();
        let a: Vec<BigInt> = a.into_iter().map(BigInt::from).collect();
        assert_eq!(a, b, "degree {n}");
    }
}

#[test]
fn a_stop_is_honoured_before_allocation() {
    let mut asked = Vec::new();
    let err = bch(
        40,
        1,
        &mut |n| {
            asked.push(n);
            false
        },
        &|| false,
    )
    .unwrap_err();
    assert!(matches!(err, FreeLieError::Stopped { .. }));
    assert_eq!(asked, vec![witt_total(40)]);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// The triangular solve inverts the expansion: word coefficients
    /// of a random Lie element of one degree (expanded by the tensor
    /// route) give back its Lyndon coordinates.
    #[test]
    fn solve_inverts_the_expansion(
        n in 2u8..=8,
        picks in proptest::collection::vec((0usize..64, -5i64..=5), 1..8),
    ) {
        let lyn = Lyndon::new(n, &mut |_| true).unwrap();
        let (lo, hi) = (lyn.first[usize::from(n)], lyn.first[usize::from(n) + 1]);
        let terms: Vec<(Word, BigRational)> = picks
            .iter()
            .map(|(i, c)| (lyn.words[lo + i % (hi - lo)].letters(), q(*c, 1)))
            .collect();
        let poly = LiePoly::from_terms(terms, &Alphabet::uniform(2)).unwrap();
        let tensor = poly.to_tensor().unwrap();
        let h: Vec<i128> = (lo..hi)
            .map(|i| {
                tensor
                    .coeff(&lyn.words[i].letters())
                    .map_or(0, |c| i128::try_from(c.to_integer()).unwrap())
            })
            .collect();
        let degree = Degree { lyn: &lyn, n, threads: 1, stop: &|| false };
        let c = degree.solve::<i128>(&h).unwrap().unwrap();
        let got: Vec<(Word, BigRational)> = (lo..hi)
            .zip(c)
            .filter(|(_, c)| *c != 0)
            .map(|(i, c)| (lyn.words[i].letters(), BigRational::from(BigInt::from(c))))
            .collect();
        prop_assert_eq!(got, poly.into_terms());
    }
}
