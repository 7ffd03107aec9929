//! Limits and faults: hostile inputs stop with a clear message that names
//! the limit and how to raise it (or says that it is fixed), with exit
//! status 2, instead of exhausting memory, time or the stack; cheap inputs
//! that look hostile simply work; file faults give clear messages.
//!
//! Each case runs twice: in a session in this process (for the status and
//! the message) and as the `ordex` binary with `-e` in a child process,
//! whose peak resident memory is read from `wait4` and must stay well below
//! 1 GiB (the numbers are printed; run with `--nocapture` to see them). The
//! child runs on the binary's main thread, so deep recursion there would
//! crash it: a crash fails the case. No address-space cap is set.
//!
//! Tests named after a bug they caught say so in their doc comment.

use std::io::Read;
use std::path::Path;
use std::process::{Command, Stdio};

use ordex::lang::{Event, RunStatus, Session};

/// Peak resident memory allowed for any case.
const MAX_RSS_KIB: u64 = 1 << 20;

/// What a run printed and how it ended.
struct Run {
    status: RunStatus,
    out: String,
    err: String,
}

/// Runs `text` in a fresh session on a thread with the 8 MiB stack of a
/// main thread, from `dir` for relative paths.
fn session_run_in(text: &str, dir: Option<&Path>) -> Run {
    let text = text.to_string();
    let dir = dir.map(Path::to_path_buf);
    let worker = std::thread::Builder::new()
        .stack_size(8 << 20)
        .spawn(move || {
            let mut session = Session::new();
            session.show_timing = false;
            if let Some(dir) = dir {
                session.set_base_dir(dir);
            }
            let (mut out, mut err) = (String::new(), String::new());
            let status = session.run_text(&text, Some("limits"), &mut |e| match e {
                Event::Report(r) => {
                    for l in r.lines {
                        out.push_str(&l.text);
                        out.push('\n');
                    }
                }
                Event::Error(m) => {
                    err.push_str(&m);
                    err.push('\n');
                }
            });
            // The session survives: it still answers afterwards.
            let mut after = String::new();
            let again = session.run_text("1 + 1", None, &mut |e| {
                if let Event::Report(r) = e {
                    after.extend(r.lines.into_iter().map(|l| l.text));
                }
            });
            assert_eq!(
                (again.exit_code(), after.as_str()),
                (0, "2"),
                "the session did not survive:\n{text}"
            );
            Run { status, out, err }
        })
        .expect("start a session thread");
    worker.join().expect("the session panicked")
}

fn session_run(text: &str) -> Run {
    session_run_in(text, None)
}

/// Runs `chunks` one after the other in one session (an error in one does
/// not stop the next).
fn session_chunks(chunks: &[&str]) -> Vec<Run> {
    let chunks: Vec<String> = chunks.iter().map(|c| c.to_string()).collect();
    let worker = std::thread::Builder::new()
        .stack_size(8 << 20)
        .spawn(move || {
            let mut session = Session::new();
            session.show_timing = false;
            let mut runs = Vec::new();
            for chunk in &chunks {
                let (mut out, mut err) = (String::new(), String::new());
                let status = session.run_text(chunk, Some("limits"), &mut |e| match e {
                    Event::Report(r) => {
                        for l in r.lines {
                            out.push_str(&l.text);
                            out.push('\n');
                        }
                    }
                    Event::Error(m) => err.push_str(&m),
                });
                runs.push(Run { status, out, err });
            }
            runs
        })
        .expect("start a session thread");
    worker.join().expect("the session panicked")
}

/// How the binary ended.
struct ChildRun {
    code: Option<i32>,
    signal: Option<i32>,
    out: String,
    err: String,
    peak_rss_kib: u64,
}

