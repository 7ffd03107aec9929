//! Eigenvalues of real square matrices in floating point, and what they say
//! about the stability of an equilibrium.
//!
//! This module owns the numerical eigenvalue computation (a real Schur
//! decomposition from nalgebra), the clean-up that makes its output
//! reproducible (deterministic order, exact conjugate pairs, no round-off
//! imaginary parts) and the classification of a linearisation. It takes
//! plain rows of `f64` and knows nothing about expressions, Jacobians or
//! how the result is printed.

use std::cmp::Ordering;
use std::fmt;

use nalgebra::{DMatrix, Schur};

/// Why eigenvalues could not be computed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) enum EigenError {
    /// The matrix has no rows.
    Empty,
    /// Row `row` has `len` entries where `expected` (the number of rows)
    /// were required.
    NotSquare {
        /// Index of the offending row, from 0.
        row: usize,
        /// Its length.
        len: usize,
        /// The number of rows.
        expected: usize,
    },
    /// The entry at (`row`, `col`) (from 0) is NaN or infinite.
    NonFinite {
        /// Row index, from 0.
        row: usize,
        /// Column index, from 0.
        col: usize,
    },
    /// The Schur iteration did not converge or overflowed.
    NoConvergence,
}

impl fmt::Display for EigenError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            EigenError::Empty => write!(f, "the matrix is empty"),
            EigenError::NotSquare { row, len, expected } => write!(
                f,
                "the matrix is not square: row {} has {len} entries, expected {expected}",
                row + 1
            ),
            EigenError::NonFinite { row, col } => write!(
                f,
                "matrix entry ({}, {}) is not a finite number",
                row + 1,
                col + 1
            ),
            EigenError::NoConvergence => {
                write!(f, "the eigenvalue iteration did not converge")
            }
        }
    }
}

impl std::error::Error for EigenError {}

/// Eigenvalues `(re, im)` of the real square matrix given by its rows.
///
/// The result is sorted by real part descending, then imaginary part
/// descending. Complex eigenvalues come as exact conjugate pairs (same real
/// part, opposite imaginary parts). Imaginary parts smaller than `1e-12`
/// times the largest entry of the matrix are round-off and set to zero.
/// Negative zeros are normalised to `0.0`, so printing is reproducible.
pub(crate) fn eigenvalues(rows: &[Vec<f64>]) -> Result<Vec<(f64, f64)>, EigenError> {
    let dim = rows.len();
    if dim == 0 {
        return Err(EigenError::Empty);
    }
    let mut entries = Vec::with_capacity(dim * dim);
    for (row_idx, row) in rows.iter().enumerate() {
        if row.len() != dim {
            return Err(EigenError::NotSquare {
                row: row_idx,
                len: row.len(),
                expected: dim,
            });
        }
        for (col_idx, &value) in row.iter().enumerate() {
            if !value.is_finite() {
                return Err(EigenError::NonFinite {
                    row: row_idx,
                    col: col_idx,
                });
            }
            entries.push(value);
        }
    }
    let scale = entries.iter().fold(0.0_f64, |acc, v| acc.max(v.abs()));
    if scale == 0.0 {
        return Ok(vec![(0.0, 0.0); dim]);
    }

    let matrix = DMatrix::from_row_slice(dim, dim, &entries);
    let quasi_triangular = schur_form(matrix).ok_or(EigenError::NoConvergence)?;

    let tiny = 1e-12 * scale;
    let mut res = read_quasi_triangular(&quasi_triangular, tiny);
    if res
        .iter()
        .any(|(re, im)| !re.is_finite() || !im.is_finite())
    {
        return Err(EigenError::NoConvergence);
    }
    for (re, im) in res.iter_mut() {
        *re += 0.0;
        *im += 0.0;
    }
    res.sort_by(|a, b| descending(a.0, b.0).then(descending(a.1, b.1)));
    Ok(res)
}

