//! Expressions: precedence and associativity, atoms and applications,
//! spans, nesting limits, and parsing minimally bracketed text back.

use super::*;

#[test]
fn precedence_and_associativity() {
    let cases = [
        ("x", "x"),
        ("-x^2", "(neg (^ x 2))"),
        ("x^-2", "(^ x (neg 2))"),
        ("x^-2^3", "(^ x (neg (^ 2 3)))"),
        ("x^2^-1", "(^ x (^ 2 (neg 1)))"),
        ("x^--2", "(^ x (neg (neg 2)))"),
        ("2^3^2", "(^ 2 (^ 3 2))"),
        ("2**3**2", "(^ 2 (^ 3 2))"),
        ("2**3^2", "(^ 2 (^ 3 2))"),
        ("-2^-x", "(neg (^ 2 (neg x)))"),
        ("a-b-c", "(- (- a b) c)"),
        ("a/b/c", "(/ (/ a b) c)"),
        ("a-b+c", "(+ (- a b) c)"),
        ("a*b/c*d", "(* (/ (* a b) c) d)"),
        ("a+b*c", "(+ a (* b c))"),
        ("a*b+c", "(+ (* a b) c)"),
        ("a*b^c", "(* a (^ b c))"),
        ("a^b*c", "(* (^ a b) c)"),
        ("-a*b", "(* (neg a) b)"),
        ("a*-b", "(* a (neg b))"),
        ("a - -b", "(- a (neg b))"),
        ("--a", "(neg (neg a))"),
        ("(a+b)*c", "(* (+ a b) c)"),
        ("(a-b)-(c-d)", "(- (- a b) (- c d))"),
        ("x^(1/2)", "(^ x (/ 1 2))"),
        ("2*pi*t", "(* (* 2 pi) t)"),
        ("-X(h)^2", "(neg (^ (call X h) 2))"),
        ("a +\n  b # comment\n * c", "(+ a (* b c))"),
        ("a + \\\n b", "(+ a b)"),
    ];
    for (text, expected) in cases {
        assert_eq!(expr(text).sexpr(), expected, "{text:?}");
    }
}

#[test]
fn atoms_calls_and_applications() {
    let cases = [
        ("3", "3"),
        ("0.25", "0.25"),
        (".5", ".5"),
        ("1e-4", "1e-4"),
        ("2.5E+3", "2.5E+3"),
        ("10e3", "10e3"),
        ("007", "007"),
        ("pi/2", "(/ pi 2)"),
        ("eps_2", "eps_2"),
        ("sin(q + pi/2)", "(call sin (+ q (/ pi 2)))"),
        ("exp(x) * cos(2*x)", "(* (call exp x) (call cos (* 2 x)))"),
        ("sin (t)", "(call sin t)"),
        ("X(h)", "(call X h)"),
        ("X (h)", "(call X h)"),
        ("X(Y(h))", "(call X (call Y h))"),
        ("[X, Y](h)", "(apply [X Y] h)"),
        ("(X + Y)(h)", "(apply (+ X Y) h)"),
        ("(f)(x)", "(apply f x)"),
        ("order(A, eps, 2)(p)", "(apply (call order A eps 2) p)"),
        ("X(h)(g)", "(apply (call X h) g)"),
        ("plug(e, q = 1, p = x)", "(call plug e (= q 1) (= p x))"),
        ("plug(W, t = 0)", "(call plug W (= t 0))"),
        (
            "plug(pd(order(A, eps, 1)(p), th), th = pi)",
            "(call plug (call pd (apply (call order A eps 1) p) th) (= th pi))",
        ),
        ("ad(X, Y, 3)", "(call ad X Y 3)"),
        ("bch(X, Y, 4)", "(call bch X Y 4)"),
        ("iint(u1, u2)", "(call iint u1 u2)"),
        ("mean(cos(t)^2)", "(call mean (^ (call cos t) 2))"),
        ("[p, -gam*sin(th)]", "[p (* (neg gam) (call sin th))]"),
        ("[[a, b], c]", "[[a b] c]"),
        ("[x]", "[x]"),
        ("{a, b; c, d}", "{a b; c d}"),
        ("{1; 2, 3}", "{1; 2 3}"),
        ("det({a, b;\n c, d})", "(call det {a b; c d})"),
        (
            "cos(t)*[0, bet*sin(th)]",
            "(* (call cos t) [0 (* bet (call sin th))])",
        ),
    ];
    for (text, expected) in cases {
        assert_eq!(expr(text).sexpr(), expected, "{text:?}");
    }
}

