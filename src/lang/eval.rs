//! Evaluation of expressions against a session: names resolved, kinds
//! checked, built-ins applied. Errors carry the span of the operand at fault.

use std::collections::HashMap;

use super::ast::{Arg, BinOp, ExprKind, Ident, Span, SyntaxExpr};
use super::builtins::{self, Arity, Builtin, BUILTIN_NAMES};
use super::session::{ErrorKind, Session, SessionError, SessionResult, SymKind};
use super::value::{FieldCombination, FieldValue, Value};
use crate::core::calc::common_period;
use crate::core::func::{Arg as FuncArg, Definition, Signature};
use crate::core::{CoreError, Expr, Field, Matrix, Sym, Q};
use std::sync::Arc;

/// The entries of a value: a scalar, a field's components or a matrix's
/// entries.
fn entries_of(value: &Value) -> Vec<&Expr> {
    match value {
        Value::Scalar(x) => vec![x],
        Value::Field(f) => f.field.0.iter().collect(),
        Value::Matrix(m) => m.data.iter().collect(),
    }
}

fn kind_err(span: Span, op: &str, left: &Value, right: Option<&Value>) -> SessionError {
    SessionError::at(
        span,
        ErrorKind::Kind {
            op: op.to_string(),
            left: left.kind_name(),
            right: right.map(Value::kind_name),
        },
    )
}

/// The usage line of `plug`, for its errors.
fn plug_usage() -> String {
    let usage = builtins::find("plug").map_or("", |builtin| builtin.usage);
    format!("usage: {usage}")
}

/// The symbol name of an iterated integral `iint(u1, u2)`.
pub fn iint_name(args: &[String]) -> String {
    crate::series::shuffle::iint_name(args)
}

/// A value with its products of iterated integrals rewritten as sums
/// (shuffle identity), so that its normal form is canonical.
pub(crate) fn reduce_iint_products(v: Value) -> Result<Value, CoreError> {
    use crate::series::shuffle::reduce_products;
    Ok(match v {
        Value::Scalar(x) => Value::Scalar(reduce_products(&x)?),
        Value::Field(mut f) => {
            f.field = f.field.map(reduce_products)?;
            Value::Field(f)
        }
        Value::Matrix(m) => Value::Matrix(Matrix {
            data: m
                .data
                .iter()
                .map(reduce_products)
                .collect::<Result<_, _>>()?,
            ..m
        }),
    })
}

impl Session {
    /// True if and only if `e` mentions no state coordinate.
    pub(crate) fn is_state_free(&self, e: &Expr) -> bool {
        !e.symbols().iter().any(|s| self.states.contains(s))
    }

    /// The kind of a declared symbol.
    pub(crate) fn sym_kind(&self, name: &str) -> Option<SymKind> {
        self.symbols.get(name).copied()
    }

    /// Suggests the nearest known name.
    pub(crate) fn suggest(&self, name: &str) -> Option<String> {
        let known = self.known_names();
        let candidates = known
            .iter()
            .map(String::as_str)
            .chain(BUILTIN_NAMES.iter().copied())
            .chain(["t", "pi"]);
        super::diag::nearest(name, candidates).map(str::to_string)
    }

    fn unknown(&self, name: &str, span: Span) -> SessionError {
        SessionError::at(
            span,
            ErrorKind::UnknownName {
                name: name.to_string(),
                suggestion: self.suggest(name),
            },
        )
    }

    /// Evaluates an expression.
    pub fn eval(&self, e: &SyntaxExpr) -> SessionResult<Value> {
        let core = |err: CoreError| SessionError::core(e.span, err);
        match &e.kind {
            ExprKind::Num(text) => {
                number_size_ok(text).map_err(core)?;
                let max_digits = crate::core::limits::limits().max_digits;
                let q = Q::parse_decimal(text, max_digits).ok_or_else(|| {
                    SessionError::invalid(
                        e.span,
                        format!("number `{text}` is malformed or too large"),
                    )
                })?;
                Ok(Value::Scalar(Expr::num(q)))
            }
            ExprKind::Name(name) => self.eval_name(name, e.span),
            ExprKind::Neg(inner) => match self.eval(inner)? {
                Value::Scalar(x) => Ok(Value::Scalar(x.neg())),
                Value::Field(f) => Ok(Value::Field(
                    scale_field_value(&f, &Expr::int(-1)).map_err(core)?,
                )),
                Value::Matrix(m) => Ok(Value::Matrix(m.mul_expr(&Expr::int(-1)).map_err(core)?)),
            },
            ExprKind::Bin(op, a, b) => {
                let v = self.eval_bin(*op, a, b, e.span)?;
                match op {
                    BinOp::Mul | BinOp::Div | BinOp::Pow => reduce_iint_products(v).map_err(core),
                    BinOp::Add | BinOp::Sub => Ok(v),
                }
            }
            ExprKind::Call(name, args) => self.eval_call(name, args, e.span),
            ExprKind::Apply(target, args) => {
                if let Some(v) = self.eval_derivative_call(target, args, e.span)? {
                    return Ok(v);
                }
                let v = self.eval(target)?;
                self.apply_field(v, target.span, args, e.span)
            }
            ExprKind::List(items) => self.eval_list(items, e.span),
            ExprKind::Matrix(rows) => {
                let mut out = Vec::with_capacity(rows.len());
                for row in rows {
                    let mut r = Vec::with_capacity(row.len());
                    for item in row {
                        r.push(self.eval_scalar(item, "a matrix entry")?);
                    }
                    out.push(r);
                }
                Ok(Value::Matrix(Matrix::from_rows(out).map_err(core)?))
            }
        }
    }

