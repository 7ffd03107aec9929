//! Hostile-input fuzzing of a language session: whatever text arrives, the
//! session answers (a report or an error), never panics, never runs away
//! and stays usable afterwards.
//!
//! Two generators: token soup drawn from the language's vocabulary (command
//! words, names, numbers huge and small, operators, brackets, continuation
//! backslashes, comments, unicode junk), and well-formed programs built from
//! random typed expression trees and series commands of small order. Every
//! generated program starts with `set budget 20000`, so no case may take
//! long; a case that does is a failure, reported with its input.
//!
//! Each case runs on its own thread with a 64 MiB stack (deep recursion is
//! not a false alarm) whose unused part is painted before the run; the
//! deepest stack use seen is compared with the 8 MiB of a main thread.
//! `PROPTEST_CASES` sets the number of cases (a few hundred by default);
//! `scripts/fuzz-long` runs many more. This file knows the language only as
//! text and the session only through `run_text`.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{mpsc, Arc};
use std::time::{Duration, Instant};

use ordex::core::limits;
use ordex::lang::{Event, RunStatus, Session};
use proptest::prelude::*;
use proptest::test_runner::TestCaseError;

// ---------------------------------------------------------------------------
// Running one case.

/// Stack of the thread a case runs on.
const CASE_STACK: usize = 64 << 20;
/// TimePart of that stack painted before the run, to measure the deepest use
/// (a case using all of it used more than [`MAIN_STACK`]).
const PAINTED: usize = 12 << 20;
/// The main thread's stack on common systems: a case using more would crash
/// the binary.
const MAIN_STACK: usize = 8 << 20;
/// The word painted on the unused stack.
const PAINT: u64 = 0x5a17_c0de_5a17_c0de;

/// The most one statement may take before it counts as running away. With
/// `set budget 20000` a statement may do at most ten million term products
/// (the budget bounds the work of a statement too): a few seconds.
/// `ORDEX_FUZZ_TIME_LIMIT` sets it in seconds.
fn time_limit() -> Duration {
    let secs = std::env::var("ORDEX_FUZZ_TIME_LIMIT")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(if cfg!(debug_assertions) { 150 } else { 20 });
    Duration::from_secs(secs)
}

/// What one case did.
struct Outcome {
    /// Status of the last `run_text` of the input.
    status: RunStatus,
    /// The session answered `1 + 1` without an error afterwards.
    answers: bool,
    /// Rendered errors and printed lines.
    output: Vec<String>,
    /// Deepest stack use (bytes below the thread's entry frame).
    stack_used: usize,
    /// Time taken.
    elapsed: Duration,
}

/// Fills the stack below the caller with [`PAINT`] and returns the painted
/// range (low, high).
#[inline(never)]
fn paint_stack() -> (usize, usize) {
    let mut area = [0u64; PAINTED / 8];
    for word in area.iter_mut() {
        // SAFETY: a plain write to a local array.
        unsafe { std::ptr::write_volatile(word, PAINT) };
    }
    std::hint::black_box(&mut area);
    let low = area.as_ptr() as usize;
    (low, low + PAINTED)
}

/// The lowest address in `low..high` where the paint was overwritten.
///
/// This reads stack memory below the current frame that a finished call
/// used: the memory stays mapped for the thread's lifetime, and the reads
/// are volatile, so the compiler cannot assume anything about them. It is a
/// measuring device of the test harness only.
#[inline(never)]
fn lowest_touched(low: usize, high: usize) -> usize {
    let mut at = low;
    while at < high {
        // SAFETY: `low..high` lies in this thread's mapped stack, below the
        // live frames; reading it is a raw memory probe (see above).
        let word = unsafe { std::ptr::read_volatile(at as *const u64) };
        if word != PAINT {
            break;
        }
        at += 8;
    }
    at
}

