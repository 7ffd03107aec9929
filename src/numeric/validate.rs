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

use super::compile::CompiledField;
use super::ode::{integrate_at, OdeError, OdeOptions};

/// One `compare` run at a fixed eps.
pub struct CompareRun<'a> {
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
}

/// Integration tolerances used by `compare` (tight: the averaging errors
/// must dominate the integration error).
pub fn compare_options() -> OdeOptions {
    OdeOptions {
        rtol: 1e-11,
        atol: 1e-13,
        ..OdeOptions::default()
    }
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
    cancel: &dyn Fn() -> bool,
) -> Result<Vec<f64>, OdeError> {
    let Some(y) = y else { return Ok(x) };
    let mut rhs = |t: f64, z: &[f64], dz: &mut [f64]| y.eval(t, z, dz);
    let out = integrate_at(
        &mut rhs,
        0.0,
        &x,
        &[1.0],
        &compare_options(),
        cancel,
        &mut |_| {},
    )?;
    Ok(out.states.into_iter().next().unwrap_or(x))
}

/// The largest Euclidean distance between the original and the model of
/// each order `1..=orders.len()` at the sample times `m·T`, `m = 1..=n`.
pub fn compare_errors(
    run: &CompareRun<'_>,
    cancel: &dyn Fn() -> bool,
    progress: &mut dyn FnMut(f64),
) -> Result<Vec<f64>, OdeError> {
    let opts = compare_options();
    let times: Vec<f64> = (1..=run.n_periods).map(|m| m as f64 * run.period).collect();
    let dim = run.y0.len();
    let mut sys = |t: f64, x: &[f64], dx: &mut [f64]| run.system.eval(t, x, dx);
    let mut cached_original: Option<Vec<Vec<f64>>> = None;
    let mut errors = Vec::with_capacity(run.orders.len());
    for order in 1..=run.orders.len() {
        // Initial point of the original system.
        let original = match (run.transform, &cached_original) {
            (None, Some(states)) => states.clone(),
            (transform, _) => {
                let x0 = match transform {
                    Some(w) => transform_at(w, run.eps, order, 0.0, run.y0),
                    None => run.y0.to_vec(),
                };
                let x0 = outer_map(run.outer, x0, cancel)?;
                let out = integrate_at(&mut sys, 0.0, &x0, &times, &opts, cancel, progress)?;
                if transform.is_none() {
                    cached_original = Some(out.states.clone());
                }
                out.states
            }
        };
        let fields = &run.orders[..order];
        let eps = run.eps;
        let mut tmp = vec![0.0; dim];
        let mut model = |t: f64, y: &[f64], dy: &mut [f64]| {
            dy.iter_mut().for_each(|v| *v = 0.0);
            let mut e = 1.0;
            for f in fields {
                e *= eps;
                f.eval(t, y, &mut tmp);
                for (d, v) in dy.iter_mut().zip(&tmp) {
                    *d += e * v;
                }
            }
        };
        let out = integrate_at(&mut model, 0.0, run.y0, &times, &opts, cancel, progress)?;
        let mut worst: f64 = 0.0;
        for ((t, x), y) in times.iter().zip(&original).zip(&out.states) {
            let y_in_x = match run.transform {
                Some(w) => transform_at(w, run.eps, order, *t, y),
                None => y.clone(),
            };
            let y_in_x = outer_map(run.outer, y_in_x, cancel)?;
            let d: f64 = x
                .iter()
                .zip(&y_in_x)
                .map(|(a, b)| (a - b) * (a - b))
                .sum::<f64>()
                .sqrt();
            worst = worst.max(d);
        }
        errors.push(worst);
    }
    Ok(errors)
}
