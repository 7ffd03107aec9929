//! `ordex kernel` driven by the real Jupyter client: `tests/kernel/drive.py`
//! installs the kernel spec, executes the notebook `tests/kernel/dolly.ipynb`
//! with nbclient, and talks to the kernel with jupyter_client (completion,
//! inspection, interrupts by message and by SIGINT, restart, shutdown,
//! a forged signature).
//!
//! The Python comes from `ORDEX_TEST_PYTHON` (a virtual environment that
//! `.ci/run` makes). Without it the test is skipped on a developer's
//! machine and fails in CI (`CI=true`).

use std::process::Command;

#[test]
fn a_notebook_runs_with_the_real_jupyter_client() {
    let python = match std::env::var_os("ORDEX_TEST_PYTHON").filter(|p| !p.is_empty()) {
        Some(python) => python,
        None => {
            assert!(
                std::env::var("CI").as_deref() != Ok("true"),
                "ORDEX_TEST_PYTHON is not set: .ci/run installs the Jupyter client into a \
                 virtual environment and exports it"
            );
            eprintln!(
                "skipped: set ORDEX_TEST_PYTHON to a Python with jupyter_client, nbclient and \
                 nbformat (pip install -r tests/kernel/requirements.txt)"
            );
            return;
        }
    };
    let work = tempfile::tempdir().expect("a temporary directory");
    let driver = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/kernel/drive.py");
    let out = Command::new(&python)
        .arg(driver)
        .arg(env!("CARGO_BIN_EXE_ordex"))
        .arg(work.path())
        .output()
        .unwrap_or_else(|e| panic!("cannot run {}: {e}", python.to_string_lossy()));
    let stdout = String::from_utf8_lossy(&out.stdout);
    let stderr = String::from_utf8_lossy(&out.stderr);
    println!("{stdout}");
    assert!(
        out.status.success(),
        "the Jupyter driver failed ({}):\n{stdout}\n{stderr}",
        out.status
    );
    assert!(
        stdout.contains(" passed, 0 failed"),
        "no summary from the driver:\n{stdout}"
    );
}
