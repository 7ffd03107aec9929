//! File effects of the language: safe writes and careful script reads.
//!
//! Every file ordex writes for the user (`save`, plots, generated code,
//! tables, the journal's rewrites) goes through [`write_file`], which
//! keeps the promise "files are never damaged":
//! - the bytes go to a temporary file in the target's directory, synced,
//!   then renamed over the target: a reader sees the old file or the new
//!   one, never half of it, and a full disk leaves the old file intact;
//! - a symbolic link is followed to its final target, which is replaced
//!   (the link stays a link);
//! - an existing target keeps its permissions (and, where the process may
//!   set it, its owner);
//! - only regular files are written: a directory, a device (`/dev/null`),
//!   a pipe or a socket is refused;
//! - a file with several hard links is refused with an explanation: a
//!   rename would split the links (the other names would keep the old
//!   text) and writing in place could leave a half-written file, so
//!   neither is done silently;
//! - a read-only file is refused (its mode says not to write it);
//! - a write that is not a script ([`FileKind::Plot`], `Code`, `Table`)
//!   never replaces a `.ordex` file: it is refused with a hint.

use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// What a write puts in its file; decides the names it may replace and
/// the words of its messages.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FileKind {
    /// An ordex script (`save`, the journal).
    Script,
    /// A plot (SVG).
    Plot,
    /// Generated source code.
    Code,
    /// A table of numbers (CSV).
    Table,
}

impl FileKind {
    fn noun(self) -> &'static str {
        match self {
            FileKind::Script => "a script",
            FileKind::Plot => "a plot",
            FileKind::Code => "code",
            FileKind::Table => "a table",
        }
    }

    fn usual_extension(self) -> &'static str {
        match self {
            FileKind::Script => "ordex",
            FileKind::Plot => "svg",
            FileKind::Code => "py",
            FileKind::Table => "csv",
        }
    }
}

/// Symbolic links followed before giving up (as the kernel does).
const MAX_LINKS: usize = 40;

/// Distinguishes the temporary files of one process.
static TEMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// Writes `bytes` to `path` as a file of kind `kind`, atomically and
/// through symbolic links (see the module documentation for the rules).
/// The error is a short lowercase reason, to follow `cannot write FILE: `.
pub fn write_file(path: &Path, bytes: &[u8], kind: FileKind) -> Result<(), String> {
    let target = resolve_links(path)?;
    if kind != FileKind::Script {
        for name in [path, target.as_path()] {
            if is_script_name(name) {
                return Err(format!(
                    "`{}` is a script name: {} would replace the script; write it to a name such as `{}`",
                    name.display(),
                    kind.noun(),
                    name.with_extension(kind.usual_extension()).display()
                ));
            }
        }
    }
    let existing = match std::fs::metadata(&target) {
        Ok(meta) => Some(meta),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
        Err(e) => return Err(io_reason(&e)),
    };
    if let Some(meta) = &existing {
        check_replaceable(&target, meta)?;
    }
    let dir = parent_dir(&target);
    let file_name = target
        .file_name()
        .ok_or_else(|| "not a file name".to_string())?
        .to_string_lossy()
        .to_string();
    let tmp = dir.join(format!(
        ".{file_name}.{}.{}.tmp",
        std::process::id(),
        TEMP_COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let result = write_temp_and_rename(&tmp, &target, bytes, existing.as_ref());
    if let Err(e) = result {
        let _ = std::fs::remove_file(&tmp);
        return Err(match e.kind() {
            std::io::ErrorKind::NotFound => "no such directory".to_string(),
            _ => io_reason(&e),
        });
    }
    // The rename is durable once the directory is synced (best effort:
    // some file systems cannot sync a directory).
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
    Ok(())
}

/// Writes a non-script output (generated code, a table): the same rules
/// as [`write_file`] with [`FileKind::Code`]; prefer `write_file` with
/// the right kind.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), String> {
    write_file(path, bytes, FileKind::Code)
}

fn is_script_name(path: &Path) -> bool {
    path.extension()
        .is_some_and(|ext| ext.eq_ignore_ascii_case("ordex"))
}

fn parent_dir(path: &Path) -> &Path {
    path.parent()
        .filter(|d| !d.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
}

/// Follows symbolic links from `path` to the file they finally name
/// (which need not exist yet: a dangling link creates its target).
fn resolve_links(path: &Path) -> Result<PathBuf, String> {
    let mut current = path.to_path_buf();
    for _ in 0..MAX_LINKS {
        match std::fs::symlink_metadata(&current) {
            Ok(meta) if meta.file_type().is_symlink() => {
                let next = std::fs::read_link(&current).map_err(|e| io_reason(&e))?;
                current = if next.is_absolute() {
                    next
                } else {
                    parent_dir(&current).join(next)
                };
            }
            Ok(_) => return Ok(current),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(current),
            Err(e) => return Err(io_reason(&e)),
        }
    }
    Err(format!(
        "more than {MAX_LINKS} symbolic links in a row (a loop?)"
    ))
}

/// Refuses targets that a rename must not replace.
fn check_replaceable(target: &Path, meta: &std::fs::Metadata) -> Result<(), String> {
    let ty = meta.file_type();
    if ty.is_dir() {
        return Err("it is a directory".to_string());
    }
    if !ty.is_file() {
        return Err(format!(
            "{} is not a regular file ({}): ordex writes only regular files",
            target.display(),
            special_kind(meta)
        ));
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if meta.nlink() > 1 {
            return Err(format!(
                "{} has {} hard links: replacing it would split them and writing it in place \
                 could leave it half-written; write to another name (or remove the other links)",
                target.display(),
                meta.nlink()
            ));
        }
    }
    if meta.permissions().readonly() {
        return Err(format!(
            "{} is read-only; change its permissions or write to another name",
            target.display()
        ));
    }
    Ok(())
}

#[cfg(unix)]
fn special_kind(meta: &std::fs::Metadata) -> &'static str {
    use std::os::unix::fs::FileTypeExt;
    let ty = meta.file_type();
    if ty.is_char_device() || ty.is_block_device() {
        "a device"
    } else if ty.is_fifo() {
        "a pipe"
    } else if ty.is_socket() {
        "a socket"
    } else {
        "a special file"
    }
}

#[cfg(not(unix))]
fn special_kind(_meta: &std::fs::Metadata) -> &'static str {
    "a special file"
}

