//! Syntax errors: their kinds, carets and wording, and inline snapshots
//! of the rendered report (message and caret) for malformed inputs.

use super::*;
use crate::lang::diag::{line_col, render_error};

#[test]
fn bad_inputs_report_kind_and_caret_column() {
    let long_chain = format!("x{}", "*x".repeat(1500));
    let long_minus = format!("{}x", "-".repeat(2000));
    let long_power = format!("x{}", "^x".repeat(2000));
    let deep_parens = format!("{}x{}", "(".repeat(300), ")".repeat(300));
    let cases: Vec<(&str, ParseErrorKind, usize)> = vec![
        ("x +", expected("an expression after `+`", END), 4),
        ("flow V to", expected(ORDER, END), 10),
        ("state t", ParseErrorKind::Reserved("t".into()), 7),
        ("sin(x", ParseErrorKind::UnclosedBracket { open: '(' }, 4),
        ("[1, 2", ParseErrorKind::UnclosedBracket { open: '[' }, 1),
        (
            "{1, 2; 3",
            ParseErrorKind::UnclosedBracket { open: '{' },
            1,
        ),
        (
            "f(a, [b, c)",
            ParseErrorKind::MismatchedClose {
                open: '[',
                close: ')',
            },
            11,
        ),
        ("(a]", ParseErrorKind::MismatchedClose { open: '(', close: ']' }, 3),
        (")", ParseErrorKind::UnexpectedClose(')'), 1),
        ("x = 1]", ParseErrorKind::UnexpectedClose(']'), 6),
        (
            "2x",
            ParseErrorKind::ImplicitMultiplication {
                left: "2".into(),
                right: "x".into(),
            },
            2,
        ),
        (
            "2(x+1)",
            ParseErrorKind::ImplicitMultiplication {
                left: "2".into(),
                right: "(".into(),
            },
            2,
        ),
        (
            "y = 3 (x+1)",
            ParseErrorKind::ImplicitMultiplication {
                left: "3".into(),
                right: "(".into(),
            },
            7,
        ),
        (
            "(a+b)c",
            ParseErrorKind::ImplicitMultiplication {
                left: "(a+b)".into(),
                right: "c".into(),
            },
            6,
        ),
        (
            "[a, b][c, d]",
            ParseErrorKind::ImplicitMultiplication {
                left: "[a, b]".into(),
                right: "[".into(),
            },
            7,
        ),
        (
            "2pi",
            ParseErrorKind::ImplicitMultiplication {
                left: "2".into(),
                right: "pi".into(),
            },
            2,
        ),
        (
            "2 x",
            expected("an operator or the end of the line", "`x`"),
            3,
        ),
        (
            "f = ",
            expected("an expression or a command after `=`", END),
            5,
        ),
        (
            "check a = b",
            expected("`==` between the two sides of `check`", "`=`"),
            9,
        ),
        ("check a ==", expected("an expression after `==`", END), 11),
        (
            "average S to 3",
            expected(
                "`in` and the small parameter after the order in `average`",
                END,
            ),
            15,
        ),
        (
            "x foo",
            expected("an operator or the end of the line", "`foo`"),
            3,
        ),
        (
            "set budget 99999999999999999999999",
            ParseErrorKind::NumberTooLarge {
                text: "99999999999999999999999".into(),
            },
            12,
        ),
        ("", ParseErrorKind::EmptyInput, 1),
        ("   # only a comment", ParseErrorKind::EmptyInput, 1),
        (
            "names foo",
            ParseErrorKind::TrailingInput {
                found: "`foo`".into(),
            },
            7,
        ),
        (
            "quit now",
            ParseErrorKind::TrailingInput {
                found: "`now`".into(),
            },
            6,
        ),
        (
            "flow V to 3 x",
            ParseErrorKind::TrailingInput {
                found: "`x`".into(),
            },
            13,
        ),
        (
            "flow V",
            expected("`to` and an order after the field in `flow`", END),
            7,
        ),
        (
            "flow to 3",
            expected("the field after `flow`", "`to`"),
            6,
        ),
        (
            "flow V on h",
            expected("`to` and an order after the output in `flow`", END),
            12,
        ),
        ("flow V to 2.5", expected(ORDER, "`2.5`"), 11),
        ("flow V to 1x", expected(ORDER, "`1x`"), 11),
        ("magnus V to -1", expected(ORDER, "`-`"), 13),
        (
            "magnus V to 2 over",
            expected("a time span after `over`", END),
            19,
        ),
        (
            "magnus V to 2 in eps",
            expected("`over` or the end of the line", "`in`"),
            15,
        ),
        ("average S to 3 in t", ParseErrorKind::Reserved("t".into()), 19),
        (
            "average S to 3 in eps classic strobo",
            ParseErrorKind::Duplicate {
                clause: "the method (`strobo` or `classic`)".into(),
            },
            31,
        ),
        (
            "average S to 3 in eps depth 2 depth 3",
            ParseErrorKind::Duplicate {
                clause: "`depth`".into(),
            },
            31,
        ),
        (
            "average S to 3 in eps with",
            expected("`transform` after `with`", END),
            27,
        ),
        (
            "average S to 3 in eps fast",
            expected(
                "`strobo`, `classic`, `depth`, `with transform`, `as` or the end of the line",
                "`fast`",
            ),
            23,
        ),
        (
            "carleman X",
            expected(
                "`degree` and a whole number after the field in `carleman`",
                END,
            ),
            11,
        ),
        (
            "simulate V for 40",
            expected(
                "`from` and initial values (such as `q = 1, p = 0`) after the field in `simulate`",
                "`for`",
            ),
            12,
        ),
        (
            "simulate V from q 1 for 40",
            expected("`=` and a value after `q`", "`1`"),
            19,
        ),
        (
            "simulate V from q=1, for 40",
            expected("a name after `,`", "`for`"),
            22,
        ),
        (
            "simulate V from t=0 for 4",
            ParseErrorKind::Reserved("t".into()),
            17,
        ),
        (
            "simulate V from q=1",
            expected("`for` and a time horizon after the initial values", END),
            20,
        ),
        (
            "simulate V from q=1 for 4 plot a.svg plot b.svg",
            ParseErrorKind::Duplicate {
                clause: "`plot`".into(),
            },
            38,
        ),
        (
            "simulate V from q=1 for 4 with",
            expected("a name after `with`", END),
            31,
        ),
        (
            "compare S with A from q=1 for 10",
            expected(
                "`sweep` and values such as `eps = 0.2, 0.1` in `compare`",
                END,
            ),
            33,
        ),
        (
            "compare S from q=1 for 10 sweep eps=1",
            expected(
                "`with` and the averaged model after the system in `compare`",
                "`from`",
            ),
            11,
        ),
        (
            "compare S with A from q=1 for 10 sweep eps 0.1",
            expected("`=` and values such as `eps = 0.2, 0.1`", "`0.1`"),
            44,
        ),
        (
            "stability F",
            expected(
                "`at` and a point such as `q = 0, p = 0` after the field in `stability`",
                END,
            ),
            12,
        ),
        (
            "show A",
            expected(
                "`as` and a format (`latex` or `brackets`) after the expression in `show`",
                END,
            ),
            7,
        ),
        ("save", expected("a file name after `save`", END), 5),
        ("save \"unterminated", ParseErrorKind::UnterminatedString, 6),
        (
            "save \"\"",
            expected("a file name after `save`", "an empty name `\"\"`"),
            6,
        ),
        ("save my file.ordex", expected(QUOTE_HINT, "`file`"), 9),
        ("forget pi", ParseErrorKind::Reserved("pi".into()), 8),
        ("forget", expected("a name after `forget`", END), 7),
        ("t = 3", ParseErrorKind::Reserved("t".into()), 1),
        ("flow = 2", ParseErrorKind::Reserved("flow".into()), 1),
        ("x, sin = average S to 1 in eps", ParseErrorKind::Reserved("sin".into()), 4),
        (
            "A, W = S + 1",
            expected(
                "a command after `=` (only a command, such as `average ... with transform`, binds several names)",
                "`S`",
            ),
            8,
        ),
        ("a, = 3", expected("a name after `,`", "`=`"), 4),
        ("a, b c", expected("`,` or `=` after the names", "`c`"), 6),
        ("x ** * y", expected("an exponent after `**`", "`*`"), 6),
        ("x^", expected("an exponent after `^`", END), 3),
        ("x^-", expected("an expression after `-`", END), 4),
        ("-", expected("an expression after `-`", END), 2),
        ("a * / b", expected("an expression after `*`", "`/`"), 5),
        (
            "(a, b)",
            expected(
                "an operator or `)` (a field is written with square brackets, as in `[a, b]`)",
                "`,`",
            ),
            3,
        ),
        ("(a b)", expected("an operator or `)`", "`b`"), 4),
        ("()", expected("an expression after `(`", "`)`"), 2),
        ("[a b]", expected("`,` or `]`", "`b`"), 4),
        ("[]", expected("an entry after `[`", "`]`"), 2),
        ("[a,]", expected("an entry after `,`", "`]`"), 4),
        ("{1, 2 3}", expected("`,`, `;` or `}`", "`3`"), 7),
        ("{1, 2;}", expected("an entry after `;`", "`}`"), 7),
        ("f()", expected("an argument after `(`", "`)`"), 3),
        ("plug(e, q == 1)", expected("`,` or `)`", "`==`"), 11),
        ("plug(e, to = 1)", ParseErrorKind::Reserved("to".into()), 9),
        ("plug(e, q = )", expected("a value after `q =`", "`)`"), 13),
        (
            "sin x",
            expected("`(` and an argument after `sin`", "`x`"),
            5,
        ),
        (
            "1.2.3",
            ParseErrorKind::BadNumber {
                text: "1.2.3".into(),
                reason: "a number has at most one decimal point",
            },
            1,
        ),
        (
            "x + 1e",
            ParseErrorKind::BadNumber {
                text: "1e".into(),
                reason: "the exponent has no digits",
            },
            5,
        ),
        (
            "1e-",
            ParseErrorKind::BadNumber {
                text: "1e-".into(),
                reason: "the exponent has no digits",
            },
            1,
        ),
        (
            "3.",
            ParseErrorKind::BadNumber {
                text: "3.".into(),
                reason: "digits must follow the decimal point",
            },
            1,
        ),
        (
            "a == b",
            expected(
                "the end of the line (to compare two sides, write `check A == B`)",
                "`==`",
            ),
            3,
        ),
        ("set x 3", expected("`budget` or `tolerance` after `set`", "`x`"), 5),
        ("set budget", expected("a whole number after `budget`", END), 11),
        (
            "help +",
            expected("a topic word after `help`, or the end of the line", "`+`"),
            6,
        ),
        ("to 3", expected("a statement or an expression", "`to`"), 1),
        (
            "\u{3b8} = 1",
            expected("a statement or an expression", "`\u{3b8}`"),
            1,
        ),
        (
            "x = 2 $",
            expected("an operator or the end of the line", "`$`"),
            7,
        ),
        ("state a b", expected("`,` or the end of the line", "`b`"), 9),
        ("state", expected("a name after `state`", END), 6),
        ("x + flow V to 3", expected("an expression after `+`", "`flow`"), 5),
        (
            &long_chain,
            ParseErrorKind::ExpressionTooDeep {
                limit: MAX_EXPR_DEPTH,
            },
            2000,
        ),
        (
            &long_minus,
            ParseErrorKind::ExpressionTooDeep {
                limit: MAX_EXPR_DEPTH,
            },
            1001,
        ),
        (
            &long_power,
            ParseErrorKind::ExpressionTooDeep {
                limit: MAX_EXPR_DEPTH,
            },
            2002,
        ),
        (
            &deep_parens,
            ParseErrorKind::NestingTooDeep { limit: MAX_NESTING },
            MAX_NESTING + 1,
        ),
    ];
    assert!(cases.len() >= 30);
    for (text, kind, column) in cases {
        let err = error(text);
        assert_eq!(err.kind, kind, "kind for {text:?}");
        assert_eq!(
            line_col(text, err.span.start),
            (0, column),
            "caret column for {text:?} ({err})"
        );
        assert!(err.span.start <= err.span.end && err.span.end <= text.len());
    }
}

