//! Syntax tree of the command language: a faithful record of what the user
//! typed, with a byte span on every node.
//!
//! This module owns the node types and a bracketed printer (`sexpr`) that makes
//! precedence and structure visible in tests and debugging output. It must not
//! know how text is parsed, what a name refers to, which kind (scalar, field,
//! matrix) a value has, or how anything is evaluated: numbers stay as the text
//! that was typed and words such as `latex` are kept for lowering to check.

use std::fmt::Write as _;

/// A half-open range `start..end` of byte offsets into the statement text.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Default)]
pub struct Span {
    /// Offset of the first byte.
    pub start: usize,
    /// Offset one past the last byte.
    pub end: usize,
}

impl Span {
    /// The span `start..end`; the two ends are swapped if given in reverse.
    pub fn new(start: usize, end: usize) -> Span {
        if end < start {
            Span {
                start: end,
                end: start,
            }
        } else {
            Span { start, end }
        }
    }

    /// The smallest span covering both `self` and `other`.
    pub fn join(self, other: Span) -> Span {
        Span {
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}

/// A name as written, with its span.
#[derive(Clone, Debug, PartialEq)]
pub struct Ident {
    /// The identifier text (ASCII letters, digits and `_`, not starting with a digit).
    pub name: String,
    /// Where the name was written.
    pub span: Span,
}

impl Ident {
    /// An identifier with the given name and span.
    pub fn new(name: impl Into<String>, span: Span) -> Ident {
        Ident {
            name: name.into(),
            span,
        }
    }
}

/// A binary operator of the expression language.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinOp {
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `^` (also written `**`)
    Pow,
}

impl BinOp {
    /// The operator's canonical symbol (`**` is shown as `^`).
    pub fn symbol(self) -> &'static str {
        match self {
            BinOp::Add => "+",
            BinOp::Sub => "-",
            BinOp::Mul => "*",
            BinOp::Div => "/",
            BinOp::Pow => "^",
        }
    }
}

/// An expression node with its span (parentheses around it are included).
#[derive(Clone, Debug, PartialEq)]
pub struct SyntaxExpr {
    /// What the node is.
    pub kind: ExprKind,
    /// Where it was written.
    pub span: Span,
}

/// The kinds of expression node.
#[derive(Clone, Debug, PartialEq)]
pub enum ExprKind {
    /// A number literal exactly as typed: "3", "0.25", ".5", "1e-4", "2.5E+3".
    Num(String),
    /// An identifier used as a value, including `t` and `pi`.
    Name(String),
    /// Unary minus.
    Neg(Box<SyntaxExpr>),
    /// A binary operation.
    Bin(BinOp, Box<SyntaxExpr>, Box<SyntaxExpr>),
    /// `NAME(args)`: a built-in such as `sin` or `plug`, or `X(h)` for a named field `X`.
    Call(Ident, Vec<Arg>),
    /// Any other postfix application, e.g. `[X, Y](h)` or `(X + Y)(h)`.
    Apply(Box<SyntaxExpr>, Vec<Arg>),
    /// `[a, b, ...]` (at least one entry): a field literal, or a Lie bracket
    /// when it has two field entries (decided later by kinds).
    List(Vec<SyntaxExpr>),
    /// `{a, b; c, d}`: rows separated by `;` (equal row lengths are not checked here).
    Matrix(Vec<Vec<SyntaxExpr>>),
}

/// An argument of a call or application.
#[derive(Clone, Debug, PartialEq)]
pub enum Arg {
    /// A plain argument.
    Pos(SyntaxExpr),
    /// `q = v`, as in `plug(e, q = v)`.
    Bind(Ident, SyntaxExpr),
    /// `V(s) = body`, as in `plug(e, V(s) = -cos(s))`: a definition of an
    /// unspecified function (name, placeholders, body).
    BindFunc(Ident, Vec<Ident>, SyntaxExpr),
}

/// One function of a `func` declaration: `J(a, b)`.
#[derive(Clone, Debug, PartialEq)]
pub struct FuncDecl {
    /// The function's name.
    pub name: Ident,
    /// The argument names (placeholders).
    pub params: Vec<Ident>,
}

