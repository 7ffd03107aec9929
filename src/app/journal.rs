//! The prompt's journal: every accepted statement of a prompt session,
//! appended as it is accepted and synced to disk before the next prompt, so
//! that `ordex --resume` can rebuild the session after a crash or a kill.
//!
//! Layout: `<home>/journal.ordex` is the current (or last) session; a new
//! prompt session, when it accepts its first statement, renames it to
//! `<home>/journal.prev.ordex` (replacing the older one) and begins a new
//! journal (a session that accepts nothing, such as `ordex </dev/null`,
//! rotates nothing). The file is an ordinary script: a comment header, then
//! the statements as they were written, each cut back by the splitter into
//! exactly that statement (see [`encode`]); a record is one statement and
//! ends with a newline.
//!
//! Only complete records stay: an append that fails (a full disk) is cut
//! back to the last complete record; a journal found with an unterminated
//! last record (a crash in the middle of a write) is cut back to the
//! complete ones on resume, and the record is reported, not run. Whenever
//! lines are cut, the whole file is first copied to a numbered backup
//! `<home>/journal.backup-N.ordex` that nothing overwrites.
//!
//! This module owns the file format and the file handling. It must not know
//! about sessions, the prompt or the command line.

use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use crate::lang::files::{write_file, FileKind};
use crate::lang::split::split_statements;

/// File name of the current journal inside the home directory.
pub(crate) const JOURNAL_FILE: &str = "journal.ordex";
/// File name of the previous session's journal.
pub(crate) const PREVIOUS_FILE: &str = "journal.prev.ordex";
/// File whose lock marks the journal as in use by a prompt.
pub(crate) const LOCK_FILE: &str = "journal.lock";
/// Numbered backups are `journal.backup-N.ordex`.
const BACKUP_STEM: &str = "journal.backup-";

/// An open journal, appending. It holds an exclusive lock on
/// `<home>/journal.lock` for its lifetime, so that a second prompt on the
/// same home neither rotates nor appends to a journal in use.
#[derive(Debug)]
pub(crate) struct Journal {
    file: File,
    path: PathBuf,
    /// Length of the file up to the end of its last complete record.
    len: u64,
    _lock: File,
    /// Tests: the next append writes only this many bytes, then fails.
    #[cfg(test)]
    fail_after: Option<usize>,
}

/// The lock on a home's journal, taken before anything is written: the
/// journal is started (rotating the old one) or resumed from it.
#[derive(Debug)]
pub(crate) struct Claim {
    home: PathBuf,
    lock: File,
}

/// A journal opened for resuming.
#[derive(Debug)]
pub(crate) struct Resumed {
    /// The journal, appending after its complete records.
    pub journal: Journal,
    /// The text of its complete records (empty when there was none).
    pub text: String,
    /// An unterminated last record that was cut off, if any.
    pub unterminated: Option<Unterminated>,
}

/// An unterminated last record found on resume: not run, cut from the
/// journal, kept in a backup.
#[derive(Debug)]
pub(crate) struct Unterminated {
    /// The record's text as found.
    pub record: String,
    /// Where the whole journal, the record included, was copied.
    pub backup: PathBuf,
}

/// Takes the journal lock of `home` (released when the file is closed,
/// also when the process is killed).
fn lock(home: &Path) -> io::Result<File> {
    let file = OpenOptions::new()
        .create(true)
        .truncate(false)
        .write(true)
        .open(home.join(LOCK_FILE))?;
    match file.try_lock() {
        Ok(()) => Ok(file),
        Err(std::fs::TryLockError::WouldBlock) => Err(io::Error::new(
            io::ErrorKind::WouldBlock,
            "another ordex prompt is using it",
        )),
        Err(std::fs::TryLockError::Error(e)) => Err(e),
    }
}

/// Copies the file at `path` to the first unused `journal.backup-N.ordex`
/// beside it and returns that name.
fn backup(path: &Path) -> io::Result<PathBuf> {
    let home = path
        .parent()
        .map_or_else(|| PathBuf::from("."), Path::to_path_buf);
    let bytes = std::fs::read(path)?;
    for n in 1..=10_000u32 {
        let candidate = home.join(format!("{BACKUP_STEM}{n}.ordex"));
        match OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&candidate)
        {
            Ok(mut file) => {
                let written = file.write_all(&bytes).and_then(|()| file.sync_all());
                if let Err(e) = written {
                    drop(file);
                    let _ = std::fs::remove_file(&candidate);
                    return Err(e);
                }
                return Ok(candidate);
            }
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists => {}
            Err(e) => return Err(e),
        }
    }
    Err(io::Error::other(
        "10000 journal backups exist already; remove old ones",
    ))
}

