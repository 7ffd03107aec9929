//! The journal and `--resume`: a prompt session killed with SIGKILL comes
//! back with every accepted statement (a failed check included, an error
//! excluded), without repeating file writes, and goes on journaling; a new
//! session rotates the journal; a journal cut in the middle of a statement
//! replays up to the cut.
//!
//! The prompt reads plain lines when standard input is not a terminal, so
//! these tests pipe their input.

use std::io::{BufRead, BufReader, Write};
use std::path::Path;
use std::process::{Child, Command, Output, Stdio};
use std::sync::mpsc::{channel, Receiver};
use std::time::{Duration, Instant};

fn prompt(work: &Path, home: &Path, args: &[&str]) -> Command {
    let mut command = Command::new(env!("CARGO_BIN_EXE_ordex"));
    command
        .args(args)
        .current_dir(work)
        .env("NO_COLOR", "1")
        .env("ORDEX_HOME", home)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    command
}

/// Runs a prompt session on `input` to the end of its input.
fn session(work: &Path, home: &Path, args: &[&str], input: &str) -> Output {
    let mut child = prompt(work, home, args).spawn().expect("ordex runs");
    if let Some(mut stdin) = child.stdin.take() {
        stdin.write_all(input.as_bytes()).expect("input is written");
    }
    child.wait_with_output().expect("ordex ends")
}

/// Lines of a child's standard output, as they come.
fn lines_of(child: &mut Child) -> Receiver<String> {
    let (send, receive) = channel();
    if let Some(out) = child.stdout.take() {
        std::thread::spawn(move || {
            for line in BufReader::new(out).lines().map_while(Result::ok) {
                if send.send(line).is_err() {
                    break;
                }
            }
        });
    }
    receive
}

/// Waits (with a deadline) for a line containing `needle`.
fn wait_for(lines: &Receiver<String>, needle: &str) -> Vec<String> {
    let deadline = Instant::now() + Duration::from_secs(60);
    let mut seen = Vec::new();
    while let Some(left) = deadline.checked_duration_since(Instant::now()) {
        match lines.recv_timeout(left) {
            Ok(line) => {
                let found = line.contains(needle);
                seen.push(line);
                if found {
                    return seen;
                }
            }
            Err(_) => break,
        }
    }
    panic!("no line with {needle:?}; saw {seen:?}");
}

