//! Resource limits and cooperative cancellation for the exact core.
//!
//! The core never aborts the process: a runaway computation trips a limit
//! and returns a typed error. Limits live in a per-thread configuration set
//! by the session (`set budget N`); cancellation is a process-wide flag set
//! by the prompt's Ctrl-C handler and polled in the inner loops.

use std::cell::{Cell, RefCell};
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::Arc;

use super::error::{CoreError, LimitKind};

/// The limits in force.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    /// Most terms one expression may hold (the term budget).
    pub max_terms: usize,
    /// Most decimal digits of one coefficient.
    pub max_digits: u64,
    /// Highest order of a series command.
    pub max_order: u64,
    /// Deepest nesting of brackets in input.
    pub max_depth: usize,
}

impl Default for Limits {
    fn default() -> Limits {
        Limits {
            max_terms: 200_000,
            max_digits: 100_000,
            max_order: 40,
            max_depth: 256,
        }
    }
}

/// Bits of a large coefficient that count as one term of the budget (64
/// bytes, about the memory of a term).
pub const BITS_PER_TERM: u64 = 512;

/// What a coefficient of `bits` bits adds to the term budget beyond its
/// term.
pub fn coefficient_terms(bits: u64) -> usize {
    usize::try_from(bits / BITS_PER_TERM).unwrap_or(usize::MAX)
}

/// Memory one unit of the term budget lets a statement use, at most, in
/// bytes: measured, `bch(X, Y, 14)` on 3 states peaked at 291 MB when it
/// tripped the default budget of 200000 (about 1.5 KB a unit), with
/// room for larger coefficients.
pub const BYTES_PER_BUDGET_TERM: u64 = 2048;

/// The largest term budget for a machine with `memory` bytes: one that
/// implies at most half of it ([`BYTES_PER_BUDGET_TERM`] a term), so that
/// raising the budget cannot make a statement exhaust the machine.
pub fn budget_cap(memory: u64) -> usize {
    usize::try_from(memory / 2 / BYTES_PER_BUDGET_TERM).unwrap_or(usize::MAX)
}

pub use super::error::WORK_PER_TERM;

thread_local! {
    static LIMITS: Cell<Limits> = Cell::new(Limits::default());
    /// Term products done by the current statement (shared with the worker
    /// threads it starts); `None` when no statement is being counted (the
    /// core used directly).
    static WORK: RefCell<Option<Arc<AtomicU64>>> = const { RefCell::new(None) };
}

/// What a worker thread needs to compute on behalf of this thread: the
/// limits and the work counter of the current statement.
#[derive(Clone, Debug)]
pub struct Context {
    limits: Limits,
    work: Option<Arc<AtomicU64>>,
}

/// This thread's limits and work counter, to hand to a worker thread.
pub fn context() -> Context {
    Context {
        limits: limits(),
        work: WORK.with(|w| w.borrow().clone()),
    }
}

/// Installs a context taken with [`context`] on this (worker) thread.
pub fn enter(ctx: Context) {
    set_limits(ctx.limits);
    WORK.with(|w| *w.borrow_mut() = ctx.work);
}

static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// The limits in force on this thread.
pub fn limits() -> Limits {
    LIMITS.with(|l| l.get())
}

/// Replaces the limits on this thread.
pub fn set_limits(new: Limits) {
    LIMITS.with(|l| l.set(new));
}

/// Asks every running computation to stop (called from a signal handler).
pub fn interrupt() {
    INTERRUPTED.store(true, Ordering::SeqCst);
}

/// Clears the interrupt flag before a new command starts.
pub fn clear_interrupt() {
    INTERRUPTED.store(false, Ordering::SeqCst);
}

/// True if and only if an interrupt is pending.
pub fn is_interrupted() -> bool {
    INTERRUPTED.load(Ordering::Relaxed)
}

