//! Numerical validation of averaged models: integrate the original system
//! and the averaged model of each order from matching initial points and
//! measure their distance at multiples of the period.
//!
//! For a stroboscopic model the coordinates agree at multiples of the
//! period, so the model starts at the same point. For a classical model the
//! original starts at `x0 = y0 + W(0, y0)` and is compared with
//! `y(t) + W(t, y(t))`; at multiples of the period `W(t, ·) = W(0, ·)`.
//! A classical fast-oscillation model (zero-mean base) adds the outer map
//! `exp(Y(0))`, the time-1 flow of `Y(0)`, the same at every multiple of
//! the period: `x0 = exp(Y(0))(y0 + W(0, y0))`.
//!
//! Every integration is repeated at a ten times tighter tolerance; the
//! change it makes estimates the integration error of the first, the
//! floor below which a measured error says little about the averaged
//! model.

use super::compile::CompiledField;
use super::ode::{integrate_at, OdeError, OdeOptions};

/// One `compare` run at a fixed eps.
pub(crate) struct CompareRun<'a> {
    /// The original system `x' = S(t, x)`.
    pub system: &'a CompiledField,
    /// `F_1..F_N` (autonomous).
    pub orders: &'a [CompiledField],
    /// `w_1..w_N` of a classical model (functions of t and y).
    pub transform: Option<&'a [CompiledField]>,
    /// `Y(0)` of a classical fast-oscillation model, whose time-1 flow maps
    /// `y + W` to `x` at multiples of the period.
    pub outer: Option<&'a CompiledField>,
    /// The value of eps.
    pub eps: f64,
    /// The period of the averaged standard form.
    pub period: f64,
    /// Number of periods to integrate.
    pub n_periods: usize,
    /// The initial point `y0` (the model's).
    pub y0: &'a [f64],
    /// The integration tolerance (relative; the absolute one is 1/100 of it).
    pub tolerance: f64,
}

/// The integration options for a tolerance: relative `tol`, absolute
/// `tol / 100`.
pub(crate) fn options_for(tol: f64) -> OdeOptions {
    OdeOptions {
        rtol: tol,
        atol: tol / 100.0,
        ..OdeOptions::default()
    }
}

/// The default integration tolerance of the numerical commands.
pub(crate) const DEFAULT_TOLERANCE: f64 = 1e-11;

/// Factor by which the check integration is tighter.
const TIGHTER: f64 = 10.0;

/// An error counts as at the integrator's floor when it is below this many
/// times the estimated integration error (the change the tighter check
/// integration makes): the integration error is then more than a tenth of
/// the measured error.
pub(crate) const FLOOR_FACTOR: f64 = 10.0;

/// The errors of one order at one eps.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct OrderErrors {
    /// Euclidean distance between system and model at each sample time.
    pub errors: Vec<f64>,
    /// The largest of `errors` (the table's entry).
    pub max: f64,
    /// Estimated integration error of the comparison (the largest change
    /// that the tighter integration makes, or the rounding level).
    pub floor: f64,
}

impl OrderErrors {
    /// Whether the error is at the integrator's floor.
    pub(crate) fn at_floor(&self) -> bool {
        self.max <= FLOOR_FACTOR * self.floor
    }
}

/// The result of one `compare` run.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct CompareResult {
    /// The sample times `m·T`, `m = 1..=n`.
    pub times: Vec<f64>,
    /// One entry per order.
    pub orders: Vec<OrderErrors>,
    /// Accepted steps of every integration at the tight tolerance.
    pub steps: usize,
}

fn transform_at(w: &[CompiledField], eps: f64, order: usize, t: f64, y: &[f64]) -> Vec<f64> {
    let mut out = y.to_vec();
    let mut tmp = vec![0.0; y.len()];
    let mut e = 1.0;
    for wj in w.iter().take(order) {
        e *= eps;
        wj.eval(t, y, &mut tmp);
        for (o, v) in out.iter_mut().zip(&tmp) {
            *o += e * v;
        }
    }
    out
}