/// One statement with its span (leading and trailing blanks and comments excluded).
#[derive(Clone, Debug, PartialEq)]
pub struct Stmt {
    /// What the statement is.
    pub kind: StmtKind,
    /// Where it was written.
    pub span: Span,
}

/// The kinds of statement.
#[derive(Clone, Debug, PartialEq)]
pub enum StmtKind {
    /// `state q, p`
    State(Vec<Ident>),
    /// `param eps, k`
    Param(Vec<Ident>),
    /// `input u1, u2`
    Input(Vec<Ident>),
    /// `func V(s), J(a, b)`
    Func(Vec<FuncDecl>),
    /// `A = ...` or `A, W = average ... with transform`.
    Define {
        /// The names being bound (one, or several for a command).
        names: Vec<Ident>,
        /// What they are bound to.
        rhs: Rhs,
    },
    /// A bare expression line: print its value.
    Print(SyntaxExpr),
    /// A series or numeric command not bound to a name.
    Run(Command),
    /// `check A == B`
    Check {
        /// Left side.
        lhs: SyntaxExpr,
        /// Right side.
        rhs: SyntaxExpr,
    },
    /// `show E as WORD [to PATH]` (the word is kept as typed; lowering validates it).
    Show {
        /// What to show.
        expr: SyntaxExpr,
        /// The format word, e.g. `latex`, `brackets` or `python`.
        how: Ident,
        /// `to PATH`: write the text to a file instead of printing it.
        to: Option<PathArg>,
    },
    /// `save PATH [with checks]`
    Save {
        /// Where.
        path: PathArg,
        /// `with checks`: freeze every bound value as a `check` after its line.
        checks: bool,
    },
    /// `run PATH`
    RunFile(PathArg),
    /// `names`
    Names,
    /// `forget NAME`
    Forget(Ident),
    /// `help` or `help WORD` (any identifier, command words included).
    Help(Option<Ident>),
    /// `set budget N`
    SetBudget(Spanned<u64>),
    /// `set tolerance E` (the integration tolerance of numerical commands)
    SetTolerance(SyntaxExpr),
    /// `quit`
    Quit,
}

/// The right-hand side of a definition.
// One statement exists at a time, so the size of a command inline costs nothing;
// keeping it unboxed keeps the shape the evaluator is written against.
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum Rhs {
    /// `A = EXPR`
    Expr(SyntaxExpr),
    /// `A = COMMAND` or `A, W = COMMAND`
    Command(Command),
}

/// A value together with the span it was written at.
#[derive(Clone, Debug, PartialEq)]
pub struct Spanned<T> {
    /// The value.
    pub value: T,
    /// Where it was written.
    pub span: Span,
}

/// A file name: a bare token or a "double-quoted string" (quotes removed).
#[derive(Clone, Debug, PartialEq)]
pub struct PathArg {
    /// The path text without quotes.
    pub path: String,
    /// Where it was written (quotes included).
    pub span: Span,
}

/// `plot q, p FILE` of `simulate`: a phase portrait of two states.
#[derive(Clone, Debug, PartialEq)]
pub struct PhasePlot {
    /// The state on the horizontal axis.
    pub x: Ident,
    /// The state on the vertical axis.
    pub y: Ident,
    /// The file.
    pub path: PathArg,
}

/// `q = 1` in a `from`, `at`, `with` list.
#[derive(Clone, Debug, PartialEq)]
pub struct Assign {
    /// The name assigned to.
    pub name: Ident,
    /// Its value.
    pub value: SyntaxExpr,
}

/// A series or numeric command with its span (from the command word on).
#[derive(Clone, Debug, PartialEq)]
pub struct Command {
    /// Which command and its parts.
    pub kind: CommandKind,
    /// Where it was written.
    pub span: Span,
}