impl Claim {
    /// The home directory claimed.
    pub(crate) fn home(&self) -> &Path {
        &self.home
    }

    /// Starts a new journal: the old journal, if any, becomes the previous
    /// one.
    pub(crate) fn start_new(self) -> io::Result<Journal> {
        let path = self.home.join(JOURNAL_FILE);
        if path.exists() {
            std::fs::rename(&path, self.home.join(PREVIOUS_FILE))?;
        }
        let mut journal = Journal::open_append(path, self.lock)?;
        let header = header();
        journal.write_record(header.as_bytes())?;
        Ok(journal)
    }

    /// Opens the journal for resuming, appending to the same file. An
    /// unterminated last record is cut off (after a numbered backup of the
    /// whole file) and returned apart from the text.
    pub(crate) fn resume(self) -> io::Result<Resumed> {
        let path = self.home.join(JOURNAL_FILE);
        let mut text = match std::fs::read(&path) {
            Ok(bytes) => String::from_utf8_lossy(&bytes).into_owned(),
            Err(e) if e.kind() == io::ErrorKind::NotFound => String::new(),
            Err(e) => return Err(e),
        };
        let mut unterminated = None;
        if !text.is_empty() && !text.ends_with('\n') {
            let keep = text.rfind('\n').map_or(0, |i| i + 1);
            let backup = backup(&path)?;
            let record = text.split_off(keep);
            OpenOptions::new()
                .write(true)
                .open(&path)?
                .set_len(keep as u64)?;
            unterminated = Some(Unterminated { record, backup });
        }
        let mut journal = Journal::open_append(path, self.lock)?;
        if text.is_empty() {
            journal.write_record(header().as_bytes())?;
        }
        Ok(Resumed {
            journal,
            text,
            unterminated,
        })
    }
}

impl Journal {
    /// Takes the lock of the journal in `home` (created if missing).
    pub(crate) fn claim(home: &Path) -> io::Result<Claim> {
        std::fs::create_dir_all(home)?;
        let lock = lock(home)?;
        Ok(Claim {
            home: home.to_path_buf(),
            lock,
        })
    }

    /// Claims and starts a new journal in `home` at once.
    #[cfg(test)]
    pub(crate) fn start_new(home: &Path) -> io::Result<Journal> {
        Journal::claim(home)?.start_new()
    }

    /// Claims the journal in `home` and opens it for resuming.
    #[cfg(test)]
    pub(crate) fn resume(home: &Path) -> io::Result<Resumed> {
        Journal::claim(home)?.resume()
    }

    /// Replaces the journal's contents by `statements` (a resume that could
    /// not replay everything keeps what it replayed); the whole old text is
    /// first copied to a numbered backup, whose path is returned.
    pub(crate) fn rewrite(&mut self, statements: &[String]) -> io::Result<PathBuf> {
        let backup = backup(&self.path)?;
        let mut text = header();
        for statement in statements {
            text.push_str(&encode(statement));
        }
        write_file(&self.path, text.as_bytes(), FileKind::Script).map_err(io::Error::other)?;
        self.file = OpenOptions::new().append(true).open(&self.path)?;
        self.len = text.len() as u64;
        Ok(backup)
    }

    /// Appends statements and syncs them to disk. When the write fails,
    /// the file is cut back to its last complete record.
    pub(crate) fn append(&mut self, statements: &[String]) -> io::Result<()> {
        if statements.is_empty() {
            return Ok(());
        }
        let mut text = String::new();
        for statement in statements {
            text.push_str(&encode(statement));
        }
        self.write_record(text.as_bytes())
    }

    /// Where the journal lives.
    pub(crate) fn path(&self) -> &Path {
        &self.path
    }

