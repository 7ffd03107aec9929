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
