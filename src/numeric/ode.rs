//! Adaptive explicit Runge–Kutta integration in floating point.
//!
//! This module owns the Dormand–Prince 5(4) embedded pair with its
//! step-size controller and the driver that reports the state at a list of
//! output times. It works on plain `f64` slices and knows nothing about
//! expressions, sessions or how a right-hand side was built: callers hand
//! in anything that implements [`Rhs`].
//!
//! Method: J. R. Dormand and P. J. Prince, "A family of embedded
//! Runge–Kutta formulae", J. Comput. Appl. Math. 6 (1980) 19–26 (from
//! memory). The fifth-order solution is propagated (local extrapolation),
//! the last stage is evaluated at the new point so it serves as the first
//! stage of the next step ("first same as last").
//!
//! Step-size control follows E. Hairer, S. P. Nørsett and G. Wanner,
//! "Solving Ordinary Differential Equations I", 2nd ed. (1993), §II.4 (from
//! memory): the mixed absolute/relative root-mean-square error norm, the
//! update `h_new = h · min(facmax, max(facmin, fac · err^(-1/5)))`, no growth
//! directly after a rejected step, and the automatic choice of the initial
//! step from the size of `y0`, `f(t0, y0)` and a difference quotient.

use std::fmt;

/// Tolerances and limits for [`integrate_at`].
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct OdeOptions {
    /// Relative tolerance per component (must be non-negative).
    pub rtol: f64,
    /// Absolute tolerance per component (must be non-negative; `rtol` and
    /// `atol` must not both be zero).
    pub atol: f64,
    /// Largest step size allowed (positive; `f64::INFINITY` for no limit).
    pub h_max: f64,
    /// Largest number of attempted steps, accepted and rejected together.
    pub max_steps: usize,
}

impl Default for OdeOptions {
    fn default() -> Self {
        OdeOptions {
            rtol: 1e-10,
            atol: 1e-12,
            h_max: f64::INFINITY,
            max_steps: 10_000_000,
        }
    }
}

/// Why an integration stopped before reaching its last output time.
#[derive(Clone, Debug, PartialEq)]
pub(crate) enum OdeError {
    /// The solution or the right-hand side stopped being finite near `t`
    /// (typically a blow-up) and smaller steps did not help.
    NonFinite {
        /// Time of the last good state.
        t: f64,
    },
    /// The step size needed to meet the tolerance fell below what the
    /// floating-point resolution of `t` allows (a singularity or stiffness).
    StepTooSmall {
        /// Time of the last good state.
        t: f64,
    },
    /// The step budget [`OdeOptions::max_steps`] was used up.
    TooManySteps {
        /// Time of the last good state.
        t: f64,
        /// Number of attempted steps when the budget ran out.
        steps: usize,
    },
    /// The caller's cancellation check returned true.
    Cancelled {
        /// Time of the last good state.
        t: f64,
    },
    /// The inputs cannot describe an integration (the payload says which).
    InvalidInput {
        /// Which input was rejected and why.
        reason: &'static str,
    },
}

impl fmt::Display for OdeError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OdeError::NonFinite { t } => write!(
                f,
                "the solution stopped being finite near t = {t} (blow-up?)"
            ),
            OdeError::StepTooSmall { t } => write!(
                f,
                "step size became too small at t = {t} (singularity or stiffness?)"
            ),
            OdeError::TooManySteps { t, steps } => write!(
                f,
                "gave up after {steps} steps at t = {t} (a fixed limit): the system is very stiff \
                 or oscillates very fast there; shorten the horizon or rescale the system"
            ),
            OdeError::Cancelled { t } => write!(f, "integration cancelled at t = {t}"),
            OdeError::InvalidInput { reason } => write!(f, "invalid integration input: {reason}"),
        }
    }
}

impl std::error::Error for OdeError {}

/// A right-hand side `y' = f(t, y)`.
///
/// `eval` writes `f(t, y)` into `dy`, which has the same length as `y`.
/// It takes `&mut self` so an implementation may keep scratch space or
/// counters. Non-finite values written into `dy` are handled by the
/// integrator (the step is retried smaller, then reported), never a panic.
pub(crate) trait Rhs {
    /// Write `f(t, y)` into `dy`.
    fn eval(&mut self, t: f64, y: &[f64], dy: &mut [f64]);
}

impl<F: FnMut(f64, &[f64], &mut [f64])> Rhs for F {
    fn eval(&mut self, t: f64, y: &[f64], dy: &mut [f64]) {
        self(t, y, dy)
    }
}