    fn open_append(path: PathBuf, lock: File) -> io::Result<Journal> {
        let file = OpenOptions::new().create(true).append(true).open(&path)?;
        let len = file.metadata()?.len();
        Ok(Journal {
            file,
            path,
            len,
            _lock: lock,
            #[cfg(test)]
            fail_after: None,
        })
    }

    /// Writes whole records and syncs; on failure cuts the file back to
    /// the end of the last complete record.
    fn write_record(&mut self, bytes: &[u8]) -> io::Result<()> {
        let written = self
            .write_bytes(bytes)
            .and_then(|()| self.file.flush())
            .and_then(|()| self.file.sync_data());
        match written {
            Ok(()) => {
                self.len += bytes.len() as u64;
                Ok(())
            }
            Err(e) => {
                let cut = self
                    .file
                    .set_len(self.len)
                    .and_then(|()| self.file.sync_data());
                match cut {
                    Ok(()) => Err(io::Error::new(
                        e.kind(),
                        format!(
                            "{}; the partial record was removed",
                            crate::lang::files::io_reason(&e)
                        ),
                    )),
                    Err(cut) => Err(io::Error::new(
                        e.kind(),
                        format!(
                            "{}; the partial record could not be removed ({}): \
                             `--resume` will report it and not run it",
                            crate::lang::files::io_reason(&e),
                            crate::lang::files::io_reason(&cut)
                        ),
                    )),
                }
            }
        }
    }

    #[cfg(not(test))]
    fn write_bytes(&mut self, bytes: &[u8]) -> io::Result<()> {
        self.file.write_all(bytes)
    }

    #[cfg(test)]
    fn write_bytes(&mut self, bytes: &[u8]) -> io::Result<()> {
        match self.fail_after.take() {
            Some(n) => {
                self.file.write_all(bytes.get(..n).unwrap_or(bytes))?;
                Err(io::Error::from(io::ErrorKind::StorageFull))
            }
            None => self.file.write_all(bytes),
        }
    }
}

/// The comment that opens a journal.
fn header() -> String {
    let seconds = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_secs());
    format!("# ordex journal: the accepted statements of a prompt session (started at unix time {seconds})\n")
}

