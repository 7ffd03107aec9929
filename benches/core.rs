//! Throughput benchmarks of the exact core, the chronological series and
//! averaging, driven directly through `ordex::core`, `ordex::series` and
//! `ordex::averaging` (no language layer, no process start-up).
//!
//! Owns: the benchmark systems (seeded random polynomial and trigonometric
//! fields of our own, fixed small systems), the timing loop (medians of
//! repeated runs with `std::time::Instant`) and the printed tables. It
//! asserts nothing about time: it prints throughputs and ratios for people
//! to read (`cargo bench --bench core`).
//!
//! Must not know: the command language, printing styles or anything of the
//! prompt.

use std::hint::black_box;
use std::time::{Duration, Instant};

use ordex::averaging::{self, Method, Options};
use ordex::core::{limits, CoreError, CoreResult, Expr, Field, Sym, Q};
use ordex::series::chrono::{flow_outputs, magnus_generator, Graded};

/// A small deterministic generator (xorshift64*), so every run benchmarks
/// the same fields.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }

    /// Uniform in `lo..=hi`.
    fn range(&mut self, lo: i64, hi: i64) -> i64 {
        let span = (hi - lo + 1) as u64;
        lo + (self.next_u64() % span) as i64
    }
}

/// The rational `n/d` (d nonzero in every call here).
fn q(n: i64, d: i64) -> Q {
    Q::ratio(n, d).unwrap_or(Q::ONE)
}

/// A small nonzero rational coefficient.
fn coeff(rng: &mut Rng) -> Q {
    let mut n = rng.range(-9, 9);
    if n == 0 {
        n = 1;
    }
    q(n, rng.range(1, 6))
}

/// The monomial `Π s_i^e_i`.
fn monomial(states: &[Sym], exps: &[i64]) -> CoreResult<Expr> {
    let mut m = Expr::int(1);
    for (s, e) in states.iter().zip(exps) {
        if *e > 0 {
            m = m.mul(&Expr::sym(*s).pow(*e)?)?;
        }
    }
    Ok(m)
}

/// Random exponents of total degree at most `deg`.
fn exponents(rng: &mut Rng, n: usize, deg: i64) -> Vec<i64> {
    let mut out = vec![0; n];
    for _ in 0..rng.range(0, deg) {
        out[rng.range(0, n as i64 - 1) as usize] += 1;
    }
    out
}

/// A polynomial with `terms` random terms of degree at most `deg`.
fn random_poly(rng: &mut Rng, states: &[Sym], deg: i64, terms: usize) -> CoreResult<Expr> {
    let mut e = Expr::zero();
    for _ in 0..terms {
        let m = monomial(states, &exponents(rng, states.len(), deg))?;
        e = e.add(&m.scale(&coeff(rng)));
    }
    Ok(e)
}

/// A random linear form `Σ a_i s_i` with small integer coefficients, not zero.
fn random_linear(rng: &mut Rng, states: &[Sym]) -> Expr {
    loop {
        let mut l = Expr::zero();
        for s in states {
            let a = rng.range(-2, 2);
            if a != 0 {
                l = l.add(&Expr::sym(*s).scale(&Q::int(a)));
            }
        }
        if !l.is_zero() {
            return l;
        }
    }
}

/// A trigonometric expression: terms `c · monomial · sin/cos(linear form)`.
fn random_trig(rng: &mut Rng, states: &[Sym], deg: i64, terms: usize) -> CoreResult<Expr> {
    let mut e = Expr::zero();
    for _ in 0..terms {
        let m = monomial(states, &exponents(rng, states.len(), deg))?;
        let arg = random_linear(rng, states);
        let wave = if rng.range(0, 1) == 0 {
            Expr::sin_of(&arg, states)?
        } else {
            Expr::cos_of(&arg, states)?
        };
        e = e.add(&m.mul(&wave)?.scale(&coeff(rng)));
    }
    Ok(e)
}

fn field_of(states: &[Sym], mut comp: impl FnMut() -> CoreResult<Expr>) -> CoreResult<Field> {
    let mut out = Vec::with_capacity(states.len());
    for _ in states {
        out.push(comp()?);
    }
    Ok(Field(out))
}

/// Times `f` repeatedly (at least `min_reps` times and at least `budget`
/// in total, at most 1000 times) and returns the median duration.
fn median_time<T>(
    min_reps: usize,
    budget: Duration,
    f: impl FnMut() -> CoreResult<T>,
) -> CoreResult<(Duration, T)> {
    let (times, out) = timed_runs(min_reps, budget, f)?;
    Ok((times.median, out))
}

