//! Least-squares fits used to summarise numerical experiments.
//!
//! This module owns the log–log slope that turns an error table into an
//! observed order ("the error falls like eps^S"). It works on plain `f64`
//! slices and knows nothing about integrators, sessions or output.

/// Least-squares slope of `ln y` against `ln x`.
///
/// Points are paired index by index; extra values in the longer slice are
/// ignored. Pairs where either value is not finite or not positive are skipped
/// (an error of exactly zero or a failed run cannot sit on a log axis).
/// Returns `None` when fewer than two usable points remain or when all
/// usable `x` are equal, so no slope is defined.
pub fn loglog_slope(xs: &[f64], ys: &[f64]) -> Option<f64> {
    let points: Vec<(f64, f64)> = xs
        .iter()
        .zip(ys)
        .filter(|(x, y)| is_loggable(**x) && is_loggable(**y))
        .map(|(x, y)| (x.ln(), y.ln()))
        .collect();
    if points.len() < 2 {
        return None;
    }
    let count = points.len() as f64;
    let mean_x = points.iter().map(|p| p.0).sum::<f64>() / count;
    let mean_y = points.iter().map(|p| p.1).sum::<f64>() / count;
    // Centred sums keep the fit accurate when the logs share a large offset.
    let sxx: f64 = points.iter().map(|p| (p.0 - mean_x).powi(2)).sum();
    let sxy: f64 = points.iter().map(|p| (p.0 - mean_x) * (p.1 - mean_y)).sum();
    let spread = points
        .iter()
        .map(|p| (p.0 - mean_x).abs())
        .fold(0.0, f64::max);
    if spread <= 1e-12 * mean_x.abs().max(1.0) || sxx <= 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    slope.is_finite().then_some(slope)
}

/// Local slopes `ln(y_i / y_{i+1}) / ln(x_i / x_{i+1})` between consecutive
/// points; `None` where either point cannot sit on a log axis or the two
/// `x` are equal.
pub(crate) fn local_slopes(xs: &[f64], ys: &[f64]) -> Vec<Option<f64>> {
    let n = xs.len().min(ys.len());
    (1..n)
        .map(|i| {
            let (x0, x1, y0, y1) = (xs[i - 1], xs[i], ys[i - 1], ys[i]);
            if !(is_loggable(x0) && is_loggable(x1) && is_loggable(y0) && is_loggable(y1)) {
                return None;
            }
            let dx = (x0 / x1).ln();
            if dx.abs() <= 1e-12 {
                return None;
            }
            let s = (y0 / y1).ln() / dx;
            s.is_finite().then_some(s)
        })
        .collect()
}

/// How far local slopes may spread and still count as settled: 0.2, or a
/// tenth of their size for steep slopes (common practice for observed
/// orders, where a few per cent of noise is usual).
fn settled_band(slopes: &[f64]) -> f64 {
    let mean = slopes.iter().sum::<f64>() / slopes.len().max(1) as f64;
    (0.1 * mean.abs()).max(0.2)
}

/// A slope fitted over the asymptotic range of a sweep.
#[derive(Clone, Debug, PartialEq)]
pub(crate) struct AsymptoticFit {
    /// The fitted slope of `ln y` against `ln x` over `used`.
    pub slope: f64,
    /// Indices (into the input) of the points the fit used, in input order.
    pub used: Vec<usize>,
    /// Whether the local slopes over `used` agree within the band
    /// (false: only the last two usable points were fitted, and the
    /// slope may still be changing).
    pub settled: bool,
}

/// Fits the slope over the asymptotic range: the points are taken in order
/// of decreasing `x` (the sweep goes towards the limit `x -> 0`), points
/// flagged in `excluded` (at the integrator's floor) and points that cannot
/// sit on a log axis are left out, and the range is the longest run of
/// usable points ending at the smallest usable `x` over which the local
/// slopes stay within a band (0.2, or 10% for steep slopes). `None` when
/// fewer than two points are usable.
pub(crate) fn asymptotic_fit(xs: &[f64], ys: &[f64], excluded: &[bool]) -> Option<AsymptoticFit> {
    let n = xs.len().min(ys.len());
    let mut usable: Vec<usize> = (0..n)
        .filter(|&i| {
            !excluded.get(i).copied().unwrap_or(false) && is_loggable(xs[i]) && is_loggable(ys[i])
        })
        .collect();
    // Largest x first; ties keep input order.
    usable.sort_by(|&a, &b| xs[b].total_cmp(&xs[a]).then(a.cmp(&b)));
    usable.dedup_by(|a, b| xs[*a] == xs[*b]);
    if usable.len() < 2 {
        return None;
    }
    let ux: Vec<f64> = usable.iter().map(|&i| xs[i]).collect();
    let uy: Vec<f64> = usable.iter().map(|&i| ys[i]).collect();
    let local: Vec<f64> = local_slopes(&ux, &uy).into_iter().flatten().collect();
    if local.len() + 1 != usable.len() {
        return None;
    }
    // Grow the range from the smallest x while the local slopes agree.
    let last = local.len() - 1;
    let mut start = last;
    while start > 0 {
        let window = &local[start - 1..];
        let lo = window.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = window.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if hi - lo > settled_band(window) {
            break;
        }
        start -= 1;
    }
    // `start..=last` are local slopes, so points `start..=last + 1`.
    let chosen = &usable[start..];
    let settled = chosen.len() >= 3;
    let cx: Vec<f64> = chosen.iter().map(|&i| xs[i]).collect();
    let cy: Vec<f64> = chosen.iter().map(|&i| ys[i]).collect();
    let slope = loglog_slope(&cx, &cy)?;
    let mut used = chosen.to_vec();
    used.sort_unstable();
    Some(AsymptoticFit {
        slope,
        used,
        settled,
    })
}