/// Runs the binary on `text` (`-e TEXT`, or a script file when the text is
/// too long for one argument) and reads the child's peak resident memory.
///
/// The peak comes from `/usr/bin/time` when it exists: a child started
/// straight from this process inherits this process's high-water mark at
/// `exec` (Linux keeps the larger of the old and new images), which would
/// count the test harness. Without it, `wait4`'s figure is used, an upper
/// bound.
// The child is reaped with `libc::wait4` (for its resource usage), which
// the lint cannot see.
#[allow(clippy::zombie_processes)]
fn binary_run(text: &str) -> ChildRun {
    let dir = tempfile::tempdir().expect("a temporary directory");
    let peak_file = dir.path().join("peak");
    let time = Path::new("/usr/bin/time");
    let mut command = if time.exists() {
        let mut c = Command::new(time);
        c.arg("-f").arg("%M").arg("-o").arg(&peak_file);
        c.arg(env!("CARGO_BIN_EXE_ordex"));
        c
    } else {
        Command::new(env!("CARGO_BIN_EXE_ordex"))
    };
    command.arg("--no-timing");
    if text.len() < 100_000 {
        command.arg("-e").arg(text);
    } else {
        let script = dir.path().join("long.ordex");
        std::fs::write(&script, text).expect("write the script");
        command.arg(&script);
    }
    let mut child = command
        .env("NO_COLOR", "1")
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("start the ordex binary");
    let mut stdout = child.stdout.take().expect("child stdout");
    let mut stderr = child.stderr.take().expect("child stderr");
    let reader = std::thread::spawn(move || {
        let mut s = String::new();
        let _ = stdout.read_to_string(&mut s);
        s
    });
    let mut err = String::new();
    let _ = stderr.read_to_string(&mut err);
    let out = reader.join().unwrap_or_default();
    let pid = child.id() as libc::pid_t;
    let mut status: libc::c_int = 0;
    // SAFETY: a zeroed rusage is a valid value for wait4 to fill in.
    let mut usage: libc::rusage = unsafe { std::mem::zeroed() };
    // SAFETY: waits for our own child with valid pointers; `child` is not
    // waited for again (dropping a `Child` does not wait).
    let waited = unsafe { libc::wait4(pid, &mut status, 0, &mut usage) };
    assert_eq!(waited, pid, "wait4 failed");
    let (mut code, mut signal) = if libc::WIFEXITED(status) {
        (Some(libc::WEXITSTATUS(status)), None)
    } else if libc::WIFSIGNALED(status) {
        (None, Some(libc::WTERMSIG(status)))
    } else {
        (None, None)
    };
    // ru_maxrss is in KiB on Linux.
    let mut peak_rss_kib = u64::try_from(usage.ru_maxrss).unwrap_or(0);
    if let Ok(report) = std::fs::read_to_string(&peak_file) {
        // `time` passes the exit status on and reports a signal in words.
        if let Some(line) = report.lines().find(|l| l.contains("terminated by signal")) {
            signal = line.split_whitespace().last().and_then(|n| n.parse().ok());
            code = None;
        }
        if let Some(kib) = report.lines().last().and_then(|l| l.trim().parse().ok()) {
            peak_rss_kib = kib;
        }
    }
    ChildRun {
        code,
        signal,
        out,
        err,
        peak_rss_kib,
    }
}

/// Runs a hostile `text` both ways: it must end with exit status 2 and an
/// error message containing every one of `wanted`, the binary within
/// [`MAX_RSS_KIB`].
fn refused(name: &str, text: &str, wanted: &[&str]) {
    let run = session_run(text);
    assert_eq!(
        run.status.exit_code(),
        2,
        "{name}: not an error:\n{}",
        run.out
    );
    for w in wanted {
        assert!(
            run.err.contains(w),
            "{name}: message lacks `{w}`:\n{}",
            run.err
        );
    }
    assert!(
        !run.err.contains("internal"),
        "{name}: internal error:\n{}",
        run.err
    );
    let child = binary_run(text);
    report_rss(name, &child);
    assert_eq!(
        (child.code, child.signal),
        (Some(2), None),
        "{name}: the binary ended wrongly; stderr:\n{}",
        child.err
    );
    for w in wanted {
        assert!(
            child.err.contains(w),
            "{name}: binary message lacks `{w}`:\n{}",
            child.err
        );
    }
}

/// Runs a cheap `text` that must simply work both ways and print `wanted`.
fn works(name: &str, text: &str, wanted: &str) {
    let run = session_run(text);
    assert_eq!(run.status.exit_code(), 0, "{name}: failed:\n{}", run.err);
    assert!(
        run.out.contains(wanted),
        "{name}: output lacks `{wanted}`:\n{}",
        run.out
    );
    let child = binary_run(text);
    report_rss(name, &child);
    assert_eq!(
        (child.code, child.signal),
        (Some(0), None),
        "{name}: the binary failed; stderr:\n{}",
        child.err
    );
    assert!(
        child.out.contains(wanted),
        "{name}: binary output lacks `{wanted}`"
    );
}

