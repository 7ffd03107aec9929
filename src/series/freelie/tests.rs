//! Tests of the free Lie algebra: words, tensor series, the Lyndon basis,
//! the tensor route of the BCH series and evaluation.

use super::*;
use num_bigint::BigInt;
use num_rational::BigRational;
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
