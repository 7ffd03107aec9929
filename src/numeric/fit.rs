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