/// The commands of the language and their parts.
// Commands are few and short-lived; their parts stay inline (see `Rhs`).
#[allow(clippy::large_enum_variant)]
#[derive(Clone, Debug, PartialEq)]
pub enum CommandKind {
    /// `flow E [on E] to N`
    Flow {
        /// The time-varying field.
        field: SyntaxExpr,
        /// The output expression after `on`.
        on: Option<SyntaxExpr>,
        /// The order after `to`.
        to: Spanned<u64>,
    },
    /// `magnus E to N [over E]`
    Magnus {
        /// The time-varying field.
        field: SyntaxExpr,
        /// The order after `to`.
        to: Spanned<u64>,
        /// The time span after `over`.
        over: Option<SyntaxExpr>,
    },
    /// `average E to N in NAME [strobo|classic] [depth N] [with transform]`
    Average {
        /// The system.
        field: SyntaxExpr,
        /// The order after `to`.
        to: Spanned<u64>,
        /// The small parameter after `in` (the frequency of `in 1/w`).
        param: Ident,
        /// `in 1/w`: a symbolic frequency w, eps = 1/w (DESIGN §2.7c).
        inverse: bool,
        /// `strobo` or `classic` as typed.
        method: Option<Ident>,
        /// The ad-series depth after `depth`.
        depth: Option<Spanned<u64>>,
        /// Whether `with transform` was given.
        with_transform: bool,
        /// Names for the averaged state after `as` (empty: the system's chart).
        chart: Vec<Ident>,
    },
    /// `change E to r, phi by x = r*cos(phi), v = r*sin(phi)`
    Change {
        /// The field or scalar to rewrite.
        field: SyntaxExpr,
        /// The new coordinates after `to`.
        to: Vec<Ident>,
        /// The old coordinates as expressions in the new ones, after `by`.
        by: Vec<Assign>,
    },
    /// `carleman E degree N`
    Carleman {
        /// The field.
        field: SyntaxExpr,
        /// The degree after `degree`.
        degree: Spanned<u64>,
    },
    /// `simulate E from q=1, p=0 for E [with a=1] [plot PATH]`
    Simulate {
        /// The system.
        field: SyntaxExpr,
        /// Initial values.
        from: Vec<Assign>,
        /// Time horizon after `for`.
        horizon: SyntaxExpr,
        /// Parameter values after `with`.
        with: Vec<Assign>,
        /// Plot file after `plot`.
        plot: Option<PathArg>,
        /// Phase portrait after `plot q, p`.
        phase: Option<PhasePlot>,
    },
    /// `compare E with E from ... for E [with ...] sweep eps=0.2,0.1 [tol E] [plot PATH]`
    Compare {
        /// The original system.
        system: SyntaxExpr,
        /// The averaged model after `with`.
        model: SyntaxExpr,
        /// Initial values.
        from: Vec<Assign>,
        /// Time horizon after `for`.
        horizon: SyntaxExpr,
        /// Parameter values after the second `with`.
        with: Vec<Assign>,
        /// The swept parameter.
        sweep_param: Ident,
        /// Its values.
        sweep: Vec<SyntaxExpr>,
        /// Error tolerance after `tol`.
        tol: Option<SyntaxExpr>,
        /// Plot file after `plot`.
        plot: Option<PathArg>,
        /// Plot file of the trajectories after `plot paths`.
        paths: Option<PathArg>,
        /// CSV file after `table`.
        table: Option<PathArg>,
    },
    /// `equilibria E near q=1, p=0 [with k=1]`
    Equilibria {
        /// The autonomous field.
        field: SyntaxExpr,
        /// The guess.
        near: Vec<Assign>,
        /// Parameter values after `with`.
        with: Vec<Assign>,
    },
    /// `stability E at q=pi, p=0 [with k=1]`
    Stability {
        /// The autonomous field.
        field: SyntaxExpr,
        /// The point.
        at: Vec<Assign>,
        /// Parameter values after `with`.
        with: Vec<Assign>,
    },
}

impl SyntaxExpr {
    /// An expression node.
    pub fn new(kind: ExprKind, span: Span) -> SyntaxExpr {
        SyntaxExpr { kind, span }
    }

    /// A compact bracketed rendering that makes structure visible, e.g.
    /// `(+ a (* b c))`, `(neg x)`, `(call sin x)`, `(apply [X Y] h)`,
    /// `[a b]`, `{a b; c d}`, `(= q 1)` for a bound argument.
    pub fn sexpr(&self) -> String {
        let mut out = String::new();
        write_expr(&mut out, self);
        out
    }
}

impl Arg {
    /// The bracketed rendering of the argument (see [`SyntaxExpr::sexpr`]).
    pub fn sexpr(&self) -> String {
        let mut out = String::new();
        write_arg(&mut out, self);
        out
    }