/// Runs the statements `chunks` in order in one fresh session (each chunk
/// with `run_text`, so an error in one does not stop the next), on a thread
/// with a large stack, under a watchdog that fails the case when one
/// statement runs longer than [`time_limit`] (the session reports after
/// every statement). Returns an error naming the input if the case panics
/// or runs away.
fn run_case(chunks: Vec<String>) -> Result<Outcome, TestCaseError> {
    let shown = chunks.join("\n");
    let scratch = tempfile::tempdir()
        .map_err(|e| TestCaseError::fail(format!("no temporary directory: {e}")))?;
    let base_dir = scratch.path().to_path_buf();
    let (tx, rx) = mpsc::channel();
    // Milliseconds from the start of the case to the last report.
    let progress = Arc::new(AtomicU64::new(0));
    let reported = Arc::clone(&progress);
    let spawned = std::thread::Builder::new()
        .name("fuzz-case".to_string())
        .stack_size(CASE_STACK)
        .spawn(move || {
            let entry = 0u8;
            let top = std::hint::black_box(&entry) as *const u8 as usize;
            let (low, high) = paint_stack();
            let started = Instant::now();
            let mut session = Session::new();
            session.show_timing = false;
            session.set_base_dir(base_dir);
            let mut output = Vec::new();
            let mut status = RunStatus::default();
            let note = |output: &mut Vec<String>, e: Event| {
                reported.store(started.elapsed().as_millis() as u64, Ordering::Relaxed);
                match e {
                    Event::Report(r) => output.extend(r.lines.into_iter().map(|l| l.text)),
                    Event::Error(m) => output.push(m),
                }
            };
            for chunk in &chunks {
                status = session.run_text(chunk, Some("fuzz"), &mut |e| note(&mut output, e));
                if status.quit {
                    break;
                }
            }
            // The session must still answer after whatever happened.
            let after = session.run_text("1 + 1", None, &mut |e| note(&mut output, e));
            let elapsed = started.elapsed();
            drop(session);
            let stack_used = top.saturating_sub(lowest_touched(low, high));
            let _ = tx.send(Outcome {
                status,
                answers: !after.error,
                output,
                stack_used,
                elapsed,
            });
        });
    let handle = spawned.map_err(|e| TestCaseError::fail(format!("cannot start a case: {e}")))?;
    let limit = time_limit();
    let started = Instant::now();
    let outcome = loop {
        match rx.recv_timeout(Duration::from_millis(250)) {
            Ok(outcome) => break Ok(outcome),
            Err(mpsc::RecvTimeoutError::Disconnected) => break Err(()),
            Err(mpsc::RecvTimeoutError::Timeout) => {
                let last = Duration::from_millis(progress.load(Ordering::Relaxed));
                if started.elapsed().saturating_sub(last) > limit {
                    return Err(stop_runaway(&rx, limit, &shown));
                }
            }
        }
    };
    match outcome {
        Ok(outcome) => {
            let _ = handle.join();
            if outcome.stack_used > MAIN_STACK {
                eprintln!(
                    "fuzz: input used {} KiB of stack (more than a main thread's 8 MiB):\n{shown}",
                    outcome.stack_used >> 10
                );
            }
            Ok(outcome)
        }
        Err(()) => {
            let panic = handle.join().err().map_or_else(String::new, |p| {
                p.downcast_ref::<String>()
                    .cloned()
                    .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default()
            });
            Err(TestCaseError::fail(format!(
                "the session panicked ({panic}) on:\n{shown}"
            )))
        }
    }
}

/// Asks a runaway statement to stop (the session clears the flag at each
/// statement, so keep asking for a while) and describes the failure.
fn stop_runaway(rx: &mpsc::Receiver<Outcome>, limit: Duration, shown: &str) -> TestCaseError {
    let grace = Instant::now();
    let stopped = loop {
        limits::interrupt();
        if rx.recv_timeout(Duration::from_millis(20)).is_ok() {
            break true;
        }
        if grace.elapsed() > Duration::from_secs(10) {
            break false;
        }
    };
    limits::clear_interrupt();
    TestCaseError::fail(format!(
        "a statement ran longer than {limit:?} ({}) in:\n{shown}",
        if stopped {
            "stopped by an interrupt"
        } else {
            "not even an interrupt stopped it"
        }
    ))
}

/// Checks what every case must satisfy beyond returning.
fn check_outcome(outcome: &Outcome, input: &str) -> Result<(), TestCaseError> {
    prop_assert!(
        outcome.output.iter().any(|l| l == "2"),
        "the session did not answer `1 + 1` after:\n{input}\noutput: {:?}",
        outcome.output
    );
    prop_assert!(outcome.answers, "`1 + 1` failed after:\n{input}");
    if outcome.status.error {
        prop_assert!(
            outcome.output.iter().any(|l| l.contains("error")),
            "an error without a message after:\n{input}"
        );
    }
    for line in &outcome.output {
        prop_assert!(
            !line.contains("internal"),
            "an internal error surfaced: {line}\ninput:\n{input}"
        );
    }
    Ok(())
}

// ---------------------------------------------------------------------------
// Generator (a): token soup.

