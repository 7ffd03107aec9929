//! Vector fields and exact matrices.
//!
//! A field is a list of expressions, one per state coordinate, in the
//! state order. Conventions (DESIGN §2.3): the Lie derivative
//! `X(h) = Σ X_i ∂h/∂x_i`; the bracket `[X, Y] = DY·X − DX·Y`, so that
//! `[X, Y](h) = X(Y(h)) − Y(X(h))`; `ad_X Y = [X, Y]`; the pull-back by a
//! flow `(Φ^Y_s)^* X = Σ s^k/k! ad_Y^k X`.

use super::error::{CoreError, CoreResult};
use super::expr::Expr;
use super::limits;
use super::num::Q;
use super::sum::{Keep, SumBuilder, TimePart, TimeParts};
use super::symbol::Sym;

/// Products of term counts above which a bracket is split over threads.
/// Since products of plain polynomial parts are packed, threads pay only on
/// large sums (measured on stroboscopic averaging of a 3-state quadratic
/// system: at 2,000 two threads were slower up to order 6; from order 8 on
/// they save 5-15% of the wall time).
const PARALLEL_WORK: usize = 100_000;

/// Worker threads for large brackets: the machine's cores, or
/// `ORDEX_THREADS` (1 turns parallelism off).
pub(crate) fn parallelism() -> usize {
    static CELL: std::sync::OnceLock<usize> = std::sync::OnceLock::new();
    *CELL.get_or_init(|| {
        std::env::var("ORDEX_THREADS")
            .ok()
            .and_then(|v| v.parse().ok())
            .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
            .max(1)
    })
}

/// Workers and the least work of a split sum for the sums on this thread,
/// when a test sets them (see [`with_workers`]).
#[cfg(test)]
thread_local! {
    static WORKERS: std::cell::Cell<Option<usize>> = const { std::cell::Cell::new(None) };
}

/// Runs `f` with the sums of brackets on this thread split over `workers`
/// threads however small they are (a test of the split).
#[cfg(test)]
pub(crate) fn with_workers<R>(workers: usize, f: impl FnOnce() -> R) -> R {
    let before = WORKERS.with(|w| w.replace(Some(workers.max(1))));
    let out = f();
    WORKERS.with(|w| w.set(before));
    out
}

