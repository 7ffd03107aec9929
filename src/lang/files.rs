//! File effects of the language: atomic writes and careful script reads.

use std::io::{Read, Write};
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
        return Err(if path.is_dir() {
            "it is a directory".to_string()
        } else {
            io_reason(&e)
        });
    }
    Ok(())
}

/// A short lowercase reason for an I/O error, without the OS error number.
fn io_reason(e: &std::io::Error) -> String {
    match e.kind() {
        std::io::ErrorKind::NotFound => "no such file or directory".to_string(),
        std::io::ErrorKind::PermissionDenied => "permission denied".to_string(),
        _ => {
            let text = e.to_string();
            let text = match text.find(" (os error") {
                Some(i) => text[..i].to_string(),
                None => text,
            };
            let mut chars = text.chars();
            match chars.next() {
                Some(first) => first.to_lowercase().chain(chars).collect(),
                None => text,
            }
        }
    }
}

/// Reads a script: a clear message for a missing, unreadable, binary or
/// non-UTF-8 file.
pub fn read_script(path: &Path) -> Result<String, String> {
    let meta = std::fs::metadata(path).map_err(|e| match e.kind() {
        std::io::ErrorKind::NotFound => "no such file".to_string(),
        _ => io_reason(&e),
    })?;
    if meta.is_dir() {
        return Err("it is a directory".to_string());
    }
    // A device or a pipe (`/dev/zero`, `/dev/stdin`) could be endless or
    // wait forever: only regular files are scripts.
    if !meta.is_file() {
        return Err("not a regular file".to_string());
    }
    const MAX_SCRIPT: u64 = 16 * 1024 * 1024;
    if meta.len() > MAX_SCRIPT {
        return Err("larger than 16 MiB: not a script".to_string());
    }
    let mut bytes = Vec::new();
    std::fs::File::open(path)
        .and_then(|f| f.take(MAX_SCRIPT + 1).read_to_end(&mut bytes))
        .map_err(|e| io_reason(&e))?;
    if bytes.len() as u64 > MAX_SCRIPT {
        return Err("larger than 16 MiB: not a script".to_string());
    }
    if bytes.contains(&0) {
        return Err("binary data (a NUL byte): not a script".to_string());
    }
    String::from_utf8(bytes)
        .map_err(|e| format!("not valid UTF-8 (at byte {})", e.utf8_error().valid_up_to()))
}