    /// Evaluates an expression that must be a scalar.
    pub fn eval_scalar(&self, e: &SyntaxExpr, what: &str) -> SessionResult<Expr> {
        match self.eval(e)? {
            Value::Scalar(x) => Ok(x),
            other => Err(SessionError::invalid(
                e.span,
                format!("{what} must be a scalar, got a {}", other.kind_name()),
            )),
        }
    }

    /// Evaluates an expression that must be a field.
    pub fn eval_field(&self, e: &SyntaxExpr, what: &str) -> SessionResult<FieldValue> {
        match self.eval(e)? {
            Value::Field(f) => Ok(f),
            other => Err(SessionError::invalid(
                e.span,
                format!("{what} must be a field, got a {}", other.kind_name()),
            )),
        }
    }

    /// Evaluates a non-negative integer.
    pub fn eval_count(&self, e: &SyntaxExpr, what: &str) -> SessionResult<i64> {
        let x = self.eval_scalar(e, what)?;
        match x.as_number().and_then(|q| q.to_i64()) {
            Some(n) => Ok(n),
            None => Err(SessionError::invalid(
                e.span,
                format!("{what} must be an integer number, got `{x}`"),
            )),
        }
    }

    fn eval_name(&self, name: &str, span: Span) -> SessionResult<Value> {
        match name {
            "t" => return Ok(Value::Scalar(Expr::sym(Sym::T))),
            "pi" => return Ok(Value::Scalar(Expr::sym(Sym::PI))),
            _ => {}
        }
        if let Some(p) = self.placeholder(name) {
            return Ok(Value::Scalar(Expr::sym(p)));
        }
        if let Some(f) = self.funcs.get(name) {
            return Err(SessionError::invalid(
                span,
                format!(
                    "`{name}` is an unspecified function: apply it to the state, e.g. `{name}({})`",
                    f.params.join(", ")
                ),
            ));
        }
        if self.symbols.contains_key(name) {
            return Ok(Value::Scalar(Expr::sym(Sym::new(name))));
        }
        match self.names.get(name) {
            Some(Value::Field(f)) => {
                let mut f = f.clone();
                if f.combo.is_none() && !f.field.0.iter().any(Expr::is_time_varying) {
                    f.combo = Some(FieldCombination {
                        parts: vec![(name.to_string(), f.field.clone(), Expr::int(1))],
                    });
                }
                Ok(Value::Field(f))
            }
            Some(v) => Ok(v.clone()),
            None => Err(self.unknown(name, span)),
        }
    }