/// Work counters of one integration.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub(crate) struct OdeStats {
    /// Accepted steps.
    pub steps: usize,
    /// Rejected steps (error too large or non-finite values).
    pub rejected: usize,
    /// Evaluations of the right-hand side.
    pub evals: usize,
}

/// The result of [`integrate_at`].
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct OdeOutput {
    /// `states[i]` is the state at `times[i]`.
    pub states: Vec<Vec<f64>>,
    /// Work done to get there.
    pub stats: OdeStats,
}

/// Integrate `y' = f(t, y)`, `y(t0) = y0`, and report the state at each of
/// the output `times`.
///
/// The times must be finite and monotone away from `t0`: all `>= t0` and
/// non-decreasing (forward), or all `<= t0` and non-increasing (backward).
/// Each output time is hit exactly by shortening the step that would pass
/// it, not by interpolation, so the reported states carry the full
/// fifth-order accuracy. `cancel` is polled before every step attempt;
/// `progress(t)` is called every 1000 attempted steps with the current time.
pub(crate) fn integrate_at<R: Rhs + ?Sized>(
    rhs: &mut R,
    t0: f64,
    y0: &[f64],
    times: &[f64],
    opts: &OdeOptions,
    cancel: &dyn Fn() -> bool,
    progress: &mut dyn FnMut(f64),
) -> Result<OdeOutput, OdeError> {
    validate(t0, y0, times, opts)?;
    let dim = y0.len();
    let mut stats = OdeStats::default();
    let mut states = Vec::with_capacity(times.len());
    let dir = match times.last() {
        Some(&t_last) if t_last < t0 => -1.0,
        _ => 1.0,
    };
    if dim == 0 {
        states.resize(times.len(), Vec::new());
        return Ok(OdeOutput { states, stats });
    }

    let mut work = Stages::new(dim);
    let y = y0.to_vec();
    rhs.eval(t0, &y, &mut work.k[0]);
    stats.evals += 1;
    if !all_finite(&work.k[0]) {
        return Err(OdeError::NonFinite { t: t0 });
    }

    let t_end = times.last().copied().unwrap_or(t0);
    let span = (t_end - t0).abs();
    let h = initial_step(rhs, t0, &y, dir, &mut work, opts, span);
    stats.evals += 1;
    let mut stepper = Stepper {
        t: t0,
        y,
        h,
        dir,
        just_rejected: false,
        work,
        stats,
    };
    let mut attempts: usize = 0;

    for &t_out in times {
        // Integrate until `t` equals `t_out` exactly.
        while (t_out - stepper.t) * dir > 0.0 {
            let t = stepper.t;
            if cancel() {
                return Err(OdeError::Cancelled { t });
            }
            if attempts >= opts.max_steps {
                return Err(OdeError::TooManySteps { t, steps: attempts });
            }
            attempts += 1;
            if attempts.is_multiple_of(1000) {
                progress(t);
            }
            stepper.attempt(rhs, t_out, opts)?;
        }
        states.push(stepper.y.clone());
    }
    Ok(OdeOutput {
        states,
        stats: stepper.stats,
    })
}

/// The adaptive driver between two step attempts: where it is, the step it
/// proposes next, its stages and its counters.
struct Stepper {
    t: f64,
    y: Vec<f64>,
    /// The proposed size of the next step (positive; `dir` gives the sign).
    h: f64,
    /// 1 forward, −1 backward.
    dir: f64,
    /// Whether the last attempt was rejected (the controller then does not
    /// let the step grow).
    just_rejected: bool,
    work: Stages,
    stats: OdeStats,
}