fn report_rss(name: &str, child: &ChildRun) {
    eprintln!(
        "peak RSS {name}: {:.1} MiB",
        child.peak_rss_kib as f64 / 1024.0
    );
    assert!(
        child.peak_rss_kib < MAX_RSS_KIB,
        "{name}: peak RSS {} KiB is not well below 1 GiB",
        child.peak_rss_kib
    );
}

// ---------------------------------------------------------------------------
// The term budget.

#[test]
fn huge_power_of_a_sum_hits_the_term_budget() {
    refused(
        "(x + y)^200000",
        "state x, y\n(x + y)^200000",
        &["term budget exceeded", "200000", "set budget N"],
    );
}

#[test]
fn product_blowup_hits_a_small_budget() {
    refused(
        "(x+y+z+w)^60 with budget 1000",
        "state x, y, z, w\nset budget 1000\n(x + y + z + w)^60",
        &["term budget exceeded", "1000", "set budget N"],
    );
}

/// A bracket whose one product of two parts holds far more terms than the
/// budget (products of sums in disjoint variables: every pair of terms is
/// a new monomial) stops while it multiplies: the packed inner loop of
/// brackets watches the budget every 64 rows, not only after the product.
#[test]
fn one_large_bracket_product_stops_at_the_term_budget() {
    refused(
        "bracket with a 69300-term product, budget 20000",
        "state a, b, c, d, e, f, g, h\nset budget 20000\n\
         X = [(a + b + c + d + 1)^7, 0, 0, 0, 0, 0, 0, 0]\n\
         Y = [(e + f + g + h + 1)^7, 0, 0, 0, 0, 0, 0, 0]\n\
         [X, Y]",
        &["term budget exceeded", "20000", "set budget N"],
    );
}

/// Averaging at a high order does many small packed products (a handful
/// of terms per pair of time parts) whose results stay small: the work
/// they do is counted as they go, so the budget's bound on term
/// multiplications stops the statement, not only its bound on terms.
#[test]
fn many_small_packed_products_stop_at_the_work_bound() {
    refused(
        "averaging to order 12 with budget 1500",
        "state x, y, z\nparam eps\nset budget 1500\n\
         S = eps*[y*z*cos(t) - 1/2*x, x*z*sin(t) + y^2*cos(2*t), x*y - z*sin(t)]\n\
         A = average S to 12 in eps",
        &[
            "term budget exceeded",
            "375000 term multiplications",
            "set budget N",
        ],
    );
}

#[test]
fn repeated_squaring_hits_a_small_budget() {
    let mut text = String::from("state x, y, z\nset budget 1000\nA = x + y + z + 1");
    for _ in 0..8 {
        text.push_str("\nA = A*A");
    }
    refused(
        "repeated squaring with budget 1000",
        &text,
        &["term budget exceeded", "1000", "set budget N"],
    );
}

/// Caught by the fuzz tests: the budget counted terms only, so a power of
/// a binomial with huge coefficients (`(x + y)^5000`, 5001 terms of up to
/// 1500 digits) ran for minutes; large coefficients now count too (a term
/// per 64 bytes), here 10 terms of 20,000 digits each.
#[test]
fn huge_products_stop_at_the_budget_counting_coefficient_size() {
    refused(
        "10 terms times 10^20000 with budget 1000",
        "state x, y, z\nset budget 1000\nS = (x + y + z)^3\nB = S*10^20000",
        &["term budget exceeded", "1000", "64 bytes"],
    );
    refused(
        "(x + y)^5000 with budget 20000",
        "state x, y\nset budget 20000\n(x + y)^5000",
        &["term budget exceeded", "20000", "set budget N"],
    );
    works(
        "(x + y)^300 with budget 20000",
        "state x, y\nset budget 20000\nA = (x + y)^300\ncheck plug(A, x = 1, y = 1) == 2^300",
        "holds",
    );
}

