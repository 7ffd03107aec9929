//! Statements and commands parse to the expected trees.

use super::*;
use crate::lang::parse::{is_reserved, COMMAND_WORDS, STATEMENT_WORDS};

/// One test per statement: the text parses to the tree written as an
/// S-expression.
macro_rules! parses_to {
    ($($name:ident: $text:expr => $tree:expr;)*) => {
        $(
            #[test]
            fn $name() {
                assert_eq!(stmt($text).sexpr(), $tree, "{:?}", $text);
            }
        )*
    };
}

parses_to! {
    state_q_p: "state q, p" => "(state q p)";
    param_eps_k_a: "param eps, k, a" => "(param eps k a)";
    input_u1_u2: "input u1,u2" => "(input u1 u2)";
    sum_of_name_and_number: "x + 1" => "(print (+ x 1))";
    time_alone: "t" => "(print t)";
    bracketed_name: "(x)" => "(print x)";
    negative_number: "-1" => "(print (neg 1))";
    define_a_field_sum: "S = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]" => "(define S (+ (* eps [p (* (neg gam) (call sin th))]) (* (call cos t) [0 (* bet (call sin th))])))";
    define_continued_on_next_line: "x = a +\n b" => "(define x (+ a b))";
    define_without_blanks: "x=1" => "(define x 1)";
    check_a_b: "check a == b" => "(check a b)";
    check_a_negated_side: "check a==-b" => "(check a (neg b))";
    check_plug_pd_order_a_eps_1_p_th_th_pi_gam_bet_2: "check plug(pd(order(A, eps, 1)(p), th), th = pi) == gam - bet^2/2" => "(check (call plug (call pd (apply (call order A eps 1) p) th) (= th pi)) (- gam (/ (^ bet 2) 2)))";
    show_order_a_eps_1_as_latex: "show order(A, eps, 1) as latex" => "(show (call order A eps 1) as latex)";
    show_a_as_brackets: "show A as brackets" => "(show A as brackets)";
    save_session_ordex: "save session.ordex" => "(save \"session.ordex\")";
    save_session_ordex_with_checks: "save session.ordex with checks" => "(save \"session.ordex\" with checks)";
    show_jac_x_as_c_to_field_c: "show jac(X) as c to \"field.c\"" => "(show (call jac X) as c to \"field.c\")";
    save_my_1_file_ordex: "save \"my #1 file.ordex\"" => "(save \"my #1 file.ordex\")";
    save_out_ordex_the_session: "save out.ordex # the session" => "(save \"out.ordex\")";
    run_scripts_boom_ordex: "run scripts/boom.ordex" => "(run \"scripts/boom.ordex\")";
    names: "names" => "(names)";
    forget_s: "forget S" => "(forget S)";
    help: "help" => "(help)";
    help_average: "help average" => "(help average)";
    help_flow: "help flow" => "(help flow)";
    help_plug: "help plug" => "(help plug)";
    set_budget_1000000: "set budget 1000000" => "(set-budget 1000000)";
    quit: "quit" => "(quit)";
    quit_with_comment: "  quit  # bye" => "(quit)";
    flow_v_to_3: "flow V to 3" => "(flow V to 3)";
    flow_v_on_h_to_4: "flow V on h to 4" => "(flow V on h to 4)";
    flow_eps_v_on_q_2_to_4: "flow eps*V on q^2 to 4" => "(flow (* eps V) on (^ q 2) to 4)";
    flow_across_lines: "flow\n  V\n  to\n  3" => "(flow V to 3)";
    y_flow_v_on_h_to_2: "Y = flow V on h to 2" => "(define Y (flow V on h to 2))";
    magnus_v_to_4: "magnus V to 4" => "(magnus V to 4)";
    magnus_v_to_4_over_2_pi: "magnus V to 4 over 2*pi" => "(magnus V to 4 over (* 2 pi))";
    average_v_to_2_in_eps: "average V to 2 in eps" => "(average V to 2 in eps)";
    average_v_to_3_in_eps_classic_depth_4: "average V to 3 in eps classic depth 4" => "(average V to 3 in eps classic depth 4)";
    average_v_to_3_in_eps_depth_4_strobo: "average V to 3 in eps depth 4 strobo" => "(average V to 3 in eps strobo depth 4)";
    average_v_to_3_in_eps_with_transform_classic: "average V to 3 in eps with transform classic" => "(average V to 3 in eps classic transform)";
    average_v_to_3_in_eps_depth_2_with_transform_str: "average V to 3 in eps depth 2 with transform strobo" => "(average V to 3 in eps strobo depth 2 transform)";
    a_w_average_s_to_3_in_eps_classic_with_transform: "A, W = average S to 3 in eps classic with transform" => "(define [A W] (average S to 3 in eps classic transform))";
    a_average_s_to_3_in_eps: "A = average S to 3 in eps" => "(define A (average S to 3 in eps))";
    carleman_x_degree_3: "carleman X degree 3" => "(carleman X degree 3)";
    simulate_v_from_q_1_p_0_for_40: "simulate V from q=1, p=0 for 40" => "(simulate V from [(= q 1) (= p 0)] for 40)";
    simulate_v_from_q_1_p_0_for_40_with_eps_0_05_k_1: "simulate V from q=1, p=0 for 40 with eps=0.05, k=1 plot out.svg" => "(simulate V from [(= q 1) (= p 0)] for 40 with [(= eps 0.05) (= k 1)] plot \"out.svg\")";
    simulate_v_from_q_1_for_2_pi_plot_my_plot_svg_wi: "simulate V from q = -1 for 2*pi plot \"my plot.svg\" with eps = 1/20" => "(simulate V from [(= q (neg 1))] for (* 2 pi) with [(= eps (/ 1 20))] plot \"my plot.svg\")";
    compare_s_with_a_from_q_1_p_0_for_l_with_k_1_swe: "compare S with A from q=1, p=0 for L with k=1 sweep eps=0.2,0.1,0.05 tol 1e-3 plot cmp.svg" => "(compare S with A from [(= q 1) (= p 0)] for L with [(= k 1)] sweep eps [0.2 0.1 0.05] tol 1e-3 plot \"cmp.svg\")";
    compare_s_with_a_from_q_1_for_10_sweep_eps_0_1: "compare S with A from q=1 for 10 sweep eps = 0.1" => "(compare S with A from [(= q 1)] for 10 sweep eps [0.1])";
    compare_s_with_a_from_q_1_for_10_plot_c_svg_swee: "compare S with A from q=1 for 10 plot c.svg sweep eps=0.1, 0.05 with k=2" => "(compare S with A from [(= q 1)] for 10 with [(= k 2)] sweep eps [0.1 0.05] plot \"c.svg\")";
    stability_f_at_q_pi_p_0: "stability F at q=pi, p=0" => "(stability F at [(= q pi) (= p 0)])";
    stability_order_a_eps_1_at_th_pi_p_0_with_gam_12: "stability order(A, eps, 1) at th = pi, p = 0 with gam = 12.26, bet = 6.1" => "(stability (call order A eps 1) at [(= th pi) (= p 0)] with [(= gam 12.26) (= bet 6.1)])";
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