fn write_temp_and_rename(
    tmp: &Path,
    target: &Path,
    bytes: &[u8],
    existing: Option<&std::fs::Metadata>,
) -> std::io::Result<()> {
    let mut f = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(tmp)?;
    if let Some(meta) = existing {
        f.set_permissions(meta.permissions())?;
        #[cfg(unix)]
        {
            use std::os::unix::fs::MetadataExt;
            // Only a privileged process may give a file away; others keep
            // their own ownership (and the target was theirs to replace).
            let _ = std::os::unix::fs::fchown(&f, Some(meta.uid()), Some(meta.gid()));
        }
    }
    f.write_all(bytes)?;
    f.sync_all()?;
    drop(f);
    std::fs::rename(tmp, target)
}

/// A short lowercase reason for an I/O error, without the OS error number.
pub fn io_reason(e: &std::io::Error) -> String {
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

#[cfg(all(test, unix))]
mod tests {
    use super::*;
    use std::os::unix::fs::{MetadataExt, PermissionsExt};

    fn dir() -> tempfile::TempDir {
        match tempfile::tempdir() {
            Ok(d) => d,
            Err(e) => panic!("a temporary directory: {e}"),
        }
    }

    fn read(path: &Path) -> String {
        std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
    }

    #[test]
    fn writes_through_a_symlink_to_its_target() {
        let d = dir();
        let real = d.path().join("real.ordex");
        let link = d.path().join("link.ordex");
        assert!(std::fs::write(&real, "old\n").is_ok());
        assert!(std::os::unix::fs::symlink("real.ordex", &link).is_ok());
        assert_eq!(write_file(&link, b"new\n", FileKind::Script), Ok(()));
        let meta = std::fs::symlink_metadata(&link).map_err(|e| e.to_string());
        assert!(
            meta.is_ok_and(|m| m.file_type().is_symlink()),
            "the link was replaced by a file"
        );
        assert_eq!(read(&real), "new\n");
        // A dangling link creates its target.
        let dangling = d.path().join("later.svg");
        assert!(std::os::unix::fs::symlink("sub-target.svg", &dangling).is_ok());
        assert_eq!(write_file(&dangling, b"<svg/>", FileKind::Plot), Ok(()));
        assert_eq!(read(&d.path().join("sub-target.svg")), "<svg/>");
    }

    #[test]
    fn keeps_the_permissions_of_the_file_it_replaces() {
        let d = dir();
        let path = d.path().join("private.ordex");
        assert!(std::fs::write(&path, "old\n").is_ok());
        assert!(std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o600)).is_ok());
        assert_eq!(write_file(&path, b"new\n", FileKind::Script), Ok(()));
        let mode = std::fs::metadata(&path).map(|m| m.mode() & 0o777).ok();
        assert_eq!(mode, Some(0o600));
        assert!(std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o755)).is_ok());
        assert_eq!(write_file(&path, b"newer\n", FileKind::Script), Ok(()));
        let mode = std::fs::metadata(&path).map(|m| m.mode() & 0o777).ok();
        assert_eq!(mode, Some(0o755));
        assert_eq!(read(&path), "newer\n");
    }

    #[test]
    fn refuses_targets_that_are_not_regular_files() {
        let d = dir();
        // A device, through a link (the device itself is left alone even
        // when the test runs as root).
        let to_null = d.path().join("null.ordex");
        assert!(std::os::unix::fs::symlink("/dev/null", &to_null).is_ok());
        let err = write_file(&to_null, b"x\n", FileKind::Script);
        assert!(
            err.as_ref().is_err_and(|e| e.contains("a device")),
            "{err:?}"
        );
        assert!(std::fs::symlink_metadata(&to_null).is_ok_and(|m| m.file_type().is_symlink()));
        assert!(std::fs::metadata("/dev/null").is_ok_and(|m| !m.is_file()));
        // A pipe.
        let fifo = d.path().join("pipe.ordex");
        let made = std::process::Command::new("mkfifo").arg(&fifo).status();
        if made.is_ok_and(|s| s.success()) {
            let err = write_file(&fifo, b"x\n", FileKind::Script);
            assert!(err.as_ref().is_err_and(|e| e.contains("a pipe")), "{err:?}");
            assert!(std::fs::symlink_metadata(&fifo).is_ok_and(|m| !m.is_file()));
        }
        // A directory.
        let sub = d.path().join("sub.ordex");
        assert!(std::fs::create_dir(&sub).is_ok());
        let err = write_file(&sub, b"x\n", FileKind::Script);
        assert_eq!(err, Err("it is a directory".to_string()));
        // No temporary file was left behind.
        let left: Vec<_> = std::fs::read_dir(d.path())
            .map(|r| r.filter_map(Result::ok).map(|e| e.file_name()).collect())
            .unwrap_or_default();
        assert_eq!(left.len(), 3, "{left:?}");
    }

    #[test]
    fn refuses_to_split_hard_links() {
        let d = dir();
        let one = d.path().join("one.ordex");
        let two = d.path().join("two.ordex");
        assert!(std::fs::write(&one, "old\n").is_ok());
        assert!(std::fs::hard_link(&one, &two).is_ok());
        let err = write_file(&one, b"new\n", FileKind::Script);
        assert!(
            err.as_ref().is_err_and(|e| e.contains("2 hard links")),
            "{err:?}"
        );
        assert_eq!(read(&one), "old\n");
        assert_eq!(read(&two), "old\n");
        assert_eq!(
            std::fs::metadata(&one).map(|m| m.nlink()).ok(),
            Some(2),
            "the links were split"
        );
    }

    #[test]
    fn a_plot_never_replaces_a_script() {
        let d = dir();
        let script = d.path().join("model.ordex");
        assert!(std::fs::write(&script, "state q\n").is_ok());
        let err = write_file(&script, b"<svg/>", FileKind::Plot);
        assert!(
            err.as_ref()
                .is_err_and(|e| e.contains("script name") && e.contains("model.svg")),
            "{err:?}"
        );
        // Not through a link either.
        let link = d.path().join("figure.svg");
        assert!(std::os::unix::fs::symlink("model.ordex", &link).is_ok());
        assert!(write_file(&link, b"<svg/>", FileKind::Plot).is_err());
        assert!(write_atomic(&script, b"code").is_err());
        assert_eq!(read(&script), "state q\n");
        // A script may replace a script.
        assert_eq!(write_file(&script, b"state p\n", FileKind::Script), Ok(()));
    }

    #[test]
    fn refuses_read_only_files_and_reports_missing_directories() {
        let d = dir();
        let path = d.path().join("frozen.ordex");
        assert!(std::fs::write(&path, "old\n").is_ok());
        assert!(std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o444)).is_ok());
        let err = write_file(&path, b"new\n", FileKind::Script);
        assert!(
            err.as_ref().is_err_and(|e| e.contains("read-only")),
            "{err:?}"
        );
        assert_eq!(read(&path), "old\n");
        let err = write_file(&d.path().join("no/such.ordex"), b"x", FileKind::Script);
        assert_eq!(err, Err("no such directory".to_string()));
    }
}