#[test]
fn spans_cover_what_was_typed() {
    let neg = expr("-x^2");
    assert_eq!(neg.span, Span::new(0, 4));
    let ExprKind::Neg(power) = &neg.kind else {
        panic!("not a negation: {}", neg.sexpr());
    };
    assert_eq!(power.span, Span::new(1, 4));

    let product = expr("(a + b) * c");
    assert_eq!(product.span, Span::new(0, 11));
    let ExprKind::Bin(BinOp::Mul, lhs, rhs) = &product.kind else {
        panic!("not a product: {}", product.sexpr());
    };
    assert_eq!(lhs.span, Span::new(0, 7));
    assert_eq!(rhs.span, Span::new(10, 11));

    let call = expr("plug(e, q = 1)");
    assert_eq!(call.span, Span::new(0, 14));
    let ExprKind::Call(name, args) = &call.kind else {
        panic!("not a call: {}", call.sexpr());
    };
    assert_eq!(name.span, Span::new(0, 4));
    let [Arg::Pos(first), Arg::Bind(bound, value)] = args.as_slice() else {
        panic!("unexpected arguments: {}", call.sexpr());
    };
    assert_eq!(first.span, Span::new(5, 6));
    assert_eq!((bound.name.as_str(), bound.span), ("q", Span::new(8, 9)));
    assert_eq!(value.span, Span::new(12, 13));

    let statement = stmt("  flow V to 12   # comment");
    assert_eq!(statement.span, Span::new(2, 14));
    let StmtKind::Run(command) = &statement.kind else {
        panic!("not a command: {}", statement.sexpr());
    };
    assert_eq!(command.span, Span::new(2, 14));
    let CommandKind::Flow { to, .. } = &command.kind else {
        panic!("not flow: {}", command.sexpr());
    };
    assert_eq!((to.value, to.span), (12, Span::new(12, 14)));

    let save = stmt("save \"my file.ordex\"");
    let StmtKind::Save { path, .. } = &save.kind else {
        panic!("not save: {}", save.sexpr());
    };
    assert_eq!(path.span, Span::new(5, 20));
}

