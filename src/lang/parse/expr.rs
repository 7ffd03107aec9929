//! The expression grammar: sums, products, unary minus, powers,
//! applications, calls, lists, matrices and call arguments, with the depth
//! of every tree tracked while it is built.

use nom::Err as NomErr;

use super::error::{no_expr, GrammarError, GrammarResult, ParseErrorKind};
use super::lex::*;
use super::words::is_reserved;
use super::{Parser, MAX_EXPR_DEPTH, MAX_SUM_TERMS};
use crate::lang::ast::{Arg, BinOp, ExprKind, Ident, Span, SyntaxExpr};

/// Flat sums of at most this many terms keep the left-leaning tree they
/// are written as (their errors name the operators as written).
pub(super) const SHORT_SUM: usize = 64;

/// An expression with the depth of its tree, tracked while building. The
/// expression is boxed to keep the recursive rules' stack frames small.
pub(super) struct ExprWithDepth {
    pub(super) expr: Box<SyntaxExpr>,
    depth: usize,
}

impl<'a> Parser<'a> {
    /// Builds a node one level above `child_depth`, refusing trees deeper
    /// than [`MAX_EXPR_DEPTH`] (reported at byte `at`).
    pub(super) fn make(
        &self,
        kind: ExprKind,
        span: Span,
        child_depth: usize,
        at: usize,
    ) -> Result<ExprWithDepth, NomErr<GrammarError>> {
        let depth = child_depth + 1;
        if depth > MAX_EXPR_DEPTH {
            self.fail::<()>(
                Span::new(at, at + 1),
                ParseErrorKind::ExpressionTooDeep {
                    limit: MAX_EXPR_DEPTH,
                },
            )?;
        }
        Ok(ExprWithDepth {
            expr: Box::new(SyntaxExpr::new(kind, span)),
            depth,
        })
    }

    pub(super) fn binary(
        &self,
        op: BinOp,
        lhs: ExprWithDepth,
        rhs: ExprWithDepth,
        at: usize,
    ) -> Result<ExprWithDepth, NomErr<GrammarError>> {
        let span = lhs.expr.span.join(rhs.expr.span);
        let depth = lhs.depth.max(rhs.depth);
        self.make(ExprKind::Bin(op, lhs.expr, rhs.expr), span, depth, at)
    }

    /// Wraps `node` in one unary minus per offset in `minuses` (the last one innermost).
    pub(super) fn negate(
        &self,
        mut node: ExprWithDepth,
        minuses: &[usize],
    ) -> Result<ExprWithDepth, NomErr<GrammarError>> {
        for &at in minuses.iter().rev() {
            let span = Span::new(at, node.expr.span.end);
            node = self.make(ExprKind::Neg(node.expr), span, node.depth, at)?;
        }
        Ok(node)
    }

    //
    // The rules that recurse (through brackets) keep few locals: stack use per
    // bracket level stays small, and every other repetition (operator chains,
    // runs of minus signs, exponent towers) is a loop.

    /// An expression: products joined by `+` and `-`, products of unary
    /// operands joined by `*` and `/`, all left associative. A recoverable
    /// error if no expression starts here.
    pub(super) fn expr(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let (mut rest, mut product) = self.unary(input)?;
        // The terms of the sum so far, each with the additive operator
        // before it and that operator's offset (the first has none).
        let mut terms: Vec<(BinOp, usize, ExprWithDepth)> = Vec::new();
        loop {
            let at = ws(rest);
            let (op, what) = match at.as_bytes() {
                [b'+', ..] => (BinOp::Add, "an expression after `+`"),
                [b'-', ..] => (BinOp::Sub, "an expression after `-`"),
                [b'*', b'*', ..] => break,
                [b'*', ..] => (BinOp::Mul, "an expression after `*`"),
                [b'/', ..] => (BinOp::Div, "an expression after `/`"),
                _ => break,
            };
            let after = at.get(1..).unwrap_or("");
            let (next, operand) = self.require(self.unary(after), after, what)?;
            let op_at = self.off(at);
            if matches!(op, BinOp::Mul | BinOp::Div) {
                product = self.binary(op, product, operand, op_at)?;
            } else {
                if terms.len() >= MAX_SUM_TERMS {
                    self.fail::<()>(
                        Span::new(op_at, op_at + 1),
                        ParseErrorKind::SumTooLong {
                            limit: MAX_SUM_TERMS,
                        },
                    )?;
                }
                terms.push((op, op_at, product));
                product = operand;
            }
            rest = next;
        }
        if terms.is_empty() {
            return Ok((rest, product));
        }
        terms.push((BinOp::Add, 0, product));
        let node = self.sum_tree(terms)?;
        Ok((rest, node))
    }