/// Fails with `Interrupted` when an interrupt is pending, and with the
/// work limit when the current statement has used up its work (see
/// [`add_work`]; arithmetic on large numbers is noted with [`note_work`]
/// and checked here).
pub fn poll() -> Result<(), CoreError> {
    if is_interrupted() {
        return Err(CoreError::Interrupted);
    }
    add_work(0)
}

/// Notes `units` of work done on large numbers (one unit is about the time
/// of a term product) for the current statement, without failing: the next
/// [`poll`] or [`add_work`] checks the total.
pub fn note_work(units: u64) {
    WORK.with(|w| {
        if let Some(c) = w.borrow().as_ref() {
            c.fetch_add(units, Ordering::Relaxed);
        }
    });
}

/// Starts counting the work of a new statement on this thread: from now
/// on [`add_work`] counts against the term budget.
pub fn start_work() {
    WORK.with(|w| *w.borrow_mut() = Some(Arc::new(AtomicU64::new(0))));
}

/// Counts `products` term products (the work of one multiplication) for
/// the current statement. The budget bounds the work as well as the size of
/// results: a statement may do at most [`WORK_PER_TERM`] term products per
/// unit of the budget, so that no statement runs for hours even when every
/// result stays small. Not counted when no statement was started.
pub fn add_work(products: u64) -> Result<(), CoreError> {
    let Some(total) = WORK.with(|w| {
        w.borrow().as_ref().map(|c| {
            c.fetch_add(products, Ordering::Relaxed)
                .saturating_add(products)
        })
    }) else {
        return Ok(());
    };
    let max = limits().max_terms as u64;
    if total > max.saturating_mul(WORK_PER_TERM) {
        return Err(CoreError::Limit {
            kind: LimitKind::Work,
            limit: max,
        });
    }
    Ok(())
}

/// Term products counted so far for the current statement (`None` when no
/// statement is being counted); benchmarks read it to report the work.
pub fn work_done() -> Option<u64> {
    WORK.with(|w| w.borrow().as_ref().map(|c| c.load(Ordering::Relaxed)))
}

/// Checks a term count against the budget.
pub fn check_terms(n_terms: usize) -> Result<(), CoreError> {
    let max = limits().max_terms;
    if n_terms > max {
        return Err(CoreError::Limit {
            kind: LimitKind::Terms,
            limit: max as u64,
        });
    }
    poll()
}

/// Checks a coefficient size given in bits against the digit limit.
pub fn check_bits(bits: u64) -> Result<(), CoreError> {
    let max = limits().max_digits;
    // log10(2) ~ 0.30103: bits * 0.30103 digits.
    if bits.saturating_mul(30103) / 100_000 > max {
        return Err(CoreError::Limit {
            kind: LimitKind::Digits,
            limit: max,
        });
    }
    Ok(())
}

/// Checks a series order against the order limit.
pub fn check_order(order: u64) -> Result<(), CoreError> {
    let max = limits().max_order;
    if order > max {
        return Err(CoreError::Limit {
            kind: LimitKind::Order,
            limit: max,
        });
    }
    Ok(())
}

/// A progress hook: `(what, done, total)`.
pub type ProgressHook = Box<dyn FnMut(&str, usize, usize)>;

thread_local! {
    static PROGRESS: std::cell::RefCell<Option<ProgressHook>> = const { std::cell::RefCell::new(None) };
}

/// Installs (or with `None` removes) this thread's progress hook. The core
/// only reports; the front end decides whether and how to show it.
pub fn set_progress_hook(hook: Option<ProgressHook>) {
    PROGRESS.with(|p| *p.borrow_mut() = hook);
}

/// Reports progress of a long computation (a no-op without a hook).
pub fn progress(what: &str, done: usize, total: usize) {
    PROGRESS.with(|p| {
        if let Ok(mut slot) = p.try_borrow_mut() {
            if let Some(hook) = slot.as_mut() {
                hook(what, done, total);
            }
        }
    });
}
