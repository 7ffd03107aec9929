//! Values held by a session and produced by evaluation.
//!
//! Kinds: scalar, field, matrix (each possibly time-varying). A field may
//! remember how it was written as `Σ c_i(t) X_i` over named fields (its
//! combination, used by the structural free-Lie route) and may carry a
//! structural display (a Lie polynomial in names) when it is the result of
//! `magnus`, `average` or `bch`.

use std::sync::Arc;

use crate::core::calc::Period;
use crate::core::{Expr, Field, Matrix, Sym};
use crate::render::{latex, plain};

/// A linear combination `Σ c_i X_i` of named fields with scalar
/// coefficients free of the state (functions of time and parameters).
#[derive(Clone, Debug, PartialEq)]
pub struct FieldCombination {
    /// `(name, value of the field, coefficient)` in order of first appearance.
    pub parts: Vec<(String, Field, Expr)>,
}

/// One term of a structural display: a coefficient times a bracket of names.
#[derive(Clone, Debug, PartialEq)]
pub struct BracketTerm {
    /// The coefficient (may contain eps, pi and parameters).
    pub coeff: Expr,
    /// The bracket in input syntax, e.g. `[X1, [X1, X2]]`.
    pub bracket: String,
    /// The bracket in LaTeX.
    pub latex: String,
}

/// A field value with its optional structure.
#[derive(Clone, Debug, PartialEq)]
pub struct FieldValue {
    /// The concrete field.
    pub field: Field,
    /// How it was written over named fields, when known.
    pub combo: Option<FieldCombination>,
    /// A structural display (Lie polynomial), when known.
    pub structure: Option<Vec<BracketTerm>>,
    /// The averaging result behind this field, for `compare`.
    pub averaged: Option<Arc<AveragedInfo>>,
}

/// What `compare` needs to know of an averaged model.
#[derive(Clone, Debug, PartialEq)]
pub struct AveragedInfo {
    /// The small parameter.
    pub eps: Sym,
    /// `F_1..F_N` (autonomous, without eps factors).
    pub orders: Vec<Field>,
    /// The classical generator `w_1..w_N`, when computed.
    pub transform: Option<Vec<Field>>,
    /// The period of the averaged standard form (and of the change of
    /// coordinates): original and model agree in coordinates at its multiples.
    pub period: Period,
    /// Classical (near-identity transform) rather than stroboscopic.
    pub classic: bool,
    /// The field whose time-1 flow is the change of coordinates at
    /// multiples of the period, when it is not the identity (a classical
    /// fast-oscillation result: `x = exp(Y(0))(y + W(0, y))`).
    pub outer: Option<Field>,
}

/// A value.
#[derive(Clone, Debug, PartialEq)]
pub enum Value {
    /// A scalar expression.
    Scalar(Expr),
    /// A vector field.
    Field(FieldValue),
    /// A matrix.
    Matrix(Matrix),
}

impl Value {
    /// A plain field without structure.
    pub fn field(f: Field) -> Value {
        Value::Field(FieldValue {
            field: f,
            combo: None,
            structure: None,
            averaged: None,
        })
    }

    /// The kind's name for messages.
    pub fn kind_name(&self) -> &'static str {
        match self {
            Value::Scalar(e) if e.is_time_varying() => "time-varying scalar",
            Value::Scalar(_) => "scalar",
            Value::Field(f) if f.field.0.iter().any(Expr::is_time_varying) => "time-varying field",
            Value::Field(_) => "field",
            Value::Matrix(_) => "matrix",
        }
    }

    /// Number of terms (for summaries).
    pub fn n_terms(&self) -> usize {
        match self {
            Value::Scalar(e) => e.len(),
            Value::Field(f) => f.field.n_terms(),
            Value::Matrix(m) => m.data.iter().map(Expr::len).sum(),
        }
    }

    /// The value on one line in the input syntax (it can be pasted back).
    pub fn plain(&self) -> String {
        match self {
            Value::Scalar(e) => e.to_string(),
            Value::Field(f) => plain::field(&f.field),
            Value::Matrix(m) => plain::matrix(m),
        }
    }

    /// The value in LaTeX over the state coordinates `states`: an averaged
    /// result as an `aligned` block of its equations of motion, other
    /// fields and matrices as `pmatrix`, scalars inline.
    pub fn latex(&self, states: &[Sym]) -> String {
        match self {
            Value::Scalar(e) => latex::expr(e, states),
            Value::Field(f) => match &f.averaged {
                Some(info) => {
                    let coords = self.coordinate_names(states);
                    latex::aligned(&f.field, info.eps, states, &coords)
                }
                None => latex::field(&f.field, states),
            },
            Value::Matrix(m) => latex::matrix(m, states),
        }
    }

    /// The names of the coordinates the value is written in, for the
    /// left-hand sides of an aligned block. The one place that decides
    /// them: today the session's state names.
    pub fn coordinate_names(&self, states: &[Sym]) -> Vec<String> {
        states.iter().map(|s| s.name()).collect()
    }
}