/// The median and the fastest of repeated runs.
struct Times {
    median: Duration,
    fastest: Duration,
}

/// Runs `f` at least `min_reps` times and for at least `budget` in total
/// (at most 1000 times); returns the median and fastest durations with the
/// last output.
fn timed_runs<T>(
    min_reps: usize,
    budget: Duration,
    mut f: impl FnMut() -> CoreResult<T>,
) -> CoreResult<(Times, T)> {
    let mut times = Vec::new();
    let start = Instant::now();
    let mut last = None;
    while times.len() < min_reps || (start.elapsed() < budget && times.len() < 1000) {
        let t0 = Instant::now();
        let out = f()?;
        times.push(t0.elapsed());
        last = Some(black_box(out));
    }
    times.sort();
    let stats = Times {
        median: times[times.len() / 2],
        fastest: times[0],
    };
    match last {
        Some(out) => Ok((stats, out)),
        None => Err(CoreError::Refused {
            reason: "no run".to_string(),
        }),
    }
}

fn ms(d: Duration) -> String {
    let v = d.as_secs_f64() * 1e3;
    if v >= 100.0 {
        format!("{v:.0}")
    } else if v >= 1.0 {
        format!("{v:.2}")
    } else {
        format!("{v:.4}")
    }
}

fn states(names: &[&str]) -> Vec<Sym> {
    names.iter().map(|n| Sym::new(n)).collect()
}

/// Issue "exact core": brackets per second.
fn bench_brackets() -> CoreResult<()> {
    println!("## exact core: Lie brackets [X, Y] of random fields in 4 variables");
    println!();
    println!("| fields | terms per component | pairs | median ms per bracket | brackets/s | result terms per bracket | result terms/s |");
    println!("|---|---|---|---|---|---|---|");
    let st = states(&["w", "x", "y", "z"]);
    let mut rng = Rng(0x0bde_5eed_0000_0001);
    for &(kind, deg, terms) in &[
        ("polynomial, degree 6", 6, 6usize),
        ("polynomial, degree 6", 6, 12),
        ("trigonometric, degree 2", 2, 4),
        ("trigonometric, degree 3", 3, 8),
    ] {
        let n_pairs = 16;
        let mut pairs = Vec::with_capacity(n_pairs);
        for _ in 0..n_pairs {
            let (x, y) = if kind.starts_with("poly") {
                (
                    field_of(&st, || random_poly(&mut rng, &st, deg, terms))?,
                    field_of(&st, || random_poly(&mut rng, &st, deg, terms))?,
                )
            } else {
                (
                    field_of(&st, || random_trig(&mut rng, &st, deg, terms))?,
                    field_of(&st, || random_trig(&mut rng, &st, deg, terms))?,
                )
            };
            pairs.push((x, y));
        }
        let (d, out_terms) = median_time(5, Duration::from_millis(400), || {
            let mut n = 0;
            for (x, y) in &pairs {
                n += x.bracket(y, &st)?.n_terms();
            }
            Ok(n)
        })?;
        let per = d / n_pairs as u32;
        let secs = d.as_secs_f64();
        println!(
            "| {kind} | {terms} | {n_pairs} | {} | {:.0} | {:.0} | {:.0} |",
            ms(per),
            n_pairs as f64 / secs,
            out_terms as f64 / n_pairs as f64,
            out_terms as f64 / secs
        );
    }
    println!();
    Ok(())
}

/// `c(t) = cos(k t)` or `sin(k t)`.
fn beat(sin: bool, k: i64, st: &[Sym]) -> CoreResult<Expr> {
    let arg = Expr::sym(Sym::T).scale(&Q::int(k));
    if sin {
        Expr::sin_of(&arg, st)
    } else {
        Expr::cos_of(&arg, st)
    }
}