/// One statement as journal text, ending with a newline. Statements come
/// as written (`SourceStmt::source`), which split back into themselves and
/// are kept as they are; a text that would split into several statements
/// (a multi-line text whose continuation backslashes were removed) gets a
/// trailing `\` on each inner line so that it stays one statement.
pub(crate) fn encode(statement: &str) -> String {
    let body = statement.trim_end_matches(['\n', '\r']);
    let one = split_statements(body).is_ok_and(|statements| statements.len() <= 1);
    let mut text = if one {
        body.to_string()
    } else {
        body.replace('\n', "\\\n")
    };
    text.push('\n');
    text
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp_home(tag: &str) -> PathBuf {
        let dir =
            std::env::temp_dir().join(format!("ordex-journal-test-{}-{tag}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        dir
    }

    fn texts(src: &str) -> Vec<String> {
        match split_statements(src) {
            Ok(statements) => statements.into_iter().map(|s| s.text).collect(),
            Err(e) => panic!("journal text does not split: {e:?}"),
        }
    }

    #[test]
    fn encoded_statements_split_back_unchanged() {
        // Statements as the splitter cuts them (continuations removed).
        let statements = [
            "state q, p".to_string(),
            "S = eps*[p,\n  -q] + cos(t)*{1, 2;\n 3, 4}".to_string(),
            "x = a + \n  b \n  + c".to_string(),
            "f = [a, \n\n b]".to_string(),
            "save \"a #1.ordex\" ".to_string(),
        ];
        let text: String = statements.iter().map(|s| encode(s)).collect();
        assert_eq!(texts(&text), statements.to_vec());
    }

    #[test]
    fn statements_as_written_are_kept_as_written() {
        let written = ["x = a + \\\n  b # note", "f = [a, # first\n b]", "names"];
        for statement in written {
            assert_eq!(encode(statement), format!("{statement}\n"));
        }
        let text: String = written.iter().map(|s| encode(s)).collect();
        assert_eq!(
            texts(&text),
            vec!["x = a + \n  b ", "f = [a, \n b]", "names"]
        );
    }

    fn resume(home: &Path) -> Resumed {
        match Journal::resume(home) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        }
    }

    fn read(path: &Path) -> String {
        std::fs::read_to_string(path).unwrap_or_default()
    }

    #[test]
    fn new_journal_rotates_the_old_one_and_resume_appends() {
        let home = temp_home("rotate");
        let mut first = match Journal::start_new(&home) {
            Ok(j) => j,
            Err(e) => panic!("{e}"),
        };
        assert!(first.append(&["state q".to_string()]).is_ok());
        drop(first);
        let mut second = match Journal::start_new(&home) {
            Ok(j) => j,
            Err(e) => panic!("{e}"),
        };
        assert!(second.append(&["param k".to_string()]).is_ok());
        assert_eq!(second.path(), home.join(JOURNAL_FILE));
        drop(second);
        let previous = read(&home.join(PREVIOUS_FILE));
        assert_eq!(texts(&previous), vec!["state q".to_string()]);
        let mut resumed = resume(&home);
        assert_eq!(texts(&resumed.text), vec!["param k".to_string()]);
        assert!(resumed.unterminated.is_none());
        assert!(resumed.journal.append(&["X = [k*q]".to_string()]).is_ok());
        let now = read(&home.join(JOURNAL_FILE));
        assert_eq!(
            texts(&now),
            vec!["param k".to_string(), "X = [k*q]".to_string()]
        );
        let _ = std::fs::remove_dir_all(&home);
    }

    #[test]
    fn resume_without_a_journal_starts_one_and_unterminated_records_are_cut() {
        let home = temp_home("partial");
        let resumed = resume(&home);
        assert!(resumed.text.is_empty());
        drop(resumed);
        let path = home.join(JOURNAL_FILE);
        assert!(std::fs::write(&path, "state q\nparam k\nk0 = 1234").is_ok());
        let mut resumed = resume(&home);
        assert_eq!(texts(&resumed.text), vec!["state q", "param k"]);
        let cut = resumed.unterminated.take();
        assert_eq!(cut.as_ref().map(|c| c.record.as_str()), Some("k0 = 1234"));
        let backup = cut.map(|c| c.backup).unwrap_or_default();
        assert_eq!(backup, home.join("journal.backup-1.ordex"));
        assert_eq!(read(&backup), "state q\nparam k\nk0 = 1234");
        assert!(resumed.journal.append(&["names".to_string()]).is_ok());
        assert_eq!(texts(&read(&path)), vec!["state q", "param k", "names"]);
        // A rewrite keeps the whole old text in the next numbered backup.
        let second = resumed.journal.rewrite(&["state q".to_string()]);
        assert_eq!(second.ok(), Some(home.join("journal.backup-2.ordex")));
        assert!(resumed.journal.append(&["param a".to_string()]).is_ok());
        assert_eq!(texts(&read(&path)), vec!["state q", "param a"]);
        assert_eq!(
            texts(&read(&home.join("journal.backup-2.ordex"))),
            vec!["state q", "param k", "names"]
        );
        // Backups survive new sessions.
        drop(resumed);
        assert!(Journal::start_new(&home).is_ok());
        assert!(Journal::start_new(&home).is_ok());
        assert_eq!(read(&backup), "state q\nparam k\nk0 = 1234");
        let _ = std::fs::remove_dir_all(&home);
    }

    #[test]
    fn a_failed_append_is_cut_back_to_the_last_complete_record() {
        let home = temp_home("full");
        let mut journal = match Journal::start_new(&home) {
            Ok(j) => j,
            Err(e) => panic!("{e}"),
        };
        assert!(journal.append(&["state q".to_string()]).is_ok());
        let before = read(journal.path());
        // The disk fills after 9 bytes of `k0 = 1234567`.
        journal.fail_after = Some(9);
        let err = journal.append(&["k0 = 1234567".to_string()]);
        assert!(
            err.as_ref()
                .is_err_and(|e| e.to_string().contains("partial record was removed")),
            "{err:?}"
        );
        assert_eq!(read(journal.path()), before);
        // The journal goes on after the cut.
        assert!(journal.append(&["param k".to_string()]).is_ok());
        assert_eq!(texts(&read(journal.path())), vec!["state q", "param k"]);
        let _ = std::fs::remove_dir_all(&home);
    }
}
