//! Interned symbol names.
//!
//! Every name an expression mentions (state coordinates, parameters, time
//! `t`, the constant `pi`) is a `Sym`, a small integer handed out in order of
//! first use. The order of symbols fixes the canonical order of terms, so a
//! session that declares the same names in the same order prints the same
//! output byte for byte.
//!
//! The interner is per thread: a session and everything it computes live on
//! one thread, and the order of symbols then depends only on that thread's
//! history (not on other sessions running in parallel, as in the test suite).
//! A `Sym` must not be sent to another thread and named there.

use std::cell::RefCell;
use std::collections::HashMap;

/// An interned name.
#[derive(Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Debug)]
pub struct Sym(pub(in crate::core) u32);

struct Interner {
    names: Vec<String>,
    ids: HashMap<String, u32>,
}

impl Interner {
    fn new() -> Interner {
        let mut it = Interner {
            names: Vec::new(),
            ids: HashMap::new(),
        };
        for name in ["t", "pi"] {
            it.ids.insert(name.to_string(), it.names.len() as u32);
            it.names.push(name.to_string());
        }
        it
    }
}

thread_local! {
    static INTERNER: RefCell<Interner> = RefCell::new(Interner::new());
}

impl Sym {
    /// Time.
    pub const T: Sym = Sym(0);
    /// The constant pi.
    pub const PI: Sym = Sym(1);

    /// The symbol's number (its order of first use).
    pub fn index(self) -> u32 {
        self.0
    }

    /// Interns `name`.
    pub fn new(name: &str) -> Sym {
        INTERNER.with(|cell| {
            let mut it = cell.borrow_mut();
            if let Some(id) = it.ids.get(name) {
                return Sym(*id);
            }
            let id = it.names.len() as u32;
            it.names.push(name.to_string());
            it.ids.insert(name.to_string(), id);
            Sym(id)
        })
    }

    /// A new symbol shown as `name` that no name lookup returns (for
    /// applications of unspecified functions, see [`super::func`]: their
    /// printed form is not a name a user can declare).
    pub fn fresh(name: &str) -> Sym {
        INTERNER.with(|cell| {
            let mut it = cell.borrow_mut();
            let id = it.names.len() as u32;
            it.names.push(name.to_string());
            Sym(id)
        })
    }

    /// The symbol's name.
    pub fn name(self) -> String {
        INTERNER.with(|cell| {
            cell.borrow()
                .names
                .get(self.0 as usize)
                .cloned()
                .unwrap_or_else(|| format!("?{}", self.0))
        })
    }
}