    /// Builds the tree of a flat sum `t0 o1 t1 o2 t2 …` (`terms[k]` holds
    /// `t_k` and the operator *after* it, which the last term lacks).
    /// Short sums fold to the left as written; a long one (a pasted
    /// result of thousands of terms) becomes a balanced tree, so that its
    /// depth counts nesting, not length: `L − (R)` with the signs inside
    /// `R` flipped is the same sum (exact arithmetic is associative).
    pub(super) fn sum_tree(
        &self,
        terms: Vec<(BinOp, usize, ExprWithDepth)>,
    ) -> Result<ExprWithDepth, NomErr<GrammarError>> {
        let mut items: Vec<Option<(BinOp, usize, ExprWithDepth)>> =
            terms.into_iter().map(Some).collect();
        self.sum_range(&mut items, false)
    }

    /// The tree of `items` (taken out of their slots), with every operator
    /// flipped (`+` ↔ `−`) when `flip` is set.
    pub(super) fn sum_range(
        &self,
        items: &mut [Option<(BinOp, usize, ExprWithDepth)>],
        flip: bool,
    ) -> Result<ExprWithDepth, NomErr<GrammarError>> {
        let turn = |op: BinOp| match (op, flip) {
            (BinOp::Add, true) => BinOp::Sub,
            (BinOp::Sub, true) => BinOp::Add,
            (other, _) => other,
        };
        // Every slot holds a term until it is taken once: not reached.
        let missing = || -> Result<ExprWithDepth, NomErr<GrammarError>> {
            Err(NomErr::Failure(GrammarError {
                remaining: 0,
                len: 0,
                kind: Some(Box::new(ParseErrorKind::SumTooLong {
                    limit: MAX_SUM_TERMS,
                })),
            }))
        };
        if items.len() <= SHORT_SUM {
            let mut iter = items.iter_mut();
            let Some((mut op, mut op_at, mut acc)) = iter.next().and_then(Option::take) else {
                return missing();
            };
            for slot in iter {
                let Some((next_op, next_at, term)) = slot.take() else {
                    return missing();
                };
                acc = self.binary(turn(op), acc, term, op_at)?;
                op = next_op;
                op_at = next_at;
            }
            return Ok(acc);
        }
        let mid = items.len() / 2;
        let (left, right) = items.split_at_mut(mid);
        // The operator joining the halves is the one after the left
        // half's last term.
        let (join, join_at) = match left.last() {
            Some(Some((op, at, _))) => (turn(*op), *at),
            _ => return missing(),
        };
        let lhs = self.sum_range(left, flip)?;
        let rhs = self.sum_range(right, flip ^ (join == BinOp::Sub))?;
        self.binary(join, lhs, rhs, join_at)
    }

    /// Leading minus signs (collected in a loop), then a power.
    pub(super) fn unary(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let (minuses, at) = self.minuses(input);
        let result = self.postfix(at);
        let (rest, base) = if minuses.is_empty() {
            result?
        } else {
            self.require(result, at, "an expression after `-`")?
        };
        let (rest, node) = if starts_power(ws(rest)) {
            self.power_tail(base, rest)?
        } else {
            (rest, base)
        };
        Ok((rest, self.negate(node, &minuses)?))
    }

    /// Offsets of a run of `-` signs and the input after them.
    pub(super) fn minuses(&self, input: &'a str) -> (Vec<usize>, &'a str) {
        let mut at = ws(input);
        let mut minuses = Vec::new();
        while let Some(after) = at.strip_prefix('-') {
            minuses.push(self.off(at));
            at = ws(after);
        }
        (minuses, at)
    }