fn is_loggable(value: f64) -> bool {
    value.is_finite() && value > 0.0
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn exact_power_laws_give_their_exponent() {
        let xs = [0.2, 0.1, 0.05, 0.025];
        for exponent in [1.0, 2.0, 3.5, -1.0, 0.0] {
            let ys: Vec<f64> = xs.iter().map(|x: &f64| 7.0 * x.powf(exponent)).collect();
            let slope = loglog_slope(&xs, &ys).unwrap();
            assert!((slope - exponent).abs() < 1e-12, "{exponent}: {slope}");
        }
    }

    #[test]
    fn unusable_points_are_skipped() {
        let xs = [0.2, 0.1, f64::NAN, 0.05, -1.0, 0.025, 0.0125];
        let ys = [0.04, 0.01, 1.0, 0.0025, 1.0, 0.0, f64::INFINITY];
        let slope = loglog_slope(&xs, &ys).unwrap();
        assert!((slope - 2.0).abs() < 1e-12, "{slope}");
    }

    #[test]
    fn too_few_or_degenerate_points_give_none() {
        assert_eq!(loglog_slope(&[], &[]), None);
        assert_eq!(loglog_slope(&[1.0], &[2.0]), None);
        assert_eq!(loglog_slope(&[1.0, 2.0], &[0.0, 3.0]), None);
        assert_eq!(loglog_slope(&[2.0, 2.0, 2.0], &[1.0, 2.0, 3.0]), None);
    }

    #[test]
    fn unequal_lengths_use_the_common_prefix() {
        let slope = loglog_slope(&[1.0, 2.0, 4.0], &[1.0, 4.0]).unwrap();
        assert!((slope - 2.0).abs() < 1e-12);
    }

    #[test]
    fn local_slopes_between_neighbours() {
        let xs = [0.2, 0.1, 0.05];
        let ys = [0.04, 0.01, 0.0];
        let s = local_slopes(&xs, &ys);
        assert_eq!(s.len(), 2);
        assert!((s[0].unwrap() - 2.0).abs() < 1e-12);
        assert_eq!(s[1], None);
    }

    // A pre-asymptotic first point (the error has not yet reached its
    // power law) must not enter the fit: y = x^3 (1 + 20 x^2) has local
    // slopes that approach 3 only for small x.
    #[test]
    fn the_fit_leaves_out_the_pre_asymptotic_range() {
        let xs = [0.4, 0.2, 0.1, 0.05, 0.025, 0.0125];
        let ys: Vec<f64> = xs
            .iter()
            .map(|x: &f64| x.powi(3) * (1.0 + 20.0 * x * x))
            .collect();
        let all = loglog_slope(&xs, &ys).unwrap();
        assert!(all > 3.3, "{all}");
        let fit = asymptotic_fit(&xs, &ys, &[false; 6]).unwrap();
        assert!((fit.slope - 3.0).abs() < 0.15, "{fit:?}");
        assert!(!fit.used.contains(&0) && fit.used.contains(&5), "{fit:?}");
        assert!(fit.settled);
    }

    #[test]
    fn excluded_points_stay_out_and_too_few_give_none() {
        let xs = [0.2, 0.1, 0.05, 0.025];
        let ys = [4e-3, 1e-3, 2.5e-4, 2e-4];
        let fit = asymptotic_fit(&xs, &ys, &[false, false, false, true]).unwrap();
        assert_eq!(fit.used, vec![0, 1, 2]);
        assert!((fit.slope - 2.0).abs() < 1e-12);
        assert_eq!(asymptotic_fit(&xs, &ys, &[true, true, true, false]), None);
    }

    #[test]
    fn unsettled_slopes_fit_the_last_two_points() {
        let xs = [0.2, 0.1, 0.05];
        let ys = [1.0, 0.5, 0.0625];
        let fit = asymptotic_fit(&xs, &ys, &[false; 3]).unwrap();
        assert_eq!(fit.used, vec![1, 2]);
        assert!(!fit.settled);
        assert!((fit.slope - 3.0).abs() < 1e-12);
    }

    proptest! {
        // Multiplicative noise (1 + n) with |n| <= 5% shifts ln y by at most
        // d = -ln(0.95). The fitted slope is linear in ln y with weights
        // w_i = (u_i - mean u) / sum (u_j - mean u)^2 that sum to zero, so
        // the slope moves by at most d * sum |w_i| (derived).
        #[test]
        fn noisy_power_laws_stay_close(
            exponent in -3.0f64..5.0,
            scale in 1e-6f64..1e6,
            noise in proptest::collection::vec(-0.05f64..0.05, 8),
        ) {
            let xs: Vec<f64> = (0..8).map(|i| 10f64.powf(-2.0 * i as f64 / 7.0)).collect();
            let ys: Vec<f64> = xs
                .iter()
                .zip(&noise)
                .map(|(x, n)| scale * x.powf(exponent) * (1.0 + n))
                .collect();
            let slope = loglog_slope(&xs, &ys).unwrap();
            let logs: Vec<f64> = xs.iter().map(|x| x.ln()).collect();
            let mean = logs.iter().sum::<f64>() / logs.len() as f64;
            let sxx: f64 = logs.iter().map(|u| (u - mean).powi(2)).sum();
            let weight_sum: f64 = logs.iter().map(|u| (u - mean).abs() / sxx).sum();
            let bound = -(0.95f64.ln()) * weight_sum + 1e-12;
            prop_assert!((slope - exponent).abs() <= bound, "{} vs {}", slope, exponent);
            prop_assert!(bound < 0.1);
        }
    }
}