    fn eval_bin(
        &self,
        op: BinOp,
        a: &SyntaxExpr,
        b: &SyntaxExpr,
        span: Span,
    ) -> SessionResult<Value> {
        let core = |err: CoreError| SessionError::core(span, err);
        if op == BinOp::Pow {
            let base = self.eval(a)?;
            let n = self.eval_count(b, "an exponent")?;
            return match base {
                Value::Scalar(x) => Ok(Value::Scalar(x.pow(n).map_err(core)?)),
                Value::Matrix(m) if m.is_square() && (0..=10_000).contains(&n) => {
                    let mut acc = Matrix::identity(m.rows);
                    for _ in 0..n {
                        acc = acc.mul(&m).map_err(core)?;
                    }
                    Ok(Value::Matrix(acc))
                }
                other => Err(kind_err(span, "`^`", &other, None)),
            };
        }
        let x = self.eval(a)?;
        let y = self.eval(b)?;
        let opname = format!("`{}`", op.symbol());
        match op {
            BinOp::Add | BinOp::Sub => {
                let sign = if op == BinOp::Add { Q::ONE } else { Q::int(-1) };
                // A sum is at most as large as its parts together, but a long
                // sum of parts each within the budget is not: check it too.
                let sum = match (&x, &y) {
                    (Value::Scalar(p), Value::Scalar(q)) => {
                        Ok(Value::Scalar(p.add_scaled(q, &sign)))
                    }
                    (Value::Field(p), Value::Field(q)) => {
                        let field = p.field.add_scaled(&q.field, &sign).map_err(core)?;
                        let combo = match (&p.combo, &q.combo) {
                            (Some(c1), Some(c2)) => Some(merge_combinations(c1, c2, &sign)),
                            _ => None,
                        };
                        Ok(Value::Field(FieldValue {
                            field,
                            combo,
                            structure: None,
                            averaged: None,
                        }))
                    }
                    (Value::Matrix(p), Value::Matrix(q)) => {
                        Ok(Value::Matrix(p.add_scaled(q, &sign).map_err(core)?))
                    }
                    _ => Err(kind_err(span, &opname, &x, Some(&y))),
                }?;
                crate::core::limits::check_terms(value_size(&sum)).map_err(core)?;
                Ok(sum)
            }
            BinOp::Mul => match (&x, &y) {
                (Value::Scalar(p), Value::Scalar(q)) => Ok(Value::Scalar(p.mul(q).map_err(core)?)),
                (Value::Scalar(s), Value::Field(f)) | (Value::Field(f), Value::Scalar(s)) => {
                    let mut out = scale_field_value(f, s).map_err(core)?;
                    if !self.is_state_free(s) {
                        out.combo = None;
                    }
                    Ok(Value::Field(out))
                }
                (Value::Scalar(s), Value::Matrix(m)) | (Value::Matrix(m), Value::Scalar(s)) => {
                    Ok(Value::Matrix(m.mul_expr(s).map_err(core)?))
                }
                (Value::Matrix(m), Value::Matrix(n)) => Ok(Value::Matrix(m.mul(n).map_err(core)?)),
                (Value::Matrix(m), Value::Field(f)) => {
                    Ok(Value::field(m.apply(&f.field).map_err(core)?))
                }
                _ => Err(kind_err(span, &opname, &x, Some(&y))),
            },
            BinOp::Div => {
                let d = match &y {
                    Value::Scalar(d) => d.clone(),
                    _ => return Err(kind_err(span, &opname, &x, Some(&y))),
                };
                let inv = if let Some(q) = d.as_number() {
                    Expr::num(
                        q.recip()
                            .ok_or_else(|| SessionError::core(b.span, CoreError::DivisionByZero))?,
                    )
                } else {
                    d.recip().map_err(|e| SessionError::core(b.span, e))?
                };
                match x {
                    Value::Scalar(p) => Ok(Value::Scalar(p.mul(&inv).map_err(core)?)),
                    Value::Field(f) => {
                        let mut out = scale_field_value(&f, &inv).map_err(core)?;
                        if !self.is_state_free(&inv) {
                            out.combo = None;
                        }
                        Ok(Value::Field(out))
                    }
                    Value::Matrix(m) => Ok(Value::Matrix(m.mul_expr(&inv).map_err(core)?)),
                }
            }
            BinOp::Pow => unreachable_pow(span),
        }
    }

    fn eval_list(&self, items: &[SyntaxExpr], span: Span) -> SessionResult<Value> {
        let values: Vec<Value> = items
            .iter()
            .map(|i| self.eval(i))
            .collect::<SessionResult<_>>()?;
        if values.len() == 2 {
            if let (Value::Field(x), Value::Field(y)) = (&values[0], &values[1]) {
                let b = x
                    .field
                    .bracket(&y.field, &self.states)
                    .map_err(|e| SessionError::core(span, e))?;
                return Ok(Value::field(b));
            }
        }
        let mut comps = Vec::with_capacity(values.len());
        for (v, item) in values.into_iter().zip(items) {
            match v {
                Value::Scalar(x) => comps.push(x),
                other => {
                    return Err(SessionError::invalid(
                        item.span,
                        format!(
                            "a field literal needs scalar entries, got a {} (a Lie bracket `[X, Y]` needs exactly two fields)",
                            other.kind_name()
                        ),
                    ))
                }
            }
        }
        if self.states.is_empty() {
            return Err(SessionError::invalid(
                span,
                "declare the state first (e.g. `state q, p`)",
            ));
        }
        if comps.len() != self.states.len() {
            return Err(SessionError::invalid(
                span,
                format!(
                    "a field on ({}) needs {} entries, got {}",
                    self.state_list(),
                    self.states.len(),
                    comps.len()
                ),
            ));
        }
        Ok(Value::field(Field(comps)))
    }

    /// The state names joined for messages.
    pub(crate) fn state_list(&self) -> String {
        self.states
            .iter()
            .map(|s| s.name())
            .collect::<Vec<_>>()
            .join(", ")
    }

    fn apply_field(
        &self,
        target: Value,
        tspan: Span,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let f = match target {
            Value::Field(f) => f,
            other => {
                return Err(SessionError::invalid(
                    tspan,
                    format!(
                        "only a field can be applied (as a Lie derivative), this is a {}",
                        other.kind_name()
                    ),
                ))
            }
        };
        let [Arg::Pos(h)] = args else {
            return Err(SessionError::invalid(
                span,
                "a Lie derivative `X(h)` takes exactly one argument",
            ));
        };
        let core = |err: CoreError| SessionError::core(span, err);
        match self.eval(h)? {
            Value::Scalar(h) => Ok(Value::Scalar(
                f.field.lie_derivative(&h, &self.states).map_err(core)?,
            )),
            Value::Field(g) => Ok(Value::field(
                g.field
                    .map(|c| f.field.lie_derivative(c, &self.states))
                    .map_err(core)?,
            )),
            Value::Matrix(_) => Err(SessionError::invalid(
                h.span,
                "a Lie derivative applies to a scalar or a field",
            )),
        }
    }