    /// `base ^ b ^ -c ...` after `base`: operands are collected left to right
    /// and folded from the right (right associative); the exponent of each
    /// `^` (or `**`) may start with minus signs.
    pub(super) fn power_tail(
        &self,
        base: ExprWithDepth,
        mut rest: &'a str,
    ) -> GrammarResult<'a, ExprWithDepth> {
        // (offset of `^`, minuses after it, operand)
        let mut tail: Vec<(usize, Vec<usize>, ExprWithDepth)> = Vec::new();
        loop {
            let at = ws(rest);
            let (after, what) = if let Some(after) = at.strip_prefix("**") {
                (after, "an exponent after `**`")
            } else if let Some(after) = at.strip_prefix('^') {
                (after, "an exponent after `^`")
            } else {
                break;
            };
            let (minuses, operand_at) = self.minuses(after);
            let what = if minuses.is_empty() {
                what
            } else {
                "an expression after `-`"
            };
            let (next, operand) = self.require(self.postfix(operand_at), operand_at, what)?;
            tail.push((self.off(at), minuses, operand));
            rest = next;
        }
        let mut exponent: Option<(ExprWithDepth, usize)> = None;
        while let Some((op_at, minuses, operand)) = tail.pop() {
            let node = match exponent.take() {
                None => operand,
                Some((power, power_op)) => self.binary(BinOp::Pow, operand, power, power_op)?,
            };
            exponent = Some((self.negate(node, &minuses)?, op_at));
        }
        let node = match exponent {
            None => base,
            Some((power, op_at)) => self.binary(BinOp::Pow, base, power, op_at)?,
        };
        Ok((rest, node))
    }

    /// An atom followed by any number of applications `(args)`.
    pub(super) fn postfix(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let (mut rest, mut node) = self.atom(input)?;
        loop {
            self.adjacent(rest, &node)?;
            let at = ws(rest);
            if !at.starts_with('(') {
                return Ok((rest, node));
            }
            let (next, applied) = self.apply(node, at)?;
            node = applied;
            rest = next;
        }
    }

    /// `head(args)` for a head that is not a plain name (`at` starts with `(`).
    pub(super) fn apply(
        &self,
        head: ExprWithDepth,
        at: &'a str,
    ) -> GrammarResult<'a, ExprWithDepth> {
        let mut args = Vec::new();
        let (next, args_depth) = self.args(at, &mut args)?;
        let span = Span::new(head.expr.span.start, self.off(next));
        let depth = args_depth.max(head.depth);
        let node = self.make(ExprKind::Apply(head.expr, args), span, depth, self.off(at))?;
        Ok((next, node))
    }

    /// Refuses an operand written directly against the previous one (`2x`,
    /// `(a)b`, `2[x]`), and a number followed by `(`: implicit multiplication.
    pub(super) fn adjacent(&self, rest: &'a str, left: &ExprWithDepth) -> GrammarResult<'a, ()> {
        let touching = rest
            .chars()
            .next()
            .is_some_and(|ch| is_ident_start(ch) || ch == '[' || ch == '{' || starts_number(rest));
        let at = ws(rest);
        let number_call = at.starts_with('(') && matches!(left.expr.kind, ExprKind::Num(_));
        if !touching && !number_call {
            return Ok((rest, ()));
        }
        let at = if touching { rest } else { at };
        let token = next_token(at);
        self.fail_at(
            at,
            token.len(),
            ParseErrorKind::ImplicitMultiplication {
                left: self.snippet(left.expr.span),
                right: token.to_string(),
            },
        )
    }

    /// A number, a name, a call `name(args)`, `(expr)`, a list or a matrix.
    pub(super) fn atom(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let at = ws(input);
        match at.as_bytes().first() {
            Some(b'(') => self.parens(at),
            Some(b'[') => self.list(at),
            Some(b'{') => self.matrix(at),
            _ if starts_number(at) => self.number_atom(at),
            Some(byte) if is_ident_start(char::from(*byte)) => self.name_atom(at),
            _ => no_expr(at),
        }
    }

    pub(super) fn number_atom(&self, at: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let (rest, text) = self.number(at)?;
        let span = Span::new(self.off(at), self.off(rest));
        let expr = Box::new(SyntaxExpr::new(ExprKind::Num(text.to_string()), span));
        Ok((rest, ExprWithDepth { expr, depth: 1 }))
    }

    /// A name, or a call when `(` follows. Reserved words other than `t` and
    /// `pi` are not names; `sin`, `cos` and `exp` must be called.
    pub(super) fn name_atom(&self, at: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let (rest, word) = ident(at)?;
        if rest.starts_with('\'') {
            return self.primed_call(at, rest, word);
        }
        let name_span = Span::new(self.off(at), self.off(rest));
        let after = ws(rest);
        let is_call = after.starts_with('(');
        if matches!(word, "sin" | "cos" | "exp") {
            if !is_call {
                return self.expected(after, &format!("`(` and an argument after `{word}`"));
            }
        } else if is_reserved(word) && word != "t" && word != "pi" {
            return no_expr(at);
        }
        if !is_call {
            let expr = Box::new(SyntaxExpr::new(ExprKind::Name(word.to_string()), name_span));
            return Ok((rest, ExprWithDepth { expr, depth: 1 }));
        }
        self.call(Ident::new(word, name_span), after)
    }

    /// `V'(q)`, `V''(q)`, …: a derivative of an unspecified function of
    /// one argument (the primes are kept in the called name).
    pub(super) fn primed_call(
        &self,
        at: &'a str,
        rest: &'a str,
        word: &str,
    ) -> GrammarResult<'a, ExprWithDepth> {
        let after_primes = rest.trim_start_matches('\'');
        let name_span = Span::new(self.off(at), self.off(after_primes));
        if is_reserved(word) {
            return self.fail(name_span, ParseErrorKind::Reserved(word.to_string()));
        }
        let after = ws(after_primes);
        if !after.starts_with('(') {
            let primed = &at[..name_span.end - name_span.start];
            return self.expected(after, &format!("`(` and an argument after `{primed}`"));
        }
        let primed = &at[..name_span.end - name_span.start];
        self.call(Ident::new(primed, name_span), after)
    }

    /// `name(args)` (`at` starts with `(`).
    pub(super) fn call(&self, name: Ident, at: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let mut args = Vec::new();
        let (next, depth) = self.args(at, &mut args)?;
        let span = Span::new(name.span.start, self.off(next));
        let node = self.make(ExprKind::Call(name, args), span, depth, self.off(at))?;
        Ok((next, node))
    }

    /// `(expr)`; the span of the result includes the parentheses.
    pub(super) fn parens(&self, at: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let inner = at.get(1..).unwrap_or("");
        let (next, mut node) = self.require(self.expr(inner), inner, "an expression after `(`")?;
        let close = ws(next);
        if let Some(after) = close.strip_prefix(')') {
            node.expr.span = Span::new(self.off(at), self.off(after));
            return Ok((after, node));
        }
        if close.starts_with(',') {
            return self.expected(
                close,
                "an operator or `)` (a field is written with square brackets, as in `[a, b]`)",
            );
        }
        self.expected(close, "an operator or `)`")
    }

    /// `[e, ...]` (`input` starts with `[`).
    pub(super) fn list(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let start = self.off(input);
        let mut next_in = input.get(1..).unwrap_or("");
        let mut entries = Vec::new();
        let mut depth = 0;
        loop {
            let what = if entries.is_empty() {
                "an entry after `[`"
            } else {
                "an entry after `,`"
            };
            let (rest, entry) = self.require(self.expr(next_in), next_in, what)?;
            depth = depth.max(entry.depth);
            entries.push(*entry.expr);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(']') {
                let span = Span::new(start, self.off(after));
                let node = self.make(ExprKind::List(entries), span, depth, start)?;
                return Ok((after, node));
            } else {
                return self.expected(at, "`,` or `]`");
            }
        }
    }

    /// `{a, b; c, d}` (`input` starts with `{`).
    pub(super) fn matrix(&self, input: &'a str) -> GrammarResult<'a, ExprWithDepth> {
        let start = self.off(input);
        let mut next_in = input.get(1..).unwrap_or("");
        let mut rows = Vec::new();
        let mut row = Vec::new();
        let mut depth = 0;
        loop {
            let what = match (row.is_empty(), rows.is_empty()) {
                (false, _) => "an entry after `,`",
                (true, true) => "an entry after `{`",
                (true, false) => "an entry after `;`",
            };
            let (rest, entry) = self.require(self.expr(next_in), next_in, what)?;
            depth = depth.max(entry.depth);
            row.push(*entry.expr);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(';') {
                rows.push(std::mem::take(&mut row));
                next_in = after;
            } else if let Some(after) = at.strip_prefix('}') {
                rows.push(row);
                let span = Span::new(start, self.off(after));
                let node = self.make(ExprKind::Matrix(rows), span, depth, start)?;
                return Ok((after, node));
            } else {
                return self.expected(at, "`,`, `;` or `}`");
            }
        }
    }

    /// `(arg, ...)` (`input` starts with `(`): pushes the arguments on `args`
    /// and returns the depth of the deepest.
    pub(super) fn args(&self, input: &'a str, args: &mut Vec<Arg>) -> GrammarResult<'a, usize> {
        let mut next_in = input.get(1..).unwrap_or("");
        let mut depth = 0;
        loop {
            let what = if args.is_empty() {
                "an argument after `(`"
            } else {
                "an argument after `,`"
            };
            let (rest, arg_depth) = self.arg(next_in, what, args)?;
            depth = depth.max(arg_depth);
            let at = ws(rest);
            if let Some(after) = at.strip_prefix(',') {
                next_in = after;
            } else if let Some(after) = at.strip_prefix(')') {
                return Ok((after, depth));
            } else {
                return self.expected(at, "`,` or `)`");
            }
        }
    }

    /// `NAME = expr` (a binding, as in `plug`) or a plain expression, pushed
    /// on `args`; returns its depth.
    pub(super) fn arg(
        &self,
        input: &'a str,
        what: &str,
        args: &mut Vec<Arg>,
    ) -> GrammarResult<'a, usize> {
        let at = ws(input);
        if let Some((name, value_in)) = self.binding(at)? {
            return self.bound_arg(name, value_in, args);
        }
        if let Some((name, params, value_in)) = self.function_binding(at) {
            let (rest, depth) = self.bound_arg(name, value_in, args)?;
            if let Some(Arg::Bind(name, value)) = args.pop() {
                args.push(Arg::BindFunc(name, params, value));
            }
            return Ok((rest, depth));
        }
        let (rest, node) = self.require(self.expr(at), at, what)?;
        args.push(Arg::Pos(*node.expr));
        Ok((rest, node.depth))
    }

    /// The value of `name = value` in an argument list, pushed on `args`.
    pub(super) fn bound_arg(
        &self,
        name: Ident,
        value_in: &'a str,
        args: &mut Vec<Arg>,
    ) -> GrammarResult<'a, usize> {
        let (rest, value) = match self.expr(value_in) {
            Err(NomErr::Error(_)) => {
                return self.expected(value_in, &format!("a value after `{} =`", name.name))
            }
            other => other?,
        };
        args.push(Arg::Bind(name, *value.expr));
        Ok((rest, value.depth))
    }

    /// `NAME =` (not `==`) at `at`: the name and the input after `=`.
    /// `t` and `pi` are accepted (lowering decides); other reserved words are not.
    pub(super) fn binding(
        &self,
        at: &'a str,
    ) -> Result<Option<(Ident, &'a str)>, NomErr<GrammarError>> {
        let Ok((after_name, word)) = ident(at) else {
            return Ok(None);
        };
        let eq = ws(after_name);
        if !single_eq(eq) {
            return Ok(None);
        }
        let span = Span::new(self.off(at), self.off(after_name));
        if is_reserved(word) && word != "t" && word != "pi" {
            self.fail::<()>(span, ParseErrorKind::Reserved(word.to_string()))?;
        }
        Ok(Some((Ident::new(word, span), eq.get(1..).unwrap_or(""))))
    }

    /// `NAME(a, b) =` (not `==`) at `at`, placeholders bare names: the
    /// name, the placeholders and the input after `=` (as in
    /// `plug(e, V(s) = -cos(s))`). Anything else is not a definition.
    pub(super) fn function_binding(&self, at: &'a str) -> Option<(Ident, Vec<Ident>, &'a str)> {
        let (after_name, word) = ident(at).ok()?;
        let mut rest = ws(after_name).strip_prefix('(')?;
        let mut params = Vec::new();
        loop {
            let p_at = ws(rest);
            let (after, p) = ident(p_at).ok()?;
            params.push(Ident::new(p, Span::new(self.off(p_at), self.off(after))));
            let next = ws(after);
            if let Some(r) = next.strip_prefix(',') {
                rest = r;
            } else {
                rest = next.strip_prefix(')')?;
                break;
            }
        }
        let eq = ws(rest);
        if !single_eq(eq) || is_reserved(word) {
            return None;
        }
        let span = Span::new(self.off(at), self.off(after_name));
        Some((Ident::new(word, span), params, eq.get(1..).unwrap_or("")))
    }

    /// A required expression.
    pub(super) fn expect_expr(&self, input: &'a str, what: &str) -> GrammarResult<'a, SyntaxExpr> {
        let (rest, node) = self.require(self.expr(input), input, what)?;
        Ok((rest, *node.expr))
    }
}