    /// The span of the whole argument (for a binding, from the name to the value).
    pub fn span(&self) -> Span {
        match self {
            Arg::Pos(expr) => expr.span,
            Arg::Bind(name, value) | Arg::BindFunc(name, _, value) => name.span.join(value.span),
        }
    }
}

impl Command {
    /// A bracketed rendering of the command, e.g. `(flow V on h to 3)`.
    pub fn sexpr(&self) -> String {
        let mut out = String::new();
        write_command(&mut out, self);
        out
    }
}

impl Stmt {
    /// A bracketed rendering of the statement, e.g. `(define A (average S to 3 in eps))`.
    pub fn sexpr(&self) -> String {
        let mut out = String::new();
        write_stmt(&mut out, self);
        out
    }
}

fn write_expr(out: &mut String, expr: &SyntaxExpr) {
    match &expr.kind {
        ExprKind::Num(text) | ExprKind::Name(text) => out.push_str(text),
        ExprKind::Neg(inner) => {
            out.push_str("(neg ");
            write_expr(out, inner);
            out.push(')');
        }
        ExprKind::Bin(op, lhs, rhs) => {
            out.push('(');
            out.push_str(op.symbol());
            out.push(' ');
            write_expr(out, lhs);
            out.push(' ');
            write_expr(out, rhs);
            out.push(')');
        }
        ExprKind::Call(name, args) => {
            out.push_str("(call ");
            out.push_str(&name.name);
            write_args(out, args);
            out.push(')');
        }
        ExprKind::Apply(head, args) => {
            out.push_str("(apply ");
            write_expr(out, head);
            write_args(out, args);
            out.push(')');
        }
        ExprKind::List(entries) => {
            out.push('[');
            write_seq(out, entries);
            out.push(']');
        }
        ExprKind::Matrix(rows) => {
            out.push('{');
            for (row_idx, row) in rows.iter().enumerate() {
                if row_idx > 0 {
                    out.push_str("; ");
                }
                write_seq(out, row);
            }
            out.push('}');
        }
    }
}

fn write_seq(out: &mut String, exprs: &[SyntaxExpr]) {
    for (idx, expr) in exprs.iter().enumerate() {
        if idx > 0 {
            out.push(' ');
        }
        write_expr(out, expr);
    }
}

fn write_args(out: &mut String, args: &[Arg]) {
    for arg in args {
        out.push(' ');
        write_arg(out, arg);
    }
}

fn write_arg(out: &mut String, arg: &Arg) {
    match arg {
        Arg::Pos(expr) => write_expr(out, expr),
        Arg::Bind(name, value) => {
            out.push_str("(= ");
            out.push_str(&name.name);
            out.push(' ');
            write_expr(out, value);
            out.push(')');
        }
        Arg::BindFunc(name, params, value) => {
            out.push_str("(= (");
            out.push_str(&name.name);
            write_names(out, params);
            out.push_str(") ");
            write_expr(out, value);
            out.push(')');
        }
    }
}

fn write_assigns(out: &mut String, word: &str, assigns: &[Assign]) {
    out.push(' ');
    out.push_str(word);
    out.push_str(" [");
    for (idx, assign) in assigns.iter().enumerate() {
        if idx > 0 {
            out.push(' ');
        }
        out.push_str("(= ");
        out.push_str(&assign.name.name);
        out.push(' ');
        write_expr(out, &assign.value);
        out.push(')');
    }
    out.push(']');
}

fn write_optional_expr(out: &mut String, word: &str, expr: Option<&SyntaxExpr>) {
    if let Some(expr) = expr {
        out.push(' ');
        out.push_str(word);
        out.push(' ');
        write_expr(out, expr);
    }
}

fn write_plot(out: &mut String, plot: Option<&PathArg>) {
    if let Some(path) = plot {
        let _ = write!(out, " plot {:?}", path.path);
    }
}