/// Caught by the fuzz tests: the antiderivative of `t^n*cos(t)` has n + 1
/// terms with coefficients up to n!, built with no limit and no way to
/// stop (`t^1000000000`: forever; `t^20000`: gigabytes of output).
#[test]
fn integral_of_a_huge_power_of_time_hits_the_budget() {
    // The flow expands the solution first: the product of two such powers
    // leaves the exponent range before any `t^p cos(2t)` is integrated.
    refused(
        "flow with t^1000000000",
        "set budget 20000\nstate x, y, z\nparam k, a\ns2 = t^1000000000\n\
         R = flow [k, a, z] + z*[s2, 8, 7] on sin(-3*x + 2*t) to 3",
        &["exponent out of range"],
    );
    refused(
        "flow with t^1000000000*cos(2t)",
        "set budget 20000\nstate x, y\ns2 = t^1000000000*cos(2*t)\n\
         R = flow [s2, x] on y to 2",
        &["term budget exceeded", "set budget N"],
    );
    refused(
        "magnus of t^20000*cos(t)",
        "state x\nmagnus t^20000*cos(t)*[1] to 1",
        &["term budget exceeded", "set budget N"],
    );
    works(
        "magnus of t^200*cos(t)",
        "state x\nW = magnus t^200*cos(t)*[1] to 1",
        "1 order",
    );
    refused(
        "t^2147483647 integrated",
        "state x\nmagnus t^2147483647*[1] to 1 over 1",
        &["exponent out of range"],
    );
}

/// Caught by the fuzz tests: `bch(X, Y, 40)` built all 2^40 words of the
/// free algebra without any limit (4.5 GB in a minute); the free Lie
/// algebra now asks the term budget as it goes, and a later `bch` works.
#[test]
fn bch_of_high_degree_stops_at_the_term_budget() {
    let text = "state x, y\nX = [1, 0]\nY = [0, x]\nset budget 20000\nB = bch(X, Y, 40)";
    refused(
        "bch(X, Y, 40)",
        text,
        &["term budget exceeded", "set budget N"],
    );
    // In one session: the stopped computation leaves nothing behind.
    let runs = session_chunks(&[text, "check bch(X, Y, 2) == X + Y + 1/2*[X, Y]"]);
    assert_eq!(runs[0].status.exit_code(), 2);
    assert_eq!(runs[1].status.exit_code(), 0, "{}", runs[1].err);
    assert!(runs[1].out.contains("holds"));
}

/// Caught by the limits tests: sums were never checked against the budget,
/// so a sum of parts each within it (here 131072 terms each) grew without
/// limit (30 parts: over a gigabyte).
#[test]
fn long_sum_of_parts_within_the_budget_hits_it() {
    let factors: Vec<String> = (0..17).map(|k| format!("(1 + x^{})", 1u64 << k)).collect();
    let parts: Vec<String> = (0..30).map(|i| format!("x^{}*A", 131072 * i)).collect();
    refused(
        "30 shifted copies of a 131072-term sum",
        &format!(
            "state x\nA = {}\nS = {}",
            factors.join("*"),
            parts.join(" + ")
        ),
        &["term budget exceeded", "set budget N"],
    );
}

/// Caught by the limits tests: a Carleman section is a dense N x N matrix
/// on the C(n + d, d) monomials, built before any check: 20 states to
/// degree 12 took 5 GB in a minute (degree 4: 3.6 GB); its entries now
/// count against the budget first.
#[test]
fn carleman_section_of_many_states_hits_the_budget() {
    let states: Vec<String> = (0..20).map(|i| format!("x{i}")).collect();
    let field: Vec<String> = (0..20).map(|i| format!("x{}", (i + 1) % 20)).collect();
    let text = format!(
        "state {}\nX = [{}]\ncarleman X degree 12",
        states.join(", "),
        field.join(", ")
    );
    refused(
        "carleman on 20 states, degree 12",
        &text,
        &["term budget exceeded"],
    );
    works(
        "carleman on 3 states, degree 10",
        "state x, y, z\nX = [y, z, x^2]\ncarleman X degree 10",
        "286x286 section",
    );
}

/// Caught by the fuzz tests: the bracket form of `magnus`/`average` to a
/// high order enumerated every word (2^40 for two fields) after the
/// result itself was done; now it is skipped with a warning when it alone
/// would outgrow the budget, and the result stands.
#[test]
fn high_order_series_skip_an_oversized_bracket_form() {
    let base = "state x, y\nparam eps\nX = [1, 0]\nY = [0, x]\n";
    works(
        "magnus to 40 (bracket form skipped)",
        &format!(
            "{base}W = magnus eps*(cos(t)*X + sin(t)*Y) to 40\ncheck order(W, eps, 2) == pi*[X, Y]"
        ),
        "no bracket form: term budget exceeded",
    );
    works(
        "average to 40 (bracket form skipped)",
        &format!("{base}A = average eps*(cos(t)*X + sin(t)*Y) to 40 in eps\ncheck order(A, eps, 2) == 1/2*[X, Y]"),
        "holds",
    );
}

