//! Where products of two packed parts go: [`PackedKeep`], [`ProductRoute`],
//! [`ProductRoutes`] and the pieces of a power of time ([`TimePiece`]).

use super::part::Packed;

/// Which products a [`PackedSum`] keeps, by time frequency of the result
/// (the integer form of [`super::super::expr::Keep`]).
#[derive(Clone, Copy, Debug)]
pub struct PackedKeep {
    /// Highest frequency kept (`None`: all).
    pub cap: Option<i64>,
    /// Of the dropped `c·sin(h t)`, keep the constant `c/h` apart.
    pub sines: bool,
}

/// One piece of what a term's power of `t` becomes (see
/// [`PackedSum::add_time_pieces`]): `t^power` with the time factor
/// `(freq, odd)` and the factor `num/den` (`den > 0`).
#[derive(Clone, Copy, Debug)]
pub struct TimePiece {
    pub power: i32,
    pub freq: i64,
    pub odd: bool,
    pub num: i64,
    pub den: i64,
}

/// Where the products of one pair of parts go: the sum of terms with time
/// factor `(freq, odd)` or, with `sines`, the constants of dropped sines;
/// each product takes the factor `p/q` on the way.
#[derive(Clone, Copy, Debug, Default)]
pub struct ProductRoute {
    pub(super) freq: i64,
    pub(super) odd: bool,
    pub(super) sines: bool,
    pub(super) p: i64,
    pub(super) q: i64,
}

impl ProductRoute {
    /// The route to the sum of time factor `(freq, odd)` (or, with
    /// `sines`, of sine constants) with the factor `p/q` (`q > 0`).
    pub fn new(freq: i64, odd: bool, sines: bool, p: i64, q: i64) -> ProductRoute {
        ProductRoute {
            freq,
            odd,
            sines,
            p,
            q,
        }
    }
}

/// The routes of the products of parts `a` and `b` (product-to-sum:
/// `cos a cos b = (cos(a−b) + cos(a+b))/2`, `sin a sin b = (cos(a−b) −
/// cos(a+b))/2`, `sin a cos b = (sin(a+b) + sin(a−b))/2`), after `cut`
/// (`∫_0^t sin(h s) ds = (1 − cos(h t))/h` for the sine constants).
/// `None` when a frequency overflows.
pub fn routes(a: &Packed, b: &Packed, cut: PackedKeep) -> Option<ProductRoutes> {
    let mut out = ProductRoutes::default();
    let mut push = |f: Option<i64>, odd: bool, p: i64, q: i64| -> Option<()> {
        let f = f?;
        // sin(−h t) = −sin(h t), cos(−h t) = cos(h t), sin(0) = 0.
        let (f, p) = if f < 0 {
            (f.checked_neg()?, if odd { -p } else { p })
        } else {
            (f, p)
        };
        if odd && f == 0 {
            return Some(());
        }
        match cut.cap {
            Some(c) if f > c => {
                if cut.sines && odd {
                    out.push(ProductRoute {
                        freq: 0,
                        odd: false,
                        sines: true,
                        p,
                        q: q.checked_mul(f)?,
                    });
                }
            }
            _ => out.push(ProductRoute {
                freq: f,
                odd,
                sines: false,
                p,
                q,
            }),
        }
        Some(())
    };
    let (fa, fb) = (a.freq, b.freq);
    // Every route scales by halves (1 = 2/2): one denominator for the
    // products of two parts, whatever their frequencies, so that the
    // targets' last quotient serves again.
    if fa == 0 {
        push(Some(fb), b.odd, 2, 2)?;
    } else if fb == 0 {
        push(Some(fa), a.odd, 2, 2)?;
    } else {
        let (sum, diff) = (fa.checked_add(fb), fa.checked_sub(fb));
        match (a.odd, b.odd) {
            (false, false) => {
                push(diff, false, 1, 2)?;
                push(sum, false, 1, 2)?;
            }
            (true, true) => {
                push(diff, false, 1, 2)?;
                push(sum, false, -1, 2)?;
            }
            (true, false) => {
                push(sum, true, 1, 2)?;
                push(diff, true, 1, 2)?;
            }
            (false, true) => {
                push(sum, true, 1, 2)?;
                push(diff.and_then(i64::checked_neg), true, 1, 2)?;
            }
        }
    }
    Some(out)
}

/// The at most two routes of a pair of parts (a fixed array: no length
/// checks or spills in the product's setup).
#[derive(Clone, Copy, Debug, Default)]
pub struct ProductRoutes {
    pub(super) routes: [ProductRoute; 2],
    pub(super) len: usize,
}

impl ProductRoutes {
    pub(super) fn push(&mut self, r: ProductRoute) {
        if let Some(slot) = self.routes.get_mut(self.len) {
            *slot = r;
            self.len += 1;
        }
    }

    /// The routes, in order.
    pub fn as_slice(&self) -> &[ProductRoute] {
        &self.routes[..self.len]
    }

    pub fn is_empty(&self) -> bool {
        self.len == 0
    }
}