fn write_command(out: &mut String, command: &Command) {
    match &command.kind {
        CommandKind::Flow { field, on, to } => {
            out.push_str("(flow ");
            write_expr(out, field);
            write_optional_expr(out, "on", on.as_ref());
            let _ = write!(out, " to {})", to.value);
        }
        CommandKind::Magnus { field, to, over } => {
            out.push_str("(magnus ");
            write_expr(out, field);
            let _ = write!(out, " to {}", to.value);
            write_optional_expr(out, "over", over.as_ref());
            out.push(')');
        }
        CommandKind::Average {
            field,
            to,
            param,
            inverse,
            method,
            depth,
            with_transform,
            chart,
        } => {
            out.push_str("(average ");
            write_expr(out, field);
            let per = if *inverse { "1/" } else { "" };
            let _ = write!(out, " to {} in {per}{}", to.value, param.name);
            if let Some(method) = method {
                out.push(' ');
                out.push_str(&method.name);
            }
            if let Some(depth) = depth {
                let _ = write!(out, " depth {}", depth.value);
            }
            if *with_transform {
                out.push_str(" transform");
            }
            if !chart.is_empty() {
                let names: Vec<&str> = chart.iter().map(|c| c.name.as_str()).collect();
                let _ = write!(out, " as {}", names.join(" "));
            }
            out.push(')');
        }
        CommandKind::Change { field, to, by } => {
            out.push_str("(change ");
            write_expr(out, field);
            let names: Vec<&str> = to.iter().map(|c| c.name.as_str()).collect();
            let _ = write!(out, " to {} by", names.join(" "));
            for a in by {
                let _ = write!(out, " (= {} ", a.name.name);
                write_expr(out, &a.value);
                out.push(')');
            }
            out.push(')');
        }
        CommandKind::Carleman { field, degree } => {
            out.push_str("(carleman ");
            write_expr(out, field);
            let _ = write!(out, " degree {})", degree.value);
        }
        CommandKind::Simulate {
            field,
            from,
            horizon,
            with,
            plot,
            phase,
        } => {
            out.push_str("(simulate ");
            write_expr(out, field);
            write_assigns(out, "from", from);
            write_optional_expr(out, "for", Some(horizon));
            if !with.is_empty() {
                write_assigns(out, "with", with);
            }
            write_plot(out, plot.as_ref());
            if let Some(ph) = phase {
                let _ = write!(out, " plot {} {} {:?}", ph.x.name, ph.y.name, ph.path.path);
            }
            out.push(')');
        }
        CommandKind::Compare {
            system,
            model,
            from,
            horizon,
            with,
            sweep_param,
            sweep,
            tol,
            plot,
            paths,
            table,
        } => {
            out.push_str("(compare ");
            write_expr(out, system);
            write_optional_expr(out, "with", Some(model));
            write_assigns(out, "from", from);
            write_optional_expr(out, "for", Some(horizon));
            if !with.is_empty() {
                write_assigns(out, "with", with);
            }
            let _ = write!(out, " sweep {} [", sweep_param.name);
            write_seq(out, sweep);
            out.push(']');
            write_optional_expr(out, "tol", tol.as_ref());
            write_plot(out, plot.as_ref());
            if let Some(p) = paths {
                let _ = write!(out, " plot-paths {:?}", p.path);
            }
            if let Some(p) = table {
                let _ = write!(out, " table {:?}", p.path);
            }
            out.push(')');
        }
        CommandKind::Equilibria { field, near, with } => {
            out.push_str("(equilibria ");
            write_expr(out, field);
            write_assigns(out, "near", near);
            if !with.is_empty() {
                write_assigns(out, "with", with);
            }
            out.push(')');
        }
        CommandKind::Stability { field, at, with } => {
            out.push_str("(stability ");
            write_expr(out, field);
            write_assigns(out, "at", at);
            if !with.is_empty() {
                write_assigns(out, "with", with);
            }
            out.push(')');
        }
    }
}

fn write_names(out: &mut String, names: &[Ident]) {
    for name in names {
        out.push(' ');
        out.push_str(&name.name);
    }
}