impl Stepper {
    /// One step attempt towards `t_out`: accepted (the state moves on) or
    /// rejected (only the proposed step shrinks). An error when the step
    /// has shrunk below what `t` can resolve.
    fn attempt<R: Rhs + ?Sized>(
        &mut self,
        rhs: &mut R,
        t_out: f64,
        opts: &OdeOptions,
    ) -> Result<(), OdeError> {
        let t = self.t;
        let h_min = 16.0 * f64::EPSILON * t.abs().max(f64::MIN_POSITIVE);
        if self.h < h_min {
            return Err(if self.work.last_nonfinite {
                OdeError::NonFinite { t }
            } else {
                OdeError::StepTooSmall { t }
            });
        }
        // Shorten the step so it lands on `t_out`; a step that would
        // leave a sliver of less than 1% is stretched to land there too.
        let remaining = (t_out - t).abs();
        let clipped = self.h * 1.01 >= remaining;
        let h_step = if clipped { remaining } else { self.h };

        self.work.step(rhs, t, &self.y, self.dir * h_step);
        self.stats.evals += 6;
        let err = self.work.error_norm(&self.y, opts);
        if !err.is_finite() {
            // Overflow or NaN inside the step: retry much smaller.
            self.work.last_nonfinite = true;
            self.stats.rejected += 1;
            self.just_rejected = true;
            self.h = h_step * FAC_MIN;
            return Ok(());
        }
        self.work.last_nonfinite = false;
        let factor = step_factor(err, self.just_rejected);
        if err <= 1.0 {
            self.stats.steps += 1;
            self.t = if clipped {
                t_out
            } else {
                t + self.dir * h_step
            };
            std::mem::swap(&mut self.y, &mut self.work.y_new);
            // First same as last: the seventh stage is f(t_new, y_new).
            self.work.k.swap(0, 6);
            let h_next = h_step * factor;
            // After a step shortened to hit an output time, keep the
            // step the controller had proposed before the clipping.
            let h = if clipped { h_next.max(self.h) } else { h_next };
            self.h = h.min(opts.h_max);
            self.just_rejected = false;
        } else {
            self.stats.rejected += 1;
            self.h = h_step * factor;
            self.just_rejected = true;
        }
        Ok(())
    }
}

/// One Dormand–Prince step of size `h` (negative to go backward) from
/// `(t, y)` with the fifth-order formula, without error control.
///
/// This is the same stage computation the adaptive driver uses, for the
/// convergence checks with a constant step.
#[cfg(test)]
pub(crate) fn rk_fixed_step<R: Rhs + ?Sized>(rhs: &mut R, t: f64, y: &[f64], h: f64) -> Vec<f64> {
    let mut work = Stages::new(y.len());
    rhs.eval(t, y, &mut work.k[0]);
    work.step(rhs, t, y, h);
    work.y_new
}

/// Safety factor of the controller (common practice).
const SAFETY: f64 = 0.9;
/// Smallest step ratio after one attempt.
const FAC_MIN: f64 = 0.2;
/// Largest step ratio after one accepted step.
const FAC_MAX: f64 = 10.0;

// Dormand–Prince 5(4) tableau (from memory; the order tests below check it).
const C: [f64; 7] = [0.0, 1.0 / 5.0, 3.0 / 10.0, 4.0 / 5.0, 8.0 / 9.0, 1.0, 1.0];
const A2: [f64; 1] = [1.0 / 5.0];
const A3: [f64; 2] = [3.0 / 40.0, 9.0 / 40.0];
const A4: [f64; 3] = [44.0 / 45.0, -56.0 / 15.0, 32.0 / 9.0];
const A5: [f64; 4] = [
    19372.0 / 6561.0,
    -25360.0 / 2187.0,
    64448.0 / 6561.0,
    -212.0 / 729.0,
];
const A6: [f64; 5] = [
    9017.0 / 3168.0,
    -355.0 / 33.0,
    46732.0 / 5247.0,
    49.0 / 176.0,
    -5103.0 / 18656.0,
];
/// Fifth-order weights, also the last row of the tableau (FSAL).
const B: [f64; 6] = [
    35.0 / 384.0,
    0.0,
    500.0 / 1113.0,
    125.0 / 192.0,
    -2187.0 / 6784.0,
    11.0 / 84.0,
];
/// Fifth-order weights minus fourth-order weights (the seventh stage has
/// weight 0 in the fifth-order formula and 1/40 in the fourth-order one).
const E: [f64; 7] = [
    71.0 / 57600.0,
    0.0,
    -71.0 / 16695.0,
    71.0 / 1920.0,
    -17253.0 / 339200.0,
    22.0 / 525.0,
    -1.0 / 40.0,
];

/// Stage vectors and scratch space for one step.
struct Stages {
    /// `k[0]` must hold `f(t, y)` before [`Stages::step`]; after it `k[6]`
    /// holds `f(t + h, y_new)`.
    k: [Vec<f64>; 7],
    y_stage: Vec<f64>,
    y_new: Vec<f64>,
    /// Signed size of the last step computed by [`Stages::step`].
    h_last: f64,
    /// Whether the last attempted step produced non-finite values.
    last_nonfinite: bool,
}

