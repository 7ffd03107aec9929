//! Coordinate changes: the old coordinates `x` written as functions
//! `x = ψ(t, y)` of new ones `y` (and possibly of time).
//!
//! A scalar becomes `h ∘ ψ`; a (possibly time-varying) field `x' = A(t, x)`
//! becomes `y' = (Dψ)^{-1} (A(t, ψ(t, y)) − ∂_t ψ(t, y))`. The inverse of the
//! Jacobian `Dψ = (∂ψ_i/∂y_j)` is exact when its determinant is a nonzero
//! number times a monomial (polar and spherical maps, scalings, shears,
//! rotations by constant or time-dependent angles): then `(Dψ)^{-1}` is the
//! adjugate times the reciprocal monomial. Any other determinant is refused,
//! naming it.
//!
//! Pure: no I/O, no session; the language layer checks names and charts.

use std::collections::HashMap;

use super::error::{CoreError, CoreResult};
use super::expr::Expr;
use super::field::{Field, Matrix};
use super::num::Q;
use super::symbol::Sym;

/// A change of coordinates `x = ψ(t, y)`, with `(Dψ)^{-1}` computed once.
#[derive(Clone, Debug)]
pub struct Change {
    /// `x_i ↦ ψ_i(t, y)`.
    map: HashMap<Sym, Expr>,
    /// The new coordinates `y` (inside `sin`, `cos`, `exp` after substitution).
    new: Vec<Sym>,
    /// `∂_t ψ`.
    dt: Field,
    /// `(Dψ)^{-1}`.
    inverse: Matrix,
    /// `det Dψ`.
    det: Expr,
}

impl Change {
    /// The change `old_i = psi_i(t, new)`. `old` and `new` have the same
    /// length as `psi`; `psi` must not mention `old` (the caller checks).
    pub fn new(old: &[Sym], new: &[Sym], psi: Vec<Expr>) -> CoreResult<Change> {
        let n = old.len();
        if new.len() != n || psi.len() != n {
            return Err(CoreError::Dimension {
                what: format!(
                    "a change of {n} coordinates needs {n} new names and {n} expressions"
                ),
            });
        }
        let field = Field(psi);
        let jac = field.jacobian(new)?;
        let det = jac.det()?;
        if det.is_zero() {
            return Err(CoreError::Refused {
                reason: "the map is singular: det Dψ = 0".to_string(),
            });
        }
        let recip = det.recip().map_err(|_| CoreError::Refused {
            reason: format!(
                "det Dψ = {det} is not a nonzero number times a monomial, so (Dψ)^-1 is not \
                 exact in ordex's expressions (polar maps, scalings, shears and rotations are)"
            ),
        })?;
        let inverse = adjugate(&jac)?.mul_expr(&recip)?;
        let dt = Field(field.0.iter().map(|e| e.pd(Sym::T)).collect());
        let map = old.iter().copied().zip(field.0).collect();
        Ok(Change {
            map,
            new: new.to_vec(),
            dt,
            inverse,
            det,
        })
    }

    /// `det Dψ`.
    pub fn det(&self) -> &Expr {
        &self.det
    }

    /// Whether the map depends on time.
    pub fn is_time_dependent(&self) -> bool {
        !self.dt.is_zero()
    }

    /// `h ∘ ψ`.
    pub fn scalar(&self, h: &Expr) -> CoreResult<Expr> {
        h.subst(&self.map, &self.new)
    }

    /// `(Dψ)^{-1} (A ∘ ψ − ∂_t ψ)`.
    pub fn field(&self, a: &Field) -> CoreResult<Field> {
        if a.dim() != self.new.len() {
            return Err(CoreError::Dimension {
                what: format!(
                    "a field with {} components in a change of {} coordinates",
                    a.dim(),
                    self.new.len()
                ),
            });
        }
        let composed = a.map(|c| self.scalar(c))?;
        let rhs = composed.sub(&self.dt)?;
        self.inverse.apply(&rhs)
    }
}

/// The adjugate (transposed cofactor matrix), so that `M · adj M = det M · I`.
fn adjugate(m: &Matrix) -> CoreResult<Matrix> {
    let n = m.rows;
    if n == 1 {
        return Ok(Matrix::identity(1));
    }
    let mut data = vec![Expr::zero(); n * n];
    for i in 0..n {
        for j in 0..n {
            let mut minor = Vec::with_capacity((n - 1) * (n - 1));
            for r in (0..n).filter(|r| *r != i) {
                for c in (0..n).filter(|c| *c != j) {
                    minor.push(m.get(r, c).clone());
                }
            }
            let d = Matrix {
                rows: n - 1,
                cols: n - 1,
                data: minor,
            }
            .det()?;
            let sign = if (i + j) % 2 == 0 { 1 } else { -1 };
            // Cofactor C_ij goes to position (j, i).
            data[j * n + i] = d.scale(&Q::int(sign));
        }
    }
    Ok(Matrix {
        rows: n,
        cols: n,
        data,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn s(n: &str) -> Expr {
        Expr::sym(Sym::new(n))
    }

    #[test]
    fn polar_coordinates_of_the_rotation_field() {
        let (x, v, r, phi) = (Sym::new("x"), Sym::new("v"), Sym::new("r"), Sym::new("phi"));
        let psi = vec![
            s("r")
                .mul(&Expr::cos_of(&s("phi"), &[r, phi]).unwrap())
                .unwrap(),
            s("r")
                .mul(&Expr::sin_of(&s("phi"), &[r, phi]).unwrap())
                .unwrap(),
        ];
        let ch = Change::new(&[x, v], &[r, phi], psi).unwrap();
        assert_eq!(ch.det(), &s("r"));
        // x' = v, v' = -x is r' = 0, phi' = -1.
        let rot = Field(vec![s("v"), s("x").neg()]);
        assert_eq!(
            ch.field(&rot).unwrap(),
            Field(vec![Expr::zero(), Expr::int(-1)])
        );
        // The radial field x∂x + v∂v is r∂r.
        let radial = Field(vec![s("x"), s("v")]);
        assert_eq!(
            ch.field(&radial).unwrap(),
            Field(vec![s("r"), Expr::zero()])
        );
    }

    #[test]
    fn a_time_dependent_rotation_subtracts_the_time_derivative() {
        let (x, v, a, b) = (Sym::new("x"), Sym::new("v"), Sym::new("a"), Sym::new("b"));
        let c = Expr::cos_of(&Expr::sym(Sym::T), &[a, b]).unwrap();
        let sn = Expr::sin_of(&Expr::sym(Sym::T), &[a, b]).unwrap();
        // x = cos(t) a + sin(t) b, v = -sin(t) a + cos(t) b: the flow of the
        // rotation x' = v, v' = -x, so the rotation becomes the zero field.
        let psi = vec![
            c.mul(&s("a")).unwrap().add(&sn.mul(&s("b")).unwrap()),
            c.mul(&s("b")).unwrap().sub(&sn.mul(&s("a")).unwrap()),
        ];
        let ch = Change::new(&[x, v], &[a, b], psi).unwrap();
        assert!(ch.is_time_dependent());
        let rot = Field(vec![s("v"), s("x").neg()]);
        assert!(ch.field(&rot).unwrap().is_zero());
    }

    #[test]
    fn a_determinant_that_is_a_sum_is_refused_by_name() {
        let (x, a) = (Sym::new("x"), Sym::new("a"));
        let psi = vec![s("a").add(&s("a").pow(3).unwrap())];
        let err = Change::new(&[x], &[a], psi).unwrap_err().to_string();
        assert!(err.contains("det Dψ = ") && err.contains("a^2"), "{err}");
    }
}
