//! End-to-end runs of whole scripts through a session.
//!
//! - `tests/checks/*.ordex`: checks against published results (each file
//!   names its source); every `check` must hold.
//! - `tests/fixtures/sympy/*.ordex`: checks against SymPy-generated
//!   reference values (see scripts/fixtures/README.md); every `check` must hold.
//! - `scripts/*.ordex`: the worked scenario scripts; they must run cleanly and
//!   their whole output is snapshotted.

use std::path::{Path, PathBuf};

use ordex::lang::session::render_error;
use ordex::lang::split::split_statements;
use ordex::lang::{Session, Style};

struct Outcome {
    /// The session as it reads: each input line echoed (`» …`), then its output.
    text: String,
    exit: i32,
    holds: usize,
    /// The output of every `show … as latex` statement.
    latex: Vec<String>,
}

/// Runs a script statement by statement, as `Session::run_text` does
/// (failed checks go on, an error stops), echoing each input before its
/// output so that a snapshot reads like the derivation it records.
fn run_source(text: &str, name: &str, dir: Option<&Path>) -> Outcome {
    let mut session = Session::new();
    session.show_timing = false;
    if let Some(dir) = dir {
        session.set_base_dir(dir.to_path_buf());
    }
    let mut out = String::new();
    let (mut holds, mut latex, mut exit) = (0, Vec::new(), 0);
    let stmts = match split_statements(text) {
        Ok(s) => s,
        Err(e) => {
            return Outcome {
                text: e.render(Some(name)),
                exit: 2,
                holds,
                latex,
            }
        }
    };
    for stmt in &stmts {
        for (i, l) in stmt.source().lines().enumerate() {
            out.push_str(if i == 0 { "» " } else { "  " });
            out.push_str(l.trim_end());
            out.push('\n');
        }
        match session.execute(stmt, Some(name)) {
            Ok(r) => {
                let shown: Vec<&str> = r
                    .lines
                    .iter()
                    .filter(|l| l.style == Style::Result)
                    .map(|l| l.text.as_str())
                    .collect();
                let code = stmt.text.trim();
                if code.starts_with("show ") && code.ends_with(" as latex") {
                    latex.push(shown.join("\n"));
                }
                if r.check_failed {
                    exit = 1;
                }
                for l in r.lines {
                    if l.style == Style::Pass {
                        holds += 1;
                    }
                    out.push_str("  ");
                    out.push_str(&l.text);
                    out.push('\n');
                }
                if r.quit {
                    break;
                }
            }
            Err(err) => {
                out.push_str(&render_error(stmt, Some(name), &err));
                out.push('\n');
                exit = 2;
                break;
            }
        }
    }
    Outcome {
        text: out,
        exit,
        holds,
        latex,
    }
}

fn run(path: &Path) -> Outcome {
    let text = std::fs::read_to_string(path).expect("read script");
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    run_source(&text, &name, path.parent())
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

/// A session that exercises the LaTeX of names and forms the worked
/// scripts do not use (short Greek names, subscripts, accents, negative
/// powers of a parameter, matrices, exponentials, time factors).
const LATEX_NAMES: &str = "\
state q_dot, x1, th
param alp, kap, Om, a12, w, sig, lam
S = [kap*x1 - alp*q_dot^2/3, Om^2*sin(th - x1) + a12*exp(-x1)*cos(t/2), sig*w^-2*x1*th - lam*pi*t]
show S as latex
show jac(S) as latex
show S(q_dot*th) as latex
show [a12/w, 0, 3/7*cos(2*t)] as latex
";

fn latex_outputs() -> Vec<(String, Vec<String>)> {
    let mut all = Vec::new();
    for dir in ["scripts", "tests/checks"] {
        for f in scripts_in(dir) {
            let o = run(&f);
            assert_eq!(o.exit, 0, "{} did not pass:\n{}", f.display(), o.text);
            if !o.latex.is_empty() {
                all.push((
                    format!("{dir}/{}", f.file_name().unwrap().to_string_lossy()),
                    o.latex,
                ));
            }
        }
    }
    let o = run_source(LATEX_NAMES, "names", None);
    assert_eq!(o.exit, 0, "{}", o.text);
    all.push(("names".to_string(), o.latex));
    all
}

/// A document with every formula, one display each.
fn latex_document(outputs: &[(String, Vec<String>)]) -> String {
    let mut doc = String::from(
        "\\documentclass[11pt]{article}\n\\usepackage{amsmath}\n\\usepackage[margin=2cm]{geometry}\n\\begin{document}\n",
    );
    for (name, formulas) in outputs {
        doc.push_str(&format!(
            "\\section*{{\\texttt{{\\detokenize{{{name}}}}}}}\n"
        ));
        for f in formulas {
            doc.push_str("\\[\n");
            doc.push_str(f);
            doc.push_str("\n\\]\n");
        }
    }
    doc.push_str("\\end{document}\n");
    doc
}

fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| v == "true" || v == "1")
}

fn have(tool: &str) -> bool {
    std::process::Command::new(tool)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

#[test]
fn latex_snapshots() {
    let outputs = latex_outputs();
    let mut text = String::new();
    for (name, formulas) in &outputs {
        text.push_str(&format!("% {name}\n"));
        for f in formulas {
            text.push_str(f);
            text.push('\n');
        }
    }
    insta::assert_snapshot!("latex_outputs", text);
}

/// Every LaTeX output of the worked scripts compiles with a real TeX engine
/// (pdflatex with amsmath); a TeX error or an undefined control sequence
/// fails the test. The PDF stays in `target/latex-check/` to look at.
#[test]
fn latex_compiles_with_pdflatex() {
    if !have("pdflatex") {
        assert!(
            !in_ci(),
            "pdflatex is missing on CI: .ci/run installs texlive-latex-base"
        );
        eprintln!("note: pdflatex not found; the LaTeX compile test is skipped (install texlive-latex-base)");
        return;
    }
    let outputs = latex_outputs();
    let n: usize = outputs.iter().map(|(_, f)| f.len()).sum();
    assert!(
        n >= 8,
        "expected the worked scripts to show LaTeX, found {n} formulas"
    );
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/latex-check");
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(dir.join("ordex-latex.tex"), latex_document(&outputs)).unwrap();
    let run = std::process::Command::new("pdflatex")
        .args([
            "-interaction=nonstopmode",
            "-halt-on-error",
            "ordex-latex.tex",
        ])
        .current_dir(&dir)
        .output()
        .expect("run pdflatex");
    let log = std::fs::read_to_string(dir.join("ordex-latex.log")).unwrap_or_default();
    let errors: Vec<&str> = log
        .lines()
        .filter(|l| l.starts_with('!') || l.contains("Undefined control sequence"))
        .collect();
    assert!(
        run.status.success() && errors.is_empty(),
        "pdflatex failed on our LaTeX:\n{}\n{}",
        errors.join("\n"),
        String::from_utf8_lossy(&run.stdout)
    );
    assert!(dir.join("ordex-latex.pdf").exists());
}