// ---------------------------------------------------------------------------
// Orders.

#[test]
fn flow_order_limit() {
    refused(
        "flow V to 100000",
        "state x, y\nV = [y, -x]\nflow V to 100000",
        &["order limit exceeded", "40", "fixed"],
    );
}

#[test]
fn average_order_limit() {
    refused(
        "average S to 1000 in eps",
        "state x, y\nparam eps\nS = eps*[y, -x*cos(t)]\naverage S to 1000 in eps",
        &["order limit exceeded", "40", "fixed"],
    );
}

#[test]
fn ad_power_limit() {
    refused(
        "ad(X, Y, 10^6)",
        "state x, y\nX = [y, -x]\nY = [x^2, 0]\nad(X, Y, 10^6)",
        &["order limit exceeded", "40"],
    );
}

// ---------------------------------------------------------------------------
// Integer size and exponents.

#[test]
fn ten_thousand_digit_number_works() {
    let digits = "7".repeat(10_000);
    works(
        "10,000-digit number",
        &format!("{digits} + 1"),
        &format!("{}8", "7".repeat(9_999)),
    );
}

/// Caught by the limits tests: a number literal was built whatever its
/// length (a 200,000-digit literal was accepted), and `1e1000000000` was
/// refused as "malformed" without naming the limit.
#[test]
fn number_literals_beyond_the_integer_limit_name_it() {
    refused(
        "1e1000000000",
        "1e1000000000",
        &["integer size limit exceeded", "100000 digits", "fixed"],
    );
    refused(
        "200,000-digit literal",
        &"9".repeat(200_000),
        &["integer size limit exceeded", "100000 digits"],
    );
    refused("1e-200000", "1e-200000", &["integer size limit exceeded"]);
}

#[test]
fn two_to_the_billion_hits_the_integer_limit() {
    refused(
        "2^(10^9)",
        "2^(10^9)",
        &["integer size limit exceeded", "100000 digits"],
    );
}

/// Caught by the limits tests: a power estimated its size as bits × e, so
/// `x^1000000000` (coefficient 1) was refused and `10^99999` (99,999
/// digits: within the limit) too; the estimate is now e·log2|c|.
#[test]
fn unit_coefficient_to_a_huge_power_is_cheap() {
    works("x^1000000000", "state x\nx^1000000000", "x^1000000000");
    works(
        "(-x)^1000000001",
        "state x\n(-x)^1000000001",
        "-x^1000000001",
    );
    works(
        "x^1000000000 * x^1000000000",
        "state x\nx^1000000000 * x^1000000000",
        "x^2000000000",
    );
    works(
        "10^99999 is within the limit",
        "a = 10^99999\ncheck a/10^99998 == 10",
        "holds",
    );
}

#[test]
fn exponent_out_of_range_is_an_error() {
    refused(
        "x^2000000000 * x^2000000000",
        "state x\nx^2000000000 * x^2000000000",
        &["exponent out of range", "2147483647"],
    );
    refused(
        "x^3000000000",
        "state x\nx^3000000000",
        &["exponent out of range"],
    );
}

/// Caught by the limits tests: a product with a number skipped the
/// integer-size check and the term budget, so `a*a` of a 99,999-digit `a`,
/// and a 1x1 matrix of it to a power, grew without limit, and a long sum
/// times a huge number was built in full.
#[test]
fn products_of_huge_numbers_hit_the_integer_limit() {
    refused(
        "10^99999 squared",
        "a = 10^99999\nb = a*a",
        &["integer size limit exceeded"],
    );
    refused(
        "{10^99999}^10000",
        "M = {10^99999}\nM^10000",
        &["integer size limit exceeded"],
    );
    refused(
        "x*10^99999 times 10^99999",
        "state x\nb = (x*10^99999)*10^99999",
        &["integer size limit exceeded"],
    );
    // 131072 terms, each to get a 99,999-digit coefficient: 5 GB unless the
    // budget is asked first.
    let factors: Vec<String> = (0..17).map(|k| format!("(1 + x^{})", 1u64 << k)).collect();
    refused(
        "131072 terms times 10^99999",
        &format!("state x\nA = {}\nB = A*10^99999", factors.join("*")),
        &["term budget exceeded", "set budget N"],
    );
}