const SOUP: &[&str] = &[
    // statement and command words
    "state",
    "param",
    "input",
    "flow",
    "on",
    "to",
    "magnus",
    "over",
    "average",
    "in",
    "strobo",
    "classic",
    "depth",
    "with",
    "transform",
    "carleman",
    "degree",
    "simulate",
    "from",
    "for",
    "plot",
    "compare",
    "sweep",
    "tol",
    "stability",
    "at",
    "check",
    "show",
    "as",
    "latex",
    "brackets",
    "save",
    "run",
    "names",
    "forget",
    "help",
    "set",
    "budget",
    "quit",
    // built-ins and constants
    "sin",
    "cos",
    "exp",
    "ad",
    "pd",
    "jac",
    "div",
    "det",
    "trace",
    "plug",
    "order",
    "mean",
    "bch",
    "iint",
    "t",
    "pi",
    // names
    "x",
    "y",
    "q",
    "p",
    "X",
    "Y",
    "A",
    "W",
    "eps",
    "k",
    "u1",
    "Z_9",
    "_",
    // numbers
    "0",
    "1",
    "2",
    "3",
    "17",
    "1/3",
    "0.25",
    ".5",
    "1.",
    "1e-4",
    "2.5E+3",
    "1e",
    "1e+",
    "99999999999999999999999999999999",
    "18446744073709551616",
    "1e100000",
    "1e-100000",
    "1e999999999",
    "9e18",
    "0.000000000000000000001",
    "1e-9",
    // operators and punctuation
    "+",
    "-",
    "*",
    "/",
    "^",
    "**",
    "=",
    "==",
    ",",
    ";",
    "(",
    ")",
    "[",
    "]",
    "{",
    "}",
    "\n",
    "\n",
    "\\",
    "#",
    "\"",
    "\"a b\"",
    ".",
    "..",
    "@",
    "!",
    "&",
    "'",
    ":",
    // unicode and control junk
    "é",
    "λ",
    "∑",
    "𝔛",
    "\u{0}",
    "\u{feff}",
    "\r",
    "\t",
    "\u{202e}",
    "\u{7f}",
    "ǅ",
    "٣",
];

fn soup() -> impl Strategy<Value = String> {
    prop::collection::vec(
        (prop::sample::select(SOUP), prop::bool::weighted(0.7)),
        0..60,
    )
    .prop_map(|tokens| {
        let mut text = String::new();
        for (token, spaced) in tokens {
            text.push_str(token);
            if spaced {
                text.push(' ');
            }
        }
        text
    })
}

// ---------------------------------------------------------------------------
// Generator (b): well-formed programs.

/// Scalar, field and matrix expression strategies for trees up to a depth.
struct Grammar {
    scalar: BoxedStrategy<String>,
    field: BoxedStrategy<String>,
    matrix: BoxedStrategy<String>,
}

fn number() -> BoxedStrategy<String> {
    prop_oneof![
        6 => (0i64..10).prop_map(|n| n.to_string()),
        2 => (1i64..20, 2i64..9).prop_map(|(n, d)| format!("{n}/{d}")),
        1 => Just("0.25".to_string()),
        1 => Just("1e-3".to_string()),
        1 => Just("2.5E+2".to_string()),
        1 => Just("123456789012345678901234567890".to_string()),
        1 => Just("1e40".to_string()),
    ]
    .boxed()
}

/// An exponent: mostly small, sometimes negative or huge.
fn exponent() -> BoxedStrategy<String> {
    prop_oneof![
        8 => (0i64..5).prop_map(|n| n.to_string()),
        2 => (-3i64..0).prop_map(|n| format!("({n})")),
        1 => Just("-2".to_string()),
        1 => Just("50".to_string()),
        1 => Just("1000".to_string()),
        1 => Just("(10^9)".to_string()),
        1 => Just("1000000000".to_string()),
        1 => Just("(1/2)".to_string()),
    ]
    .boxed()
}

/// A small order, sometimes at or past the limit.
fn order() -> BoxedStrategy<String> {
    prop_oneof![
        16 => (1u32..4).prop_map(|n| n.to_string()),
        1 => Just("0".to_string()),
        1 => Just("40".to_string()),
        1 => Just("41".to_string()),
        1 => Just("100000".to_string()),
    ]
    .boxed()
}

/// The state coordinates of a program with `dim` states.
fn states(dim: usize) -> &'static [&'static str] {
    match dim {
        1 => &["x"],
        2 => &["x", "y"],
        _ => &["x", "y", "z"],
    }
}

