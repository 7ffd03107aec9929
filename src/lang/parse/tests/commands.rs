//! Statements and commands parse to the expected trees.

use super::*;
use crate::lang::parse::{is_reserved, COMMAND_WORDS, STATEMENT_WORDS};

#[test]
fn statements_and_commands() {
    let cases = [
        ("state q, p", "(state q p)"),
        ("param eps, k, a", "(param eps k a)"),
        ("input u1,u2", "(input u1 u2)"),
        ("x + 1", "(print (+ x 1))"),
        ("t", "(print t)"),
        ("(x)", "(print x)"),
        ("-1", "(print (neg 1))"),
        (
            "S = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]",
            "(define S (+ (* eps [p (* (neg gam) (call sin th))]) (* (call cos t) [0 (* bet (call sin th))])))",
        ),
        ("x = a +\n b", "(define x (+ a b))"),
        ("x=1", "(define x 1)"),
        ("check a == b", "(check a b)"),
        ("check a==-b", "(check a (neg b))"),
        (
            "check plug(pd(order(A, eps, 1)(p), th), th = pi) == gam - bet^2/2",
            "(check (call plug (call pd (apply (call order A eps 1) p) th) (= th pi)) (- gam (/ (^ bet 2) 2)))",
        ),
        (
            "show order(A, eps, 1) as latex",
            "(show (call order A eps 1) as latex)",
        ),
        ("show A as brackets", "(show A as brackets)"),
        ("save session.ordex", "(save \"session.ordex\")"),
        (
            "save session.ordex with checks",
            "(save \"session.ordex\" with checks)",
        ),
        (
            "show jac(X) as c to \"field.c\"",
            "(show (call jac X) as c to \"field.c\")",
        ),
        ("save \"my #1 file.ordex\"", "(save \"my #1 file.ordex\")"),
        ("save out.ordex # the session", "(save \"out.ordex\")"),
        ("run scripts/boom.ordex", "(run \"scripts/boom.ordex\")"),
        ("names", "(names)"),
        ("forget S", "(forget S)"),
        ("help", "(help)"),
        ("help average", "(help average)"),
        ("help flow", "(help flow)"),
        ("help plug", "(help plug)"),
        ("set budget 1000000", "(set-budget 1000000)"),
        ("quit", "(quit)"),
        ("  quit  # bye", "(quit)"),
        ("flow V to 3", "(flow V to 3)"),
        ("flow V on h to 4", "(flow V on h to 4)"),
        (
            "flow eps*V on q^2 to 4",
            "(flow (* eps V) on (^ q 2) to 4)",
        ),
        ("flow\n  V\n  to\n  3", "(flow V to 3)"),
        ("Y = flow V on h to 2", "(define Y (flow V on h to 2))"),
        ("magnus V to 4", "(magnus V to 4)"),
        ("magnus V to 4 over 2*pi", "(magnus V to 4 over (* 2 pi))"),
        ("average V to 2 in eps", "(average V to 2 in eps)"),
        (
            "average V to 3 in eps classic depth 4",
            "(average V to 3 in eps classic depth 4)",
        ),
        (
            "average V to 3 in eps depth 4 strobo",
            "(average V to 3 in eps strobo depth 4)",
        ),
        (
            "average V to 3 in eps with transform classic",
            "(average V to 3 in eps classic transform)",
        ),
        (
            "average V to 3 in eps depth 2 with transform strobo",
            "(average V to 3 in eps strobo depth 2 transform)",
        ),
        (
            "A, W = average S to 3 in eps classic with transform",
            "(define [A W] (average S to 3 in eps classic transform))",
        ),
        (
            "A = average S to 3 in eps",
            "(define A (average S to 3 in eps))",
        ),
        ("carleman X degree 3", "(carleman X degree 3)"),
        (
            "simulate V from q=1, p=0 for 40",
            "(simulate V from [(= q 1) (= p 0)] for 40)",
        ),
        (
            "simulate V from q=1, p=0 for 40 with eps=0.05, k=1 plot out.svg",
            "(simulate V from [(= q 1) (= p 0)] for 40 with [(= eps 0.05) (= k 1)] plot \"out.svg\")",
        ),
        (
            "simulate V from q = -1 for 2*pi plot \"my plot.svg\" with eps = 1/20",
            "(simulate V from [(= q (neg 1))] for (* 2 pi) with [(= eps (/ 1 20))] plot \"my plot.svg\")",
        ),
        (
            "compare S with A from q=1, p=0 for L with k=1 sweep eps=0.2,0.1,0.05 tol 1e-3 plot cmp.svg",
            "(compare S with A from [(= q 1) (= p 0)] for L with [(= k 1)] sweep eps [0.2 0.1 0.05] tol 1e-3 plot \"cmp.svg\")",
        ),
        (
            "compare S with A from q=1 for 10 sweep eps = 0.1",
            "(compare S with A from [(= q 1)] for 10 sweep eps [0.1])",
        ),
        (
            "compare S with A from q=1 for 10 plot c.svg sweep eps=0.1, 0.05 with k=2",
            "(compare S with A from [(= q 1)] for 10 with [(= k 2)] sweep eps [0.1 0.05] plot \"c.svg\")",
        ),
        (
            "stability F at q=pi, p=0",
            "(stability F at [(= q pi) (= p 0)])",
        ),
        (
            "stability order(A, eps, 1) at th = pi, p = 0 with gam = 12.26, bet = 6.1",
            "(stability (call order A eps 1) at [(= th pi) (= p 0)] with [(= gam 12.26) (= bet 6.1)])",
        ),
    ];
    for (text, expected) in cases {
        assert_eq!(stmt(text).sexpr(), expected, "{text:?}");
    }
}

