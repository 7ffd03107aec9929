//! Resource limits and cooperative cancellation for the exact core.
//!
//! The core never aborts the process: a runaway computation trips a limit
//! and returns a typed error. Limits live in a per-thread configuration set
//! by the session (`set budget N`); cancellation is a process-wide flag set
//! by the prompt's Ctrl-C handler and polled in the inner loops.

use std::cell::Cell;
use std::sync::atomic::{AtomicBool, Ordering};

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

thread_local! {
    static LIMITS: Cell<Limits> = Cell::new(Limits::default());
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

/// Fails with `Interrupted` when an interrupt is pending.
pub fn poll() -> Result<(), CoreError> {
    if is_interrupted() {
        Err(CoreError::Interrupted)
    } else {
        Ok(())
    }
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
