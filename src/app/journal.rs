//! The prompt's journal: every accepted statement of a prompt session,
//! appended as it is accepted and synced to disk before the next prompt, so
//! that `ordex --resume` can rebuild the session after a crash or a kill.
//!
//! Layout: `<home>/journal.ordex` is the current (or last) session; starting
//! a new prompt session renames it to `<home>/journal.prev.ordex` (replacing
//! the older one) and begins an empty journal. The file is an ordinary script:
//! a comment header, then the statements as they were written, each cut back
//! by the splitter into exactly that statement (see [`encode`]).
//!
//! This module owns the file format and the file handling. It must not know
//! about sessions, the prompt or the command line.

use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use crate::lang::split::split_statements;

/// File name of the current journal inside the home directory.
pub const JOURNAL_FILE: &str = "journal.ordex";
/// File name of the previous session's journal.
pub const PREVIOUS_FILE: &str = "journal.prev.ordex";
/// File whose lock marks the journal as in use by a prompt.
pub const LOCK_FILE: &str = "journal.lock";

/// An open journal, appending. It holds an exclusive lock on
/// `<home>/journal.lock` for its lifetime, so that a second prompt on the
/// same home neither rotates nor appends to a journal in use.
#[derive(Debug)]
pub struct Journal {
    file: File,
    path: PathBuf,
    _lock: File,
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

impl Journal {
    /// Starts a new journal in `home` (created if missing): the old journal,
    /// if any, becomes the previous one.
    pub fn start_new(home: &Path) -> io::Result<Journal> {
        std::fs::create_dir_all(home)?;
        let lock = lock(home)?;
        let path = home.join(JOURNAL_FILE);
        if path.exists() {
            std::fs::rename(&path, home.join(PREVIOUS_FILE))?;
        }
        let mut journal = Journal::open_append(path, lock)?;
        journal.write_header()?;
        Ok(journal)
    }

    /// Opens the journal in `home` for resuming: its text (empty when there
    /// is none) and the journal, appending to the same file.
    pub fn resume(home: &Path) -> io::Result<(Journal, String)> {
        std::fs::create_dir_all(home)?;
        let lock = lock(home)?;
        let path = home.join(JOURNAL_FILE);
        let text = match std::fs::read(&path) {
            Ok(bytes) => String::from_utf8_lossy(&bytes).into_owned(),
            Err(e) if e.kind() == io::ErrorKind::NotFound => String::new(),
            Err(e) => return Err(e),
        };
        let mut journal = Journal::open_append(path, lock)?;
        if text.is_empty() {
            journal.write_header()?;
        } else if !text.ends_with('\n') {
            // A kill in the middle of a write can leave a partial last line;
            // end it so the next statement starts on a line of its own.
            journal.file.write_all(b"\n")?;
            journal.file.sync_data()?;
        }
        Ok((journal, text))
    }

    /// Replaces the journal's contents by `statements` (a resume that could
    /// not replay everything keeps only what it replayed); the old text is
    /// kept as the previous journal.
    pub fn rewrite(&mut self, statements: &[String]) -> io::Result<()> {
        let home = self
            .path
            .parent()
            .map_or_else(|| PathBuf::from("."), Path::to_path_buf);
        std::fs::copy(&self.path, home.join(PREVIOUS_FILE))?;
        let mut text = header();
        for statement in statements {
            text.push_str(&encode(statement));
        }
        crate::lang::files::write_atomic(&self.path, text.as_bytes()).map_err(io::Error::other)?;
        self.file = OpenOptions::new().append(true).open(&self.path)?;
        Ok(())
    }

    /// Appends statements and syncs them to disk.
    pub fn append(&mut self, statements: &[String]) -> io::Result<()> {
        if statements.is_empty() {
            return Ok(());
        }
        let mut text = String::new();
        for statement in statements {
            text.push_str(&encode(statement));
        }
        self.file.write_all(text.as_bytes())?;
        self.file.flush()?;
        self.file.sync_data()
    }

    /// Where the journal lives.
    pub fn path(&self) -> &Path {
        &self.path
    }

    fn open_append(path: PathBuf, lock: File) -> io::Result<Journal> {
        let file = OpenOptions::new().create(true).append(true).open(&path)?;
        Ok(Journal {
            file,
            path,
            _lock: lock,
        })
    }

    fn write_header(&mut self) -> io::Result<()> {
        self.file.write_all(header().as_bytes())?;
        self.file.sync_data()
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
pub fn encode(statement: &str) -> String {
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
        let previous = std::fs::read_to_string(home.join(PREVIOUS_FILE)).unwrap_or_default();
        assert_eq!(texts(&previous), vec!["state q".to_string()]);
        let (mut resumed, text) = match Journal::resume(&home) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert_eq!(texts(&text), vec!["param k".to_string()]);
        assert!(resumed.append(&["X = [k*q]".to_string()]).is_ok());
        let now = std::fs::read_to_string(home.join(JOURNAL_FILE)).unwrap_or_default();
        assert_eq!(
            texts(&now),
            vec!["param k".to_string(), "X = [k*q]".to_string()]
        );
        let _ = std::fs::remove_dir_all(&home);
    }

    #[test]
    fn resume_without_a_journal_starts_one_and_partial_lines_are_ended() {
        let home = temp_home("partial");
        let (mut journal, text) = match Journal::resume(&home) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert!(text.is_empty());
        drop(journal);
        let path = home.join(JOURNAL_FILE);
        assert!(std::fs::write(&path, "state q\nparam k").is_ok());
        (journal, _) = match Journal::resume(&home) {
            Ok(r) => r,
            Err(e) => panic!("{e}"),
        };
        assert!(journal.append(&["names".to_string()]).is_ok());
        let now = std::fs::read_to_string(&path).unwrap_or_default();
        assert_eq!(texts(&now), vec!["state q", "param k", "names"]);
        assert!(journal.rewrite(&["state q".to_string()]).is_ok());
        assert!(journal.append(&["param a".to_string()]).is_ok());
        let now = std::fs::read_to_string(&path).unwrap_or_default();
        assert_eq!(texts(&now), vec!["state q", "param a"]);
        let previous = std::fs::read_to_string(home.join(PREVIOUS_FILE)).unwrap_or_default();
        assert_eq!(texts(&previous), vec!["state q", "param k", "names"]);
        let _ = std::fs::remove_dir_all(&home);
    }
}
