//! Newton's method for equilibria `F(x) = 0` of an autonomous field, from
//! a guess, with a backtracking line search on `|F|` (so that a guess a
//! little off does not throw the iterates far away).
//!
//! Method: J. E. Dennis and R. B. Schnabel, "Numerical Methods for
//! Unconstrained Optimization and Nonlinear Equations" (1983), §6.3
//! (from memory): the Newton step, cut to a largest length and halved
//! until the residual decreases.

use std::fmt;

use nalgebra::{DMatrix, DVector};

/// Why Newton's method stopped without an equilibrium.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum NewtonError {
    /// The Jacobian is singular (or nearly so) at an iterate.
    Singular {
        /// The iterate.
        at: Vec<f64>,
        /// The residual there.
        residual: f64,
    },
    /// No step decreased the residual, or the iterations ran out.
    NoConvergence {
        /// The best iterate.
        at: Vec<f64>,
        /// Its residual.
        residual: f64,
        /// Iterations done.
        iterations: usize,
    },
    /// The field or the iterate stopped being finite.
    NonFinite,
}

impl fmt::Display for NewtonError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NewtonError::Singular { residual, .. } => write!(
                f,
                "the Jacobian is singular at an iterate (residual {residual:.3e}): the equilibrium may be degenerate or the guess on a line of them; try another guess"
            ),
            NewtonError::NoConvergence {
                residual,
                iterations,
                ..
            } => write!(
                f,
                "Newton's method did not converge in {iterations} steps (smallest residual {residual:.3e}): there may be no equilibrium near the guess; try a closer one"
            ),
            NewtonError::NonFinite => write!(
                f,
                "the field stopped being finite along Newton's iterates: try a closer guess"
            ),
        }
    }
}

impl std::error::Error for NewtonError {}

/// A converged equilibrium.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct Root {
    /// The point.
    pub x: Vec<f64>,
    /// `|F(x)|` (Euclidean).
    pub residual: f64,
    /// Newton steps taken.
    pub iterations: usize,
}

/// Most Newton steps.
pub(crate) const MAX_ITERATIONS: usize = 60;

fn norm(v: &[f64]) -> f64 {
    v.iter().map(|x| x * x).sum::<f64>().sqrt()
}

/// Solves `F(x) = 0` from `guess`. `f` writes `F(x)`, `jac` writes the
/// Jacobian row by row (`n·n` entries). Converged when the step is below
/// `1e-13·(1 + |x|)` or the residual is at rounding level (`F` evaluated
/// with its scale `1e-14·(1 + |J|·|x|)`).
pub(crate) fn solve(
    f: &dyn Fn(&[f64], &mut [f64]),
    jac: &dyn Fn(&[f64], &mut [f64]),
    guess: &[f64],
    cancel: &dyn Fn() -> bool,
) -> Result<Root, NewtonError> {
    let n = guess.len();
    let mut x = guess.to_vec();
    let mut fx = vec![0.0; n];
    let mut jx = vec![0.0; n * n];
    f(&x, &mut fx);
    let mut r = norm(&fx);
    if !r.is_finite() {
        return Err(NewtonError::NonFinite);
    }
    let mut trial = vec![0.0; n];
    let mut ftrial = vec![0.0; n];
    for it in 0..MAX_ITERATIONS {
        if cancel() {
            return Err(NewtonError::NoConvergence {
                at: x,
                residual: r,
                iterations: it,
            });
        }
        jac(&x, &mut jx);
        if jx.iter().any(|v| !v.is_finite()) {
            return Err(NewtonError::NonFinite);
        }
        let jnorm = jx.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
        let scale = 1e-14 * (1.0 + jnorm * (1.0 + norm(&x)));
        if r <= scale {
            return Ok(Root {
                x,
                residual: r,
                iterations: it,
            });
        }
        let m = DMatrix::from_row_slice(n, n, &jx);
        let rhs = DVector::from_iterator(n, fx.iter().map(|v| -v));
        let lu = m.lu();
        let step = match lu.solve(&rhs) {
            Some(s) if s.iter().all(|v| v.is_finite()) => s,
            _ => return Err(NewtonError::Singular { at: x, residual: r }),
        };
        // A step longer than max(1, |x|) is cut to that length (so that a
        // nearly singular Jacobian does not throw the iterate far from the
        // guess), then halved until the residual decreases.
        let cap = 1.0_f64.max(norm(&x));
        let mut lambda = (cap / step.norm()).min(1.0);
        let mut accepted = false;
        for _ in 0..30 {
            for i in 0..n {
                trial[i] = x[i] + lambda * step[i];
            }
            f(&trial, &mut ftrial);
            let rt = norm(&ftrial);
            if rt.is_finite() && rt < r {
                accepted = true;
                break;
            }
            lambda *= 0.5;
        }
        let step_size = lambda * step.norm();
        if !accepted {
            // No decrease: at rounding level already, or stuck.
            if step.norm() <= 1e-10 * (1.0 + norm(&x)) {
                return Ok(Root {
                    x,
                    residual: r,
                    iterations: it,
                });
            }
            return Err(NewtonError::NoConvergence {
                at: x,
                residual: r,
                iterations: it,
            });
        }
        std::mem::swap(&mut x, &mut trial);
        std::mem::swap(&mut fx, &mut ftrial);
        r = norm(&fx);
        if step_size <= 1e-13 * (1.0 + norm(&x)) {
            return Ok(Root {
                x,
                residual: r,
                iterations: it + 1,
            });
        }
    }
    Err(NewtonError::NoConvergence {
        at: x,
        residual: r,
        iterations: MAX_ITERATIONS,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn never() -> bool {
        false
    }

    // The pendulum with a vibrating pivot, averaged (Landau & Lifshitz,
    // Mechanics, 3rd ed. 1976, §30, from memory): th' = p,
    // p' = -gam*sin(th) - bet^2/4*sin(2*th) has an equilibrium at th = pi.
    #[test]
    fn finds_the_inverted_equilibrium() {
        let (gam, bet) = (12.26, 6.1);
        let f = |x: &[f64], out: &mut [f64]| {
            out[0] = x[1];
            out[1] = -gam * x[0].sin() - bet * bet / 4.0 * (2.0 * x[0]).sin();
        };
        let j = |x: &[f64], out: &mut [f64]| {
            out[0] = 0.0;
            out[1] = 1.0;
            out[2] = -gam * x[0].cos() - bet * bet / 2.0 * (2.0 * x[0]).cos();
            out[3] = 0.0;
        };
        let root = solve(&f, &j, &[2.9, 0.1], &never).unwrap();
        assert!((root.x[0] - std::f64::consts::PI).abs() < 1e-12, "{root:?}");
        assert!(root.x[1].abs() < 1e-12);
        assert!(root.residual < 1e-12);
    }

    #[test]
    fn failures_are_reported() {
        // x^2 + 1 = 0 has no real root.
        let f = |x: &[f64], out: &mut [f64]| out[0] = x[0] * x[0] + 1.0;
        let j = |x: &[f64], out: &mut [f64]| out[0] = 2.0 * x[0];
        let e = solve(&f, &j, &[0.5], &never).unwrap_err();
        assert!(
            matches!(
                e,
                NewtonError::NoConvergence { .. } | NewtonError::Singular { .. }
            ),
            "{e:?}"
        );
        let e = solve(&f, &j, &[0.0], &never).unwrap_err();
        assert!(matches!(e, NewtonError::Singular { .. }), "{e:?}");
        assert!(e.to_string().starts_with("the Jacobian is singular"));
    }
}