#[test]
fn change_and_average_as_keep_their_names() {
    let s = stmt("P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)");
    assert_eq!(
        s.sexpr(),
        "(define P (change A to r phi by (= x (* r (call cos phi))) (= v (* r (call sin phi)))))"
    );
    let s = stmt("Z = average S to 2 in eps classic as z1, z2");
    assert_eq!(
        s.sexpr(),
        "(define Z (average S to 2 in eps classic as z1 z2))"
    );
    assert!(parse_stmt("P = change A to r, phi").is_err());
    assert!(parse_stmt("P = change A to r, by x = r").is_err());
}

#[test]
fn average_keeps_every_part() {
    let statement = stmt("A, W = average S to 3 in eps classic depth 5 with transform");
    let StmtKind::Define { names, rhs } = &statement.kind else {
        panic!("not a definition: {}", statement.sexpr());
    };
    let spans: Vec<Span> = names.iter().map(|name| name.span).collect();
    assert_eq!(spans, vec![Span::new(0, 1), Span::new(3, 4)]);
    let Rhs::Command(Command {
        kind:
            CommandKind::Average {
                to,
                param,
                method,
                depth,
                with_transform,
                ..
            },
        span,
    }) = rhs
    else {
        panic!("not average: {}", statement.sexpr());
    };
    assert_eq!(*span, Span::new(7, 59));
    assert_eq!(to.value, 3);
    assert_eq!(
        (param.name.as_str(), param.span),
        ("eps", Span::new(25, 28))
    );
    assert_eq!(
        method.as_ref().map(|m| (m.name.as_str(), m.span)),
        Some(("classic", Span::new(29, 36)))
    );
    assert_eq!(depth.as_ref().map(|d| d.value), Some(5));
    assert!(*with_transform);
}

#[test]
fn largest_integer_is_accepted() {
    let statement = stmt("set budget 18446744073709551615");
    assert_eq!(statement.sexpr(), "(set-budget 18446744073709551615)");
}

#[test]
fn reserved_words_cover_the_statement_and_command_words() {
    for word in COMMAND_WORDS.iter().chain(STATEMENT_WORDS) {
        assert!(is_reserved(word), "{word}");
    }
    assert!(!is_reserved("plug"));
    assert!(!is_reserved("eps"));
}
