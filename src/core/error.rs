//! Typed errors of the exact core.
//!
//! Each variant says when it happens; messages start lowercase, quote the
//! offending input and carry a hint where one helps. Spans are attached by
//! the language layer, which knows where an operand came from.

use std::fmt;

/// Term products one statement may do, per unit of the term budget (see
/// [`LimitKind::Work`]).
pub const WORK_PER_TERM: u64 = 250;

/// Which limit was hit.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LimitKind {
    /// Terms in one expression (`set budget N`).
    Terms,
    /// Decimal digits of one coefficient.
    Digits,
    /// Order of a series command.
    Order,
    /// Nesting depth of the input.
    Depth,
    /// An exponent outside the machine range.
    Exponent,
    /// A statement needing more term multiplications than the term budget
    /// allows (`set budget N`, times `limits::WORK_PER_TERM`).
    Work,
    /// The machine refused memory for a growing result (the limit is the
    /// number of bytes asked for).
    Memory,
}

/// An error of the exact core.
#[derive(Clone, Debug, PartialEq)]
pub enum CoreError {
    /// Division by zero.
    DivisionByZero,
    /// Division by an expression that is not a number or a monomial.
    DivisionBySum { divisor: String },
    /// A negative power of something that is not a monomial.
    NegativePowerOfSum { base: String },
    /// A fractional or symbolic exponent.
    BadExponent { exponent: String },
    /// `sin`, `cos` or `exp` of an argument that is not linear in the state.
    NonlinearArgument { func: &'static str, arg: String },
    /// An unspecified function applied to something other than a linear
    /// form in the state plus a constant, or with the wrong arity.
    FunctionArgument { call: String, reason: String },
    /// A parameter inside `sin`, `cos` or `exp`.
    ParameterInArgument { func: &'static str, name: String },
    /// A constant inside `sin`/`cos`/`exp` that is not a rational multiple of pi
    /// usable exactly.
    ConstantInArgument { func: &'static str, arg: String },
    /// A symbolic frequency such as `cos(w*t)`.
    SymbolicFrequency { arg: String },
    /// Time inside `exp`.
    TimeInExp { arg: String },
    /// The value is not expressible exactly (e.g. `sin(pi/3)`).
    Irrational { what: String },
    /// Substitution would leave the algebra of normal forms.
    OutsideAlgebra { what: String },
    /// The expression is not periodic in `t`.
    NotPeriodic { term: String },
    /// Dimensions do not agree.
    Dimension { what: String },
    /// A computation was refused with a reason (a form not supported).
    Refused { reason: String },
    /// A limit was hit.
    Limit { kind: LimitKind, limit: u64 },
    /// Ctrl-C.
    Interrupted,
}

impl fmt::Display for CoreError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        use CoreError::*;
        match self {
            DivisionByZero => write!(f, "division by zero"),
            DivisionBySum { divisor } => write!(
                f,
                "cannot divide by `{divisor}`: only numbers and monomials divide exactly \
                 (hint: introduce a parameter for it, e.g. `param c` and write `1/c`)"
            ),
            NegativePowerOfSum { base } => write!(
                f,
                "cannot raise `{base}` to a negative power: only monomials have exact inverses \
                 (hint: introduce a parameter)"
            ),
            BadExponent { exponent } => {
                write!(f, "exponent `{exponent}` must be an integer number")
            }
            NonlinearArgument { func, arg } => write!(
                f,
                "`{func}` needs an argument linear in the state variables, got `{arg}`"
            ),
            FunctionArgument { call, reason } => write!(
                f,
                "`{call}`: an unspecified function takes arguments linear in the state plus a \
                 constant (a number and/or a multiple of pi); {reason}"
            ),
            ParameterInArgument { func, name } => write!(
                f,
                "parameter `{name}` inside `{func}(...)` is not supported \
                 (hint: for a phase write `a*cos(x) + b*sin(x)` with parameters a, b)"
            ),
            ConstantInArgument { func, arg } => write!(
                f,
                "constant in `{func}({arg})` must be a multiple of pi/2 to stay exact \
                 (hint: use parameters for a phase: `a*cos(x) + b*sin(x)`)"
            ),
            SymbolicFrequency { arg } => write!(
                f,
                "symbolic frequency in `{arg}`: frequencies must be rational numbers \
                 (hint: rescale time s = w*t and write eps = 1/w)"
            ),
            TimeInExp { arg } => write!(f, "time inside `exp({arg})` is not supported"),
            Irrational { what } => write!(f, "`{what}` is not a rational number"),
            OutsideAlgebra { what } => {
                write!(f, "the result would leave exact normal forms: {what}")
            }
            NotPeriodic { term } => write!(f, "not periodic in t: term `{term}`"),
            Dimension { what } => write!(f, "dimension mismatch: {what}"),
            Refused { reason } => write!(f, "{reason}"),
            Limit { kind, limit } => match kind {
                LimitKind::Terms => write!(
                    f,
                    "term budget exceeded: a result would hold more than {limit} terms \
                     (a large coefficient counts as a term per 64 bytes); \
                     raise it with `set budget N`"
                ),
                LimitKind::Digits => write!(
                    f,
                    "integer size limit exceeded: a coefficient would have more than {limit} \
                     digits (a fixed limit; `set budget` does not change it)"
                ),
                LimitKind::Order => write!(
                    f,
                    "order limit exceeded: the highest order is {limit} \
                     (a fixed limit; `set budget` does not change it)"
                ),
                LimitKind::Depth => write!(
                    f,
                    "nesting limit exceeded: at most {limit} nested brackets \
                     (a fixed limit: define inner parts as names)"
                ),
                LimitKind::Work => write!(
                    f,
                    "term budget exceeded: the computation would need more than {} term \
                     multiplications ({} per term of the budget of {limit}); \
                     raise it with `set budget N`",
                    limit.saturating_mul(WORK_PER_TERM),
                    WORK_PER_TERM
                ),
                LimitKind::Memory => write!(
                    f,
                    "out of memory: a growing result needed about {limit} more bytes and the \
                     machine refused them; the session is intact (lower the budget with \
                     `set budget N`, or split the computation)"
                ),
                LimitKind::Exponent => write!(
                    f,
                    "exponent out of range: at most {limit} in absolute value \
                     (a fixed limit; `set budget` does not change it)"
                ),
            },
            Interrupted => write!(f, "interrupted"),
        }
    }
}

impl std::error::Error for CoreError {}

/// Result type of the core.
pub type CoreResult<T> = Result<T, CoreError>;