#[test]
fn error_on_a_later_line_of_a_statement() {
    let text = "f = [a,\n  b +]";
    let err = error(text);
    assert_eq!(err.kind, expected("an expression after `+`", "`]`"));
    assert_eq!(line_col(text, err.span.start), (1, 6));
    let text = "g = sin(x,\n  [1, 2\n)";
    let err = error(text);
    assert_eq!(
        err.kind,
        ParseErrorKind::MismatchedClose {
            open: '[',
            close: ')'
        }
    );
    assert_eq!(line_col(text, err.span.start), (2, 1));
}

#[test]
fn brackets_in_comments_and_quotes_do_not_count() {
    assert_eq!(stmt("x # (").sexpr(), "(print x)");
    assert_eq!(stmt("save \"a(b.svg\"").sexpr(), "(save \"a(b.svg\")");
}

#[test]
fn messages_are_lowercase_without_full_stop_and_quote_the_input() {
    let cases = [
        (
            "x +",
            "expected an expression after `+`, found the end of the line",
        ),
        (
            "state t",
            "`t` is a reserved word and cannot be used as a name",
        ),
        ("sin(x", "`(` is never closed"),
        (")", "`)` has no matching opening bracket"),
        ("(a]", "`]` cannot close `(` (expected `)`)"),
        (
            "names foo",
            "unexpected `foo` after the end of the statement",
        ),
        (
            "2x",
            "missing `*` between `2` and `x`: implicit multiplication is not allowed",
        ),
        (
            "1.2.3",
            "malformed number `1.2.3`: a number has at most one decimal point",
        ),
        (
            "set budget 99999999999999999999999",
            "`99999999999999999999999` is too large (at most 18446744073709551615)",
        ),
        ("save \"x", "quoted file name without its closing `\"`"),
        (
            "average S to 1 in e depth 1 depth 2",
            "`depth` is given more than once",
        ),
        ("", "empty statement"),
    ];
    for (text, message) in cases {
        let shown = error(text).to_string();
        assert_eq!(shown, message, "{text:?}");
        assert!(!shown.ends_with('.'));
    }
}

