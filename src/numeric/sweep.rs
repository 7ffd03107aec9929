//! The summary of an eps sweep of `compare`: the error table with local
//! slopes between consecutive eps and marks at the integrator's floor, one
//! fitted slope per order over the asymptotic range, the largest eps that
//! meets a tolerance, and the CSV of every sample. Plain text from plain
//! numbers; no integration here.

use super::fit::{asymptotic_fit, local_slopes};
use super::validate::{CompareResult, FLOOR_FACTOR};

/// Formats a float compactly and deterministically: up to six decimals
/// between 1e-3 and 1e5, otherwise three significant decimals in
/// scientific notation.
pub(crate) fn num(v: f64) -> String {
    if v == 0.0 {
        "0".to_string()
    } else if v.abs() >= 1e-3 && v.abs() < 1e5 {
        let s = format!("{v:.6}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    } else {
        format!("{v:.3e}")
    }
}

/// A value with `digits` significant digits, trailing zeros dropped
/// (scientific notation outside 1e-4..1e6).
pub(crate) fn decimal(v: f64, digits: usize) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v == 0.0 {
            "0".to_string()
        } else {
            format!("{v}")
        };
    }
    let a = v.abs();
    if (1e-4..1e6).contains(&a) {
        let int_digits = a.log10().floor() as i64 + 1;
        let decimals = (digits as i64 - int_digits).clamp(0, 17) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        format!("{v:.prec$e}", prec = digits.saturating_sub(1))
    }
}