/// The quasi-triangular factor of a real Schur form of `a`, or `None`.
///
/// The shifted QR iteration can stall on rare matrices (its shifts cycle),
/// so when it does not converge within a finite budget it is run again on
/// similar matrices, which have the same eigenvalues: first the balanced
/// matrix (rows and columns scaled by powers of two, exact in floating
/// point), then that matrix turned by fixed plane rotations (orthogonal,
/// so round-off stays at the level of the matrix entries).
fn schur_form(a: DMatrix<f64>) -> Option<DMatrix<f64>> {
    // A finite iteration budget: nalgebra's default (0) means "no limit".
    let max_iterations = 100 * a.nrows().max(10);
    let attempt =
        |m: DMatrix<f64>| Schur::try_new(m, f64::EPSILON, max_iterations).map(|s| s.unpack().1);
    if let Some(t) = attempt(a.clone()) {
        return Some(t);
    }
    let balanced = balance(a);
    if let Some(t) = attempt(balanced.clone()) {
        return Some(t);
    }
    let dim = balanced.nrows();
    (1..=4).find_map(|k| {
        let mut q = DMatrix::<f64>::identity(dim, dim);
        for i in 0..dim.saturating_sub(1) {
            let (s, c) = (0.37 * k as f64 + 0.11 * i as f64).sin_cos();
            let mut g = DMatrix::<f64>::identity(dim, dim);
            g[(i, i)] = c;
            g[(i + 1, i + 1)] = c;
            g[(i, i + 1)] = -s;
            g[(i + 1, i)] = s;
            q *= g;
        }
        attempt(q.transpose() * &balanced * &q)
    })
}

/// Balancing: a diagonal similarity by powers of two that makes each row
/// and column of similar size, which helps the QR iteration (the
/// Parlett–Reinsch procedure, from memory).
fn balance(mut a: DMatrix<f64>) -> DMatrix<f64> {
    let dim = a.nrows();
    for _ in 0..32 {
        let mut changed = false;
        for i in 0..dim {
            let col: f64 = (0..dim).filter(|&j| j != i).map(|j| a[(j, i)].abs()).sum();
            let row: f64 = (0..dim).filter(|&j| j != i).map(|j| a[(i, j)].abs()).sum();
            if col == 0.0 || row == 0.0 {
                continue;
            }
            // Find f = 2^k with col·f close to row/f; c tracks col·f².
            let mut f = 1.0;
            let (mut c, r) = (col, row);
            while c < r / 2.0 {
                c *= 4.0;
                f *= 2.0;
            }
            while c > r * 2.0 {
                c /= 4.0;
                f /= 2.0;
            }
            // Scale only when the new norms col·f + row/f are clearly smaller.
            if (c + r) / f < 0.95 * (col + row) {
                changed = true;
                for j in 0..dim {
                    a[(i, j)] /= f;
                    a[(j, i)] *= f;
                }
            }
        }
        if !changed {
            break;
        }
    }
    a
}

/// What the eigenvalues of a linearisation say about an equilibrium.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) enum Stability {
    /// Every eigenvalue has negative real part.
    AsymptoticallyStable,
    /// Some eigenvalue has positive real part and none has negative real
    /// part (some may have zero real part).
    Unstable,
    /// Eigenvalues with positive and with negative real parts.
    Saddle,
    /// Every eigenvalue is purely imaginary and nonzero: the linear part
    /// oscillates, and the nonlinear terms decide stability.
    Centre,
    /// No eigenvalue has positive real part but some has zero real part
    /// (and not all are nonzero imaginary): the linearisation is
    /// inconclusive.
    Marginal,
}

impl fmt::Display for Stability {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let text = match self {
            Stability::AsymptoticallyStable => {
                "asymptotically stable: every eigenvalue has negative real part"
            }
            Stability::Unstable => "unstable: an eigenvalue has positive real part",
            Stability::Saddle => {
                "a saddle (unstable): eigenvalues with positive and negative real parts"
            }
            Stability::Centre => "a centre of the linearisation: nonlinear terms decide",
            Stability::Marginal => {
                "marginal: an eigenvalue has zero real part, so the linearisation cannot decide"
            }
        };
        f.write_str(text)
    }
}

/// Relative size below which a real part counts as zero in [`classify`].
pub(crate) const ZERO_REAL_PART: f64 = 1e-10;

