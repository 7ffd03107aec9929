//! File effects of the language: atomic writes and careful script reads.

use std::io::Write;
use std::path::Path;

/// Writes `bytes` to `path` atomically: a temporary file in the same
/// directory, flushed and synced, then renamed over the target.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), String> {
    let dir = path
        .parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let file_name = path
        .file_name()
        .ok_or_else(|| "not a file name".to_string())?
        .to_string_lossy()
        .to_string();
    let tmp = dir.join(format!(".{file_name}.{}.tmp", std::process::id()));
    let result = (|| -> std::io::Result<()> {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)?;
        Ok(())
    })();
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(e.to_string());
    }
    Ok(())
}

/// Reads a script: a clear message for a missing, unreadable, binary or
/// non-UTF-8 file.
pub fn read_script(path: &Path) -> Result<String, String> {
    let meta = std::fs::metadata(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => "no such file".to_string(),
        std::io::ErrorKind::PermissionDenied => "permission denied".to_string(),
        _ => e.to_string(),
    })?;
    if meta.is_dir() {
        return Err("it is a directory".to_string());
    }
    if meta.len() > 16 * 1024 * 1024 {
        return Err("larger than 16 MiB: not a script".to_string());
    }
    let bytes = std::fs::read(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::PermissionDenied => "permission denied".to_string(),
        _ => e.to_string(),
    })?;
    if bytes.contains(&0) {
        return Err("binary data (a NUL byte): not a script".to_string());
    }
    String::from_utf8(bytes)
        .map_err(|e| format!("not valid UTF-8 (at byte {})", e.utf8_error().valid_up_to()))
}