/// The `eps` values as a list for messages: `0.1, 0.05, 0.025`.
fn eps_list(eps: &[f64], idx: &[usize]) -> String {
    idx.iter()
        .filter_map(|&i| eps.get(i))
        .map(|e| num(*e))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Width of a column of the table.
const COL: usize = 13;

/// The error table: a row per eps, a column per order; between two rows,
/// the local slope of each order. Errors at the integrator's floor carry
/// `*` (and a footnote says what that means).
pub(crate) fn table_lines(eps: &[f64], results: &[CompareResult]) -> Vec<String> {
    let n_orders = results.first().map_or(0, |r| r.orders.len());
    let mut lines = Vec::new();
    let header: String = (1..=n_orders)
        .map(|k| format!("{:>COL$}", format!("order {k}")))
        .collect();
    lines.push(format!("{:>10}{header}", "eps"));
    let mut any_floor = false;
    let slopes: Vec<Vec<Option<f64>>> = (0..n_orders)
        .map(|k| {
            let ys: Vec<f64> = results.iter().map(|r| r.orders[k].max).collect();
            local_slopes(eps, &ys)
        })
        .collect();
    for (i, (e, r)) in eps.iter().zip(results).enumerate() {
        if i > 0 {
            let cols: String = (0..n_orders)
                .map(|k| {
                    let floor = r.orders[k].at_floor() || results[i - 1].orders[k].at_floor();
                    let text = match slopes[k].get(i - 1).copied().flatten() {
                        Some(s) => format!("({s:.2}){}", if floor { "*" } else { " " }),
                        None => "(n/a) ".to_string(),
                    };
                    format!("{text:>COL$}")
                })
                .collect();
            lines.push(format!("{:>10}{cols}", "slope"));
        }
        let cols: String = r
            .orders
            .iter()
            .map(|o| {
                let mark = if o.at_floor() {
                    any_floor = true;
                    "*"
                } else {
                    " "
                };
                format!("{:>COL$}", format!("{:.3e}{mark}", o.max))
            })
            .collect();
        lines.push(format!("{:>10}{cols}", num(*e)));
    }
    if any_floor {
        lines.push(format!(
            "  * at the integrator's floor (less than {FLOOR_FACTOR} times the change a 10 times tighter integration makes): left out of the fits; `set tolerance` lower to see further"
        ));
    }
    lines
}

/// The line `slope order K: S.SS (…)` for each order: the slope fitted over
/// the asymptotic range, which eps it used, which it left out and why.
pub(crate) fn slope_lines(eps: &[f64], results: &[CompareResult]) -> Vec<String> {
    let n_orders = results.first().map_or(0, |r| r.orders.len());
    (0..n_orders)
        .map(|k| {
            let ys: Vec<f64> = results.iter().map(|r| r.orders[k].max).collect();
            let floor: Vec<bool> = results.iter().map(|r| r.orders[k].at_floor()).collect();
            let floor_idx: Vec<usize> = (0..eps.len()).filter(|&i| floor[i]).collect();
            let floor_note = if floor_idx.is_empty() {
                String::new()
            } else {
                format!(
                    "; at the integrator's floor, left out: eps = {}",
                    eps_list(eps, &floor_idx)
                )
            };
            match asymptotic_fit(eps, &ys, &floor) {
                Some(fit) => {
                    let before: Vec<usize> = (0..eps.len())
                        .filter(|i| !floor[*i] && !fit.used.contains(i))
                        .collect();
                    let before_note = if before.is_empty() {
                        String::new()
                    } else {
                        format!(
                            "; before the asymptotic range, left out: eps = {}",
                            eps_list(eps, &before)
                        )
                    };
                    let settled = if fit.settled {
                        "local slopes settled"
                    } else {
                        "only the last two points: local slopes have not settled, sweep smaller eps"
                    };
                    format!(
                        "slope order {}: {:.2} (fit over eps = {}: {settled}{before_note}{floor_note})",
                        k + 1,
                        fit.slope,
                        eps_list(eps, &fit.used)
                    )
                }
                None => format!(
                    "slope order {}: n/a (fewer than two usable points{floor_note})",
                    k + 1
                ),
            }
        })
        .collect()
}

/// For a tolerance, the largest eps whose error meets it, per order.
pub(crate) fn tol_lines(eps: &[f64], results: &[CompareResult], tol: f64) -> Vec<String> {
    let n_orders = results.first().map_or(0, |r| r.orders.len());
    (0..n_orders)
        .map(|k| {
            let best = eps
                .iter()
                .zip(results)
                .filter(|(_, r)| r.orders[k].max <= tol)
                .map(|(e, _)| *e)
                .fold(None, |acc: Option<f64>, e| {
                    Some(acc.map_or(e, |a| a.max(e)))
                });
            match best {
                Some(e) => format!(
                    "tol {}: order {} meets it up to eps = {}",
                    num(tol),
                    k + 1,
                    num(e)
                ),
                None => format!(
                    "tol {}: order {} meets it for no eps in the sweep",
                    num(tol),
                    k + 1
                ),
            }
        })
        .collect()
}

/// Every sample as CSV: `eps,order,time,error,at_floor` (the last column
/// says whether the order's largest error at this eps is at the
/// integrator's floor). Numbers in Rust's shortest round-trip notation.
pub(crate) fn csv(eps: &[f64], results: &[CompareResult]) -> String {
    let mut out = String::from("eps,order,time,error,at_floor\n");
    for (e, r) in eps.iter().zip(results) {
        for (k, o) in r.orders.iter().enumerate() {
            let floor = o.at_floor();
            for (t, err) in r.times.iter().zip(&o.errors) {
                out.push_str(&format!("{e:e},{},{t:e},{err:e},{floor}\n", k + 1));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::numeric::validate::OrderErrors;

    fn result(errs: &[f64], floors: &[f64]) -> CompareResult {
        CompareResult {
            times: vec![1.0, 2.0],
            orders: errs
                .iter()
                .zip(floors)
                .map(|(e, f)| OrderErrors {
                    errors: vec![e / 2.0, *e],
                    max: *e,
                    floor: *f,
                })
                .collect(),
            steps: 10,
        }
    }

    #[test]
    fn floor_points_are_marked_and_left_out() {
        let eps = [0.2, 0.1, 0.05, 0.025];
        let results = vec![
            result(&[4e-2, 8e-6], &[1e-13, 1e-13]),
            result(&[2e-2, 1e-6], &[1e-13, 1e-13]),
            result(&[1e-2, 1.25e-7], &[1e-13, 1e-13]),
            result(&[5e-3, 1e-12], &[1e-12, 1e-12]),
        ];
        let table = table_lines(&eps, &results);
        assert!(table.iter().any(|l| l.contains("1.000e-12*")), "{table:?}");
        assert!(table
            .iter()
            .any(|l| l.contains("at the integrator's floor")));
        let slopes = slope_lines(&eps, &results);
        assert!(
            slopes[0].starts_with("slope order 1: 1.00 (fit over eps = 0.2, 0.1, 0.05, 0.025"),
            "{}",
            slopes[0]
        );
        assert!(
            slopes[1].starts_with("slope order 2: 3.00 (fit over eps = 0.2, 0.1, 0.05: local slopes settled; at the integrator's floor, left out: eps = 0.025)"),
            "{}",
            slopes[1]
        );
        let csv = csv(&eps, &results);
        assert_eq!(csv.lines().count(), 1 + 4 * 2 * 2);
        assert!(csv.contains("2.5e-2,2,2e0,1e-12,true"), "{csv}");
    }

    #[test]
    fn decimals_are_short() {
        assert_eq!(decimal(std::f64::consts::PI, 10), "3.141592654");
        assert_eq!(decimal(0.0, 10), "0");
        assert_eq!(decimal(-2.5, 10), "-2.5");
        assert_eq!(decimal(1.5e-17, 4), "1.500e-17");
    }
}