    /// The positional arguments of a call of `builtin`, which takes a
    /// fixed number of them (`name = value` arguments are refused).
    fn pos_args<'a>(
        &self,
        name: &Ident,
        args: &'a [Arg],
        builtin: &Builtin,
    ) -> SessionResult<Vec<&'a SyntaxExpr>> {
        let usage = builtin.usage;
        let n = match builtin.arity {
            Arity::Exactly(n) => n,
            Arity::OneThenBindings | Arity::AtLeastOne => 1,
        };
        let mut out = Vec::new();
        for a in args {
            match a {
                Arg::Pos(e) => out.push(e),
                Arg::Bind(id, _) | Arg::BindFunc(id, _, _) => {
                    return Err(SessionError::invalid(
                        id.span,
                        format!(
                            "`{}` takes no `name = value` arguments; usage: {usage}",
                            name.name
                        ),
                    ))
                }
            }
        }
        if out.len() != n {
            return Err(SessionError::invalid(
                name.span,
                format!(
                    "`{}` takes {} argument{}, got {}; usage: {usage}",
                    name.name,
                    n,
                    if n == 1 { "" } else { "s" },
                    out.len()
                ),
            ));
        }
        Ok(out)
    }

    /// Resolves an argument that must be a declared name of the given kinds.
    fn symbol_arg(&self, e: &SyntaxExpr, kinds: &[SymKind], what: &str) -> SessionResult<Sym> {
        if let ExprKind::Name(n) = &e.kind {
            if n == "t" {
                return Ok(Sym::T);
            }
            if let Some(k) = self.sym_kind(n) {
                if kinds.contains(&k) {
                    return Ok(Sym::new(n));
                }
            }
        }
        Err(SessionError::invalid(e.span, what.to_string()))
    }

    /// A call `name(args)`: a built-in, an unspecified function (or one of
    /// its derivatives `V'`), or a named field applied to a scalar.
    fn eval_call(&self, name: &Ident, args: &[Arg], span: Span) -> SessionResult<Value> {
        match builtins::find(&name.name) {
            Some(builtin) => self.eval_builtin(builtin, name, args, span),
            None => self.eval_user_call(name, args, span),
        }
    }

    /// A call of a built-in of the table in `super::builtins`, by family.
    fn eval_builtin(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        match builtin.name {
            "sin" | "cos" | "exp" => self.eval_elementary(builtin, name, args),
            "ad" => self.eval_ad(builtin, name, args, span),
            "pd" => self.eval_pd(builtin, name, args, span),
            "jac" | "div" => self.eval_field_derivative(builtin, name, args, span),
            "det" | "trace" => self.eval_matrix_scalar(builtin, name, args, span),
            "plug" => self.eval_plug(name, args, span),
            "order" => self.eval_order(builtin, name, args),
            "mean" => self.eval_mean(builtin, name, args, span),
            "bch" => self.eval_bch(name, args, span),
            "iint" => self.eval_iint(args, span),
            other => Err(self.unknown(other, name.span)),
        }
    }

    /// `sin(x)`, `cos(x)`, `exp(x)` of a scalar (linear arguments).
    fn eval_elementary(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
    ) -> SessionResult<Value> {
        let f = builtin.name;
        let a = self.pos_args(name, args, builtin)?;
        let x = self.eval_scalar(a[0], &format!("the argument of `{f}`"))?;
        // `w*t` (w a parameter) is a symbolic-frequency phase.
        let (x, mut st) = match f {
            "exp" => (x, self.states.clone()),
            _ => self.phase_arg(&x),
        };
        st.extend(self.placeholders.borrow().iter().map(|(_, s)| *s));
        let r = match f {
            "sin" => Expr::sin_of(&x, &st),
            "cos" => Expr::cos_of(&x, &st),
            _ => Expr::exp_of(&x, &st),
        };
        Ok(Value::Scalar(
            r.map_err(|e| SessionError::core(a[0].span, e))?,
        ))
    }

    /// `ad(X, Y, k)`: `[X, [X, … Y]]` with `k` brackets.
    fn eval_ad(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let a = self.pos_args(name, args, builtin)?;
        let x = self.eval_field(a[0], "the first argument of `ad`")?;
        let y = self.eval_field(a[1], "the second argument of `ad`")?;
        let k = self.eval_count(a[2], "the power of `ad`")?;
        if k < 0 {
            return Err(SessionError::invalid(
                a[2].span,
                "the power of `ad` must be non-negative",
            ));
        }
        crate::core::limits::check_order(k as u64).map_err(|e| SessionError::core(a[2].span, e))?;
        Ok(Value::field(
            x.field
                .ad_pow(&y.field, k as u64, &self.states)
                .map_err(|err| SessionError::core(span, err))?,
        ))
    }

    /// `pd(h, q)`: the partial derivative of a value by a state, a
    /// parameter or `t`, entry by entry.
    fn eval_pd(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let a = self.pos_args(name, args, builtin)?;
        if let ExprKind::Name(n) = &a[0].kind {
            if let Some(f) = self.funcs.get(n) {
                return Err(SessionError::invalid(
                    span,
                    format!(
                        "a derivative of the function `{n}` is applied to arguments: \
                         write `pd({n}, {})(…)` (or `{n}'(…)` for one argument)",
                        f.params[0],
                    ),
                ));
            }
        }
        let s = self.symbol_arg(
            a[1],
            &[SymKind::State, SymKind::Param],
            "the second argument of `pd` must be a state, a parameter or t",
        )?;
        let v = self.eval(a[0])?;
        if s == Sym::T {
            self.refuse_phase(entries_of(&v), a[0].span, "`pd(…, t)` of this expression")?;
        }
        match v {
            Value::Scalar(h) => Ok(Value::Scalar(h.pd(s))),
            Value::Field(f) => Ok(Value::field(Field(
                f.field.0.iter().map(|c| c.pd(s)).collect(),
            ))),
            Value::Matrix(m) => Ok(Value::Matrix(Matrix {
                data: m.data.iter().map(|c| c.pd(s)).collect(),
                ..m
            })),
        }
    }

    /// `jac(X)` (the Jacobian matrix) and `div(X)` (the divergence).
    fn eval_field_derivative(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let core = |err: CoreError| SessionError::core(span, err);
        let a = self.pos_args(name, args, builtin)?;
        let x = self.eval_field(a[0], &format!("the argument of `{}`", builtin.name))?;
        if builtin.name == "jac" {
            Ok(Value::Matrix(x.field.jacobian(&self.states).map_err(core)?))
        } else {
            Ok(Value::Scalar(
                x.field.divergence(&self.states).map_err(core)?,
            ))
        }
    }

    /// `det(M)` and `trace(M)` of a matrix.
    fn eval_matrix_scalar(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let f = builtin.name;
        let a = self.pos_args(name, args, builtin)?;
        let m = match self.eval(a[0])? {
            Value::Matrix(m) => m,
            other => return Err(kind_err(a[0].span, &format!("`{f}`"), &other, None)),
        };
        let r = if f == "det" { m.det() } else { m.trace() };
        Ok(Value::Scalar(
            r.map_err(|err| SessionError::core(span, err))?,
        ))
    }

    /// `order(e, eps, k)`: the coefficient of `eps^k`, entry by entry (a
    /// field keeps the matching terms of its structure).
    fn eval_order(&self, builtin: &Builtin, name: &Ident, args: &[Arg]) -> SessionResult<Value> {
        let a = self.pos_args(name, args, builtin)?;
        let s = self.symbol_arg(
            a[1],
            &[SymKind::Param, SymKind::State],
            "the second argument of `order` must be a parameter",
        )?;
        let k = self.eval_count(a[2], "the order")?;
        let k = i32::try_from(k)
            .map_err(|_| SessionError::invalid(a[2].span, "the order is out of range"))?;
        Ok(match self.eval(a[0])? {
            Value::Scalar(x) => Value::Scalar(x.coeff_of_power(s, k)),
            Value::Field(f) => {
                let structure = f.structure.as_ref().map(|terms| {
                    terms
                        .iter()
                        .filter_map(|t| {
                            let c = t.coeff.coeff_of_power(s, k);
                            (!c.is_zero()).then(|| super::value::BracketTerm {
                                coeff: c,
                                ..t.clone()
                            })
                        })
                        .collect()
                });
                Value::Field(FieldValue {
                    field: Field(f.field.0.iter().map(|c| c.coeff_of_power(s, k)).collect()),
                    combo: None,
                    structure,
                    averaged: None,
                })
            }
            Value::Matrix(m) => Value::Matrix(Matrix {
                data: m.data.iter().map(|c| c.coeff_of_power(s, k)).collect(),
                ..m
            }),
        })
    }

    /// `mean(e)`: the mean over the common period of every entry (a value
    /// without time dependence is its own mean).
    fn eval_mean(
        &self,
        builtin: &Builtin,
        name: &Ident,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let core = |err: CoreError| SessionError::core(span, err);
        let a = self.pos_args(name, args, builtin)?;
        let v = self.eval(a[0])?;
        let exprs = entries_of(&v);
        self.refuse_phase(exprs.iter().copied(), a[0].span, "the argument of `mean`")?;
        let mut freqs = Vec::new();
        for x in &exprs {
            x.check_periodic()
                .map_err(|e| SessionError::core(a[0].span, e))?;
            freqs.extend(x.frequencies());
        }
        let Some(period) = common_period(&freqs) else {
            return Ok(v);
        };
        let m = |x: &Expr| x.mean_over(&period);
        Ok(match v {
            Value::Scalar(x) => Value::Scalar(m(&x).map_err(core)?),
            Value::Field(f) => Value::field(f.field.map(m).map_err(core)?),
            Value::Matrix(mm) => Value::Matrix(Matrix {
                data: mm
                    .data
                    .iter()
                    .map(m)
                    .collect::<Result<_, _>>()
                    .map_err(core)?,
                ..mm
            }),
        })
    }

    /// `iint(u1, …)`: the symbol of an iterated integral of inputs (or 1).
    fn eval_iint(&self, args: &[Arg], span: Span) -> SessionResult<Value> {
        let mut names = Vec::new();
        for a in args {
            match a {
                Arg::Pos(SyntaxExpr {
                    kind: ExprKind::Name(n),
                    ..
                }) if self.sym_kind(n) == Some(SymKind::Input) => names.push(n.clone()),
                Arg::Pos(SyntaxExpr {
                    kind: ExprKind::Num(n),
                    ..
                }) if n == "1" => names.push("1".to_string()),
                Arg::Pos(e) | Arg::Bind(_, e) | Arg::BindFunc(_, _, e) => {
                    return Err(SessionError::invalid(
                        e.span,
                        "`iint` takes input names (declared with `input`) or 1",
                    ))
                }
            }
        }
        if names.is_empty() {
            return Err(SessionError::invalid(
                span,
                "`iint` needs at least one input",
            ));
        }
        Ok(Value::Scalar(Expr::sym(Sym::new(&iint_name(&names)))))
    }

    /// A call of a name that is not a built-in: an unspecified function or
    /// its derivative, or a named field applied to a scalar.
    fn eval_user_call(&self, name: &Ident, args: &[Arg], span: Span) -> SessionResult<Value> {
        let other = name.name.as_str();
        let base = other.trim_end_matches('\'');
        if let Some(sig) = self.funcs.get(base) {
            let primes = (other.len() - base.len()) as u32;
            if primes > 0 && sig.params.len() != 1 {
                return Err(SessionError::invalid(
                    name.span,
                    format!(
                        "primes mark derivatives of a function of one argument; \
                         `{base}` takes {}: write `pd({base}, {})(…)`",
                        sig.params.len(),
                        sig.params[0],
                    ),
                ));
            }
            let deriv = if primes > 0 {
                vec![primes]
            } else {
                vec![0; sig.params.len()]
            };
            let sig = sig.clone();
            return self.apply_func(&sig, &deriv, name.span, args, span);
        }
        if base.len() != other.len() {
            return Err(SessionError::invalid(
                name.span,
                format!(
                    "`{base}` is not an unspecified function (declare it with `func {base}(s)`)"
                ),
            ));
        }
        if let Some(v) = self.names.get(other) {
            return self.apply_field(v.clone(), name.span, args, span);
        }
        if self.symbols.contains_key(other) {
            return Err(SessionError::invalid(
                name.span,
                format!("`{other}` is a symbol, not a field: it cannot be applied (write `{other}*(...)` for a product)"),
            ));
        }
        Err(self.unknown(other, name.span))
    }

    fn eval_plug(&self, name: &Ident, args: &[Arg], span: Span) -> SessionResult<Value> {
        let mut target = None;
        let mut map: HashMap<Sym, Expr> = HashMap::new();
        let mut defs: Vec<Definition> = Vec::new();
        let mut inputs: HashMap<String, Expr> = HashMap::new();
        for a in args {
            match a {
                Arg::BindFunc(id, params, body) => defs.push(self.definition(id, params, body)?),
                Arg::Pos(e) if target.is_none() => target = Some(e),
                Arg::Pos(e) => return Err(SessionError::invalid(e.span, plug_usage())),
                Arg::Bind(id, v) => {
                    if self.sym_kind(&id.name) == Some(SymKind::Input) {
                        let val = self.eval_scalar(v, "a plugged input")?;
                        if !self.is_state_free(&val) {
                            return Err(SessionError::invalid(
                                v.span,
                                format!(
                                    "an input is a function of time (and parameters): `{val}` mentions the state"
                                ),
                            ));
                        }
                        inputs.insert(id.name.clone(), val);
                        continue;
                    }
                    let s = match id.name.as_str() {
                        "t" => Sym::T,
                        n if matches!(self.sym_kind(n), Some(SymKind::State | SymKind::Param)) => {
                            Sym::new(n)
                        }
                        n => {
                            return Err(SessionError::invalid(
                                id.span,
                                format!(
                                "`{n}` is not a state, a parameter or an input: only those can be plugged"
                            ),
                            ))
                        }
                    };
                    let val = self.eval_scalar(v, "a plugged value")?;
                    map.insert(s, val);
                }
            }
        }
        let Some(target) = target else {
            return Err(SessionError::invalid(name.span, plug_usage()));
        };
        let core = |err: CoreError| SessionError::core(span, err);
        let mut value = self.eval(target)?;
        for def in &mut defs {
            value = map_value(value, &mut |c: &Expr| c.plug_definition(def, &self.states))
                .map_err(core)?;
        }
        let es: Vec<&Expr> = match &value {
            Value::Scalar(x) => vec![x],
            Value::Field(f) => f.field.0.iter().collect(),
            Value::Matrix(m) => m.data.iter().collect(),
        };
        let st = &self.plug_phases(&es, &mut map, span)?;
        let sub = |c: &Expr| {
            if inputs.is_empty() {
                c.subst(&map, st)
            } else {
                crate::series::shuffle::evaluate(c, &inputs, &map, st)
            }
        };
        let v = match value {
            Value::Scalar(x) => Value::Scalar(sub(&x).map_err(core)?),
            Value::Field(f) => Value::field(f.field.map(sub).map_err(core)?),
            Value::Matrix(m) => Value::Matrix(Matrix {
                data: m
                    .data
                    .iter()
                    .map(sub)
                    .collect::<Result<_, _>>()
                    .map_err(core)?,
                ..m
            }),
        };
        reduce_iint_products(v).map_err(core)
    }
}