/// A state, now and then one that is not declared.
fn state_name(dim: usize) -> BoxedStrategy<String> {
    prop_oneof![
        40 => prop::sample::select(states(dim)).prop_map(String::from),
        1 => Just("w".to_string()),
    ]
    .boxed()
}

fn scalar_leaf(dim: usize) -> BoxedStrategy<String> {
    prop_oneof![
        3 => state_name(dim),
        3 => prop::sample::select(vec!["eps", "k", "a", "t", "pi", "s1", "s2"]).prop_map(String::from),
        3 => number(),
    ]
    .boxed()
}

/// A field literal `[e1, …, e_dim]` (now and then with one entry too many).
fn field_literal(dim: usize, entry: BoxedStrategy<String>) -> BoxedStrategy<String> {
    prop_oneof![
        12 => prop::collection::vec(entry.clone(), dim),
        1 => prop::collection::vec(entry, dim + 1),
    ]
    .prop_map(|entries| format!("[{}]", entries.join(", ")))
    .boxed()
}

/// A square matrix literal of size `dim` (the size of `jac`).
fn matrix_literal(dim: usize, entry: BoxedStrategy<String>) -> BoxedStrategy<String> {
    prop::collection::vec(prop::collection::vec(entry, dim), dim)
        .prop_map(|rows| {
            let rows: Vec<String> = rows.into_iter().map(|r| r.join(", ")).collect();
            format!("{{{}}}", rows.join("; "))
        })
        .boxed()
}

fn field_leaf(dim: usize) -> BoxedStrategy<String> {
    prop_oneof![
        3 => prop::sample::select(vec!["X", "Y", "F1", "F2"]).prop_map(String::from),
        2 => field_literal(dim, scalar_leaf(dim)),
    ]
    .boxed()
}

fn matrix_leaf(dim: usize) -> BoxedStrategy<String> {
    prop_oneof![
        1 => Just("M1".to_string()),
        2 => matrix_literal(dim, scalar_leaf(dim)),
    ]
    .boxed()
}

/// A linear argument of `sin`/`cos`/`exp`, sometimes not linear at all.
fn argument(dim: usize, scalar: BoxedStrategy<String>) -> BoxedStrategy<String> {
    prop_oneof![
        4 => ((-3i64..4), state_name(dim)).prop_map(|(c, v)| format!("{c}*{v}")),
        2 => ((-3i64..4), state_name(dim), 1i64..4)
            .prop_map(|(c, v, w)| format!("{c}*{v} + {w}*t")),
        2 => (1i64..4).prop_map(|c| format!("{c}*t")),
        1 => Just("pi/2".to_string()),
        1 => Just("pi/3".to_string()),
        1 => Just("k*t".to_string()),
        2 => scalar,
    ]
    .boxed()
}

impl Grammar {
    /// Trees up to `depth` levels on `dim` states.
    fn new(depth: u32, dim: usize) -> Grammar {
        let mut g = Grammar {
            scalar: scalar_leaf(dim),
            field: field_leaf(dim),
            matrix: matrix_leaf(dim),
        };
        for _ in 0..depth {
            g = g.deeper(dim);
        }
        g
    }

