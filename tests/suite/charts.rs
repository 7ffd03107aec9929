//! Charts (`change … to … by …`, `average … as …`) and the messages of
//! issue 17: what a user sees when charts mix, names are forgotten, a
//! command word is misspelt, a horizon has irrational values, and several
//! `-e` arguments are run.

use std::process::Command;

use ordex::lang::{Event, Session};

/// Runs `text` in a fresh session: printed lines, the error (if any), and
/// whether every check held.
fn run(text: &str) -> (String, Option<String>, bool) {
    let mut s = Session::new();
    s.show_timing = false;
    let mut out = String::new();
    let mut err = None;
    let status = s.run_text(text, None, &mut |e| match e {
        Event::Report(r) => {
            for l in r.lines {
                out.push_str(&l.text);
                out.push('\n');
            }
        }
        Event::Error(m) => err = Some(m),
    });
    (out, err, !status.check_failed)
}

const VDP: &str =
    "state x, v\nparam eps\nS = [v, -x] + eps*[0, (1 - x^2)*v]\nA = average S to 1 in eps\n";

#[test]
fn a_polar_change_gives_the_amplitude_equations_and_values_keep_their_chart() {
    let text = format!(
        "{VDP}P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)\n\
         check P == eps*[r/2 - r^3/8, 0]\ncheck [P, [r, 0]] == [P, [r, 0]]\nnames\n"
    );
    let (out, err, held) = run(&text);
    assert!(err.is_none(), "{err:?}");
    assert!(held, "{out}");
    assert!(out.contains("det Dψ = r"), "{out}");
    assert!(out.contains("chart  r, phi"), "{out}");
    assert!(out.contains("P: field on (r, phi)"), "{out}");
    assert!(out.contains("A: field on (x, v)"), "{out}");
}

#[test]
fn mixing_two_charts_is_refused_naming_both() {
    let text = format!("{VDP}P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)\nA + P\n");
    let (_, err, _) = run(&text);
    let err = err.expect("an error");
    assert!(err.contains("cannot mix charts"), "{err}");
    assert!(err.contains("(x, v)") && err.contains("(r, phi)"), "{err}");
    // A coordinate of the other chart mixes too.
    let text = format!("{VDP}P = change A to r, phi by x = r*cos(phi), v = r*sin(phi)\nx*P\n");
    let err = run(&text).1.expect("an error");
    assert!(err.contains("cannot mix charts"), "{err}");
}

#[test]
fn a_determinant_that_is_not_a_monomial_is_refused_by_name() {
    let (_, err, _) = run("state x\nB = change [x^2] to y by x = y + y^3\n");
    let err = err.expect("an error");
    assert!(err.contains("det Dψ = 1 + 3*y^2"), "{err}");
}

#[test]
fn a_change_must_name_every_old_coordinate_once_in_the_new_ones() {
    let (_, err, _) = run("state x, v\nB = change [v, x] to a, b by x = a\n");
    assert!(err.expect("an error").contains("`v = …` is missing"));
    let (_, err, _) = run("state x, v\nB = change [v, x] to a, b by x = a, v = x\n");
    assert!(err.expect("an error").contains("new coordinates (a, b)"));
    let (_, err, _) = run("state x, v\nparam a\nB = change [v, x] to a, b by x = a, v = b\n");
    assert!(err.expect("an error").contains("already a parameter"));
}

#[test]
fn renaming_is_the_identity_map_and_a_time_dependent_rotation_subtracts_its_motion() {
    let text = "state x, v\nX = [v, -x^3]\nZ = change X to z1, z2 by x = z1, v = z2\n\
                check Z == [z2, -z1^3]\n\
                R = change [v, -x] to a, b by x = cos(t)*a + sin(t)*b, v = -sin(t)*a + cos(t)*b\n\
                check R == [0, 0]\n";
    let (out, err, held) = run(text);
    assert!(err.is_none(), "{err:?}");
    assert!(held, "{out}");
    assert!(out.contains("time-dependent"), "{out}");
}

#[test]
fn average_as_names_the_averaged_state_and_compare_relates_it_to_the_system() {
    let text = "state x, v\nparam eps\nS = [v, -x] + eps*[0, (1 - x^2)*v]\n\
                Z = average S to 1 in eps as z1, z2\ncheck Z == eps*[z1/2 - z1*z2^2/8 - z1^3/8, z2/2 - z1^2*z2/8 - z2^3/8]\n\
                compare S with Z from x = 1, v = 0 for 1 sweep eps = 0.2, 0.1\n";
    let (out, err, held) = run(text);
    assert!(err.is_none(), "{err:?}");
    assert!(held, "{out}");
    assert!(out.contains("order 1  [1/2*z1"), "{out}");
    assert!(out.contains("named (z1, z2)"), "{out}");
    assert!(out.contains("slope order 1"), "{out}");
}

#[test]
fn forget_explains_what_it_can_and_cannot_forget() {
    let (out, err, _) = run("param eps\nforget eps\nparam eps\n");
    assert!(err.is_none(), "{err:?}");
    assert!(out.contains("forgot the parameter eps"), "{out}");
    let (_, err, _) = run("state x\nparam eps\nX = [eps*x]\nforget eps\n");
    let err = err.expect("an error");
    assert!(err.contains("used by X"), "{err}");
    assert!(!err.contains("did you mean `eps`"), "{err}");
    let (_, err, _) = run("state x\nforget x\n");
    assert!(err.expect("an error").contains("state coordinate"));
    let (_, err, _) = run("param eps\nforget epss\n");
    assert!(err.expect("an error").contains("did you mean `eps`"));
}

#[test]
fn misspelt_command_and_help_words_get_suggestions() {
    let (_, err, _) = run("state x\nparam eps\naverge [x] to 2 in eps\n");
    assert!(err
        .expect("an error")
        .contains("unknown command `averge` (did you mean `average`?)"));
    let (_, err, _) = run("help averag\n");
    assert!(err
        .expect("an error")
        .contains("did you mean `help average`"));
}

#[test]
fn the_order_zero_part_is_named_with_the_small_parameter() {
    let (_, err, _) = run("state x, p\nparam k\naverage [p^2, 0] + k*[0, x^3] to 2 in k\n");
    let err = err.expect("an error");
    assert!(err.contains("the k^0 part"), "{err}");
    assert!(!err.contains("eps"), "{err}");
}

#[test]
fn an_irrational_horizon_says_where_values_are_rational() {
    let (_, err, _) = run("state x, v\nmagnus [v*cos(t), 0] to 2 over 2*pi/3\n");
    let err = err.expect("an error");
    assert!(err.contains("`sin(2/3*pi)` is irrational"), "{err}");
    assert!(err.contains("multiples of 1/2*pi"), "{err}");
    // At a multiple of pi/2 it is exact.
    let (_, err, _) = run("state x, v\nmagnus [v*cos(t), 0] to 2 over pi/2\n");
    assert!(err.is_none(), "{err:?}");
}

#[test]
fn several_inline_arguments_are_told_apart_with_lines_inside_each() {
    let out = Command::new(env!("CARGO_BIN_EXE_ordex"))
        .args(["-e", "state x", "-e", "param eps\ny = foo"])
        .output()
        .expect("ordex runs");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("-e#2:2:5: error: unknown name `foo`"), "{err}");
    let out = Command::new(env!("CARGO_BIN_EXE_ordex"))
        .args(["-e", "state x\n\ny = foo"])
        .output()
        .expect("ordex runs");
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("-e:3:5: error"), "{err}");
}