/// A value with `f` applied to every scalar entry (the field's extra
/// structure is dropped: the value changed).
fn map_value(
    v: Value,
    f: &mut dyn FnMut(&Expr) -> Result<Expr, CoreError>,
) -> Result<Value, CoreError> {
    Ok(match v {
        Value::Scalar(x) => Value::Scalar(f(&x)?),
        Value::Field(fv) => Value::field(fv.field.map(f)?),
        Value::Matrix(m) => Value::Matrix(Matrix {
            data: m.data.iter().map(&mut *f).collect::<Result<_, _>>()?,
            ..m
        }),
    })
}

impl Session {
    /// The states for the arguments of `sin`, `cos`, `exp` and unspecified
    /// functions: the state, and while a definition's body is read, its
    /// placeholders.
    fn arg_states(&self) -> Vec<Sym> {
        let mut st = self.states.clone();
        st.extend(self.placeholders.borrow().iter().map(|(_, s)| *s));
        st
    }

    /// The placeholder `name` of a definition being read.
    fn placeholder(&self, name: &str) -> Option<Sym> {
        self.placeholders
            .borrow()
            .iter()
            .find(|(n, _)| n == name)
            .map(|(_, s)| *s)
    }

    /// `f^(deriv)(args)` for a declared function.
    fn apply_func(
        &self,
        sig: &Arc<Signature>,
        deriv: &[u32],
        name_span: Span,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Value> {
        let n = sig.params.len();
        let shown = format!("{}({})", sig.name, sig.params.join(", "));
        let mut values = Vec::with_capacity(n);
        let st = self.arg_states();
        for (i, a) in args.iter().enumerate() {
            let Arg::Pos(e) = a else {
                return Err(SessionError::invalid(
                    a.span(),
                    format!(
                        "`{}` takes positional arguments, as declared: `{shown}`",
                        sig.name
                    ),
                ));
            };
            let x = self.eval_scalar(e, &format!("an argument of `{}`", sig.name))?;
            if let Err(reason) = FuncArg::from_expr(&x, &st) {
                return Err(SessionError::core(
                    e.span,
                    CoreError::FunctionArgument {
                        call: {
                            let mut shown: Vec<String> = vec!["…".to_string(); args.len()];
                            shown[i] = x.to_string();
                            format!("{}({})", sig.name, shown.join(", "))
                        },
                        reason,
                    },
                ));
            }
            values.push(x);
        }
        if values.len() != n {
            return Err(SessionError::invalid(
                name_span,
                format!(
                    "`{}` takes {n} argument{}, as declared (`{shown}`), got {}",
                    sig.name,
                    if n == 1 { "" } else { "s" },
                    values.len()
                ),
            ));
        }
        Expr::apply_function(sig, deriv, &values, &st)
            .map(Value::Scalar)
            .map_err(|e| SessionError::core(span, e))
    }

    /// `pd(J, a, …)(x, y)`: a derivative of a declared function applied;
    /// `None` when `target` is not `pd` of a function.
    fn eval_derivative_call(
        &self,
        target: &SyntaxExpr,
        args: &[Arg],
        span: Span,
    ) -> SessionResult<Option<Value>> {
        let ExprKind::Call(head, pd_args) = &target.kind else {
            return Ok(None);
        };
        if head.name != "pd" {
            return Ok(None);
        }
        let Some(Arg::Pos(SyntaxExpr {
            kind: ExprKind::Name(fname),
            ..
        })) = pd_args.first()
        else {
            return Ok(None);
        };
        let Some(sig) = self.funcs.get(fname).cloned() else {
            return Ok(None);
        };
        let mut deriv = vec![0u32; sig.params.len()];
        for a in &pd_args[1..] {
            let j = match a {
                Arg::Pos(SyntaxExpr {
                    kind: ExprKind::Name(p),
                    ..
                }) => sig.params.iter().position(|q| q == p),
                _ => None,
            };
            let Some(j) = j else {
                return Err(SessionError::invalid(
                    a.span(),
                    format!(
                        "`pd({fname}, …)` takes argument names of `{fname}({})`",
                        sig.params.join(", ")
                    ),
                ));
            };
            deriv[j] += 1;
        }
        if pd_args.len() < 2 {
            return Err(SessionError::invalid(
                target.span,
                format!("`pd({fname}, …)` needs an argument name to differentiate in"),
            ));
        }
        self.apply_func(&sig, &deriv, head.span, args, span)
            .map(Some)
    }

    /// Reads `V(s) = body` of `plug`.
    fn definition(
        &self,
        id: &Ident,
        params: &[Ident],
        body: &SyntaxExpr,
    ) -> SessionResult<Definition> {
        let Some(sig) = self.funcs.get(&id.name).cloned() else {
            return Err(SessionError::invalid(
                id.span,
                format!(
                    "`{}` is not an unspecified function (declared with `func`): only those take a definition",
                    id.name
                ),
            ));
        };
        if params.len() != sig.params.len() {
            return Err(SessionError::invalid(
                id.span,
                format!(
                    "`{}` takes {} argument{} (`{}({})`), the definition names {}",
                    sig.name,
                    sig.params.len(),
                    if sig.params.len() == 1 { "" } else { "s" },
                    sig.name,
                    sig.params.join(", "),
                    params.len()
                ),
            ));
        }
        let mut names: Vec<(String, Sym)> = Vec::new();
        for p in params {
            if names.iter().any(|(n, _)| *n == p.name) {
                return Err(SessionError::invalid(
                    p.span,
                    format!("argument `{}` is listed twice", p.name),
                ));
            }
            if matches!(self.sym_kind(&p.name), Some(k) if k != SymKind::State)
                || p.name == "t"
                || p.name == "pi"
            {
                return Err(SessionError::invalid(
                    p.span,
                    format!(
                        "`{}` is already declared: name the argument of the definition otherwise",
                        p.name
                    ),
                ));
            }
            names.push((p.name.clone(), Sym::new(&p.name)));
        }
        let syms: Vec<Sym> = names.iter().map(|(_, s)| *s).collect();
        *self.placeholders.borrow_mut() = names;
        let value = self.eval_scalar(body, "the definition of a function");
        self.placeholders.borrow_mut().clear();
        let value = value?;
        if let Some(bad) = value
            .symbols()
            .into_iter()
            .find(|s| *s == Sym::T || (self.states.contains(s) && !syms.contains(s)))
        {
            return Err(SessionError::invalid(
                body.span,
                format!(
                    "the definition of `{}` may use its arguments ({}) and parameters only, not `{}`",
                    sig.name,
                    sig.params.join(", "),
                    bad.name()
                ),
            ));
        }
        Ok(Definition::new(sig, syms, value))
    }
}

/// The size of a value in the term budget's measure (terms plus the words
/// of large coefficients, over all entries).
fn value_size(v: &Value) -> usize {
    let total = |es: &[Expr]| {
        es.iter()
            .fold(0usize, |acc, e| acc.saturating_add(e.size()))
    };
    match v {
        Value::Scalar(e) => e.size(),
        Value::Field(f) => total(&f.field.0),
        Value::Matrix(m) => total(&m.data),
    }
}

/// Refuses a number literal whose value would exceed the integer-size
/// limit (digits typed plus the decimal exponent) before it is built.
fn number_size_ok(text: &str) -> Result<(), CoreError> {
    let max_digits = crate::core::limits::limits().max_digits;
    let too_big = CoreError::Limit {
        kind: crate::core::error::LimitKind::Digits,
        limit: max_digits,
    };
    let (mantissa, exponent) = match text.find(['e', 'E']) {
        Some(i) => (&text[..i], text.get(i + 1..).unwrap_or("")),
        None => (text, ""),
    };
    let digits = mantissa.bytes().filter(u8::is_ascii_digit).count() as u64;
    let exponent = exponent.trim_start_matches(['+', '-']);
    let exponent_size = if exponent.is_empty() {
        0
    } else {
        match exponent.parse::<u64>() {
            Ok(n) => n,
            Err(_) if exponent.bytes().all(|b| b.is_ascii_digit()) => u64::MAX,
            Err(_) => 0,
        }
    };
    if digits.saturating_add(exponent_size) > max_digits.saturating_add(1) {
        return Err(too_big);
    }
    Ok(())
}

fn unreachable_pow(span: Span) -> SessionResult<Value> {
    Err(SessionError::invalid(span, "internal: power handled above"))
}

/// Multiplies a field value by a scalar, keeping its combination.
pub(crate) fn scale_field_value(f: &FieldValue, s: &Expr) -> Result<FieldValue, CoreError> {
    let field = f.field.mul_expr(s)?;
    let combo = match &f.combo {
        Some(c) => Some(FieldCombination {
            parts: c
                .parts
                .iter()
                .map(|(n, g, k)| Ok((n.clone(), g.clone(), k.mul(s)?)))
                .collect::<Result<_, CoreError>>()?,
        }),
        None => None,
    };
    Ok(FieldValue {
        field,
        combo,
        structure: None,
        averaged: None,
    })
}

fn merge_combinations(a: &FieldCombination, b: &FieldCombination, sign: &Q) -> FieldCombination {
    let mut parts = a.parts.clone();
    for (n, g, k) in &b.parts {
        match parts.iter_mut().find(|(m, _, _)| m == n) {
            Some(p) => p.2 = p.2.add_scaled(k, sign),
            None => parts.push((n.clone(), g.clone(), k.scale(sign))),
        }
    }
    parts.retain(|(_, _, k)| !k.is_zero());
    FieldCombination { parts }
}