    /// One more level of operators over the current level.
    fn deeper(&self, dim: usize) -> Grammar {
        let (s, f, m) = (self.scalar.clone(), self.field.clone(), self.matrix.clone());
        let sl = scalar_leaf(dim);
        let var = || prop_oneof![3 => state_name(dim), 1 => prop::sample::select(vec!["eps", "t", "k"]).prop_map(String::from)];
        let scalar = prop_oneof![
            4 => s.clone(),
            2 => (s.clone(), s.clone()).prop_map(|(a, b)| format!("{a} + {b}")),
            1 => (s.clone(), s.clone()).prop_map(|(a, b)| format!("({a}) - ({b})")),
            3 => (s.clone(), s.clone()).prop_map(|(a, b)| format!("({a})*({b})")),
            1 => (s.clone(), sl.clone()).prop_map(|(a, b)| format!("({a})/{b}")),
            1 => (s.clone(), s.clone()).prop_map(|(a, b)| format!("({a})/({b})")),
            1 => (s.clone(), sl.clone(), 1i64..4, state_name(dim))
                .prop_map(|(a, b, n, v)| format!("({a})/({b}^{n}*{v})")),
            2 => (s.clone(), exponent()).prop_map(|(a, e)| format!("({a})^{e}")),
            1 => s.clone().prop_map(|a| format!("-({a})")),
            2 => (prop::sample::select(vec!["sin", "cos", "exp"]), argument(dim, s.clone()))
                .prop_map(|(f, a)| format!("{f}({a})")),
            2 => (f.clone(), s.clone()).prop_map(|(x, h)| format!("({x})({h})")),
            1 => (s.clone(), var()).prop_map(|(h, v)| format!("pd({h}, {v})")),
            1 => m.clone().prop_map(|a| format!("det({a})")),
            1 => m.clone().prop_map(|a| format!("trace({a})")),
            1 => f.clone().prop_map(|a| format!("div({a})")),
            1 => (s.clone(), 0i64..4).prop_map(|(a, k)| format!("order({a}, eps, {k})")),
            1 => s.clone().prop_map(|a| format!("mean({a})")),
            1 => (s.clone(), var(), s.clone())
                .prop_map(|(a, v, b)| format!("plug({a}, {v} = {b})")),
        ]
        .boxed();
        let field = prop_oneof![
            4 => f.clone(),
            2 => field_literal(dim, s.clone()),
            2 => (f.clone(), f.clone()).prop_map(|(a, b)| format!("[{a}, {b}]")),
            3 => (s.clone(), f.clone()).prop_map(|(a, x)| format!("({a})*{x}")),
            2 => (f.clone(), f.clone()).prop_map(|(a, b)| format!("{a} + {b}")),
            1 => (f.clone(), f.clone()).prop_map(|(a, b)| format!("{a} - ({b})")),
            1 => (f.clone(), sl.clone()).prop_map(|(a, b)| format!("({a})/{b}")),
            1 => (f.clone(), f.clone(), order()).prop_map(|(a, b, k)| format!("ad({a}, {b}, {k})")),
            1 => (f.clone(), var(), s.clone())
                .prop_map(|(a, v, b)| format!("plug({a}, {v} = {b})")),
            1 => (f.clone(), 0i64..4).prop_map(|(a, k)| format!("order({a}, eps, {k})")),
            1 => (f.clone(), f.clone(), order()).prop_map(|(a, b, n)| format!("bch({a}, {b}, {n})")),
            1 => f.clone().prop_map(|a| format!("mean({a})")),
            1 => (m.clone(), f.clone()).prop_map(|(a, x)| format!("({a})*({x})")),
            1 => (f.clone(), f.clone()).prop_map(|(a, b)| format!("({a})({b})")),
        ]
        .boxed();
        let matrix = prop_oneof![
            3 => m.clone(),
            2 => f.clone().prop_map(|a| format!("jac({a})")),
            1 => (m.clone(), m.clone()).prop_map(|(a, b)| format!("({a})*({b})")),
            1 => (m.clone(), m.clone()).prop_map(|(a, b)| format!("{a} + {b}")),
            1 => (s.clone(), m.clone()).prop_map(|(a, b)| format!("({a})*{b}")),
            1 => (m.clone(), exponent()).prop_map(|(a, e)| format!("({a})^{e}")),
            1 => matrix_literal(dim, s.clone()),
        ]
        .boxed();
        Grammar {
            scalar,
            field,
            matrix,
        }
    }
}

fn statement(g: &Grammar) -> BoxedStrategy<String> {
    let (s, f, m) = (g.scalar.clone(), g.field.clone(), g.matrix.clone());
    let method = prop::sample::select(vec!["", " strobo", " classic", " classic depth 2"]);
    prop_oneof![
        3 => (prop::sample::select(vec!["s1", "s2"]), s.clone()).prop_map(|(n, e)| format!("{n} = {e}")),
        3 => (prop::sample::select(vec!["F1", "F2"]), f.clone()).prop_map(|(n, e)| format!("{n} = {e}")),
        1 => m.clone().prop_map(|e| format!("M1 = {e}")),
        2 => s.clone(),
        2 => f.clone(),
        1 => m.clone(),
        1 => (s.clone(), s.clone()).prop_map(|(a, b)| format!("check {a} == {b}")),
        1 => (f.clone(), f.clone()).prop_map(|(a, b)| format!("check {a} == {b}")),
        1 => (f.clone(), prop::sample::select(vec!["latex", "brackets"]))
            .prop_map(|(a, w)| format!("show {a} as {w}")),
        1 => (s.clone(), prop::sample::select(vec!["latex", "brackets"]))
            .prop_map(|(a, w)| format!("show {a} as {w}")),
        2 => (f.clone(), order()).prop_map(|(v, n)| format!("flow {v} to {n}")),
        2 => (f.clone(), s.clone(), order()).prop_map(|(v, h, n)| format!("R = flow {v} on {h} to {n}")),
        2 => (f.clone(), order()).prop_map(|(v, n)| format!("W = magnus {v} to {n}")),
        1 => (f.clone(), order(), number()).prop_map(|(v, n, o)| format!("magnus {v} to {n} over {o}")),
        3 => (f.clone(), order(), method).prop_map(|(v, n, w)| format!("A = average {v} to {n} in eps{w}")),
        1 => (f.clone(), order()).prop_map(|(v, n)| format!("A, W = average {v} to {n} in eps classic with transform")),
        1 => (f.clone(), order()).prop_map(|(v, n)| format!("carleman {v} degree {n}")),
        1 => Just("names".to_string()),
        1 => prop::sample::select(vec!["s1", "F1", "A", "M1"]).prop_map(|n| format!("forget {n}")),
        1 => Just("order(A, eps, 1)".to_string()),
        1 => Just("show A as brackets".to_string()),
    ]
    .boxed()
}

