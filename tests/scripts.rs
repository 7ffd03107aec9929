//! End-to-end runs of whole scripts through a session.
//!
//! - `tests/checks/*.ordex`: checks against published results (each file
//!   names its source); every `check` must hold.
//! - `tests/fixtures/sympy/*.ordex`: checks against SymPy-generated
//!   reference values (see scripts/fixtures/README.md); every `check` must hold.
//! - `scripts/*.ordex`: the worked scenario scripts; they must run cleanly and
//!   their whole output is snapshotted.

use std::path::{Path, PathBuf};

use ordex::lang::{Event, Session, Style};

struct Outcome {
    text: String,
    exit: i32,
    holds: usize,
}

fn run(path: &Path) -> Outcome {
    let text = std::fs::read_to_string(path).expect("read script");
    let mut session = Session::new();
    session.show_timing = false;
    if let Some(dir) = path.parent() {
        session.set_base_dir(dir.to_path_buf());
    }
    let mut out = String::new();
    let mut holds = 0;
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let status = session.run_text(&text, Some(&name), &mut |e| match e {
        Event::Report(r) => {
            for l in r.lines {
                if l.style == Style::Pass {
                    holds += 1;
                }
                out.push_str("  ");
                out.push_str(&l.text);
                out.push('\n');
            }
        }
        Event::Error(m) => {
            out.push_str(&m);
            out.push('\n');
        }
    });
    Outcome {
        text: out,
        exit: status.exit_code(),
        holds,
    }
}

fn scripts_in(dir: &str) -> Vec<PathBuf> {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join(dir);
    let mut v: Vec<PathBuf> = std::fs::read_dir(&root)
        .map(|rd| rd.filter_map(|e| e.ok().map(|e| e.path())).collect())
        .unwrap_or_default();
    v.retain(|p| p.extension().is_some_and(|e| e == "ordex"));
    v.sort();
    v
}

fn count_checks(path: &Path) -> usize {
    std::fs::read_to_string(path)
        .unwrap_or_default()
        .lines()
        .filter(|l| l.trim_start().starts_with("check "))
        .count()
}

fn assert_all_hold(dir: &str, at_least: usize) {
    let files = scripts_in(dir);
    assert!(
        files.len() >= at_least,
        "expected at least {at_least} scripts in {dir}, found {}",
        files.len()
    );
    for f in files {
        let o = run(&f);
        let n = count_checks(&f);
        assert!(n > 0, "{} has no checks", f.display());
        assert_eq!(o.exit, 0, "{} did not pass:\n{}", f.display(), o.text);
        assert_eq!(
            o.holds,
            n,
            "{}: {} of {} checks held:\n{}",
            f.display(),
            o.holds,
            n,
            o.text
        );
    }
}

#[test]
fn published_results_hold() {
    assert_all_hold("tests/checks", 7);
}

#[test]
fn sympy_fixtures_hold() {
    assert_all_hold("tests/fixtures/sympy", 1);
}

#[test]
fn scenario_scripts_snapshots() {
    let files = scripts_in("scripts");
    assert!(files.len() >= 4, "expected the worked scenario scripts");
    for f in files {
        let o = run(&f);
        assert_eq!(o.exit, 0, "{} did not pass:\n{}", f.display(), o.text);
        assert_eq!(
            o.holds,
            count_checks(&f),
            "{}: not every check held",
            f.display()
        );
        let name = f
            .file_stem()
            .map(|s| s.to_string_lossy().to_string())
            .unwrap_or_default();
        insta::assert_snapshot!(format!("scenario_{name}"), o.text);
    }
}