/// Issue "series": the generator and the flow to order 6.
fn bench_series() -> CoreResult<()> {
    println!("## series: magnus_generator and flow_outputs to order 6 (3 states, 3 fields)");
    println!();
    let st = states(&["x", "y", "z"]);
    let (x, y, z) = (Expr::sym(st[0]), Expr::sym(st[1]), Expr::sym(st[2]));
    // V(t) = cos(t) X1 + sin(t) X2 + cos(2t) X3 with quadratic X_i.
    let x1 = Field(vec![y.mul(&z)?, x.scale(&q(-1, 2)), x.mul(&y)?]);
    let x2 = Field(vec![z.clone(), x.mul(&z)?, y.mul(&y)?.scale(&q(1, 3))]);
    let x3 = Field(vec![x.mul(&x)?, z.scale(&Q::int(-1)), y.clone()]);
    let v = x1
        .mul_expr(&beat(false, 1, &st)?)?
        .add(&x2.mul_expr(&beat(true, 1, &st)?)?)?
        .add(&x3.mul_expr(&beat(false, 2, &st)?)?)?;
    println!("| what | order | median ms | result terms (all orders) | result terms/s |");
    println!("|---|---|---|---|---|");
    for n in [2usize, 4, 6] {
        let g = Graded::single(v.clone());
        let (d, w) = median_time(3, Duration::from_millis(500), || {
            magnus_generator(&g, n, &st)
        })?;
        let terms: usize = w.iter().map(Field::n_terms).sum();
        println!(
            "| magnus_generator W(t) | {n} | {} | {terms} | {:.0} |",
            ms(d),
            terms as f64 / d.as_secs_f64()
        );
    }
    println!();
    // The flow per order, with fastest runs, for the flatness measure of
    // `scripts/bench` (the same columns as the averaging tables).
    println!("| system | order | median ms | fastest ms | result terms | us/term median | us/term fastest |");
    println!("|---|---|---|---|---|---|---|");
    for n in 2usize..=6 {
        let (times, terms) = timed_runs(3, Duration::from_millis(500), || {
            let outputs = [x.clone(), y.clone(), z.clone()];
            Ok(flow_outputs(&v, &outputs, n, &st)?
                .iter()
                .flatten()
                .map(Expr::len)
                .sum::<usize>())
        })?;
        let per_term = |d: Duration| d.as_secs_f64() * 1e6 / terms.max(1) as f64;
        println!(
            "| 3-state flow | {n} | {} | {} | {terms} | {:.2} | {:.2} |",
            ms(times.median),
            ms(times.fastest),
            per_term(times.median),
            per_term(times.fastest)
        );
    }
    println!();
    Ok(())
}

/// Issue "averaging": `average` for orders 2..6 on two systems.
fn bench_averaging() -> CoreResult<()> {
    println!("## averaging: stroboscopic `average`, orders 2..6");
    println!();
    let eps = Sym::new("eps");
    // Two-state trigonometric: [p*cos(t) - sin(q), -sin(q)*sin(2t) - p/2].
    let st2 = states(&["q", "p"]);
    let (qq, pp) = (Expr::sym(st2[0]), Expr::sym(st2[1]));
    let sin_q = Expr::sin_of(&qq, &st2)?;
    let trig = Field(vec![
        pp.mul(&beat(false, 1, &st2)?)?.sub(&sin_q),
        sin_q
            .mul(&beat(true, 2, &st2)?)?
            .neg()
            .sub(&pp.scale(&q(1, 2))),
    ]);
    // Three-state quadratic.
    let st3 = states(&["x", "y", "z"]);
    let (x, y, z) = (Expr::sym(st3[0]), Expr::sym(st3[1]), Expr::sym(st3[2]));
    let poly = Field(vec![
        y.mul(&z)?
            .mul(&beat(false, 1, &st3)?)?
            .sub(&x.scale(&q(1, 2))),
        x.mul(&z)?
            .mul(&beat(true, 1, &st3)?)?
            .add(&y.mul(&y)?.mul(&beat(false, 2, &st3)?)?),
        x.mul(&y)?.sub(&z.mul(&beat(true, 1, &st3)?)?),
    ]);
    println!("Systems eps*V. Work is what the core counts: one unit per pair of terms");
    println!("multiplied and per pair of time-factor parts tested; ns per unit staying level");
    println!("means the growth with the order is the recursion's work, not overhead.");
    println!("Fastest: the quickest of the runs, which other load on a shared machine can");
    println!("only slow down (common practice for timing on busy machines); median: the");
    println!("middle run, which moves with that load.");
    println!();
    println!(
        "| system | order | median ms | fastest ms | result terms | us per result term \
         | us per result term, fastest | time ratio to previous order | work units \
         | ns per work unit |"
    );
    println!("|---|---|---|---|---|---|---|---|---|---|");
    for (name, v1, st) in [
        ("2-state trigonometric", &trig, &st2),
        ("3-state quadratic", &poly, &st3),
    ] {
        let v = v1.mul_expr(&Expr::sym(eps))?;
        let mut prev: Option<Duration> = None;
        for n in 2..=6usize {
            let opts = Options {
                method: Method::Strobo,
                order: n,
                depth: 8,
                with_transform: false,
            };
            let (times, (terms, work)) = timed_runs(3, Duration::from_millis(500), || {
                limits::start_work();
                let terms = averaging::average(&v, eps, &opts, st)?
                    .orders
                    .iter()
                    .map(Field::n_terms)
                    .sum::<usize>();
                Ok((terms, limits::work_done().unwrap_or(0)))
            })?;
            let d = times.median;
            let ratio = prev.map_or("-".to_string(), |p| {
                format!("{:.1}", d.as_secs_f64() / p.as_secs_f64())
            });
            let per_term = |d: Duration| d.as_secs_f64() * 1e6 / terms.max(1) as f64;
            println!(
                "| {name} | {n} | {} | {} | {terms} | {:.1} | {:.1} | {ratio} | {work} | {:.0} |",
                ms(d),
                ms(times.fastest),
                per_term(d),
                per_term(times.fastest),
                d.as_secs_f64() * 1e9 / work.max(1) as f64
            );
            prev = Some(d);
        }
    }
    println!();
    Ok(())
}