#[test]
fn long_operands_are_shortened_in_messages() {
    let err = error("(aaaaaaaaaa + bbbbbbbbbb + cccccccccc)x");
    let ParseErrorKind::ImplicitMultiplication { left, right } = err.kind else {
        panic!("unexpected {:?}", err.kind);
    };
    assert_eq!(left, "\u{2026}bbbbbbbbb + cccccccccc)");
    assert_eq!(right, "x");
}

proptest::proptest! {
    #[test]
    fn never_panics_and_spans_stay_inside(text in "[a-z0-9 ()\\[\\]{}+*/^=,;.#\"\\\\\n-]{0,40}") {
        if let Err(err) = parse_stmt(&text) {
            proptest::prop_assert!(err.span.start <= err.span.end);
            proptest::prop_assert!(err.span.end <= text.len());
            let _ = err.to_string();
        }
    }

    #[test]
    fn never_panics_on_word_soup(words in proptest::collection::vec(
        proptest::sample::select(vec![
            "flow", "on", "to", "magnus", "over", "average", "in", "strobo", "classic",
            "depth", "with", "transform", "carleman", "degree", "simulate", "from", "for",
            "plot", "compare", "sweep", "tol", "stability", "at", "check", "show", "as",
            "save", "run", "names", "forget", "help", "set", "budget", "quit", "state",
            "x", "q", "3", "1e-4", "=", "==", ",", "(", ")", "[", "]", "-", "^", "t", "pi",
            "sin", "\"a b\"", "#", "\n", "\\",
        ]),
        0..14,
    )) {
        let text = words.join(" ");
        match parse_stmt(&text) {
            Ok(stmt) => { let _ = stmt.sexpr(); }
            Err(err) => proptest::prop_assert!(err.span.end <= text.len()),
        }
    }

    #[test]
    fn any_unicode_never_panics(text in "\\PC{0,30}") {
        if let Err(err) = parse_stmt(&text) {
            proptest::prop_assert!(text.is_char_boundary(err.span.start));
            proptest::prop_assert!(err.span.end <= text.len());
        }
    }
}