fn stdout(out: &Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn a_killed_session_resumes_with_every_accepted_line() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());

    let mut child = prompt(work, home, &[]).spawn().expect("ordex runs");
    let lines = lines_of(&mut child);
    let input = "state q, p\n\
                 param k\n\
                 X = [p, -k*q]\n\
                 check X(q) == q\n\
                 Y = [q, r]\n\
                 save saved.ordex\n\
                 Z = [q^2,\n  0]\n\
                 w = q + \\\n  p\n\
                 check [X, X] == [0, 0]\n";
    let mut stdin = child.stdin.take().expect("a pipe");
    stdin.write_all(input.as_bytes()).expect("input is written");
    stdin.flush().expect("input is written");
    // The last statement's report is printed after its journal entry is on
    // disk; once it shows, the kill cannot lose anything accepted.
    let seen = wait_for(&lines, "holds").join("\n");
    assert!(seen.contains("check failed"), "{seen}");
    assert!(seen.contains("saved 4 lines to saved.ordex"), "{seen}");
    child.kill().expect("SIGKILL");
    let _ = child.wait();
    drop(stdin);

    let saved = work.join("saved.ordex");
    assert!(saved.exists());
    std::fs::remove_file(&saved).expect("saved file removed");

    let out = session(work, home, &["--resume"], "names\nZ(q)\nw\n");
    let text = stdout(&out);
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    assert!(text.contains("resumed 8 lines from"), "{text}");
    for defined in [
        "state  q, p",
        "param  k",
        "X: field",
        "Z: field",
        "w: scalar",
    ] {
        assert!(text.contains(defined), "`names` lacks {defined:?}:\n{text}");
    }
    // The error line was not replayed, the failed check was replayed quietly.
    assert!(!text.contains("Y: field"), "{text}");
    assert!(!text.contains("check failed"), "{text}");
    assert_eq!(stderr(&out), "");
    assert!(text.contains("  q^2\n"), "{text}");
    assert!(
        text.contains("  q + p") || text.contains("  p + q"),
        "{text}"
    );
    // `save` was not executed again.
    assert!(!saved.exists(), "resume rewrote the saved file");

    // The resumed session went on in the same journal.
    let journal = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    for line in [
        "state q, p",
        "check X(q) == q",
        "save saved.ordex",
        "Z(q)",
        "w = q + \\",
    ] {
        assert!(journal.contains(line), "journal lacks {line:?}:\n{journal}");
    }
    assert!(!journal.contains("Y = [q, r]"), "{journal}");
    let again = session(work, home, &["--resume"], "names\n");
    assert!(
        stdout(&again).contains("resumed 11 lines"),
        "{}",
        stdout(&again)
    );

    // A new session starts a new journal; the old one becomes the previous.
    let fresh = session(work, home, &[], "names\n");
    assert!(
        stdout(&fresh).contains("nothing declared or defined yet"),
        "{}",
        stdout(&fresh)
    );
    let previous =
        std::fs::read_to_string(home.join("journal.prev.ordex")).expect("previous journal");
    assert!(previous.contains("Z(q)"), "{previous}");
    let current = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    assert!(!current.contains("state q, p"), "{current}");
}

#[test]
fn a_journal_cut_inside_a_statement_replays_up_to_the_cut() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());
    std::fs::write(
        home.join("journal.ordex"),
        "state q, p\nX = [p, -q]\nY = [q,\\\n",
    )
    .expect("journal");
    let out = session(work, home, &["--resume"], "names\n");
    let text = stdout(&out);
    assert!(text.contains("resumed 2 lines"), "{text}");
    assert!(text.contains("X: field"), "{text}");
    assert!(stderr(&out).contains("never closed"), "{}", stderr(&out));
    // The journal was cut back to what replayed, and went on.
    let journal = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    assert!(!journal.contains("Y = [q,"), "{journal}");
    assert!(journal.contains("names"), "{journal}");
}

#[test]
fn resume_without_a_journal_starts_empty() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let out = session(
        work.path(),
        home.path().join("new").as_path(),
        &["--resume"],
        "names\n",
    );
    assert_eq!(out.status.code(), Some(0));
    assert!(stdout(&out).contains("resumed 0 lines"), "{}", stdout(&out));
    assert!(
        stdout(&out).contains("nothing declared or defined yet"),
        "{}",
        stdout(&out)
    );
}

#[test]
fn lines_of_a_run_that_failed_partway_are_journalled() {
    // `run FILE` executes the file's statements one by one; when a later
    // one fails, the earlier ones have changed the session, so a resumed
    // session must have them too.
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    std::fs::write(
        work.path().join("partial.ordex"),
        "state q, p\nX = [p, -q]\nY = nosuch + 1\nZ = [q, p]\n",
    )
    .expect("the script is written");
    let first = session(work.path(), home.path(), &[], "run partial.ordex\n");
    assert!(
        stderr(&first).contains("unknown name `nosuch`"),
        "{}",
        stderr(&first)
    );
    let resumed = session(work.path(), home.path(), &["--resume"], "names\n");
    let text = stdout(&resumed);
    assert!(text.contains("resumed 2 lines"), "{text}");
    assert!(text.contains("X: field on (q, p)"), "{text}");
    assert!(!text.contains("Z:"), "{text}");
}

