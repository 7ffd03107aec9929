//! `save FILE with checks` with the real binary: the saved script replays
//! in a fresh process and re-checks every result (exit 0); one altered
//! coefficient makes the replay fail at that line (exit 1). A failed check
//! typed at the prompt names its line in the session.

use std::io::Write;
use std::path::Path;
use std::process::{Command, Output, Stdio};

fn ordex(dir: &Path, args: &[&str], stdin: Option<&str>) -> Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_ordex"))
        .args(args)
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .env("ORDEX_HOME", dir.join("home"))
        .env("XDG_STATE_HOME", dir.join("state"))
        .stdin(if stdin.is_some() {
            Stdio::piped()
        } else {
            Stdio::null()
        })
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("ordex runs");
    if let Some(text) = stdin {
        child
            .stdin
            .take()
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
    }
    child.wait_with_output().expect("ordex ends")
}

/// A derivation as a user would type it: a boom on a vibrating pivot,
/// averaged to order 2, with help and a listing in between.
const SESSION: &str = "\
state th, p
param eps, gam, bet
help average
S = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)]
A = average S to 2 in eps
names
L = jac(order(A, eps, 1))
F = flow eps*[p, -gam*sin(th)] on th to 2
H = p^2/2 - gam*cos(th)
save derivation.ordex with checks
";

#[test]
fn a_script_saved_with_checks_replays_and_catches_an_altered_coefficient() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("session.ordex"), SESSION).unwrap();
    let out = ordex(dir.path(), &["session.ordex"], None);
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    let stdout = String::from_utf8_lossy(&out.stdout);
    assert!(
        stdout.contains("saved 7 lines to derivation.ordex with 5 checks"),
        "{stdout}"
    );

    let saved = std::fs::read_to_string(dir.path().join("derivation.ordex")).unwrap();
    let lines: Vec<&str> = saved.lines().collect();
    assert!(
        !saved.contains("help") && !lines.contains(&"names"),
        "{saved}"
    );
    // Each definition is followed by the check of its value.
    for name in ["S", "A", "L", "F", "H"] {
        let def = lines
            .iter()
            .position(|l| l.starts_with(&format!("{name} = ")))
            .unwrap_or_else(|| panic!("{name} not saved:\n{saved}"));
        assert!(
            lines[def + 1].starts_with(&format!("check {name} == ")),
            "{saved}"
        );
    }
    // The frozen value of A holds the published first-order term of the
    // pendulum with a vertically vibrating pivot,
    // th'' = -gam*sin(th) - (bet^2/2)*sin(th)*cos(th) (Landau & Lifshitz,
    // Mechanics, 3rd ed., §30, Problem 1; from memory, as in
    // tests/checks/kapitza.ordex), i.e. -1/4*bet^2*sin(2*th).
    let check_a = lines
        .iter()
        .position(|l| l.starts_with("check A == "))
        .unwrap();
    assert!(
        lines[check_a].contains("1/4*eps*bet^2*sin(2*th)"),
        "{saved}"
    );

    // A fresh process replays it: every result re-derived and re-checked.
    let replay = ordex(dir.path(), &["derivation.ordex"], None);
    assert_eq!(replay.status.code(), Some(0), "{replay:?}");
    let text = String::from_utf8_lossy(&replay.stdout);
    assert_eq!(text.matches("holds").count(), 5, "{text}");

    // One altered coefficient: exit 1, and the message names that line.
    let altered = saved.replacen("1/4*eps*bet^2*sin(2*th)", "1/5*eps*bet^2*sin(2*th)", 1);
    assert_ne!(altered, saved);
    std::fs::write(dir.path().join("derivation.ordex"), altered).unwrap();
    let bad = ordex(dir.path(), &["derivation.ordex"], None);
    assert_eq!(bad.status.code(), Some(1), "{bad:?}");
    let text =
        String::from_utf8_lossy(&bad.stdout).into_owned() + &String::from_utf8_lossy(&bad.stderr);
    let place = format!("check failed at derivation.ordex:{}:", check_a + 1);
    assert!(text.contains(&place), "expected `{place}` in:\n{text}");
    assert_eq!(text.matches("holds").count(), 4, "{text}");
}

#[test]
fn a_failed_check_at_the_prompt_names_its_line_in_the_session() {
    let dir = tempfile::tempdir().unwrap();
    let input = "state x\nparam a\nX = [a*x]\n\ncheck X(x) == x\ncheck X(x) == a*x\ncheck [X,\n X] == [1]\n";
    let out = ordex(dir.path(), &[], Some(input));
    let text =
        String::from_utf8_lossy(&out.stdout).into_owned() + &String::from_utf8_lossy(&out.stderr);
    assert!(
        text.contains("check failed at line 5: check X(x) == x"),
        "{text}"
    );
    assert!(text.contains("check failed at line 7:"), "{text}");
}