/// Declarations and a few names every program starts from, by number of
/// states (the statements redefine the names at random).
fn preludes(dim: usize) -> &'static [&'static str] {
    match dim {
        1 => &["state x\nparam eps, k, a\nX = [x^2]\nY = [sin(x)]\nF1 = [1]\nF2 = eps*cos(t)*[x]\nM1 = {2}"],
        2 => &[
            "state x, y\nparam eps, k, a\nX = [y, -x]\nY = [0, sin(x)]\nF1 = [x, 1]\nF2 = eps*cos(t)*X\nM1 = {1, 2; 3, 4}",
            "state x, y\nparam eps, k, a\nX = [1, 0]\nY = [0, x]\nF1 = eps*(cos(t)*X + sin(t)*Y)\nF2 = [x*y, 0]\nM1 = {0, 1; -1, 0}",
            "state x, y\nparam eps, k, a\nX = eps*[y, -x + cos(t)*x^2]\nY = [x*y, exp(x)]\nF1 = X\nF2 = [y, -x] + eps*[0, (1 - x^2)*y]\nM1 = {k, 1; 0, k}",
        ],
        _ => &["state x, y, z\nparam eps, k, a\nX = [1, 0, 0]\nY = [0, 1, x]\nF1 = [X, Y]\nF2 = eps*(cos(t)*X + sin(t)*Y)\nM1 = {1, 0, 0; 0, 2, 0; 0, 0, 3}"],
    }
}

/// Scalars every program starts with.
const NAMES: &str = "s1 = x*eps + 1/2\ns2 = cos(t) + k\nA = X";

/// A program on `dim` states: its setup, then random statements.
fn program_on(dim: usize) -> BoxedStrategy<Vec<String>> {
    let grammar = Grammar::new(3, dim);
    (
        prop::sample::select(preludes(dim)),
        prop::collection::vec(statement(&grammar), 1..8),
    )
        .prop_map(|(prelude, stmts)| {
            let mut chunks = vec![format!("set budget 20000\n{prelude}\n{NAMES}")];
            chunks.extend(stmts);
            chunks
        })
        .boxed()
}

fn program() -> impl Strategy<Value = Vec<String>> {
    prop_oneof![1 => program_on(1), 4 => program_on(2), 2 => program_on(3)]
}

// ---------------------------------------------------------------------------
// Properties.

/// Runs `strategy` through `PROPTEST_CASES` cases (else `default_cases`, a
/// fifth of it in unoptimised builds):
/// each value becomes the chunks of one case, which must come back with a
/// working session. Prints how many inputs were tried and the deepest stack
/// seen (`scripts/fuzz-long` adds these up); a failure panics with the
/// shrunk input.
fn fuzz<S: Strategy>(
    name: &str,
    default_cases: u32,
    strategy: S,
    to_chunks: fn(S::Value) -> Vec<String>,
) where
    S::Value: std::fmt::Debug,
{
    let config = ProptestConfig {
        cases: std::env::var("PROPTEST_CASES")
            .ok()
            .and_then(|s| s.parse().ok())
            // Unoptimised builds are many times slower: fewer cases there.
            .unwrap_or(if cfg!(debug_assertions) {
                default_cases / 5
            } else {
                default_cases
            }),
        failure_persistence: Some(Box::new(
            proptest::test_runner::FileFailurePersistence::Direct("proptest-regressions/fuzz.txt"),
        )),
        max_shrink_time: 300_000,
        ..ProptestConfig::default()
    };
    let mut runner = proptest::test_runner::TestRunner::new(config);
    let tried = std::cell::Cell::new(0u64);
    let deepest = std::cell::Cell::new(0usize);
    let slowest = std::cell::Cell::new(Duration::ZERO);
    let started = Instant::now();
    let result = runner.run(&strategy, |value| {
        tried.set(tried.get() + 1);
        let chunks = to_chunks(value);
        let shown = chunks.join("\n");
        let outcome = run_case(chunks)?;
        if std::env::var_os("ORDEX_FUZZ_SHOW").is_some() {
            eprintln!("----\n{shown}\n>>>>\n{}", outcome.output.join("\n"));
        }
        deepest.set(deepest.get().max(outcome.stack_used));
        slowest.set(slowest.get().max(outcome.elapsed));
        check_outcome(&outcome, &shown)
    });
    eprintln!(
        "fuzz {name}: {} inputs tried in {:.1} s, slowest {:.2} s, deepest stack {} KiB",
        tried.get(),
        started.elapsed().as_secs_f64(),
        slowest.get().as_secs_f64(),
        deepest.get() >> 10
    );
    if let Err(e) = result {
        panic!("fuzz {name} failed: {e}");
    }
}

