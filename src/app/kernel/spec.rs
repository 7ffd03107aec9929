//! The kernel spec: `kernel.json` in `<Jupyter data dir>/kernels/ordex/`,
//! telling Jupyter how to start `ordex kernel CONNECTION_FILE`.
//!
//! The data directory is `JUPYTER_DATA_DIR` when set, else the per-user
//! default Jupyter uses: `$XDG_DATA_HOME/jupyter` or
//! `~/.local/share/jupyter` on Linux, `~/Library/Jupyter` on macOS,
//! `%APPDATA%\jupyter` on Windows.

use std::path::{Path, PathBuf};

use serde_json::json;

/// The kernel's name in Jupyter (its directory under `kernels/`).
pub(crate) const KERNEL_NAME: &str = "ordex";

/// The user's Jupyter data directory; `None` when there is no home.
pub(crate) fn jupyter_data_dir() -> Option<PathBuf> {
    if let Some(dir) = std::env::var_os("JUPYTER_DATA_DIR").filter(|v| !v.is_empty()) {
        return Some(PathBuf::from(dir));
    }
    if cfg!(target_os = "macos") {
        return dirs::home_dir().map(|home| home.join("Library").join("Jupyter"));
    }
    dirs::data_dir().map(|dir| dir.join("jupyter"))
}

/// The text of `kernel.json` for the binary at `exe`. Interrupts come as
/// `interrupt_request` messages on the control channel (`interrupt_mode`
/// `message`), which reach the kernel however it was started; SIGINT works
/// too.
pub(crate) fn kernel_json(exe: &Path) -> String {
    let spec = json!({
        "argv": [exe.to_string_lossy(), "kernel", "{connection_file}"],
        "display_name": "ordex",
        "language": "ordex",
        "interrupt_mode": "message",
        "metadata": {"debugger": false},
    });
    let mut text = serde_json::to_string_pretty(&spec).unwrap_or_default();
    text.push('\n');
    text
}

/// Writes the kernel spec for this binary into the user's Jupyter data
/// directory; returns the spec's directory.
pub(crate) fn install() -> Result<PathBuf, String> {
    let exe = std::env::current_exe()
        .and_then(|p| p.canonicalize())
        .map_err(|e| format!("cannot find the ordex binary to register: {e}"))?;
    let data = jupyter_data_dir()
        .ok_or("no home directory to find the Jupyter data directory (set JUPYTER_DATA_DIR)")?;
    let dir = data.join("kernels").join(KERNEL_NAME);
    std::fs::create_dir_all(&dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))?;
    let file = dir.join("kernel.json");
    crate::lang::files::write_atomic(&file, kernel_json(&exe).as_bytes())
        .map_err(|e| format!("cannot write {}: {e}", file.display()))?;
    Ok(dir)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_spec_starts_this_binary_with_the_connection_file() {
        let text = kernel_json(Path::new("/opt/ordex/bin/ordex"));
        let spec: serde_json::Value = serde_json::from_str(&text).expect("json");
        assert_eq!(
            spec["argv"],
            json!(["/opt/ordex/bin/ordex", "kernel", "{connection_file}"])
        );
        assert_eq!(spec["language"], json!("ordex"));
        assert_eq!(spec["interrupt_mode"], json!("message"));
    }
}