/// `exp(Y)(x)`: the time-1 flow of the autonomous field `Y`.
fn outer_map(
    y: Option<&CompiledField>,
    x: Vec<f64>,
    tol: f64,
    cancel: &dyn Fn() -> bool,
) -> Result<Vec<f64>, OdeError> {
    let Some(y) = y else { return Ok(x) };
    let mut rhs = |t: f64, z: &[f64], dz: &mut [f64]| y.eval(t, z, dz);
    let out = integrate_at(
        &mut rhs,
        0.0,
        &x,
        &[1.0],
        &options_for(tol),
        cancel,
        &mut |_| {},
    )?;
    Ok(out.states.into_iter().next().unwrap_or(x))
}

fn distance(a: &[f64], b: &[f64]) -> f64 {
    a.iter()
        .zip(b)
        .map(|(x, y)| (x - y) * (x - y))
        .sum::<f64>()
        .sqrt()
}

/// The averaged model of order `order`: `y' = Σ_{j ≤ order} eps^j F_j(y)`.
pub(crate) fn model_rhs<'a>(
    orders: &'a [CompiledField],
    order: usize,
    eps: f64,
) -> impl FnMut(f64, &[f64], &mut [f64]) + 'a {
    let fields = &orders[..order.min(orders.len())];
    let mut tmp: Vec<f64> = Vec::new();
    move |t: f64, y: &[f64], dy: &mut [f64]| {
        tmp.resize(y.len(), 0.0);
        dy.iter_mut().for_each(|v| *v = 0.0);
        let mut e = 1.0;
        for f in fields {
            e *= eps;
            f.eval(t, y, &mut tmp);
            for (d, v) in dy.iter_mut().zip(&tmp) {
                *d += e * v;
            }
        }
    }
}

/// Progress of a run as the fraction of its integrations done.
struct Work<'p> {
    done: f64,
    total: f64,
    t_end: f64,
    report: &'p mut dyn FnMut(f64),
}

impl Work<'_> {
    fn at(&mut self, t: f64) {
        let f = (self.done + (t / self.t_end).clamp(0.0, 1.0)) / self.total;
        (self.report)(f);
    }
    fn finish_one(&mut self) {
        self.done += 1.0;
        (self.report)(self.done / self.total);
    }
}

/// The state at each output time of one integration.
type States = Vec<Vec<f64>>;

/// Integrates from `x0` at the tolerance and at the tighter one: the
/// states of both and the first run's accepted steps.
type Pair = (States, States, usize);

fn both(
    rhs: &mut dyn super::ode::Rhs,
    x0: &[f64],
    times: &[f64],
    tol: f64,
    cancel: &dyn Fn() -> bool,
    work: &mut Work<'_>,
) -> Result<Pair, OdeError> {
    let tight = integrate_at(rhs, 0.0, x0, times, &options_for(tol), cancel, &mut |t| {
        work.at(t)
    })?;
    work.finish_one();
    let check = integrate_at(
        rhs,
        0.0,
        x0,
        times,
        &options_for(tol / TIGHTER),
        cancel,
        &mut |t| work.at(t),
    )?;
    work.finish_one();
    Ok((tight.states, check.states, tight.stats.steps))
}