impl Stages {
    fn new(dim: usize) -> Self {
        Stages {
            k: std::array::from_fn(|_| vec![0.0; dim]),
            y_stage: vec![0.0; dim],
            y_new: vec![0.0; dim],
            h_last: 0.0,
            last_nonfinite: false,
        }
    }

    /// Compute stages 2..7 and the fifth-order solution `y_new`.
    fn step<R: Rhs + ?Sized>(&mut self, rhs: &mut R, t: f64, y: &[f64], h: f64) {
        let rows: [&[f64]; 5] = [&A2, &A3, &A4, &A5, &A6];
        for (stage, row) in rows.iter().enumerate() {
            let (done, rest) = self.k.split_at_mut(stage + 1);
            for (i, value) in self.y_stage.iter_mut().enumerate() {
                let incr: f64 = row.iter().zip(done.iter()).map(|(a, k)| a * k[i]).sum();
                *value = y[i] + h * incr;
            }
            rhs.eval(t + C[stage + 1] * h, &self.y_stage, &mut rest[0]);
        }
        for (i, value) in self.y_new.iter_mut().enumerate() {
            let incr: f64 = B.iter().zip(self.k.iter()).map(|(b, k)| b * k[i]).sum();
            *value = y[i] + h * incr;
        }
        let (_, last) = self.k.split_at_mut(6);
        rhs.eval(t + h, &self.y_new, &mut last[0]);
        self.h_last = h;
    }

    /// Root-mean-square of the embedded error estimate scaled by
    /// `atol + rtol · max(|y|, |y_new|)`; `<= 1` means the step is accepted.
    fn error_norm(&self, y: &[f64], opts: &OdeOptions) -> f64 {
        let dim = y.len();
        let mut sum = 0.0;
        for i in 0..dim {
            let est: f64 = E.iter().zip(self.k.iter()).map(|(e, k)| e * k[i]).sum();
            let scale = (opts.atol + opts.rtol * y[i].abs().max(self.y_new[i].abs()))
                .max(f64::MIN_POSITIVE);
            let ratio = self.h_last * est / scale;
            sum += ratio * ratio;
        }
        let norm = (sum / dim as f64).sqrt();
        if all_finite(&self.y_new) && all_finite(&self.k[6]) {
            norm
        } else {
            f64::NAN
        }
    }
}

/// Step-size ratio proposed by the controller for a step with scaled error
/// `err` (Hairer, Nørsett and Wanner 1993, §II.4, eq. 4.13; from memory).
fn step_factor(err: f64, just_rejected: bool) -> f64 {
    let fac_max = if just_rejected { 1.0 } else { FAC_MAX };
    if err <= 0.0 {
        return fac_max;
    }
    (SAFETY * err.powf(-0.2)).clamp(FAC_MIN, fac_max)
}

/// Initial step size, positive (Hairer, Nørsett and Wanner 1993, §II.4,
/// "starting step size"; from memory). Expects `work.k[0] = f(t, y)` and
/// uses one more evaluation of the right-hand side.
fn initial_step<R: Rhs + ?Sized>(
    rhs: &mut R,
    t: f64,
    y: &[f64],
    dir: f64,
    work: &mut Stages,
    opts: &OdeOptions,
    span: f64,
) -> f64 {
    let scale = |value: f64| (opts.atol + opts.rtol * value.abs()).max(f64::MIN_POSITIVE);
    let rms = |values: &mut dyn Iterator<Item = f64>| {
        let (mut sum, mut count) = (0.0, 0.0);
        for value in values {
            sum += value * value;
            count += 1.0;
        }
        (sum / count).sqrt()
    };
    let d0 = rms(&mut y.iter().map(|&v| v / scale(v)));
    let d1 = rms(&mut y.iter().zip(&work.k[0]).map(|(&v, &f)| f / scale(v)));
    let h0 = if d0 < 1e-5 || d1 < 1e-5 || !(d0 / d1).is_finite() {
        1e-6
    } else {
        0.01 * d0 / d1
    };
    let h0 = h0.min(opts.h_max).min(if span > 0.0 { span } else { h0 });
    for (i, value) in work.y_stage.iter_mut().enumerate() {
        *value = y[i] + dir * h0 * work.k[0][i];
    }
    let (first, rest) = work.k.split_at_mut(1);
    rhs.eval(t + dir * h0, &work.y_stage, &mut rest[0]);
    let d2 = rms(&mut y
        .iter()
        .zip(first[0].iter().zip(rest[0].iter()))
        .map(|(&v, (&f0, &f1))| (f1 - f0) / scale(v)))
        / h0;
    let d12 = d1.max(d2);
    let h1 = if d12.is_finite() && d12 > 1e-15 {
        (0.01 / d12).powf(0.2)
    } else {
        (h0 * 1e-3).max(1e-6)
    };
    let h = (100.0 * h0).min(h1).min(opts.h_max);
    if h.is_finite() && h > 0.0 {
        h
    } else {
        h0
    }
}