#[test]
fn a_second_prompt_leaves_the_journal_in_use_alone() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());

    let mut first = prompt(work, home, &[]).spawn().expect("ordex runs");
    let lines = lines_of(&mut first);
    let mut stdin = first.stdin.take().expect("a pipe");
    stdin
        .write_all(b"state q, p\nX = [p, -q]\ncheck X(q) == p\n")
        .expect("input is written");
    stdin.flush().expect("input is written");
    wait_for(&lines, "holds");

    // A second prompt on the same home while the first runs: it says so
    // and runs without a journal, and neither rotates nor appends to the
    // first one's.
    let second = session(work, home, &[], "Y = [q, q]\n");
    assert_eq!(second.status.code(), Some(0), "{}", stderr(&second));
    assert!(
        stderr(&second).contains("another ordex prompt is using it"),
        "{}",
        stderr(&second)
    );
    let resumed = session(work, home, &["--resume"], "names\n");
    assert!(
        stderr(&resumed).contains("another ordex prompt is using it"),
        "{}",
        stderr(&resumed)
    );

    stdin
        .write_all(b"Z = [q, 0]\nquit\n")
        .expect("input is written");
    drop(stdin);
    assert!(first.wait().expect("ordex ends").success());
    let journal = std::fs::read_to_string(home.join("journal.ordex")).expect("the journal");
    assert!(
        journal.contains("X = [p, -q]") && journal.contains("Z = [q, 0]"),
        "{journal}"
    );
    assert!(!journal.contains("Y = [q, q]"), "{journal}");
    assert!(!home.join("journal.prev.ordex").exists());

    // Once the first prompt has ended, the journal is free again.
    let out = session(work, home, &["--resume"], "names\n");
    assert!(stdout(&out).contains("resumed 4 lines"), "{}", stdout(&out));
    assert_eq!(stderr(&out), "");
}

#[test]
fn a_session_that_accepts_nothing_does_not_rotate_the_journal() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());
    let first = session(work, home, &[], "state q, p\nX = [p, -q]\n");
    assert_eq!(first.status.code(), Some(0), "{}", stderr(&first));
    let before = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    // `ordex </dev/null`, and a session of comments only.
    let out = prompt(work, home, &[])
        .stdin(Stdio::null())
        .output()
        .expect("ordex runs");
    assert_eq!(out.status.code(), Some(0), "{}", stderr(&out));
    let blank = session(work, home, &[], "\n# nothing\n\n");
    assert_eq!(blank.status.code(), Some(0), "{}", stderr(&blank));
    let after = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    assert_eq!(after, before);
    assert!(!home.join("journal.prev.ordex").exists());
    let resumed = session(work, home, &["--resume"], "names\n");
    assert!(
        stdout(&resumed).contains("resumed 2 lines"),
        "{}",
        stdout(&resumed)
    );
}

#[test]
fn a_failing_resume_keeps_every_line_in_a_numbered_backup() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());
    let journal = "state q, p\nX = [p, -q]\nY = [q, nosuch]\nZ = [q, p]\nW = [p, p]\n";
    std::fs::write(home.join("journal.ordex"), journal).expect("journal");
    let out = session(work, home, &["--resume"], "names\n");
    let err = stderr(&out);
    assert!(stdout(&out).contains("resumed 2 lines"), "{}", stdout(&out));
    let backup = home.join("journal.backup-1.ordex");
    assert!(
        err.contains(&format!("all of it is kept in {}", backup.display())),
        "{err}"
    );
    assert_eq!(std::fs::read_to_string(&backup).expect("a backup"), journal);
    // Two plain starts later (each rotating the journal), the lines that
    // were not replayed are still there, and a second failure gets a
    // backup of its own.
    session(work, home, &[], "names\n");
    session(work, home, &[], "names\n");
    std::fs::write(home.join("journal.ordex"), "state q\nbad = [q,\n").expect("journal");
    let again = session(work, home, &["--resume"], "names\n");
    assert!(
        stderr(&again).contains("journal.backup-2.ordex"),
        "{}",
        stderr(&again)
    );
    assert_eq!(std::fs::read_to_string(&backup).expect("a backup"), journal);
}