thread_local! {
    /// True on the workers of [`on_workers`]: their sums do not split again.
    static ON_WORKER: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

/// The workers for `work` term products: one below [`PARALLEL_WORK`] and
/// on a worker already.
fn workers_for(work: usize) -> usize {
    #[cfg(test)]
    if let Some(w) = WORKERS.with(std::cell::Cell::get) {
        return w;
    }
    if work < PARALLEL_WORK || ON_WORKER.with(std::cell::Cell::get) {
        1
    } else {
        parallelism()
    }
}

/// Runs `body` on `workers` scoped threads, each with this thread's limits
/// (counting work against this statement) and without further splits; the
/// results in the order of the workers.
fn on_workers<R: Send>(
    workers: usize,
    body: impl Fn() -> CoreResult<R> + Sync,
) -> Vec<CoreResult<R>> {
    let ctx = limits::context();
    std::thread::scope(|scope| {
        let handles: Vec<_> = (0..workers)
            .map(|_| {
                let (body, ctx) = (&body, ctx.clone());
                scope.spawn(move || {
                    limits::enter(ctx);
                    ON_WORKER.with(|w| w.set(true));
                    body()
                })
            })
            .collect();
        handles
            .into_iter()
            .map(|h| h.join().unwrap_or(Err(CoreError::Interrupted)))
            .collect()
    })
}

/// The term products of a sum of brackets of these pairs, as
/// [`bracket_sum`] estimates them to decide on a split.
pub fn bracket_work(pairs: &[(&Prepared, &Prepared)]) -> usize {
    pairs.iter().fold(0usize, |w, (x, y)| {
        w.saturating_add(x.n_terms.saturating_mul(y.n_terms))
    })
}

/// `f(0), …, f(count − 1)` computed on the available cores when `work`
/// (the estimated term products of each) is large, largest first; one at a
/// time otherwise, and when the largest is more than half the total (then
/// its own sum is better split, see [`bracket_sum`]). The results are in
/// the order of the indices whatever thread computed them.
pub fn map_on_workers<T: Send>(
    work: &[usize],
    f: impl Fn(usize) -> CoreResult<T> + Sync,
) -> CoreResult<Vec<T>> {
    let total = work.iter().fold(0usize, |a, &w| a.saturating_add(w));
    let largest = work.iter().copied().max().unwrap_or(0);
    let workers = workers_for(total).min(work.len());
    if workers < 2 || largest > total / 2 {
        return (0..work.len()).map(f).collect();
    }
    let mut order: Vec<usize> = (0..work.len()).collect();
    order.sort_by_key(|&i| std::cmp::Reverse(work[i]));
    let next = std::sync::atomic::AtomicUsize::new(0);
    let failed = std::sync::atomic::AtomicBool::new(false);
    let results = on_workers(workers, || {
        let mut done = Vec::new();
        while !failed.load(std::sync::atomic::Ordering::Relaxed) {
            let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            let Some(&i) = order.get(k) else {
                break;
            };
            match f(i) {
                Ok(t) => done.push((i, t)),
                Err(e) => {
                    failed.store(true, std::sync::atomic::Ordering::Relaxed);
                    return Err(e);
                }
            }
        }
        Ok(done)
    });
    let mut out: Vec<(usize, T)> = Vec::with_capacity(work.len());
    for r in results {
        out.extend(r?);
    }
    out.sort_by_key(|(i, _)| *i);
    Ok(out.into_iter().map(|(_, t)| t).collect())
}

/// A (possibly time-varying) vector field in the coordinates of a state list.
#[derive(Clone, PartialEq, Eq, Hash, Debug, Default)]
pub struct Field(pub Vec<Expr>);

/// A matrix with exact entries, stored by rows.
#[derive(Clone, PartialEq, Eq, Hash, Debug)]
pub struct Matrix {
    /// Number of rows.
    pub rows: usize,
    /// Number of columns.
    pub cols: usize,
    /// Entries by rows.
    pub data: Vec<Expr>,
}

impl Field {
    /// The zero field of dimension `n`.
    pub fn zero(n: usize) -> Field {
        Field(vec![Expr::zero(); n])
    }

    /// Dimension.
    pub fn dim(&self) -> usize {
        self.0.len()
    }

    /// True if and only if every component is zero.
    pub fn is_zero(&self) -> bool {
        self.0.iter().all(Expr::is_zero)
    }

    /// Number of terms over all components.
    pub fn n_terms(&self) -> usize {
        self.0.iter().map(Expr::len).sum()
    }

    fn same_dim(&self, other: &Field) -> CoreResult<()> {
        if self.dim() != other.dim() {
            return Err(CoreError::Dimension {
                what: format!("fields of dimension {} and {}", self.dim(), other.dim()),
            });
        }
        Ok(())
    }

    /// Sum.
    pub fn add(&self, other: &Field) -> CoreResult<Field> {
        self.same_dim(other)?;
        Ok(Field(
            self.0.iter().zip(&other.0).map(|(a, b)| a.add(b)).collect(),
        ))
    }

    /// `self + q·other`.
    pub fn add_scaled(&self, other: &Field, q: &Q) -> CoreResult<Field> {
        self.same_dim(other)?;
        Ok(Field(
            self.0
                .iter()
                .zip(&other.0)
                .map(|(a, b)| a.add_scaled(b, q))
                .collect(),
        ))
    }

    /// Difference.
    pub fn sub(&self, other: &Field) -> CoreResult<Field> {
        self.add_scaled(other, &Q::int(-1))
    }

    /// Multiplies by a rational.
    pub fn scale(&self, q: &Q) -> Field {
        Field(self.0.iter().map(|a| a.scale(q)).collect())
    }

    /// Multiplies by a scalar function.
    pub fn mul_expr(&self, f: &Expr) -> CoreResult<Field> {
        Ok(Field(
            self.0.iter().map(|a| a.mul(f)).collect::<CoreResult<_>>()?,
        ))
    }

    /// Applies `f` to every component.
    pub fn map(&self, f: impl FnMut(&Expr) -> CoreResult<Expr>) -> CoreResult<Field> {
        Ok(Field(self.0.iter().map(f).collect::<CoreResult<_>>()?))
    }

    /// The Lie derivative `X(h) = Σ X_i ∂h/∂x_i`.
    pub fn lie_derivative(&self, h: &Expr, states: &[Sym]) -> CoreResult<Expr> {
        self.check_states(states)?;
        let mut acc = SumBuilder::new();
        for (xi, s) in self.0.iter().zip(states) {
            if xi.is_zero() {
                continue;
            }
            acc.add_product(xi, &h.pd(*s), false)?;
        }
        Ok(acc.finish())
    }

    /// An error unless the field has one component per state coordinate.
    pub(crate) fn check_states(&self, states: &[Sym]) -> CoreResult<()> {
        if self.dim() != states.len() {
            return Err(CoreError::Dimension {
                what: format!(
                    "a field of dimension {} on {} state coordinates",
                    self.dim(),
                    states.len()
                ),
            });
        }
        Ok(())
    }

    /// The field with its first partial derivatives, for brackets that use
    /// it more than once (see [`bracket_sum`]).
    pub fn prepare(self, states: &[Sym]) -> CoreResult<Prepared> {
        self.check_states(states)?;
        let parts: Vec<TimeParts> = self.0.into_iter().map(Expr::into_by_frequency).collect();
        Ok(Prepared::from_parts(parts, states))
    }

    /// The Lie bracket `[self, other] = D(other)·self − D(self)·other`.
    pub fn bracket(&self, other: &Field, states: &[Sym]) -> CoreResult<Field> {
        self.same_dim(other)?;
        let (x, y) = (
            self.clone().prepare(states)?,
            other.clone().prepare(states)?,
        );
        bracket_sum(&[(&x, &y)], states, Keep::All)
    }

    /// `ad_self^k other`.
    pub fn ad_pow(&self, other: &Field, k: u64, states: &[Sym]) -> CoreResult<Field> {
        let mut acc = other.clone();
        for _ in 0..k {
            if acc.is_zero() {
                break;
            }
            acc = self.bracket(&acc, states)?;
        }
        Ok(acc)
    }

    /// The Jacobian matrix `J[i][j] = ∂X_i/∂x_j`.
    pub fn jacobian(&self, states: &[Sym]) -> CoreResult<Matrix> {
        self.check_states(states)?;
        let n = self.dim();
        let mut data = Vec::with_capacity(n * n);
        for xi in &self.0 {
            for s in states {
                data.push(xi.pd(*s));
            }
        }
        Ok(Matrix {
            rows: n,
            cols: n,
            data,
        })
    }

    /// The divergence `Σ ∂X_i/∂x_i`.
    pub fn divergence(&self, states: &[Sym]) -> CoreResult<Expr> {
        self.check_states(states)?;
        Ok(self
            .0
            .iter()
            .zip(states)
            .fold(Expr::zero(), |acc, (xi, s)| acc.add(&xi.pd(*s))))
    }

    /// The pull-back series `Σ_{k=0..depth} 1/k! ad_y^k self`; returns the
    /// sum and whether the series ended (a zero term) before `depth`.
    pub fn pullback(&self, y: &Field, depth: u64, states: &[Sym]) -> CoreResult<(Field, bool)> {
        let mut term = self.clone();
        let mut acc = self.clone();
        let mut fact = Q::ONE;
        for k in 1..=depth {
            term = y.bracket(&term, states)?;
            if term.is_zero() {
                return Ok((acc, true));
            }
            fact = fact.mul(&Q::int(k as i64));
            acc = acc.add_scaled(&term, &fact.recip().unwrap_or(Q::ZERO))?;
        }
        let ended = y.bracket(&term, states)?.is_zero();
        Ok((acc, ended))
    }
}

/// A field together with its first partial derivatives
/// (`d[i][s] = ∂X_i/∂x_s`), computed once for fields that enter many
/// brackets (the generators of the averaging recursions). Components and
/// derivatives are kept split by time frequency, for brackets that only
/// want low harmonics.
#[derive(Clone, Debug)]
pub struct Prepared {
    parts: Vec<TimeParts>,
    d: Vec<Vec<TimeParts>>,
    n_terms: usize,
}

impl Prepared {
    /// From components split by time frequency (their derivatives are
    /// taken part by part: a part's derivative keeps its time factor).
    pub fn from_parts(parts: Vec<TimeParts>, states: &[Sym]) -> Prepared {
        let n_terms = parts.iter().flatten().map(TimePart::len).sum();
        let d = parts
            .iter()
            .map(|xi| {
                states
                    .iter()
                    .map(|s| xi.iter().filter_map(|p| p.derivative(*s)).collect())
                    .collect()
            })
            .collect();
        Prepared { parts, d, n_terms }
    }

    /// The components, split by time frequency.
    pub fn parts(&self) -> &[TimeParts] {
        &self.parts
    }

    /// True if and only if the field is zero.
    pub fn is_zero(&self) -> bool {
        self.n_terms == 0
    }
}

/// `Σ_m [X_m, Y_m]` for prepared pairs, with one accumulator per component:
/// `Σ_m Σ_s (X_m)_s ∂_s (Y_m)_i − (Y_m)_s ∂_s (X_m)_i`. Every term product
/// goes into that accumulator, so a sum of brackets costs its products and
/// one normal form per component. `keep` selects terms by time frequency
/// (products that cannot reach them are skipped). Large sums split their
/// components over the available cores (each worker gets this thread's
/// limits and counts its work against this statement).
pub fn bracket_sum(
    pairs: &[(&Prepared, &Prepared)],
    states: &[Sym],
    keep: Keep,
) -> CoreResult<Field> {
    Ok(Field(component_sums(
        &[],
        pairs,
        false,
        states,
        keep,
        |acc, _| acc.finish(),
    )?))
}

/// The start of a sum of brackets (see [`bracket_sum_onto_parts`]): a field, or
/// a field split by time factor (one list of parts per component).
#[derive(Clone, Copy, Debug)]
pub enum BracketStart<'a> {
    /// A field.
    Field(&'a Field),
    /// A field split by time factor.
    Parts(&'a [TimeParts]),
}

impl BracketStart<'_> {
    fn dim(&self) -> usize {
        match self {
            BracketStart::Field(f) => f.dim(),
            BracketStart::Parts(p) => p.len(),
        }
    }
}

/// `Σ_i q_i·F_i ± Σ_m [X_m, Y_m]` (minus when `negate`) in one sum per
/// component, keeping the terms `keep` asks for, by time parts: the kept
/// terms split by time factor (packed when every product was) and the
/// constant of the dropped sine terms (see [`Keep::UpToWithSines`]) as an
/// autonomous field.
pub fn bracket_sum_onto_parts(
    init: &[(BracketStart, Q)],
    pairs: &[(&Prepared, &Prepared)],
    negate: bool,
    states: &[Sym],
    keep: Keep,
) -> CoreResult<(Vec<TimeParts>, Field)> {
    let sums = component_sums(init, pairs, negate, states, keep, |acc, more| {
        let (parts, sines) = acc.finish_parts_with_sines();
        (
            parts,
            if more.is_zero() {
                sines
            } else {
                sines.add(&more)
            },
        )
    })?;
    let (parts, sines) = sums.into_iter().unzip();
    Ok((parts, Field(sines)))
}

/// [`bracket_sum_onto_parts`] (without sine constants) as a prepared field for
/// further brackets: when every product was packed, its parts stay packed
/// and no normal form is built.
pub fn bracket_sum_onto_prepared(
    init: &[(BracketStart, Q)],
    pairs: &[(&Prepared, &Prepared)],
    negate: bool,
    states: &[Sym],
    keep: Keep,
) -> CoreResult<Prepared> {
    let parts = component_sums(init, pairs, negate, states, keep, |acc, _| {
        acc.finish_parts()
    })?;
    Ok(Prepared::from_parts(parts, states))
}

/// The sum of [`bracket_sum_onto_parts`] for every component, each accumulator
/// handed to `finish` with the sine constants of merged partial sums (zero
/// when the component was summed in one piece). Large sums are cut into
/// pieces (the start terms of a component; the two products of one state
/// coordinate of one pair) that the available cores take largest first;
/// each worker keeps one accumulator per component and the partial sums of
/// a component are added at the end. Sums are exact and normal forms
/// canonical, so the result does not depend on how the pieces were dealt
/// (each worker gets this thread's limits and counts its work against this
/// statement).
fn component_sums<T: Send>(
    init: &[(BracketStart, Q)],
    pairs: &[(&Prepared, &Prepared)],
    negate: bool,
    states: &[Sym],
    keep: Keep,
    finish: impl Fn(SumBuilder, Expr) -> T + Sync,
) -> CoreResult<Vec<T>> {
    let n = states.len();
    if let Some((f, _)) = init.iter().find(|(f, _)| f.dim() != n) {
        return Err(CoreError::Dimension {
            what: format!(
                "a field of dimension {} in a sum on {n} state coordinates",
                f.dim()
            ),
        });
    }
    for (x, y) in pairs {
        if x.parts.len() != n || y.parts.len() != n {
            return Err(CoreError::Dimension {
                what: format!(
                    "a bracket of fields of dimension {} and {} on {n} state coordinates",
                    x.parts.len(),
                    y.parts.len()
                ),
            });
        }
    }
    let add_piece = |acc: &mut SumBuilder, piece: &Piece| -> CoreResult<()> {
        let i = piece.component;
        let Some((m, s)) = piece.products else {
            for (start, q) in init {
                match start {
                    BracketStart::Field(f) => acc.add_scaled(&f.0[i], q, keep)?,
                    BracketStart::Parts(p) => acc.add_parts(&p[i], q, keep)?,
                }
            }
            return Ok(());
        };
        let (x, y) = pairs[m];
        acc.add_product_harmonics(&x.parts[s], &y.d[i][s], negate, keep)?;
        acc.add_product_harmonics(&y.parts[s], &x.d[i][s], !negate, keep)
    };
    let workers = workers_for(bracket_work(pairs));
    if workers < 2 {
        return (0..n)
            .map(|i| {
                let mut acc = SumBuilder::new();
                for piece in pieces_of(i, init, pairs, n) {
                    add_piece(&mut acc, &piece)?;
                }
                Ok(finish(acc, Expr::zero()))
            })
            .collect();
    }
    let mut pieces: Vec<Piece> = (0..n).flat_map(|i| pieces_of(i, init, pairs, n)).collect();
    // Largest first, so that the last pieces taken are small (a stable
    // sort: the list is the same on every run).
    pieces.sort_by_key(|p| std::cmp::Reverse(p.work));
    let workers = workers.min(pieces.len()).max(1);
    let next = std::sync::atomic::AtomicUsize::new(0);
    let failed = std::sync::atomic::AtomicBool::new(false);
    let partials = on_workers(workers, || {
        let mut accs: Vec<Option<SumBuilder>> = (0..n).map(|_| None).collect();
        while !failed.load(std::sync::atomic::Ordering::Relaxed) {
            let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
            let Some(piece) = pieces.get(k) else {
                break;
            };
            let acc = accs[piece.component].get_or_insert_with(SumBuilder::new);
            if let Err(e) = add_piece(acc, piece) {
                failed.store(true, std::sync::atomic::Ordering::Relaxed);
                return Err(e);
            }
        }
        Ok(accs)
    });
    // By component, the partial sums in the order of the workers.
    let mut by_component: Vec<Vec<SumBuilder>> = (0..n).map(|_| Vec::new()).collect();
    for accs in partials {
        for (i, acc) in accs?.into_iter().enumerate() {
            by_component[i].extend(acc);
        }
    }
    by_component
        .into_iter()
        .map(|mut accs| {
            if accs.len() <= 1 {
                return Ok(finish(accs.pop().unwrap_or_default(), Expr::zero()));
            }
            let mut merged = SumBuilder::new();
            let mut sines = Expr::zero();
            for acc in accs {
                let (parts, s) = acc.finish_parts_with_sines();
                merged.add_parts(&parts, &Q::ONE, Keep::All)?;
                sines = sines.add(&s);
            }
            Ok(finish(merged, sines))
        })
        .collect()
}

/// A piece of a sum of brackets for one component (see [`component_sums`]):
/// its start terms (`products` = `None`) or the two products of state
/// coordinate `s` of pair `m`, with an estimate of its work.
struct Piece {
    component: usize,
    products: Option<(usize, usize)>,
    work: usize,
}

/// The pieces of component `i`, in the order of a sum in one piece: the
/// start terms, then pair by pair and state by state (pieces without
/// products left out).
fn pieces_of(
    i: usize,
    init: &[(BracketStart, Q)],
    pairs: &[(&Prepared, &Prepared)],
    n: usize,
) -> Vec<Piece> {
    let len = |p: &[TimePart]| p.iter().map(TimePart::len).sum::<usize>();
    let start = (!init.is_empty()).then_some(Piece {
        component: i,
        products: None,
        work: 0,
    });
    let products = pairs.iter().enumerate().flat_map(move |(m, (x, y))| {
        (0..n).filter_map(move |s| {
            let work = len(&x.parts[s]).saturating_mul(len(&y.d[i][s]))
                + len(&y.parts[s]).saturating_mul(len(&x.d[i][s]));
            (work > 0).then_some(Piece {
                component: i,
                products: Some((m, s)),
                work,
            })
        })
    });
    start.into_iter().chain(products).collect()
}

impl Matrix {
    /// The `n × n` identity.
    pub fn identity(n: usize) -> Matrix {
        let mut data = vec![Expr::zero(); n * n];
        for i in 0..n {
            data[i * n + i] = Expr::int(1);
        }
        Matrix {
            rows: n,
            cols: n,
            data,
        }
    }

    /// Builds from rows; all rows must have the same length.
    pub fn from_rows(rows: Vec<Vec<Expr>>) -> CoreResult<Matrix> {
        let n_rows = rows.len();
        let n_cols = rows.first().map_or(0, Vec::len);
        if n_rows == 0 || n_cols == 0 {
            return Err(CoreError::Dimension {
                what: "an empty matrix".to_string(),
            });
        }
        if let Some((i, r)) = rows.iter().enumerate().find(|(_, r)| r.len() != n_cols) {
            return Err(CoreError::Dimension {
                what: format!(
                    "row {} has {} entries, row 1 has {}",
                    i + 1,
                    r.len(),
                    n_cols
                ),
            });
        }
        Ok(Matrix {
            rows: n_rows,
            cols: n_cols,
            data: rows.into_iter().flatten().collect(),
        })
    }

    /// Entry `(i, j)`, zero-based.
    pub fn get(&self, i: usize, j: usize) -> &Expr {
        &self.data[i * self.cols + j]
    }

    /// Rows as slices.
    pub fn row(&self, i: usize) -> &[Expr] {
        &self.data[i * self.cols..(i + 1) * self.cols]
    }

    /// True if and only if square.
    pub fn is_square(&self) -> bool {
        self.rows == self.cols
    }

    fn require_square(&self, what: &str) -> CoreResult<()> {
        if !self.is_square() {
            return Err(CoreError::Dimension {
                what: format!(
                    "{what} needs a square matrix, got {}x{}",
                    self.rows, self.cols
                ),
            });
        }
        Ok(())
    }

    /// Sum.
    pub fn add(&self, other: &Matrix) -> CoreResult<Matrix> {
        self.add_scaled(other, &Q::ONE)
    }

    /// `self + q·other`.
    pub fn add_scaled(&self, other: &Matrix, q: &Q) -> CoreResult<Matrix> {
        if (self.rows, self.cols) != (other.rows, other.cols) {
            return Err(CoreError::Dimension {
                what: format!(
                    "{}x{} and {}x{} matrices",
                    self.rows, self.cols, other.rows, other.cols
                ),
            });
        }
        let data = self
            .data
            .iter()
            .zip(&other.data)
            .map(|(a, b)| a.add_scaled(b, q))
            .collect();
        Ok(Matrix {
            rows: self.rows,
            cols: self.cols,
            data,
        })
    }

    /// Multiplies every entry by a scalar.
    pub fn mul_expr(&self, f: &Expr) -> CoreResult<Matrix> {
        let data = self
            .data
            .iter()
            .map(|a| a.mul(f))
            .collect::<CoreResult<_>>()?;
        Ok(Matrix {
            rows: self.rows,
            cols: self.cols,
            data,
        })
    }

    /// Matrix product.
    pub fn mul(&self, other: &Matrix) -> CoreResult<Matrix> {
        if self.cols != other.rows {
            return Err(CoreError::Dimension {
                what: format!(
                    "cannot multiply {}x{} by {}x{}",
                    self.rows, self.cols, other.rows, other.cols
                ),
            });
        }
        let mut data = Vec::with_capacity(self.rows * other.cols);
        for i in 0..self.rows {
            for j in 0..other.cols {
                let mut acc = Expr::zero();
                for k in 0..self.cols {
                    let a = self.get(i, k);
                    let b = other.get(k, j);
                    if a.is_zero() || b.is_zero() {
                        continue;
                    }
                    acc = acc.add(&a.mul(b)?);
                }
                data.push(acc);
            }
        }
        Ok(Matrix {
            rows: self.rows,
            cols: other.cols,
            data,
        })
    }

    /// Matrix times a field (column vector).
    pub fn apply(&self, v: &Field) -> CoreResult<Field> {
        if self.cols != v.dim() {
            return Err(CoreError::Dimension {
                what: format!(
                    "a {}x{} matrix applied to a field of dimension {}",
                    self.rows,
                    self.cols,
                    v.dim()
                ),
            });
        }
        let mut out = Vec::with_capacity(self.rows);
        for i in 0..self.rows {
            let mut acc = Expr::zero();
            for (a, b) in self.row(i).iter().zip(&v.0) {
                if !a.is_zero() && !b.is_zero() {
                    acc = acc.add(&a.mul(b)?);
                }
            }
            out.push(acc);
        }
        Ok(Field(out))
    }

    /// Trace.
    pub fn trace(&self) -> CoreResult<Expr> {
        self.require_square("trace")?;
        Ok((0..self.rows).fold(Expr::zero(), |acc, i| acc.add(self.get(i, i))))
    }

    /// Transpose.
    pub fn transpose(&self) -> Matrix {
        let mut data = Vec::with_capacity(self.data.len());
        for j in 0..self.cols {
            for i in 0..self.rows {
                data.push(self.get(i, j).clone());
            }
        }
        Matrix {
            rows: self.cols,
            cols: self.rows,
            data,
        }
    }

    /// Coefficients `c_0..c_n` of the characteristic polynomial
    /// `det(λI − A) = Σ c_k λ^k` (Faddeev–LeVerrier: only divisions by
    /// integers, so exact over any expression ring).
    pub fn charpoly(&self) -> CoreResult<Vec<Expr>> {
        self.require_square("the characteristic polynomial")?;
        let n = self.rows;
        let mut coeffs = vec![Expr::zero(); n + 1];
        coeffs[n] = Expr::int(1);
        let mut m = Matrix {
            rows: n,
            cols: n,
            data: vec![Expr::zero(); n * n],
        };
        for k in 1..=n {
            limits::poll()?;
            // M_k = A M_{k-1} + c_{n-k+1} I
            let mut next = self.mul(&m)?;
            for i in 0..n {
                next.data[i * n + i] = next.data[i * n + i].add(&coeffs[n - k + 1]);
            }
            m = next;
            let am = self.mul(&m)?;
            let tr = am.trace()?;
            coeffs[n - k] = tr.scale(&Q::ratio(-1, k as i64).unwrap_or(Q::ZERO));
        }
        Ok(coeffs)
    }

    /// Determinant.
    pub fn det(&self) -> CoreResult<Expr> {
        self.require_square("det")?;
        let c = self.charpoly()?;
        let sign = if self.rows.is_multiple_of(2) { 1 } else { -1 };
        Ok(c[0].scale(&Q::int(sign)))
    }

    /// True if and only if every entry is zero.
    pub fn is_zero(&self) -> bool {
        self.data.iter().all(Expr::is_zero)
    }
}