/// Classify an equilibrium from the eigenvalues `(re, im)` of its
/// linearisation (Lyapunov's indirect method).
///
/// A real part counts as zero when its size is at most [`ZERO_REAL_PART`]
/// times the largest eigenvalue modulus, since the eigenvalues carry
/// round-off of that order. An empty list is vacuously asymptotically
/// stable.
pub(crate) fn classify(eigs: &[(f64, f64)]) -> Stability {
    let largest = eigs
        .iter()
        .map(|(re, im)| re.hypot(*im))
        .fold(0.0_f64, f64::max);
    let tol = ZERO_REAL_PART * largest;
    let has_positive = eigs.iter().any(|(re, _)| *re > tol);
    let has_negative = eigs.iter().any(|(re, _)| *re < -tol);
    let all_negative = eigs.iter().all(|(re, _)| *re < -tol);
    let all_centre = eigs
        .iter()
        .all(|(re, im)| re.abs() <= tol && im.abs() > tol);
    if has_positive && has_negative {
        Stability::Saddle
    } else if has_positive {
        Stability::Unstable
    } else if all_negative {
        Stability::AsymptoticallyStable
    } else if all_centre {
        Stability::Centre
    } else {
        Stability::Marginal
    }
}

/// Eigenvalues from the 1x1 and 2x2 diagonal blocks of a real Schur form.
fn read_quasi_triangular(t: &DMatrix<f64>, tiny: f64) -> Vec<(f64, f64)> {
    let dim = t.nrows();
    let mut res = Vec::with_capacity(dim);
    let mut idx = 0;
    while idx < dim {
        let below = if idx + 1 < dim {
            t[(idx + 1, idx)]
        } else {
            0.0
        };
        if below == 0.0 {
            res.push((t[(idx, idx)], 0.0));
            idx += 1;
            continue;
        }
        let (a, b, c, d) = (
            t[(idx, idx)],
            t[(idx, idx + 1)],
            below,
            t[(idx + 1, idx + 1)],
        );
        let half_trace = 0.5 * (a + d);
        let half_diff = 0.5 * (a - d);
        let discriminant = half_diff * half_diff + b * c;
        if discriminant >= 0.0 {
            // Two real eigenvalues; avoid cancellation in the smaller one.
            let root = discriminant.sqrt();
            let big = half_trace + root.copysign(half_trace);
            let det = a * d - b * c;
            let small = if big != 0.0 {
                det / big
            } else {
                half_trace - root
            };
            res.push((big, 0.0));
            res.push((small, 0.0));
        } else {
            let im = (-discriminant).sqrt();
            if im < tiny {
                res.push((half_trace, 0.0));
                res.push((half_trace, 0.0));
            } else {
                res.push((half_trace, im));
                res.push((half_trace, -im));
            }
        }
        idx += 2;
    }
    res
}