fn write_stmt(out: &mut String, stmt: &Stmt) {
    match &stmt.kind {
        StmtKind::State(names) => {
            out.push_str("(state");
            write_names(out, names);
            out.push(')');
        }
        StmtKind::Param(names) => {
            out.push_str("(param");
            write_names(out, names);
            out.push(')');
        }
        StmtKind::Input(names) => {
            out.push_str("(input");
            write_names(out, names);
            out.push(')');
        }
        StmtKind::Func(decls) => {
            out.push_str("(func");
            for d in decls {
                out.push_str(" (");
                out.push_str(&d.name.name);
                write_names(out, &d.params);
                out.push(')');
            }
            out.push(')');
        }
        StmtKind::Define { names, rhs } => {
            out.push_str("(define ");
            if let [single] = names.as_slice() {
                out.push_str(&single.name);
            } else {
                out.push('[');
                for (idx, name) in names.iter().enumerate() {
                    if idx > 0 {
                        out.push(' ');
                    }
                    out.push_str(&name.name);
                }
                out.push(']');
            }
            out.push(' ');
            match rhs {
                Rhs::Expr(expr) => write_expr(out, expr),
                Rhs::Command(command) => write_command(out, command),
            }
            out.push(')');
        }
        StmtKind::Print(expr) => {
            out.push_str("(print ");
            write_expr(out, expr);
            out.push(')');
        }
        StmtKind::Run(command) => write_command(out, command),
        StmtKind::Check { lhs, rhs } => {
            out.push_str("(check ");
            write_expr(out, lhs);
            out.push(' ');
            write_expr(out, rhs);
            out.push(')');
        }
        StmtKind::Show { expr, how, to } => {
            out.push_str("(show ");
            write_expr(out, expr);
            let _ = write!(out, " as {}", how.name);
            if let Some(p) = to {
                let _ = write!(out, " to {:?}", p.path);
            }
            out.push(')');
        }
        StmtKind::Save { path, checks } => {
            let _ = write!(out, "(save {:?}", path.path);
            out.push_str(if *checks { " with checks)" } else { ")" });
        }
        StmtKind::RunFile(path) => {
            let _ = write!(out, "(run {:?})", path.path);
        }
        StmtKind::Names => out.push_str("(names)"),
        StmtKind::Forget(name) => {
            let _ = write!(out, "(forget {})", name.name);
        }
        StmtKind::Help(None) => out.push_str("(help)"),
        StmtKind::Help(Some(word)) => {
            let _ = write!(out, "(help {})", word.name);
        }
        StmtKind::SetBudget(budget) => {
            let _ = write!(out, "(set-budget {})", budget.value);
        }
        StmtKind::SetTolerance(value) => {
            out.push_str("(set-tolerance ");
            write_expr(out, value);
            out.push(')');
        }
        StmtKind::Quit => out.push_str("(quit)"),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn name(text: &str, start: usize) -> SyntaxExpr {
        SyntaxExpr::new(
            ExprKind::Name(text.to_string()),
            Span::new(start, start + text.len()),
        )
    }

    #[test]
    fn span_new_orders_ends_and_join_covers_both() {
        assert_eq!(Span::new(5, 2), Span { start: 2, end: 5 });
        assert_eq!(Span::new(1, 3).join(Span::new(7, 9)), Span::new(1, 9));
        assert_eq!(Span::new(7, 9).join(Span::new(1, 3)), Span::new(1, 9));
    }

    #[test]
    fn sexpr_brackets_every_node() {
        let sum = SyntaxExpr::new(
            ExprKind::Bin(
                BinOp::Add,
                Box::new(name("a", 0)),
                Box::new(SyntaxExpr::new(
                    ExprKind::Neg(Box::new(name("b", 5))),
                    Span::new(4, 6),
                )),
            ),
            Span::new(0, 6),
        );
        assert_eq!(sum.sexpr(), "(+ a (neg b))");
        let matrix = SyntaxExpr::new(
            ExprKind::Matrix(vec![vec![name("a", 1), name("b", 4)], vec![name("c", 7)]]),
            Span::new(0, 9),
        );
        assert_eq!(matrix.sexpr(), "{a b; c}");
        let call = SyntaxExpr::new(
            ExprKind::Call(
                Ident::new("plug", Span::new(0, 4)),
                vec![
                    Arg::Pos(name("e", 5)),
                    Arg::Bind(Ident::new("q", Span::new(8, 9)), name("x", 12)),
                ],
            ),
            Span::new(0, 14),
        );
        assert_eq!(call.sexpr(), "(call plug e (= q x))");
    }

    #[test]
    fn arg_span_of_a_binding_covers_name_and_value() {
        let arg = Arg::Bind(Ident::new("q", Span::new(8, 9)), name("x", 12));
        assert_eq!(arg.span(), Span::new(8, 13));
    }
}