/// Caught by the fuzz tests: rationals with huge numerators and
/// denominators were added and multiplied through a full gcd each time
/// (seconds per operation at 40,000 digits); now only gcds with the
/// denominators are taken, and powers need no gcd at all.
#[test]
fn huge_rationals_add_and_multiply_quickly() {
    works(
        "(13/7)^80000 + (11/3)^80000",
        "a = (13/7)^80000\nb = (11/3)^80000\nc = a + b\ncheck (c - b)/a == 1",
        "holds",
    );
}

/// A huge power of time evaluated at the end of the horizon.
#[test]
fn time_power_at_the_horizon_hits_the_integer_limit() {
    refused(
        "magnus of t^1000000000 over 2",
        "state x\nmagnus t^1000000000*[1] to 1 over 2",
        &["integer size limit exceeded"],
    );
}

// ---------------------------------------------------------------------------
// Nesting and length of the input.

#[test]
fn three_hundred_nested_brackets() {
    let text = format!("state x\n{}x{}", "(".repeat(300), ")".repeat(300));
    refused("300 nested brackets", &text, &["nested more than 256"]);
    let text = format!("state x\n{}x{}", "[".repeat(300), "]".repeat(300));
    refused(
        "300 nested square brackets",
        &text,
        &["nested more than 256"],
    );
}

/// A flat sum is as deep as its nesting, not as long as it is (it was
/// refused as "more than 1000 levels deep", so long printed results could
/// not be pasted back).
#[test]
fn typed_out_sum_of_100000_terms() {
    let terms: Vec<String> = (1..=100_000).map(|i| format!("x^{i}")).collect();
    let text = format!("state x\nS = {}", terms.join(" + "));
    works("100,000-term sum", &text, "S: scalar, 100000 terms");
}

/// `(1+q+p)^550` took 17-19 s of large coefficients before the work limit
/// spoke; its size is known in advance (multinomial count), so it is
/// refused at once.
#[test]
fn power_of_a_sum_of_independent_terms_is_refused_before_any_work() {
    refused(
        "(1+q+p)^550",
        "state q, p\nx = (1 + q + p)^550",
        &[
            "term budget exceeded",
            "term multiplications",
            "set budget N",
        ],
    );
    works(
        "(1+q+q^2)^300",
        "state q, p\nx = (1 + q + q^2)^300",
        "x: scalar, 601 terms",
    );
}

/// `set budget 1000000000` then `bch(X, Y, 14)` on 3 states aborted the
/// process out of memory: the budget is capped by the memory it implies
/// (here under an address-space limit of 1 GiB), and the computation
/// ends with the budget's error message instead.
#[cfg(target_os = "linux")]
#[test]
fn a_raised_budget_is_capped_by_the_memory_it_implies() {
    use std::os::unix::process::CommandExt;
    let text = "state x, y, z\nset budget 1000000000\nX = [y + z^2, z + x^2, x + y^2]\n\
                Y = [y*z, x*z + 1, x*y]\nB = bch(X, Y, 14)";
    let mut command = Command::new(env!("CARGO_BIN_EXE_ordex"));
    command
        .args(["--no-timing", "-e", text])
        .env("NO_COLOR", "1")
        .stdin(Stdio::null());
    // SAFETY: setrlimit is async-signal-safe; it limits only the child.
    unsafe {
        command.pre_exec(|| {
            let limit = libc::rlimit {
                rlim_cur: 1 << 30,
                rlim_max: 1 << 30,
            };
            if libc::setrlimit(libc::RLIMIT_AS, &limit) != 0 {
                return Err(std::io::Error::last_os_error());
            }
            Ok(())
        });
    }
    let out = command.output().expect("ordex runs");
    let (stdout, stderr) = (
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr),
    );
    // 1 GiB / 2 / 2048 bytes a term.
    assert!(stdout.contains("capped at 262144"), "{stdout}");
    assert!(stdout.contains("term budget 262144"), "{stdout}");
    assert_eq!(out.status.code(), Some(2), "{stdout}\n{stderr}");
    assert!(stderr.contains("term budget exceeded"), "{stderr}");
}

