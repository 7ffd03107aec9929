//! Code for simulation (`show E as python | julia | c | rust`), run by its
//! own toolchain: Python with NumPy, gcc (C99), rustc. Each generated
//! function is evaluated at random points and compared with ordex's own
//! floating-point evaluation (`numeric::compile`), relative error ≤ 1e-12.
//! Julia is not on CI machines: its output is checked by snapshot.
//!
//! With `CI=true` a missing Python/NumPy, gcc or rustc fails the test
//! (`.ci/run` installs NumPy in `target/ci-venv`); elsewhere it is skipped
//! with a note.

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use ordex::core::Sym;
use ordex::lang::split::split_statements;
use ordex::lang::value::Value;
use ordex::lang::{Session, Style};
use ordex::numeric::compile::CompiledExpr;
use ordex::render::code::Lang;

/// A vibrating-pivot boom with extra terms that exercise every factor the
/// generator writes: parameters whose names are keywords (`lambda`, `del`),
/// negative powers, `exp`, `pi`, powers of `t`, time frequencies 1 and 1/2.
const SETUP: &str = "\
state th, p
param eps, gam, bet, lambda, del
S = eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)] + [0, lambda*p^-2*exp(th/3)/7]
A = average eps*[p, -gam*sin(th)] + cos(t)*[0, bet*sin(th)] to 2 in eps
J = jac(S)
E = p^2/2 - gam*cos(th) + del*t^2*exp(-th/3)*cos(t/2) + lambda*pi/p^2 - 123456789/1000*sin(2*th - p)
";

const NAMES: [&str; 4] = ["S", "A", "J", "E"];

fn session() -> Session {
    let mut s = Session::new();
    s.show_timing = false;
    for stmt in split_statements(SETUP).unwrap() {
        s.execute(&stmt, None).unwrap();
    }
    s
}

fn generated(s: &mut Session, name: &str, lang: Lang) -> String {
    let line = format!("show {name} as {}", lang.word());
    let stmt = split_statements(&line).unwrap().remove(0);
    let r = s.execute(&stmt, None).unwrap();
    let mut text: String = r
        .lines
        .iter()
        .filter(|l| l.style == Style::Result)
        .map(|l| format!("{}\n", l.text))
        .collect();
    if text.is_empty() {
        text.push('\n');
    }
    text
}

/// Deterministic points: (t, state, parameter values).
struct Point {
    t: f64,
    x: Vec<f64>,
    params: Vec<f64>,
}

const PARAMS: [&str; 5] = ["eps", "gam", "bet", "lambda", "del"];

fn points(n: usize) -> Vec<Point> {
    let mut seed: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut next = move |lo: f64, hi: f64| {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        lo + (hi - lo) * ((seed >> 11) as f64 / (1u64 << 53) as f64)
    };
    (0..n)
        .map(|_| Point {
            t: next(0.0, 12.0),
            x: vec![next(-3.0, 3.0), next(0.4, 2.5)],
            params: (0..PARAMS.len()).map(|_| next(0.1, 2.0)).collect(),
        })
        .collect()
}

/// ordex's own evaluation of every entry (row by row for a matrix).
fn expected(s: &Session, name: &str, pt: &Point) -> Vec<f64> {
    let values: HashMap<Sym, f64> = PARAMS
        .iter()
        .zip(&pt.params)
        .map(|(n, v)| (Sym::new(n), *v))
        .collect();
    let entries: Vec<ordex::core::Expr> = match s.get(name).unwrap() {
        Value::Scalar(e) => vec![e.clone()],
        Value::Field(f) => f.field.0.clone(),
        Value::Matrix(m) => m.data.clone(),
    };
    entries
        .iter()
        .map(|e| {
            CompiledExpr::new(e, s.states(), &values)
                .unwrap()
                .eval(pt.t, &pt.x)
        })
        .collect()
}

fn in_ci() -> bool {
    std::env::var("CI").is_ok_and(|v| v == "true" || v == "1")
}

fn skip_or_fail(what: &str) {
    assert!(!in_ci(), "{what} is missing on CI (.ci/run installs it)");
    eprintln!("note: {what} not found; this code-generation test is skipped");
}