#[test]
fn nesting_up_to_the_limit_parses() {
    let parens = format!("{}x{}", "(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
    assert_eq!(expr(&parens).sexpr(), "x");
    let lists = format!("{}x{}", "[".repeat(MAX_NESTING), "]".repeat(MAX_NESTING));
    assert_eq!(
        expr(&lists).sexpr(),
        format!("{}x{}", "[".repeat(MAX_NESTING), "]".repeat(MAX_NESTING))
    );
    let calls = format!("{}x{}", "f(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
    assert!(expr(&calls).sexpr().starts_with("(call f (call f"));
    let mixed = format!(
        "{}x{}",
        "-g(1 + [{a, ".repeat(MAX_NESTING / 3),
        "}])".repeat(MAX_NESTING / 3)
    );
    assert!(expr(&mixed).sexpr().starts_with("(neg (call g (+ 1 [{a"));
    let chain = format!("x{}", "+x".repeat(MAX_EXPR_DEPTH - 2));
    assert!(parse_expr(&chain).is_ok());
}

#[test]
fn deep_nesting_is_safe_on_a_small_stack() {
    let handle = std::thread::Builder::new()
        .stack_size(256 * 1024)
        .spawn(|| {
            let calls = format!("{}x{}", "f(".repeat(MAX_NESTING), ")".repeat(MAX_NESTING));
            let shallow = format!(
                "{}x{}",
                "g(".repeat(INLINE_NESTING),
                ")".repeat(INLINE_NESTING)
            );
            (
                parse_stmt(&calls).map(|stmt| stmt.span),
                parse_stmt(&shallow).map(|stmt| stmt.span),
            )
        });
    let joined = match handle {
        Ok(handle) => handle.join(),
        Err(err) => panic!("cannot start the test thread: {err}"),
    };
    let Ok((deep, shallow)) = joined else {
        panic!("parsing on a small stack panicked");
    };
    assert_eq!(deep, Ok(Span::new(0, 3 * MAX_NESTING + 1)));
    assert_eq!(shallow, Ok(Span::new(0, 3 * INLINE_NESTING + 1)));
}

#[test]
fn parse_expr_requires_exactly_one_expression() {
    assert_eq!(expr(" a*b ").sexpr(), "(* a b)");
    let Err(err) = parse_expr("a b") else {
        panic!("`a b` parsed");
    };
    assert_eq!(err.span, Span::new(2, 3));
    let Err(err) = parse_expr("") else {
        panic!("empty text parsed");
    };
    assert_eq!(err.kind, expected("an expression", END));
}

/// Random expression trees over a few leaves, operators, calls and lists.
fn arb_expr() -> impl proptest::strategy::Strategy<Value = SyntaxExpr> {
    use proptest::prelude::*;
    let leaf = prop_oneof![
        Just(ExprKind::Name("a".into())),
        Just(ExprKind::Name("t".into())),
        Just(ExprKind::Num("2".into())),
        Just(ExprKind::Num("0.5".into())),
    ]
    .prop_map(|kind| SyntaxExpr::new(kind, Span::default()));
    leaf.prop_recursive(5, 48, 3, |inner| {
        let op = prop_oneof![
            Just(BinOp::Add),
            Just(BinOp::Sub),
            Just(BinOp::Mul),
            Just(BinOp::Div),
            Just(BinOp::Pow),
        ];
        prop_oneof![
            (op, inner.clone(), inner.clone()).prop_map(|(op, l, r)| ExprKind::Bin(
                op,
                Box::new(l),
                Box::new(r)
            )),
            inner.clone().prop_map(|e| ExprKind::Neg(Box::new(e))),
            proptest::collection::vec(inner.clone(), 1..3).prop_map(|args| {
                let args = args.into_iter().map(Arg::Pos).collect();
                ExprKind::Call(Ident::new("f", Span::default()), args)
            }),
            proptest::collection::vec(inner, 1..3).prop_map(ExprKind::List),
        ]
        .prop_map(|kind| SyntaxExpr::new(kind, Span::default()))
    })
}

/// Binding strength of the outermost operator, as the grammar defines it.
fn strength(expr: &SyntaxExpr) -> u8 {
    match &expr.kind {
        ExprKind::Bin(BinOp::Add | BinOp::Sub, ..) => 1,
        ExprKind::Bin(BinOp::Mul | BinOp::Div, ..) => 2,
        ExprKind::Neg(_) => 3,
        ExprKind::Bin(BinOp::Pow, ..) => 4,
        _ => 5,
    }
}

/// Writes `expr` with only the parentheses the precedence rules require.
fn print_min(expr: &SyntaxExpr, min: u8) -> String {
    let body = match &expr.kind {
        ExprKind::Num(text) | ExprKind::Name(text) => text.clone(),
        ExprKind::Neg(inner) => format!("-{}", print_min(inner, 3)),
        ExprKind::Bin(op, lhs, rhs) => {
            let (left_min, right_min) = match op {
                BinOp::Add | BinOp::Sub => (1, 2),
                BinOp::Mul | BinOp::Div => (2, 3),
                BinOp::Pow => (5, 3),
            };
            format!(
                "{} {} {}",
                print_min(lhs, left_min),
                op.symbol(),
                print_min(rhs, right_min)
            )
        }
        ExprKind::Call(name, args) => {
            let args: Vec<String> = args
                .iter()
                .map(|arg| match arg {
                    Arg::Pos(e) | Arg::Bind(_, e) | Arg::BindFunc(_, _, e) => print_min(e, 0),
                })
                .collect();
            format!("{}({})", name.name, args.join(", "))
        }
        ExprKind::List(entries) => {
            let entries: Vec<String> = entries.iter().map(|e| print_min(e, 0)).collect();
            format!("[{}]", entries.join(", "))
        }
        ExprKind::Apply(..) | ExprKind::Matrix(_) => String::new(),
    };
    if strength(expr) < min {
        format!("({body})")
    } else {
        body
    }
}

proptest::proptest! {
    #[test]
    fn minimally_bracketed_text_parses_back_to_the_same_tree(tree in arb_expr()) {
        let text = print_min(&tree, 0);
        let parsed = parse_expr(&text);
        proptest::prop_assert_eq!(parsed.map(|e| e.sexpr()), Ok(tree.sexpr()), "{}", text);
    }
}