/// The report of the syntax error in `input` as the front end shows it: the
/// place, the message, the line and the caret under the offending token.
fn rendered(input: &str) -> String {
    let err = error(input);
    render_error(Some("input"), 1, 0, input, err.span, &err.to_string())
}

/// One test per malformed input, comparing its rendered report with an
/// inline snapshot.
macro_rules! error_snapshots {
    ($($name:ident: $input:expr => @$snapshot:literal;)*) => {
        $(
            #[test]
            fn $name() {
                insta::assert_snapshot!(rendered($input), @$snapshot);
            }
        )*
    };
}

error_snapshots! {
    missing_operand_after_plus: "x +" => @r#"
        input:1:4: error: expected an expression after `+`, found the end of the line
            x +
               ^
    "#;
    missing_order_after_to: "flow V to" => @r#"
        input:1:10: error: expected an order (a whole number) after `to`, found the end of the line
            flow V to
                     ^
    "#;
    reserved_word_as_state: "state t" => @r#"
        input:1:7: error: `t` is a reserved word and cannot be used as a name
            state t
                  ^
    "#;
    unclosed_call_bracket: "sin(x" => @r#"
        input:1:4: error: `(` is never closed
            sin(x
               ^
    "#;
    mismatched_closing_bracket: "f(a, [b, c)" => @r#"
        input:1:11: error: `)` cannot close `[` (expected `]`)
            f(a, [b, c)
                      ^
    "#;
    stray_closing_bracket: "x = 1]" => @r#"
        input:1:6: error: `]` has no matching opening bracket
            x = 1]
                 ^
    "#;
    implicit_multiplication: "2x" => @r#"
        input:1:2: error: missing `*` between `2` and `x`: implicit multiplication is not allowed
            2x
             ^
    "#;
    two_decimal_points: "1.2.3" => @r#"
        input:1:1: error: malformed number `1.2.3`: a number has at most one decimal point
            1.2.3
            ^^^^^
    "#;
    exponent_without_digits: "y = 1e" => @r#"
        input:1:5: error: malformed number `1e`: the exponent has no digits
            y = 1e
                ^^
    "#;
    unterminated_quoted_file_name: "save \"my file" => @r#"
        input:1:6: error: quoted file name without its closing `"`
            save "my file
                 ^
    "#;
    optional_part_given_twice: "average V to 2 in eps depth 1 depth 2" => @r#"
        input:1:31: error: `depth` is given more than once
            average V to 2 in eps depth 1 depth 2
                                          ^^^^^
    "#;
    comparison_outside_check: "x == y" => @r#"
        input:1:3: error: expected the end of the line (to compare two sides, write `check A == B`), found `==`
            x == y
              ^^
    "#;
    greek_letter_as_a_name: "θ = 1" => @r#"
        input:1:1: error: expected a statement or an expression, found `θ` (names are ASCII letters, digits and `_`: for `θ` write `theta` or `th`; LaTeX output shows it as the letter)
            θ = 1
            ^
    "#;
    simulate_without_horizon: "simulate V from q = 1" => @r#"
        input:1:22: error: expected `for` and a time horizon after the initial values, found the end of the line
            simulate V from q = 1
                                 ^
    "#;
    order_too_large: "magnus V to 99999999999999999999" => @r#"
        input:1:13: error: `99999999999999999999` is too large (at most 18446744073709551615)
            magnus V to 99999999999999999999
                        ^^^^^^^^^^^^^^^^^^^^
    "#;
    show_without_format_word: "show x as" => @r#"
        input:1:10: error: expected a format word after `as`, such as `latex` or `brackets`, found the end of the line
            show x as
                     ^
    "#;
}