#[test]
fn an_unterminated_last_record_is_reported_and_not_run() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let home = tempfile::tempdir().expect("a temporary directory");
    let (work, home) = (work.path(), home.path());
    // What a write cut off by a full disk left: `k0 = 1234567` cut short.
    std::fs::write(home.join("journal.ordex"), "state q\nk1 = 7\nk0 = 1234").expect("journal");
    let out = session(work, home, &["--resume"], "k1\nk0\n");
    let err = stderr(&out);
    assert!(stdout(&out).contains("resumed 2 lines"), "{}", stdout(&out));
    assert!(err.contains("never finished"), "{err}");
    assert!(err.contains("`k0 = 1234` was not run"), "{err}");
    assert!(err.contains("journal.backup-1.ordex"), "{err}");
    assert!(err.contains("unknown name `k0`"), "{err}");
    assert!(stdout(&out).contains("  7\n"), "{}", stdout(&out));
    let now = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    assert!(!now.contains("k0 = 1234"), "{now}");
    assert!(now.contains("k1 = 7\nk1\n"), "{now}");
}

/// A small tmpfs mounted for a test, unmounted when dropped.
struct SmallDisk(std::path::PathBuf);

impl SmallDisk {
    /// Mounts a 64 KiB tmpfs on `dir`; `None` where mounting is not
    /// allowed (not root, a container without the capability).
    fn mount(dir: &Path) -> Option<SmallDisk> {
        let status = Command::new("mount")
            .args(["-t", "tmpfs", "-o", "size=64k", "tmpfs"])
            .arg(dir)
            .stderr(Stdio::null())
            .status()
            .ok()?;
        status.success().then(|| SmallDisk(dir.to_path_buf()))
    }
}

impl Drop for SmallDisk {
    fn drop(&mut self) {
        let _ = Command::new("umount").arg(&self.0).status();
    }
}

#[test]
fn a_full_disk_cuts_the_journal_back_to_its_last_complete_record() {
    let work = tempfile::tempdir().expect("a temporary directory");
    let mount = tempfile::tempdir().expect("a temporary directory");
    let Some(disk) = SmallDisk::mount(mount.path()) else {
        eprintln!("cannot mount a tmpfs here: the injected failure test in src/app/journal.rs covers this");
        return;
    };
    let home = disk.0.join("home");
    let work = work.path();
    let first = session(work, &home, &[], "state q\nk1 = 7\n");
    assert_eq!(first.status.code(), Some(0), "{}", stderr(&first));
    // Fill the disk: the journal's page has a few KiB left after it.
    {
        let mut filler = std::fs::File::create(disk.0.join("filler")).expect("filler");
        let block = [b'x'; 1024];
        while filler
            .write_all(&block)
            .and_then(|()| filler.sync_all())
            .is_ok()
        {}
    }
    let digits = "1234567".repeat(1000);
    let input = format!("k0 = {digits}\nk2 = 9\n");
    let out = session(work, &home, &["--resume"], &input);
    let err = stderr(&out);
    assert!(err.contains("cannot be written"), "{err}");
    assert!(err.contains("partial record was removed"), "{err}");
    let journal = std::fs::read_to_string(home.join("journal.ordex")).expect("a journal");
    assert!(journal.ends_with("k1 = 7\n"), "{journal:?}");
    // With room again, a resume has exactly the complete records.
    std::fs::remove_file(disk.0.join("filler")).expect("filler removed");
    let again = session(work, &home, &["--resume"], "k1\nk0\n");
    assert!(
        stdout(&again).contains("resumed 2 lines"),
        "{}",
        stdout(&again)
    );
    assert!(
        !stderr(&again).contains("never finished"),
        "{}",
        stderr(&again)
    );
    assert!(
        stderr(&again).contains("unknown name `k0`"),
        "{}",
        stderr(&again)
    );
    drop(disk);
}