#[test]
fn token_soup_never_kills_the_session() {
    fuzz("token_soup", 200, soup(), |text| {
        vec![format!("set budget 20000\n{text}")]
    });
}

#[test]
fn token_soup_line_by_line_never_kills_the_session() {
    fuzz(
        "token_soup_lines",
        100,
        prop::collection::vec(soup(), 1..6),
        |lines| {
            let mut chunks =
                vec!["set budget 20000\nstate x, y\nparam eps, k\nX = [y, -x]".to_string()];
            chunks.extend(lines);
            chunks
        },
    );
}

#[test]
fn random_programs_never_kill_the_session() {
    fuzz("programs_by_line", 250, program(), |chunks| chunks);
}

#[test]
fn random_programs_run_whole_never_kill_the_session() {
    fuzz("programs_whole", 150, program(), |chunks| {
        vec![chunks.join("\n")]
    });
}

// ---------------------------------------------------------------------------
// Inputs the fuzz tests caught, kept as regression tests (each must finish
// within the watchdog's time with the message it gives now).

/// Runs one fixed case under the watchdog and returns its output.
fn fixed_case(chunks: &[&str]) -> Outcome {
    let chunks: Vec<String> = chunks.iter().map(|c| c.to_string()).collect();
    match run_case(chunks) {
        Ok(outcome) => outcome,
        Err(e) => panic!("{e}"),
    }
}

/// The setup of the programs these cases were found in.
const PRELUDE_2: &str =
    "set budget 20000\nstate x, y\nparam eps, k, a\nX = [y, -x]\nY = [0, sin(x)]";

/// Caught by the fuzz tests: sums and products of big integers went
/// through the rationals' gcd (with denominator 1, a step per bit), so
/// `(z - 8)^1000` (1001 terms of up to 1000 digits) took half a minute.
#[test]
fn power_of_a_binomial_with_big_coefficients_finishes() {
    // With the default budget (at 20000 the coefficients' size now trips it).
    let outcome = fixed_case(&[
        "state x, y, z\nparam eps",
        "show (-((eps)/(4^3*x)))*(((z) - (8))^1000) as latex",
        "check plug((z - 8)^1000, z = 0) == 8^1000",
    ]);
    assert!(outcome.output.iter().any(|l| l.contains("\\frac")));
    assert!(
        outcome.output.iter().any(|l| l == "holds"),
        "{:?}",
        outcome.output
    );
}

/// Caught by the fuzz tests: `bch(…, 40)` built all 2^40 words of the free
/// algebra with no limit and could not be interrupted.
#[test]
fn bch_of_degree_40_stops_at_the_budget() {
    let outcome = fixed_case(&[
        PRELUDE_2,
        "W = magnus plug(bch(plug([y, t], t = 0.25), [2.5E+2, 11/5], 40), eps = (13/7)^50) to 1",
    ]);
    assert!(
        outcome
            .output
            .iter()
            .any(|l| l.contains("term budget exceeded")),
        "{:?}",
        outcome.output
    );
}