/// Issue "unspecified functions": the same system averaged with `V`, `g`
/// unspecified and with concrete polynomials in their place, per result
/// term (the unspecified result has more terms: each derivative is an atom
/// of its own). Runs on a fresh thread, so the symbols are numbered as in a
/// session that declares the state, the parameters and the functions.
fn bench_functions() -> CoreResult<()> {
    std::thread::spawn(bench_functions_here)
        .join()
        .unwrap_or(Err(CoreError::Interrupted))
}

fn bench_functions_here() -> CoreResult<()> {
    use ordex::core::func::{Definition, Signature};
    use std::sync::Arc;
    println!("## unspecified functions: stroboscopic `average`, orders 2..5");
    println!();
    let st = states(&["q", "p"]);
    let eps = Sym::new("eps");
    let s = Sym::new("s");
    let (qq, pp) = (Expr::sym(st[0]), Expr::sym(st[1]));
    let sig = |n: &str| {
        Arc::new(Signature {
            name: n.to_string(),
            params: vec!["s".to_string()],
        })
    };
    let (sv, sg) = (sig("V"), sig("g"));
    let app = |f: &Arc<Signature>, k: u32| Expr::apply_function(f, &[k], &[qq.clone()], &st);
    // eps*[p + g(q)*cos(t), -V'(q) + p*g'(q)*sin(t) + g(q)*cos(2t)]
    let generic = Field(vec![
        pp.add(&app(&sg, 0)?.mul(&beat(false, 1, &st)?)?),
        app(&sv, 1)?
            .neg()
            .add(&pp.mul(&app(&sg, 1)?)?.mul(&beat(true, 1, &st)?)?)
            .add(&app(&sg, 0)?.mul(&beat(false, 2, &st)?)?),
    ])
    .mul_expr(&Expr::sym(eps))?;
    // V(s) = s^4/4 + s^2/2, g(s) = s^3 - s/2: polynomials of the degree
    // the derivatives to order 5 still see.
    let ss = Expr::sym(s);
    let mut dv = Definition::new(
        sv.clone(),
        vec![s],
        ss.pow(4)?.scale(&q(1, 4)).add(&ss.pow(2)?.scale(&q(1, 2))),
    );
    let mut dg = Definition::new(sg.clone(), vec![s], ss.pow(3)?.sub(&ss.scale(&q(1, 2))));
    let concrete = generic.map(|e| {
        e.plug_definition(&mut dv, &st)?
            .plug_definition(&mut dg, &st)
    })?;
    println!("System eps*[p + g(q)*cos(t), -V'(q) + p*g'(q)*sin(t) + g(q)*cos(2t)], with V, g");
    println!("unspecified and with V = q^4/4 + q^2/2, g = q^3 - q/2. The line of issue 16: the");
    println!("unspecified system within 3x of the concrete one per result term.");
    println!();
    println!(
        "| order | unspecified ms (fastest) | terms | concrete ms (fastest) | terms \
         | us per term, unspecified | us per term, concrete | ratio per term |"
    );
    println!("|---|---|---|---|---|---|---|---|");
    for n in 2..=5usize {
        let opts = Options {
            method: Method::Strobo,
            order: n,
            depth: 8,
            with_transform: false,
        };
        let run = |v: &Field| {
            timed_runs(3, Duration::from_millis(500), || {
                Ok(averaging::average(v, eps, &opts, &st)?
                    .orders
                    .iter()
                    .map(Field::n_terms)
                    .sum::<usize>())
            })
        };
        let (tg, ng) = run(&generic)?;
        let (tc, nc) = run(&concrete)?;
        let per = |d: Duration, n: usize| d.as_secs_f64() * 1e6 / n.max(1) as f64;
        let (pg, pc) = (per(tg.fastest, ng), per(tc.fastest, nc));
        println!(
            "| {n} | {} | {ng} | {} | {nc} | {pg:.2} | {pc:.2} | {:.2} |",
            ms(tg.fastest),
            ms(tc.fastest),
            pg / pc
        );
    }
    println!();
    Ok(())
}