/// Descending order for finite floats, total on all values.
fn descending(a: f64, b: f64) -> Ordering {
    b.total_cmp(&a)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn close(actual: &[(f64, f64)], expected: &[(f64, f64)], tol: f64) -> bool {
        actual.len() == expected.len()
            && actual
                .iter()
                .zip(expected)
                .all(|(a, e)| (a.0 - e.0).abs() <= tol && (a.1 - e.1).abs() <= tol)
    }

    fn rows(data: &[&[f64]]) -> Vec<Vec<f64>> {
        data.iter().map(|row| row.to_vec()).collect()
    }

    // A plane rotation by θ has eigenvalues cos θ ± i sin θ (standard linear
    // algebra, from memory).
    #[test]
    fn rotation_matrix() {
        let theta: f64 = 0.7;
        let (s, c) = theta.sin_cos();
        let eigs = eigenvalues(&rows(&[&[c, -s], &[s, c]])).unwrap();
        assert!(close(&eigs, &[(c, s), (c, -s)], 1e-14), "{eigs:?}");
        assert_eq!(eigs[0].0, eigs[1].0);
        assert_eq!(eigs[0].1, -eigs[1].1);
        assert_eq!(classify(&eigs), Stability::Unstable);

        let quarter = eigenvalues(&rows(&[&[0.0, -1.0], &[1.0, 0.0]])).unwrap();
        assert!(
            close(&quarter, &[(0.0, 1.0), (0.0, -1.0)], 1e-15),
            "{quarter:?}"
        );
        assert_eq!(classify(&quarter), Stability::Centre);
    }

    // The averaged-pendulum Jacobian of DESIGN.md §5: {0, 1; -6.345, 0} has
    // eigenvalues ±i·sqrt(6.345) (derived).
    #[test]
    fn linear_centre_from_the_design_example() {
        let eigs = eigenvalues(&rows(&[&[0.0, 1.0], &[-6.345, 0.0]])).unwrap();
        let omega = 6.345_f64.sqrt();
        assert!(
            close(&eigs, &[(0.0, omega), (0.0, -omega)], 1e-13),
            "{eigs:?}"
        );
        assert_eq!(classify(&eigs), Stability::Centre);
        assert_eq!(
            classify(&eigs).to_string(),
            "a centre of the linearisation: nonlinear terms decide"
        );
    }

    #[test]
    fn saddle() {
        let eigs = eigenvalues(&rows(&[&[0.0, 1.0], &[4.0, 0.0]])).unwrap();
        assert!(close(&eigs, &[(2.0, 0.0), (-2.0, 0.0)], 1e-14), "{eigs:?}");
        assert_eq!(classify(&eigs), Stability::Saddle);
    }

    // q'' + c q' + k q = 0 as a first-order system has eigenvalues
    // -c/2 ± i sqrt(k - c²/4) (derived from the characteristic polynomial).
    #[test]
    fn damped_oscillator() {
        let (k, c) = (4.0_f64, 0.4_f64);
        let eigs = eigenvalues(&rows(&[&[0.0, 1.0], &[-k, -c]])).unwrap();
        let omega = (k - c * c / 4.0).sqrt();
        assert!(
            close(&eigs, &[(-c / 2.0, omega), (-c / 2.0, -omega)], 1e-13),
            "{eigs:?}"
        );
        assert_eq!(eigs[0].0, eigs[1].0);
        assert_eq!(eigs[0].1, -eigs[1].1);
        assert_eq!(classify(&eigs), Stability::AsymptoticallyStable);
    }

    // The companion matrix of λ³ - 2λ² - 5λ + 6 = (λ - 1)(λ + 2)(λ - 3)
    // has eigenvalues 3, 1, -2 (derived).
    #[test]
    fn companion_matrix_3x3() {
        let eigs = eigenvalues(&rows(&[
            &[0.0, 1.0, 0.0],
            &[0.0, 0.0, 1.0],
            &[-6.0, 5.0, 2.0],
        ]))
        .unwrap();
        assert!(
            close(&eigs, &[(3.0, 0.0), (1.0, 0.0), (-2.0, 0.0)], 1e-12),
            "{eigs:?}"
        );
        assert_eq!(classify(&eigs), Stability::Saddle);
    }

    // A = P D P⁻¹ with D = {-1, 2, 0; -2, -1, 0; 0, 0, -3} has eigenvalues
    // -1 ± 2i and -3 (similarity keeps the spectrum; derived).
    #[test]
    fn similar_to_block_diagonal_3x3() {
        let p = DMatrix::from_row_slice(3, 3, &[1.0, 1.0, 0.0, 0.0, 1.0, 1.0, 1.0, 0.0, 1.0]);
        let d = DMatrix::from_row_slice(3, 3, &[-1.0, 2.0, 0.0, -2.0, -1.0, 0.0, 0.0, 0.0, -3.0]);
        let p_inv = p.clone().try_inverse().unwrap();
        let a = &p * d * p_inv;
        let a_rows: Vec<Vec<f64>> = (0..3).map(|i| a.row(i).iter().copied().collect()).collect();
        let eigs = eigenvalues(&a_rows).unwrap();
        assert!(
            close(&eigs, &[(-1.0, 2.0), (-1.0, -2.0), (-3.0, 0.0)], 1e-12),
            "{eigs:?}"
        );
        assert_eq!(classify(&eigs), Stability::AsymptoticallyStable);
    }

    #[test]
    fn round_off_imaginary_parts_are_zeroed() {
        // Eigenvalues 1 ± i·1e-15: below 1e-12 of the scale.
        let eigs = eigenvalues(&rows(&[&[1.0, 1.0], &[-1e-30, 1.0]])).unwrap();
        assert_eq!(eigs, vec![(1.0, 0.0), (1.0, 0.0)]);
    }

    #[test]
    fn trivial_matrices() {
        assert_eq!(eigenvalues(&rows(&[&[-2.5]])).unwrap(), vec![(-2.5, 0.0)]);
        let zero = eigenvalues(&rows(&[&[0.0, 0.0], &[0.0, 0.0]])).unwrap();
        assert_eq!(zero, vec![(0.0, 0.0), (0.0, 0.0)]);
        assert_eq!(classify(&zero), Stability::Marginal);
        let nilpotent = eigenvalues(&rows(&[&[0.0, 1.0], &[0.0, 0.0]])).unwrap();
        assert_eq!(nilpotent, vec![(0.0, 0.0), (0.0, 0.0)]);
        let diagonal = eigenvalues(&rows(&[
            &[-1.0, 0.0, 0.0],
            &[0.0, 5.0, 0.0],
            &[0.0, 0.0, 0.5],
        ]));
        assert_eq!(diagonal.unwrap(), vec![(5.0, 0.0), (0.5, 0.0), (-1.0, 0.0)]);
    }

    #[test]
    fn bad_matrices_are_errors() {
        assert_eq!(eigenvalues(&[]), Err(EigenError::Empty));
        assert_eq!(
            eigenvalues(&rows(&[&[1.0, 2.0], &[3.0]])),
            Err(EigenError::NotSquare {
                row: 1,
                len: 1,
                expected: 2
            })
        );
        assert_eq!(
            eigenvalues(&rows(&[&[1.0, 2.0, 3.0]])),
            Err(EigenError::NotSquare {
                row: 0,
                len: 3,
                expected: 1
            })
        );
        assert_eq!(
            eigenvalues(&rows(&[&[1.0, f64::NAN], &[0.0, 1.0]])),
            Err(EigenError::NonFinite { row: 0, col: 1 })
        );
        let huge = eigenvalues(&rows(&[&[f64::MAX, f64::MAX], &[-f64::MAX, f64::MAX]]));
        assert!(huge.is_ok() || huge == Err(EigenError::NoConvergence));
        for error in [
            EigenError::Empty,
            EigenError::NotSquare {
                row: 0,
                len: 1,
                expected: 2,
            },
            EigenError::NonFinite { row: 0, col: 0 },
            EigenError::NoConvergence,
        ] {
            let text = error.to_string();
            assert!(text.starts_with(|c: char| c.is_lowercase()) && !text.ends_with('.'));
        }
    }

    #[test]
    fn classification_table() {
        let cases: &[(&[(f64, f64)], Stability)] = &[
            (&[(-1.0, 0.0), (-2.0, 0.0)], Stability::AsymptoticallyStable),
            (&[(1.0, 0.0), (-2.0, 0.0)], Stability::Saddle),
            (&[(1.0, 3.0), (1.0, -3.0)], Stability::Unstable),
            (&[(1.0, 0.0), (0.0, 0.0)], Stability::Unstable),
            (
                &[(0.0, 2.0), (0.0, -2.0), (0.0, 1.0), (0.0, -1.0)],
                Stability::Centre,
            ),
            (&[(1e-14, 2.0), (1e-14, -2.0)], Stability::Centre),
            (&[(0.0, 2.0), (0.0, -2.0), (0.0, 0.0)], Stability::Marginal),
            (&[(0.0, 0.0), (-1.0, 0.0)], Stability::Marginal),
            (&[], Stability::AsymptoticallyStable),
        ];
        for (eigs, expected) in cases {
            assert_eq!(classify(eigs), *expected, "{eigs:?}");
            let text = expected.to_string();
            assert!(text.starts_with(|c: char| c.is_lowercase()) && !text.ends_with('.'));
        }
    }

    // A random 4x4 matrix on which the shifted QR iteration stalled within
    // its budget (found by the property test below): the retries on similar
    // matrices must give its spectrum, checked by trace and determinant.
    #[test]
    fn stalled_schur_iteration_is_retried() {
        let data = [
            9.926430397401113,
            0.0,
            -4.023828386105364,
            -6.440901709852286,
            -3.736996247188484,
            -6.9486515250989385,
            2.48877832832313,
            5.201195219759201,
            2.9392802114739074,
            9.966468073376717,
            9.400067947290307,
            -4.982802769273592,
            -7.242178286581889,
            -2.3737254943747437,
            0.5103153089142191,
            -7.238703013898687,
        ];
        let matrix_rows: Vec<Vec<f64>> = data.chunks(4).map(|c| c.to_vec()).collect();
        let matrix = DMatrix::from_row_slice(4, 4, &data);
        // The plain iteration does stall on it (so the retry is exercised).
        assert!(Schur::try_new(matrix.clone(), f64::EPSILON, 1000).is_none());
        let eigs = eigenvalues(&matrix_rows).expect("eigenvalues");
        let sum: f64 = eigs.iter().map(|e| e.0).sum();
        assert!((sum - matrix.trace()).abs() < 1e-9, "{eigs:?}");
        let mut product = (1.0f64, 0.0f64);
        for (re, im) in &eigs {
            product = (
                product.0 * re - product.1 * im,
                product.0 * im + product.1 * re,
            );
        }
        assert!(
            (product.0 - matrix.determinant()).abs() < 1e-6,
            "{product:?}"
        );
        assert!(product.1.abs() < 1e-6);
    }

    #[test]
    fn balancing_keeps_the_spectrum() {
        // Badly scaled: entries from 1e-6 to 1e6 (eigenvalues 1, 2, 3 by
        // construction: a similarity of diag(1, 2, 3)).
        let a = DMatrix::from_row_slice(3, 3, &[1.0, 1e6, 0.0, 0.0, 2.0, 1e-6, 0.0, 0.0, 3.0]);
        let b = balance(a.clone());
        let rows_of = |m: &DMatrix<f64>| -> Vec<Vec<f64>> {
            (0..3).map(|i| m.row(i).iter().copied().collect()).collect()
        };
        let ea = eigenvalues(&rows_of(&a)).unwrap();
        let eb = eigenvalues(&rows_of(&b)).unwrap();
        assert!(
            close(&ea, &[(3.0, 0.0), (2.0, 0.0), (1.0, 0.0)], 1e-9),
            "{ea:?}"
        );
        assert!(close(&eb, &ea, 1e-9), "{eb:?}");
        let largest = |m: &DMatrix<f64>| m.iter().fold(0.0f64, |x, v| x.max(v.abs()));
        assert!(largest(&b) < largest(&a), "balancing did not reduce {b}");
    }

    proptest! {
        // For any real matrix: the spectrum sums to the trace and multiplies
        // to the determinant; the output is sorted with exact conjugate
        // pairs (standard linear algebra, from memory).
        #[test]
        fn spectrum_invariants(
            dim in 1usize..6,
            data in proptest::collection::vec(-10.0f64..10.0, 25),
        ) {
            let entries = &data[..dim * dim];
            let matrix_rows: Vec<Vec<f64>> = entries.chunks(dim).map(|c| c.to_vec()).collect();
            let eigs = eigenvalues(&matrix_rows).unwrap();
            prop_assert_eq!(eigs.len(), dim);
            let matrix = DMatrix::from_row_slice(dim, dim, entries);
            let trace: f64 = matrix.trace();
            let sum_re: f64 = eigs.iter().map(|e| e.0).sum();
            let sum_im: f64 = eigs.iter().map(|e| e.1).sum();
            prop_assert!((sum_re - trace).abs() <= 1e-9 * (1.0 + trace.abs()) * 10.0);
            prop_assert!(sum_im.abs() <= 1e-12 * (1.0 + trace.abs()) * 10.0);
            let mut product = (1.0f64, 0.0f64);
            for (re, im) in &eigs {
                product = (product.0 * re - product.1 * im, product.0 * im + product.1 * re);
            }
            let det = matrix.determinant();
            let size = 10f64.powi(dim as i32) * 50.0;
            prop_assert!((product.0 - det).abs() <= 1e-9 * size, "{:?} vs {}", product, det);
            prop_assert!(product.1.abs() <= 1e-9 * size);
            for pair in eigs.windows(2) {
                prop_assert!(pair[0].0 >= pair[1].0);
                if pair[0].0 == pair[1].0 {
                    prop_assert!(pair[0].1 >= pair[1].1);
                }
            }
            for (re, im) in &eigs {
                if *im != 0.0 {
                    prop_assert!(eigs.contains(&(*re, -im)));
                }
            }
        }

        #[test]
        fn symmetric_matrices_have_real_spectra(
            data in proptest::collection::vec(-10.0f64..10.0, 16),
        ) {
            let a = DMatrix::from_row_slice(4, 4, &data);
            let sym = &a + a.transpose();
            let sym_rows: Vec<Vec<f64>> =
                (0..4).map(|i| sym.row(i).iter().copied().collect()).collect();
            let eigs = eigenvalues(&sym_rows).unwrap();
            prop_assert!(eigs.iter().all(|e| e.1 == 0.0), "{:?}", eigs);
            let mut expected: Vec<f64> = sym.symmetric_eigenvalues().iter().copied().collect();
            expected.sort_by(|a, b| b.total_cmp(a));
            for (got, want) in eigs.iter().zip(&expected) {
                prop_assert!((got.0 - want).abs() <= 1e-9 * 40.0);
            }
        }
    }
}