/// Caught by the fuzz tests: products of long trigonometric sums collide
/// into few terms, so `(cos(t) + k)^1000` stayed within the term budget
/// while each squaring did hundreds of millions of term products with
/// big rational coefficients (each through a slow gcd); powers of sums now
/// multiply by the base step by step and the budget bounds the work.
#[test]
fn power_of_a_trigonometric_sum_stops_at_the_budget() {
    let outcome = fixed_case(&[
        "set budget 20000\nstate x, y, z\nparam eps, k, a\ns2 = cos(t) + k",
        "check (order(x, eps, 2)) - (((pi)/y)*((s2)^1000)) == (pd(order(2.5E+2, eps, 2), x))/123456789012345678901234567890",
    ]);
    assert!(
        outcome
            .output
            .iter()
            .any(|l| l.contains("term budget exceeded")),
        "{:?}",
        outcome.output
    );
}

/// Caught by the fuzz tests: `magnus` of a nonlinear field to order 40
/// keeps every result small but does exponentially many brackets (minutes
/// at order 14); the term budget now bounds the work of a statement.
#[test]
fn high_order_magnus_stops_at_the_work_budget() {
    let outcome = fixed_case(&[
        PRELUDE_2,
        "W = magnus [pd(x, x) + (x)/(2), (plug(x, t = y)) - (sin(2*y + 1*t))] to 40",
    ]);
    assert!(
        outcome
            .output
            .iter()
            .any(|l| l.contains("term multiplications") && l.contains("set budget N")),
        "{:?}",
        outcome.output
    );
}

/// The deepest inputs the parser accepts (bracket nesting 256, expression
/// depth 1000) stay well below the 8 MiB of a main thread (in release
/// builds); prints the use.
#[test]
fn deepest_accepted_inputs_use_little_stack() {
    let cases = [
        format!("state x\nP = x{}", " + x".repeat(990)),
        format!("state x\nP = x{}", "^1".repeat(990)),
        format!("state x\nP = {}x{}", "-".repeat(990), ""),
        format!("state x\nP = {}x + 1{}", "(".repeat(256), ")".repeat(256)),
        format!("state x\nP = {}x{}", "[".repeat(256), "]".repeat(256)),
        format!(
            "state x, y\nX = [y, -x]\nP = {}x{}",
            "X(".repeat(256),
            ")".repeat(256)
        ),
        format!("state x\nP = {}x{}", "sin(".repeat(256), ")".repeat(256)),
        format!("state x\nP = {}x{}", "-(".repeat(256), ")".repeat(256)),
    ];
    for text in &cases {
        let outcome = fixed_case(&[text]);
        eprintln!(
            "stack {:>6} KiB: {}…",
            outcome.stack_used >> 10,
            text.chars()
                .take(60)
                .collect::<String>()
                .replace('\n', "; ")
        );
        assert!(
            outcome.stack_used < MAIN_STACK / 2,
            "{} KiB of stack for {text}",
            outcome.stack_used >> 10
        );
    }
}

/// Caught by the fuzz tests: `magnus` to order 40 of a field with a long
/// rational parameter value spent its time in sums of rationals with long
/// denominators (each through a slow gcd), which no limit counted; the gcd
/// is now Lehmer's, and arithmetic on large numbers counts as work.
#[test]
fn magnus_with_long_rational_coefficients_stops_at_the_work_budget() {
    let prelude = format!("{PRELUDE_2}\ns2 = cos(t) + k");
    let outcome = fixed_case(&[
        &prelude,
        "magnus plug(({s2, 1e-3; t, x})*([x, a]), k = (2.5E+2)^(-3)) to 40 over 4",
    ]);
    assert!(
        outcome
            .output
            .iter()
            .any(|l| l.contains("term multiplications")),
        "{:?}",
        outcome.output
    );
}

/// Caught by the fuzz tests: a gcd of two long fractions costs up to a
/// hundred times what the work budget counted for the whole operation, so
/// the cube of a matrix holding a 1000th power with fractional
/// coefficients ran for 50 s before the budget stopped it. Gcds now count
/// their own work (measured: about 5 µs at 128 bits, 22 µs at 1024 bits).
#[test]
fn powers_with_long_fractions_stop_within_the_budget() {
    let prelude = format!("{PRELUDE_2}\ns1 = x*eps + 1/2\nM1 = {{1, 2; 3, 4}}");
    let outcome = fixed_case(&[
        &prelude,
        "M1 = {(4)*(det({k, s1; x, x})), (pd(x, x))*((Y)(5)); ((s1)*(y))^1000, (det(M1))*((x)/(4))}",
        "s2 = trace(((M1)*({0.25, 8; k, y}))^3)",
    ]);
    assert!(
        outcome
            .output
            .iter()
            .any(|l| l.contains("term multiplications")),
        "{:?}",
        outcome.output
    );
}