/// The error between the original and the model of each order
/// `1..=orders.len()` at the sample times `m·T`, `m = 1..=n` (Euclidean
/// distance in the original coordinates), with the integration floor of
/// each. `progress` receives the fraction of the run done.
pub(crate) fn compare_errors(
    run: &CompareRun<'_>,
    cancel: &dyn Fn() -> bool,
    progress: &mut dyn FnMut(f64),
) -> Result<CompareResult, OdeError> {
    let times: Vec<f64> = (1..=run.n_periods).map(|m| m as f64 * run.period).collect();
    let n_orders = run.orders.len();
    let system_runs = if run.transform.is_some() { n_orders } else { 1 };
    let mut work = Work {
        done: 0.0,
        total: 2.0 * (system_runs + n_orders) as f64,
        t_end: times.last().copied().unwrap_or(1.0).max(f64::MIN_POSITIVE),
        report: progress,
    };
    let mut sys = |t: f64, x: &[f64], dx: &mut [f64]| run.system.eval(t, x, dx);
    let mut cached: Option<(States, States)> = None;
    let mut steps = 0;
    let mut orders = Vec::with_capacity(n_orders);
    for order in 1..=n_orders {
        let (orig, orig_check) = match (&cached, run.transform) {
            (Some(c), None) => c.clone(),
            (_, transform) => {
                let x0 = match transform {
                    Some(w) => transform_at(w, run.eps, order, 0.0, run.y0),
                    None => run.y0.to_vec(),
                };
                let x0 = outer_map(run.outer, x0, run.tolerance / TIGHTER, cancel)?;
                let (a, b, s) = both(&mut sys, &x0, &times, run.tolerance, cancel, &mut work)?;
                steps += s;
                if transform.is_none() {
                    cached = Some((a.clone(), b.clone()));
                }
                (a, b)
            }
        };
        let mut model = model_rhs(run.orders, order, run.eps);
        let (ys, ys_check, s) = both(&mut model, run.y0, &times, run.tolerance, cancel, &mut work)?;
        steps += s;
        let to_x = |t: f64, y: &[f64]| {
            let z = match run.transform {
                Some(w) => transform_at(w, run.eps, order, t, y),
                None => y.to_vec(),
            };
            outer_map(run.outer, z, run.tolerance / TIGHTER, cancel)
        };
        let mut errors = Vec::with_capacity(times.len());
        let mut floor: f64 = 0.0;
        let mut size: f64 = 0.0;
        for (i, t) in times.iter().enumerate() {
            let x = &orig[i];
            let y = to_x(*t, &ys[i])?;
            errors.push(distance(x, &y));
            let change = distance(x, &orig_check[i]) + distance(&y, &to_x(*t, &ys_check[i])?);
            floor = floor.max(change);
            size = size.max(x.iter().fold(0.0, |m: f64, v| m.max(v.abs())));
        }
        // Rounding: the steps' round-off adds up like a random walk.
        let rounding = 16.0 * f64::EPSILON * size.max(1.0) * (s.max(1) as f64).sqrt();
        let max = errors.iter().copied().fold(0.0, f64::max);
        orders.push(OrderErrors {
            errors,
            max,
            floor: floor.max(rounding),
        });
    }
    Ok(CompareResult {
        times,
        orders,
        steps,
    })
}

/// Dense trajectories of the system and of each averaged order, for a
/// plot of paths: `n` equally spaced times over `(0, t_end]`, the model in
/// its own (averaged) coordinates, started from `y0`; the system from
/// `y0` (stroboscopic) or `y0 + W(0, y0)` of the highest order (classical).
pub(crate) struct Paths {
    /// The sample times, starting at 0.
    pub times: Vec<f64>,
    /// The system's state at each time.
    pub system: Vec<Vec<f64>>,
    /// For each order, the model's state at each time.
    pub models: Vec<Vec<Vec<f64>>>,
}

/// Integrates the system and each model densely for [`Paths`].
pub(crate) fn paths(
    run: &CompareRun<'_>,
    t_end: f64,
    n: usize,
    cancel: &dyn Fn() -> bool,
) -> Result<Paths, OdeError> {
    let n = n.max(2);
    let mut times: Vec<f64> = (0..=n).map(|i| t_end * i as f64 / n as f64).collect();
    times[0] = 0.0;
    let opts = options_for(run.tolerance);
    let x0 = match run.transform {
        Some(w) => transform_at(w, run.eps, run.orders.len(), 0.0, run.y0),
        None => run.y0.to_vec(),
    };
    let x0 = outer_map(run.outer, x0, run.tolerance, cancel)?;
    let mut sys = |t: f64, x: &[f64], dx: &mut [f64]| run.system.eval(t, x, dx);
    let system = integrate_at(&mut sys, 0.0, &x0, &times, &opts, cancel, &mut |_| {})?.states;
    let mut models = Vec::with_capacity(run.orders.len());
    for order in 1..=run.orders.len() {
        let mut model = model_rhs(run.orders, order, run.eps);
        let out = integrate_at(&mut model, 0.0, run.y0, &times, &opts, cancel, &mut |_| {})?;
        models.push(out.states);
    }
    Ok(Paths {
        times,
        system,
        models,
    })
}
