//! Plain rendering in the input syntax.

use crate::core::{Expr, Field, Matrix};

/// A field as `[e1, e2, …]`.
pub(crate) fn field(f: &Field) -> String {
    let parts: Vec<String> = f.0.iter().map(Expr::to_string).collect();
    format!("[{}]", parts.join(", "))
}

/// A matrix as `{a, b; c, d}`.
pub(crate) fn matrix(m: &Matrix) -> String {
    let rows: Vec<String> = (0..m.rows)
        .map(|i| {
            m.row(i)
                .iter()
                .map(Expr::to_string)
                .collect::<Vec<_>>()
                .join(", ")
        })
        .collect();
    format!("{{{}}}", rows.join("; "))
}