fn work_dir(lang: &str) -> PathBuf {
    let d = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("target/codegen-check")
        .join(lang);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Compares each output line of a driver (numbers separated by spaces)
/// with ordex's evaluation.
fn compare(s: &Session, name: &str, pts: &[Point], out: &str, lang: &str) {
    let rows: Vec<&str> = out.lines().collect();
    assert_eq!(rows.len(), pts.len(), "{lang} {name}: output\n{out}");
    let mut worst: f64 = 0.0;
    for (row, pt) in rows.iter().zip(pts) {
        let got: Vec<f64> = row.split_whitespace().map(|w| w.parse().unwrap()).collect();
        let want = expected(s, name, pt);
        assert_eq!(got.len(), want.len(), "{lang} {name}: {row}");
        for (g, w) in got.iter().zip(&want) {
            let scale = g.abs().max(w.abs());
            let err = if scale == 0.0 {
                0.0
            } else {
                (g - w).abs() / scale
            };
            worst = worst.max(err);
            assert!(
                err <= 1e-12,
                "{lang} {name}: {g} vs ordex {w} (relative error {err:e}) at t = {}, x = {:?}",
                pt.t,
                pt.x
            );
        }
    }
    eprintln!(
        "{lang} {name}: {} points, worst relative error {worst:e}",
        pts.len()
    );
}

fn python() -> Option<PathBuf> {
    let venv = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/ci-venv/bin/python");
    let mut candidates = vec![venv];
    if let Ok(p) = std::env::var("ORDEX_PYTHON") {
        candidates.insert(0, PathBuf::from(p));
    }
    candidates.push(PathBuf::from("python3"));
    candidates.into_iter().find(|p| {
        Command::new(p)
            .args(["-c", "import numpy"])
            .output()
            .is_ok_and(|o| o.status.success())
    })
}

fn run(cmd: &mut Command, what: &str) -> String {
    let out = cmd.output().unwrap_or_else(|e| panic!("{what}: {e}"));
    assert!(
        out.status.success(),
        "{what} failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

#[test]
fn python_code_matches_ordex() {
    let Some(py) = python() else {
        return skip_or_fail("Python with NumPy");
    };
    let mut s = session();
    let pts = points(40);
    let dir = work_dir("python");
    for name in NAMES {
        let module = format!("gen_{}", name.to_lowercase());
        std::fs::write(
            dir.join(format!("{module}.py")),
            generated(&mut s, name, Lang::Python),
        )
        .unwrap();
        let mut driver = format!("import numpy as np\nfrom {module} import {name}\n");
        for pt in &pts {
            let kw: Vec<String> = PARAMS
                .iter()
                .zip(&pt.params)
                .filter(|(p, _)| uses(&s, name, p))
                .map(|(p, v)| format!("{}={v:?}", Lang::Python.ident(p)))
                .collect();
            driver.push_str(&format!(
                "print(' '.join(repr(float(v)) for v in np.ravel({name}({:?}, np.array([{:?}, {:?}]), {}))))\n",
                pt.t,
                pt.x[0],
                pt.x[1],
                kw.join(", ")
            ));
        }
        let file = dir.join(format!("drive_{module}.py"));
        std::fs::write(&file, driver).unwrap();
        let out = run(Command::new(&py).arg(&file).current_dir(&dir), "python");
        compare(&s, name, &pts, &out, "python");
    }
}

/// Whether the value `name` mentions parameter `p` (the function takes
/// only the parameters it uses).
fn uses(s: &Session, name: &str, p: &str) -> bool {
    let sym = Sym::new(p);
    match s.get(name).unwrap() {
        Value::Scalar(e) => e.mentions(sym),
        Value::Field(f) => f.field.0.iter().any(|e| e.mentions(sym)),
        Value::Matrix(m) => m.data.iter().any(|e| e.mentions(sym)),
    }
}

fn have(tool: &str) -> bool {
    Command::new(tool)
        .arg("--version")
        .output()
        .is_ok_and(|o| o.status.success())
}

fn dim(s: &Session, name: &str) -> usize {
    match s.get(name).unwrap() {
        Value::Scalar(_) => 1,
        Value::Field(f) => f.field.0.len(),
        Value::Matrix(m) => m.data.len(),
    }
}

#[test]
fn c_code_matches_ordex() {
    if !have("gcc") {
        return skip_or_fail("gcc");
    }
    let mut s = session();
    let pts = points(40);
    let dir = work_dir("c");
    for name in NAMES {
        let lower = name.to_lowercase();
        std::fs::write(
            dir.join(format!("gen_{lower}.c")),
            generated(&mut s, name, Lang::C),
        )
        .unwrap();
        let scalar = matches!(s.get(name).unwrap(), Value::Scalar(_));
        let n = dim(&s, name);
        let mut d = format!("#include <stdio.h>\n#include \"gen_{lower}.c\"\nint main(void)\n{{\n    double out[{n}];\n    double state[2];\n");
        for pt in &pts {
            let mut args = vec![format!("{:?}", pt.t), "state".to_string()];
            args.extend(
                PARAMS
                    .iter()
                    .zip(&pt.params)
                    .filter(|(p, _)| uses(&s, name, p))
                    .map(|(_, v)| format!("{v:?}")),
            );
            d.push_str(&format!(
                "    state[0] = {:?}; state[1] = {:?};\n",
                pt.x[0], pt.x[1]
            ));
            if scalar {
                d.push_str(&format!("    out[0] = {name}({});\n", args.join(", ")));
            } else {
                args.push("out".to_string());
                d.push_str(&format!("    {name}({});\n", args.join(", ")));
            }
            d.push_str(&format!(
                "    for (int i = 0; i < {n}; i++) printf(\"%.17g \", out[i]);\n    printf(\"\\n\");\n"
            ));
        }
        d.push_str("    return 0;\n}\n");
        let src = dir.join(format!("drive_{lower}.c"));
        std::fs::write(&src, d).unwrap();
        let exe = dir.join(format!("drive_{lower}"));
        run(
            Command::new("gcc")
                .args([
                    "-std=c99",
                    "-pedantic",
                    "-Wall",
                    "-Wextra",
                    "-Werror",
                    "-O2",
                ])
                .arg(&src)
                .arg("-o")
                .arg(&exe)
                .arg("-lm")
                .current_dir(&dir),
            "gcc",
        );
        let out = run(&mut Command::new(&exe), "the C driver");
        compare(&s, name, &pts, &out, "c");
    }
}

#[test]
fn rust_code_matches_ordex() {
    if !have("rustc") {
        return skip_or_fail("rustc");
    }
    let mut s = session();
    let pts = points(40);
    let dir = work_dir("rust");
    let mut d = String::new();
    for name in NAMES {
        let lower = name.to_lowercase();
        std::fs::write(
            dir.join(format!("gen_{lower}.rs")),
            generated(&mut s, name, Lang::Rust),
        )
        .unwrap();
        d.push_str(&format!(
            "mod gen_{lower} {{ include!(\"gen_{lower}.rs\"); }}\n"
        ));
    }
    d.push_str("fn show(v: &[f64]) { let w: Vec<String> = v.iter().map(|x| format!(\"{:?}\", x)).collect(); println!(\"{}\", w.join(\" \")); }\n");
    d.push_str("fn main() {\n    let which = std::env::args().nth(1).unwrap();\n");
    for name in NAMES {
        let lower = name.to_lowercase();
        d.push_str(&format!("    if which == \"{name}\" {{\n"));
        for pt in &pts {
            let mut args = vec![
                format!("{:?}", pt.t),
                format!("&[{:?}, {:?}]", pt.x[0], pt.x[1]),
            ];
            args.extend(
                PARAMS
                    .iter()
                    .zip(&pt.params)
                    .filter(|(p, _)| uses(&s, name, p))
                    .map(|(_, v)| format!("{v:?}")),
            );
            let call = format!("gen_{lower}::{name}({})", args.join(", "));
            let flat = match s.get(name).unwrap() {
                Value::Scalar(_) => format!("vec![{call}]"),
                Value::Field(_) => format!("{call}.to_vec()"),
                Value::Matrix(_) => format!("{call}.concat()"),
            };
            d.push_str(&format!("        show(&{flat});\n"));
        }
        d.push_str("    }\n");
    }
    d.push_str("}\n");
    let src = dir.join("main.rs");
    std::fs::write(&src, d).unwrap();
    let exe = dir.join("drive");
    run(
        Command::new("rustc")
            .args(["--edition", "2021", "-O", "-D", "warnings", "-o"])
            .arg(&exe)
            .arg(&src)
            .current_dir(&dir),
        "rustc",
    );
    for name in NAMES {
        let out = run(Command::new(&exe).arg(name), "the Rust driver");
        compare(&s, name, &pts, &out, "rust");
    }
}

#[test]
fn julia_code_snapshot() {
    let mut s = session();
    let mut text = String::new();
    for name in NAMES {
        text.push_str(&generated(&mut s, name, Lang::Julia));
        text.push('\n');
    }
    insta::assert_snapshot!("julia", text);
}

#[test]
fn code_goes_to_a_file_atomically_with_the_same_text() {
    let dir = tempfile::tempdir().unwrap();
    let mut s = session();
    s.set_base_dir(dir.path().to_path_buf());
    let printed = generated(&mut s, "S", Lang::Python);
    let stmt = split_statements("show S as python to field.py")
        .unwrap()
        .remove(0);
    let r = s.execute(&stmt, None).unwrap();
    assert!(r.lines.iter().any(|l| l.text == "wrote python to field.py"));
    let written = std::fs::read_to_string(dir.path().join("field.py")).unwrap();
    assert_eq!(written, printed);
    // Code never replaces a script.
    let stmt = split_statements("show S as c to model.ordex")
        .unwrap()
        .remove(0);
    assert!(s.execute(&stmt, None).is_err());
}