/// Structural BCH, `log(e^X e^Y)` in the Lyndon basis: the Lyndon-word
/// route on one and two threads, and the tensor-algebra route (the tests'
/// oracle) where it finishes in seconds. `ORDEX_BCH_MAX` raises the top
/// degree (default 20).
fn bench_bch() -> CoreResult<()> {
    use num_rational::BigRational;
    use ordex::series::freelie::bch_by_tensor;
    use ordex::series::freelie as lyndon;
    let top: u32 = std::env::var("ORDEX_BCH_MAX")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20);
    println!("## structural BCH log(e^X e^Y) in the Lyndon basis");
    println!();
    println!("| degree | basis elements | nonzero | 1 thread ms (fastest) | 2 threads ms (fastest) | 1 / 2 threads | tensor route ms | tensor / Lyndon (1 thread) |");
    println!("|---|---|---|---|---|---|---|---|");
    let run = |n: u32, threads: usize| {
        let reps = if n <= 16 { 5 } else { 2 };
        timed_runs(reps, Duration::from_millis(300), || {
            lyndon::bch(n, threads, &mut |_| true, &|| false).map_err(|e| CoreError::Refused {
                reason: e.to_string(),
            })
        })
    };
    for n in (10..=top).step_by(2) {
        let (one, series) = run(n, 1)?;
        let (two, series2) = run(n, 2)?;
        if series != series2 {
            return Err(CoreError::Refused {
                reason: format!("degree {n}: one and two threads differ"),
            });
        }
        let tensor = if n <= 12 {
            let (t, old) = timed_runs(2, Duration::from_millis(100), || {
                bch_by_tensor::<BigRational>(n).map_err(|e| CoreError::Refused {
                    reason: e.to_string(),
                })
            })?;
            if old.into_terms() != series {
                return Err(CoreError::Refused {
                    reason: format!("degree {n}: the routes differ"),
                });
            }
            Some(t.fastest)
        } else {
            None
        };
        println!(
            "| {n} | {} | {} | {} | {} | {:.2} | {} | {} |",
            lyndon::witt_total(n as u8),
            series.len(),
            ms(one.fastest),
            ms(two.fastest),
            one.fastest.as_secs_f64() / two.fastest.as_secs_f64(),
            tensor.map_or("-".to_string(), ms),
            tensor.map_or("-".to_string(), |t| format!(
                "{:.0}x",
                t.as_secs_f64() / one.fastest.as_secs_f64()
            )),
        );
    }
    println!();
    Ok(())
}

fn main() {
    // `cargo bench` passes `--bench`; a filter word selects one issue.
    let filter: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let wants = |w: &str| filter.is_empty() || filter.iter().any(|f| w.contains(f.as_str()));
    let mut status = Ok(());
    if wants("core brackets") {
        status = status.and_then(|()| bench_brackets());
    }
    if wants("series magnus flow") {
        status = status.and_then(|()| bench_series());
    }
    if wants("averaging") {
        status = status.and_then(|()| bench_averaging());
    }
    if wants("functions averaging") {
        status = status.and_then(|()| bench_functions());
    }
    if wants("bch structural") {
        status = status.and_then(|()| bench_bch());
    }
    if let Err(e) = status {
        eprintln!("benchmark failed: {e}");
        std::process::exit(1);
    }
}
