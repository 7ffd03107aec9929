//! Plain rendering in the input syntax.

use crate::core::{Expr, Field, Matrix};
use crate::lang::value::Value;

/// A field as `[e1, e2, …]`.
pub fn field(f: &Field) -> String {
    let parts: Vec<String> = f.0.iter().map(Expr::to_string).collect();
    format!("[{}]", parts.join(", "))
}

/// A matrix as `{a, b; c, d}`.
pub fn matrix(m: &Matrix) -> String {
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

/// Any value on one line.
pub fn value(v: &Value) -> String {
    match v {
        Value::Scalar(e) => e.to_string(),
        Value::Field(f) => field(&f.field),
        Value::Matrix(m) => matrix(m),
    }
}