/// Check the inputs of [`integrate_at`].
fn validate(t0: f64, y0: &[f64], times: &[f64], opts: &OdeOptions) -> Result<(), OdeError> {
    let bad = |reason| Err(OdeError::InvalidInput { reason });
    if !t0.is_finite() {
        return bad("the initial time is not finite");
    }
    if !all_finite(y0) {
        return bad("the initial state is not finite");
    }
    if !all_finite(times) {
        return bad("an output time is not finite");
    }
    let forward = times.iter().all(|&t| t >= t0) && times.windows(2).all(|w| w[0] <= w[1]);
    let backward = times.iter().all(|&t| t <= t0) && times.windows(2).all(|w| w[0] >= w[1]);
    if !forward && !backward {
        return bad("output times must run monotonically away from the initial time");
    }
    if !(opts.rtol >= 0.0 && opts.rtol.is_finite() && opts.atol >= 0.0 && opts.atol.is_finite()) {
        return bad("tolerances must be finite and non-negative");
    }
    if opts.rtol == 0.0 && opts.atol == 0.0 {
        return bad("relative and absolute tolerance cannot both be zero");
    }
    if opts.h_max.is_nan() || opts.h_max <= 0.0 {
        return bad("the largest step must be positive");
    }
    Ok(())
}

fn all_finite(values: &[f64]) -> bool {
    values.iter().all(|v| v.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use std::cell::Cell;

    /// `y' = y cos t`, whose solution with `y(0) = 1` is `exp(sin t)`
    /// (derived: differentiate the closed form).
    fn exp_sin(t: f64, y: &[f64], dy: &mut [f64]) {
        for (d, v) in dy.iter_mut().zip(y) {
            *d = v * t.cos();
        }
    }

    /// Harmonic oscillator `q' = p, p' = -q`; from `(1, 0)` the solution is
    /// `(cos t, -sin t)`.
    fn oscillator(_t: f64, y: &[f64], dy: &mut [f64]) {
        dy[0] = y[1];
        dy[1] = -y[0];
    }

    fn never() -> bool {
        false
    }

    fn run(
        rhs: &mut dyn Rhs,
        t0: f64,
        y0: &[f64],
        times: &[f64],
        opts: &OdeOptions,
    ) -> Result<OdeOutput, OdeError> {
        integrate_at(rhs, t0, y0, times, opts, &never, &mut |_| {})
    }

    fn fixed(rhs: &mut dyn Rhs, t0: f64, y0: &[f64], t1: f64, n_steps: usize) -> Vec<f64> {
        let h = (t1 - t0) / n_steps as f64;
        let mut y = y0.to_vec();
        for step in 0..n_steps {
            y = rk_fixed_step(rhs, t0 + step as f64 * h, &y, h);
        }
        y
    }

    fn max_abs_diff(a: &[f64], b: &[f64]) -> f64 {
        a.iter()
            .zip(b)
            .map(|(x, y)| (x - y).abs())
            .fold(0.0, f64::max)
    }

    /// Observed orders `log2(e(h) / e(h/2))` for consecutive halvings.
    fn observed_orders(errors: &[f64]) -> Vec<f64> {
        errors.windows(2).map(|w| (w[0] / w[1]).log2()).collect()
    }

    // Dormand & Prince, "A family of embedded Runge–Kutta formulae",
    // J. Comput. Appl. Math. 6 (1980) 19–26 (from memory): the propagated
    // solution has order 5.
    #[test]
    fn fixed_step_order_is_five_on_exp_sin() {
        let t1: f64 = 2.0;
        let exact = t1.sin().exp();
        let errors: Vec<f64> = [10, 20, 40, 80]
            .iter()
            .map(|&n| (fixed(&mut exp_sin, 0.0, &[1.0], t1, n)[0] - exact).abs())
            .collect();
        for order in observed_orders(&errors) {
            assert!(
                (4.5..5.5).contains(&order),
                "order {order}, errors {errors:?}"
            );
        }
    }

    // Same source as above (from memory): order 5 on a linear system too.
    #[test]
    fn fixed_step_order_is_five_on_oscillator() {
        let t1 = 2.0 * std::f64::consts::PI;
        let exact = [t1.cos(), -t1.sin()];
        let errors: Vec<f64> = [16, 32, 64, 128]
            .iter()
            .map(|&n| max_abs_diff(&fixed(&mut oscillator, 0.0, &[1.0, 0.0], t1, n), &exact))
            .collect();
        for order in observed_orders(&errors) {
            assert!(
                (4.5..5.5).contains(&order),
                "order {order}, errors {errors:?}"
            );
        }
    }

    // The embedded difference is the local error of the fourth-order
    // formula, so it scales like h^5 for one step (same source, from memory).
    #[test]
    fn embedded_error_estimate_scales_like_h_to_the_fifth() {
        let opts = OdeOptions {
            rtol: 0.0,
            atol: 1.0,
            ..OdeOptions::default()
        };
        let estimate = |h: f64| {
            let mut work = Stages::new(1);
            let y = [1.0];
            exp_sin(0.3, &y, &mut work.k[0]);
            work.step(&mut exp_sin, 0.3, &y, h);
            work.error_norm(&y, &opts)
        };
        let errors: Vec<f64> = [0.2, 0.1, 0.05].iter().map(|&h| estimate(h)).collect();
        for order in observed_orders(&errors) {
            assert!(
                (4.5..5.5).contains(&order),
                "order {order}, errors {errors:?}"
            );
        }
    }

    #[test]
    fn adaptive_error_follows_tolerance_on_oscillator() {
        let t1 = 5.0 * 2.0 * std::f64::consts::PI;
        let exact = [t1.cos(), -t1.sin()];
        let mut previous = f64::INFINITY;
        for rtol in [1e-6, 1e-8, 1e-10] {
            let opts = OdeOptions {
                rtol,
                atol: rtol,
                ..OdeOptions::default()
            };
            let out = run(&mut oscillator, 0.0, &[1.0, 0.0], &[t1], &opts).unwrap();
            let error = max_abs_diff(&out.states[0], &exact);
            assert!(error < 100.0 * rtol, "rtol {rtol}: error {error}");
            assert!(
                error < previous,
                "rtol {rtol}: error {error} not below {previous}"
            );
            previous = error;
        }
    }

    #[test]
    fn adaptive_error_follows_tolerance_on_exp_sin() {
        let times: Vec<f64> = (1..=30).map(|i| 0.5 * i as f64).collect();
        let mut previous = f64::INFINITY;
        for rtol in [1e-6, 1e-8, 1e-10] {
            let opts = OdeOptions {
                rtol,
                atol: rtol,
                ..OdeOptions::default()
            };
            let out = run(&mut exp_sin, 0.0, &[1.0], &times, &opts).unwrap();
            assert_eq!(out.states.len(), times.len());
            let error = times
                .iter()
                .zip(&out.states)
                .map(|(t, y)| (y[0] - t.sin().exp()).abs() / t.sin().exp())
                .fold(0.0, f64::max);
            assert!(error < 100.0 * rtol, "rtol {rtol}: error {error}");
            assert!(
                error < previous,
                "rtol {rtol}: error {error} not below {previous}"
            );
            previous = error;
        }
    }

    #[test]
    fn default_options_are_accurate_and_count_work() {
        let t1 = 2.0 * std::f64::consts::PI;
        let out = run(
            &mut oscillator,
            0.0,
            &[1.0, 0.0],
            &[t1],
            &OdeOptions::default(),
        )
        .unwrap();
        assert!(max_abs_diff(&out.states[0], &[1.0, 0.0]) < 1e-9);
        let stats = out.stats;
        assert!(stats.steps > 10);
        // Two evaluations to start (f(t0, y0) and the initial-step probe),
        // then six per attempt thanks to first-same-as-last.
        assert_eq!(stats.evals, 2 + 6 * (stats.steps + stats.rejected));
    }

    #[test]
    fn output_times_are_hit_exactly_and_in_order() {
        let times = [0.0, 1e-9, 0.1, 0.1, 1.0, 3.0];
        let out = run(&mut exp_sin, 0.0, &[1.0], &times, &OdeOptions::default()).unwrap();
        assert_eq!(out.states.len(), times.len());
        assert_eq!(out.states[0], vec![1.0]);
        assert_eq!(out.states[2], out.states[3]);
        for (t, y) in times.iter().zip(&out.states) {
            assert!((y[0] - t.sin().exp()).abs() < 1e-9, "t = {t}");
        }
    }

    #[test]
    fn backward_integration_recovers_the_start() {
        let y1 = 2.0_f64.sin().exp();
        let times = [1.0, 0.0];
        let out = run(&mut exp_sin, 2.0, &[y1], &times, &OdeOptions::default()).unwrap();
        assert!((out.states[0][0] - 1.0_f64.sin().exp()).abs() < 1e-9);
        assert!((out.states[1][0] - 1.0).abs() < 1e-9);
    }

    #[test]
    fn step_limit_is_honoured() {
        let opts = OdeOptions {
            h_max: 0.01,
            ..OdeOptions::default()
        };
        let out = run(&mut oscillator, 0.0, &[1.0, 0.0], &[1.0], &opts).unwrap();
        assert!(out.stats.steps >= 100);
        assert!(out.stats.steps <= 102);
    }

    #[test]
    fn cancellation_stops_the_integration() {
        let polls = Cell::new(0usize);
        let cancel = || {
            polls.set(polls.get() + 1);
            polls.get() > 50
        };
        let opts = OdeOptions {
            h_max: 1e-3,
            ..OdeOptions::default()
        };
        let res = integrate_at(
            &mut oscillator,
            0.0,
            &[1.0, 0.0],
            &[100.0],
            &opts,
            &cancel,
            &mut |_| {},
        );
        match res {
            Err(OdeError::Cancelled { t }) => assert!(t > 0.0 && t < 1.0, "t = {t}"),
            other => panic!("expected cancellation, got {other:?}"),
        }
        assert_eq!(polls.get(), 51);
    }

    #[test]
    fn progress_is_reported_sparingly() {
        let calls = Cell::new(0usize);
        let last_t = Cell::new(0.0);
        let opts = OdeOptions {
            h_max: 1e-3,
            ..OdeOptions::default()
        };
        let out = integrate_at(
            &mut oscillator,
            0.0,
            &[1.0, 0.0],
            &[10.0],
            &opts,
            &never,
            &mut |t| {
                assert!(t >= last_t.get());
                last_t.set(t);
                calls.set(calls.get() + 1);
            },
        )
        .unwrap();
        let attempts = out.stats.steps + out.stats.rejected;
        assert_eq!(calls.get(), attempts / 1000);
        assert!(calls.get() >= 9);
    }

    // y' = y², y(0) = 1 has the solution 1/(1 - t), which blows up at t = 1.
    #[test]
    fn blow_up_is_an_error() {
        let mut square = |_t: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0] * y[0];
        let res = run(&mut square, 0.0, &[1.0], &[2.0], &OdeOptions::default());
        match res {
            Err(OdeError::StepTooSmall { t }) | Err(OdeError::NonFinite { t }) => {
                assert!((t - 1.0).abs() < 1e-3, "stopped at t = {t}");
            }
            other => panic!("expected a blow-up error, got {other:?}"),
        }
    }

    // y' = y³ blows up at t = 1/2 from y(0) = 1; with a loose tolerance the
    // steps overflow before they become too small.
    #[test]
    fn overflow_is_reported_as_non_finite_or_small_step() {
        let mut cube = |_t: f64, y: &[f64], dy: &mut [f64]| dy[0] = y[0].powi(3) * 1e100;
        let opts = OdeOptions {
            rtol: 1e-2,
            atol: 1e-2,
            ..OdeOptions::default()
        };
        let res = run(&mut cube, 0.0, &[1.0], &[1.0], &opts);
        assert!(
            matches!(
                res,
                Err(OdeError::NonFinite { .. }) | Err(OdeError::StepTooSmall { .. })
            ),
            "{res:?}"
        );
    }

    #[test]
    fn nan_from_the_rhs_is_an_error() {
        let mut nan_after = |t: f64, _y: &[f64], dy: &mut [f64]| {
            dy[0] = if t > 0.5 { f64::NAN } else { 1.0 };
        };
        let res = run(&mut nan_after, 0.0, &[0.0], &[1.0], &OdeOptions::default());
        match res {
            Err(OdeError::NonFinite { t }) => assert!(t <= 0.5 && t > 0.4, "t = {t}"),
            other => panic!("expected non-finite, got {other:?}"),
        }
        let mut nan_now = |_t: f64, _y: &[f64], dy: &mut [f64]| dy[0] = f64::NAN;
        let res = run(&mut nan_now, 0.0, &[0.0], &[1.0], &OdeOptions::default());
        assert_eq!(res, Err(OdeError::NonFinite { t: 0.0 }));
    }

    #[test]
    fn step_budget_is_an_error() {
        let opts = OdeOptions {
            max_steps: 10,
            ..OdeOptions::default()
        };
        let res = run(&mut oscillator, 0.0, &[1.0, 0.0], &[100.0], &opts);
        assert!(
            matches!(res, Err(OdeError::TooManySteps { steps: 10, .. })),
            "{res:?}"
        );
        // The message names no setting that does not exist.
        let text = res.err().map(|e| e.to_string()).unwrap_or_default();
        assert!(text.contains("a fixed limit"), "{text}");
        assert!(
            !text.contains("step limit") && !text.contains("loosen"),
            "{text}"
        );
    }

    #[test]
    fn bad_inputs_are_rejected() {
        let opts = OdeOptions::default();
        let cases: Vec<(f64, Vec<f64>, Vec<f64>, OdeOptions)> = vec![
            (0.0, vec![1.0], vec![1.0, 0.5], opts.clone()),
            (0.0, vec![1.0], vec![1.0, -1.0], opts.clone()),
            (0.0, vec![f64::NAN], vec![1.0], opts.clone()),
            (f64::INFINITY, vec![1.0], vec![1.0], opts.clone()),
            (0.0, vec![1.0], vec![f64::NAN], opts.clone()),
            (
                0.0,
                vec![1.0],
                vec![1.0],
                OdeOptions {
                    rtol: 0.0,
                    atol: 0.0,
                    ..opts.clone()
                },
            ),
            (
                0.0,
                vec![1.0],
                vec![1.0],
                OdeOptions {
                    rtol: -1.0,
                    ..opts.clone()
                },
            ),
            (
                0.0,
                vec![1.0],
                vec![1.0],
                OdeOptions {
                    h_max: 0.0,
                    ..opts.clone()
                },
            ),
            (
                0.0,
                vec![1.0],
                vec![1.0],
                OdeOptions {
                    h_max: f64::NAN,
                    ..opts.clone()
                },
            ),
        ];
        for (t0, y0, times, case_opts) in cases {
            let res = run(&mut exp_sin, t0, &y0, &times, &case_opts);
            assert!(
                matches!(res, Err(OdeError::InvalidInput { .. })),
                "{t0} {y0:?} {times:?}"
            );
        }
    }

    #[test]
    fn trivial_requests_need_no_steps() {
        let out = run(&mut exp_sin, 0.0, &[1.0], &[], &OdeOptions::default()).unwrap();
        assert!(out.states.is_empty());
        let out = run(&mut exp_sin, 0.0, &[], &[1.0, 2.0], &OdeOptions::default()).unwrap();
        assert_eq!(out.states, vec![Vec::<f64>::new(), Vec::new()]);
        let out = run(&mut exp_sin, 0.0, &[3.0], &[0.0], &OdeOptions::default()).unwrap();
        assert_eq!(out.states, vec![vec![3.0]]);
        assert_eq!(out.stats.steps, 0);
    }

    #[test]
    fn messages_are_lowercase_without_full_stop() {
        let errors = [
            OdeError::NonFinite { t: 1.0 },
            OdeError::StepTooSmall { t: 1.0 },
            OdeError::TooManySteps { t: 1.0, steps: 5 },
            OdeError::Cancelled { t: 1.0 },
            OdeError::InvalidInput { reason: "x" },
        ];
        for error in errors {
            let text = error.to_string();
            assert!(text.starts_with(|c: char| c.is_lowercase()), "{text}");
            assert!(!text.ends_with('.'), "{text}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]

        // Linear decay/growth y' = λ y has the solution y0 · exp(λ t).
        #[test]
        fn linear_equation_matches_exponential(
            lambda in -5.0f64..1.0,
            y0 in -10.0f64..10.0,
            t1 in 0.0f64..3.0,
        ) {
            let mut linear = |_t: f64, y: &[f64], dy: &mut [f64]| dy[0] = lambda * y[0];
            let out = run(&mut linear, 0.0, &[y0], &[t1], &OdeOptions::default()).unwrap();
            let exact = y0 * (lambda * t1).exp();
            prop_assert!((out.states[0][0] - exact).abs() <= 1e-8 * exact.abs().max(1.0));
        }
    }
}