/// The deepest inputs the parser accepts evaluate on a main thread's stack.
#[test]
fn deepest_accepted_inputs_fit_the_main_thread_stack() {
    let chain = format!("state x\nS = x{}", " + x".repeat(990));
    works("990-operator chain", &chain, "S: scalar, 1 term");
    let powers = format!("state x\nP = x{}", "^1".repeat(990));
    works("990-level power tower", &powers, "P: scalar, 1 term");
    let parens = format!(
        "state x\nP = {}x + 1{}\ncheck P == x + 1",
        "(".repeat(256),
        ")".repeat(256)
    );
    works("256 nested parentheses", &parens, "holds");
    let minus = format!("state x\nP = {}x\ncheck P == x", "-".repeat(990));
    works("990 minus signs", &minus, "holds");
    let lie = format!(
        "state x, y\nX = [y, -x]\nP = {}x{}\ncheck P == x",
        "X(".repeat(256),
        ")".repeat(256)
    );
    works("256 nested Lie derivatives", &lie, "holds");
}

// ---------------------------------------------------------------------------
// Files.

fn temp_dir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary directory")
}

fn file_error(dir: &Path, line: &str, wanted: &str) {
    let run = session_run_in(line, Some(dir));
    assert_eq!(
        run.status.exit_code(),
        2,
        "`{line}` did not fail:\n{}",
        run.out
    );
    assert!(run.err.contains("cannot use file"), "`{line}`: {}", run.err);
    assert!(
        run.err.contains(wanted),
        "`{line}`: message lacks `{wanted}`:\n{}",
        run.err
    );
    assert!(
        !run.err.contains("os error"),
        "`{line}`: raw OS message:\n{}",
        run.err
    );
}

#[test]
fn run_of_a_bad_file_gives_a_clear_message() {
    let dir = temp_dir();
    file_error(dir.path(), "run missing.ordex", "no such file");
    std::fs::create_dir(dir.path().join("sub")).expect("a subdirectory");
    file_error(dir.path(), "run sub", "it is a directory");
    std::fs::write(dir.path().join("bin.ordex"), b"state x\n\x00\x01\x02").expect("write");
    file_error(dir.path(), "run bin.ordex", "binary data");
    std::fs::write(dir.path().join("latin1.ordex"), b"state x\n# caf\xe9\n").expect("write");
    file_error(
        dir.path(),
        "run latin1.ordex",
        "not valid UTF-8 (at byte 13)",
    );
}

/// Caught by the limits tests: `run /dev/zero` read without end (a
/// gigabyte a second) and `run /dev/stdin` waited for input; only regular
/// files are scripts now.
#[test]
fn run_of_a_device_is_refused() {
    let dir = temp_dir();
    file_error(dir.path(), "run /dev/zero", "not a regular file");
    let child = binary_run("run /dev/zero");
    report_rss("run /dev/zero", &child);
    assert_eq!(child.code, Some(2), "{}", child.err);
    assert!(child.err.contains("not a regular file"), "{}", child.err);
}

fn leftovers(dir: &Path) -> Vec<String> {
    std::fs::read_dir(dir)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().to_string())
                .filter(|n| n.ends_with(".tmp"))
                .collect()
        })
        .unwrap_or_default()
}

/// Caught by the limits tests (the message): `save` over a directory
/// reported the raw OS error; it says what is wrong now.
#[test]
fn save_to_an_unwritable_path_fails_cleanly() {
    let dir = temp_dir();
    std::fs::create_dir(dir.path().join("taken")).expect("a subdirectory");
    // Over an existing directory: the temporary file is written, the
    // rename fails, and the temporary file must be gone.
    file_error(dir.path(), "state x\nsave taken", "it is a directory");
    assert!(
        leftovers(dir.path()).is_empty(),
        "{:?}",
        leftovers(dir.path())
    );
    assert!(dir.path().join("taken").is_dir());
    // Into a directory that does not exist.
    file_error(
        dir.path(),
        "state x\nsave nowhere/out.ordex",
        "no such file or directory",
    );
    // Below a regular file.
    std::fs::write(dir.path().join("plain"), "x").expect("write");
    file_error(
        dir.path(),
        "state x\nsave plain/out.ordex",
        "not a directory",
    );
    assert!(
        leftovers(dir.path()).is_empty(),
        "{:?}",
        leftovers(dir.path())
    );
    // A path that names no file.
    file_error(dir.path(), "state x\nsave ..", "");
    // And a good save still works afterwards.
    let run = session_run_in("state x\nsave good.ordex", Some(dir.path()));
    assert_eq!(run.status.exit_code(), 0, "{}", run.err);
    let saved = std::fs::read_to_string(dir.path().join("good.ordex")).expect("saved file");
    assert_eq!(saved, "state x\n");
    assert!(leftovers(dir.path()).is_empty());
}
