//! The interactive prompt, driven through a pseudo-terminal like a person at
//! a keyboard: definitions and results, multi-line input, tab completion,
//! history across sessions, Ctrl-C at the prompt and during a long
//! computation, and Ctrl-D.
//!
//! Every wait polls the terminal output against a deadline; nothing relies
//! on a fixed sleep except the pause that lets a long computation get going
//! before it is interrupted.

#![cfg(unix)]

use std::fs::File;
use std::io::{Read, Write};
use std::os::fd::{AsFd, OwnedFd};
use std::os::unix::process::CommandExt;
use std::path::Path;
use std::process::{Child, Command, ExitStatus, Stdio};
use std::time::{Duration, Instant};

use nix::poll::{poll, PollFd, PollFlags};
use nix::pty::{openpty, Winsize};

/// Generous deadline for a reply on a busy machine.
const REPLY: Duration = Duration::from_secs(60);

/// A fresh prompt: the prompt string at the start of a line (redraws of the
/// line being edited start with a carriage return instead).
const PROMPT: &str = "\n» ";

/// A running `ordex` on a pseudo-terminal.
struct Terminal {
    master: File,
    child: Child,
    /// Everything the program wrote, raw.
    raw: Vec<u8>,
    /// How much of the cleaned transcript earlier expectations consumed.
    seen: usize,
}

impl Terminal {
    /// Starts `ordex ARGS` with `home` as its ORDEX_HOME, colour off.
    fn start(home: &Path, args: &[&str]) -> Terminal {
        Terminal::start_with(home, args, &[("NO_COLOR", "1"), ("TERM", "xterm")])
    }

    /// Starts `ordex ARGS` with `home` as its ORDEX_HOME and exactly these
    /// of `NO_COLOR` and `TERM` set.
    fn start_with(home: &Path, args: &[&str], env: &[(&str, &str)]) -> Terminal {
        let size = Winsize {
            ws_row: 50,
            ws_col: 200,
            ws_xpixel: 0,
            ws_ypixel: 0,
        };
        let pty = openpty(&size, None).expect("a pseudo-terminal");
        let slave: OwnedFd = pty.slave;
        let mut command = Command::new(env!("CARGO_BIN_EXE_ordex"));
        command
            .args(args)
            .env("ORDEX_HOME", home)
            .env_remove("NO_COLOR")
            .env_remove("TERM")
            .envs(env.iter().copied())
            .stdin(Stdio::from(slave.try_clone().expect("dup")))
            .stdout(Stdio::from(slave.try_clone().expect("dup")))
            .stderr(Stdio::from(slave));
        // SAFETY: only async-signal-safe calls (setsid, ioctl) between fork
        // and exec: the child gets its own session with the pseudo-terminal
        // as controlling terminal, so Ctrl-C there sends it SIGINT.
        unsafe {
            command.pre_exec(|| {
                nix::unistd::setsid()?;
                if nix::libc::ioctl(0, nix::libc::TIOCSCTTY, 0) != 0 {
                    return Err(std::io::Error::last_os_error());
                }
                Ok(())
            });
        }
        let child = command.spawn().expect("ordex starts");
        Terminal {
            master: File::from(pty.master),
            child,
            raw: Vec::new(),
            seen: 0,
        }
    }

    /// Types `keys`.
    fn send(&mut self, keys: &str) {
        self.master.write_all(keys.as_bytes()).expect("typing");
        self.master.flush().expect("typing");
    }

    /// Reads what is available within `wait`; false at end of output.
    fn pump(&mut self, wait: Duration) -> bool {
        let millis = u16::try_from(wait.as_millis()).unwrap_or(u16::MAX);
        let mut fds = [PollFd::new(self.master.as_fd(), PollFlags::POLLIN)];
        match poll(&mut fds, millis) {
            Ok(0) => return true,
            Ok(_) => {}
            Err(nix::errno::Errno::EINTR) => return true,
            Err(_) => return false,
        }
        let mut chunk = [0u8; 4096];
        match self.master.read(&mut chunk) {
            Ok(0) => false,
            Ok(n) => {
                self.raw.extend_from_slice(&chunk[..n]);
                true
            }
            // EIO: the child closed its side.
            Err(_) => false,
        }
    }

    /// The transcript without terminal control sequences and carriage returns.
    fn transcript(&self) -> String {
        clean(&String::from_utf8_lossy(&self.raw))
    }

    /// Waits until `needle` appears after what earlier expectations consumed;
    /// returns the text from there to the end of the match.
    fn expect(&mut self, needle: &str) -> String {
        let deadline = Instant::now() + REPLY;
        loop {
            let text = self.transcript();
            let from = self.seen.min(text.len());
            if let Some(at) = text.get(from..).and_then(|rest| rest.find(needle)) {
                let end = from + at + needle.len();
                self.seen = end;
                return text.get(from..end).unwrap_or("").to_string();
            }
            let now = Instant::now();
            if now >= deadline {
                panic!(
                    "timed out waiting for {needle:?}; transcript after the last match:\n{}",
                    text.get(from..).unwrap_or("")
                );
            }
            if !self.pump((deadline - now).min(Duration::from_millis(100)))
                && !self.transcript().contains(needle)
            {
                panic!(
                    "ordex ended before {needle:?}; transcript:\n{}",
                    self.transcript()
                );
            }
        }
    }

    /// Types a line and waits for `reply`, then for the next prompt.
    fn enter(&mut self, line: &str, reply: &str) -> String {
        self.send(line);
        self.send("\r");
        let got = self.expect(reply);
        if reply != PROMPT {
            self.expect(PROMPT);
        }
        got
    }

    /// Waits for the program to exit, draining its output.
    fn wait_exit(&mut self) -> ExitStatus {
        let deadline = Instant::now() + REPLY;
        loop {
            if let Ok(Some(status)) = self.child.try_wait() {
                return status;
            }
            assert!(
                Instant::now() < deadline,
                "ordex did not exit; transcript:\n{}",
                self.transcript()
            );
            self.pump(Duration::from_millis(50));
        }
    }
}

impl Drop for Terminal {
    fn drop(&mut self) {
        if let Ok(None) = self.child.try_wait() {
            let _ = self.child.kill();
            let _ = self.child.wait();
        }
    }
}

/// Removes ANSI escape sequences and carriage returns.
fn clean(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '\u{1b}' => match chars.next() {
                Some('[') => {
                    // CSI: parameters, then one final byte in @..~.
                    for c in chars.by_ref() {
                        if ('@'..='~').contains(&c) {
                            break;
                        }
                    }
                }
                Some(']') => {
                    // OSC: up to BEL or ESC \.
                    while let Some(c) = chars.next() {
                        if c == '\u{7}' {
                            break;
                        }
                        if c == '\u{1b}' {
                            chars.next();
                            break;
                        }
                    }
                }
                _ => {}
            },
            '\r' => {}
            other => out.push(other),
        }
    }
    out
}

fn temp_home() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary directory")
}

#[test]
fn definitions_results_multiline_completion_and_ctrl_d() {
    let home = temp_home();
    let mut term = Terminal::start(home.path(), &[]);
    let banner = term.expect(PROMPT);
    assert!(banner.contains("ordex "), "banner: {banner:?}");
    assert!(banner.contains("help"), "banner: {banner:?}");

    term.enter("state q, p", PROMPT);
    term.enter("X = [p, -q]", "X: field on (q, p)");
    // A bare expression prints its value, indented.
    term.enter("X(q^3)", "  3*q^2*p");

    // An open bracket keeps the input going on the next line.
    term.send("Y = [q,\r");
    term.send("  p^2]\r");
    term.expect("Y: field on (q, p)");
    term.expect(PROMPT);
    term.enter("Y(p)", "  p^2");

    // Tab completes a defined name ...
    term.enter("Xfast = [p^5, 0]", "Xfast: field on (q, p)");
    term.send("Xfa\t(q)\r");
    term.expect("  p^5");
    term.expect(PROMPT);
    // ... and a command word.
    term.send("forg\t Xfast\r");
    term.expect("forgot Xfast");
    term.expect(PROMPT);

    // Ctrl-C on a half-typed line drops it; the next line runs alone.
    term.send("bogus_line_that_would_fail\u{3}");
    term.expect(PROMPT);
    let reply = term.enter("Y(q)", "  q");
    assert!(
        !reply.contains("unknown name"),
        "the dropped line ran: {reply:?}"
    );

    // An error is reported with a caret and the session goes on.
    let error = term.enter("Z = [q, r]", "^");
    assert!(error.contains("error: unknown name `r`"), "{error:?}");
    term.enter("names", "Y: field on (q, p)");

    term.send("\u{4}");
    let status = term.wait_exit();
    assert!(
        status.success(),
        "Ctrl-D exits with status 0, got {status:?}"
    );
    assert!(
        !term.transcript().contains("Z: field"),
        "an error must not bind"
    );

    // History survives into the next session: Up brings back the last line.
    let mut again = Terminal::start(home.path(), &[]);
    again.expect(PROMPT);
    again.send("\u{1b}[A");
    again.expect("names");
    again.send("\r");
    again.expect("nothing declared or defined yet");
    again.expect(PROMPT);
    again.send("\u{4}");
    assert!(again.wait_exit().success());
}

#[test]
fn ctrl_c_interrupts_a_long_computation_and_keeps_the_session() {
    let home = temp_home();
    let mut term = Terminal::start(home.path(), &["--no-timing"]);
    term.expect(PROMPT);
    term.enter("state q, p", PROMPT);
    term.enter("param eps", PROMPT);
    term.enter("X = [p, -q]", "X: field on (q, p)");
    // Far more work than the test will wait for (order 9 already takes
    // several seconds; 14 takes much longer).
    term.send("average eps*[p^3*cos(t) + q^2*sin(2*t), q^3*cos(3*t) + p*q*sin(t)] to 14 in eps\r");
    term.expect("in eps");
    // Let the computation get going before it is interrupted.
    std::thread::sleep(Duration::from_millis(1500));
    let sent = Instant::now();
    term.send("\u{3}");
    let reply = term.expect("interrupted");
    term.expect(PROMPT);
    let latency = sent.elapsed();
    eprintln!("Ctrl-C to prompt: {} ms", latency.as_millis());
    assert!(
        !reply.contains("orders,"),
        "the computation finished instead: {reply:?}"
    );
    assert!(
        latency < Duration::from_secs(5),
        "Ctrl-C took {latency:?} to bring the prompt back"
    );
    // The session still knows what was defined before.
    term.enter("X(q^3)", "  3*q^2*p");
    // And the next computation is not interrupted by the old Ctrl-C.
    term.enter("average eps*[p, -q + cos(t)*q^2] to 2 in eps", "2 orders");
    term.send("quit\r");
    assert!(term.wait_exit().success());
}

#[test]
fn a_burst_of_typed_ahead_lines_runs_every_line_whole() {
    // 200 lines arrive at once, as an unbracketed paste or fast typing
    // does: some while the prompt reads, some while a statement runs.
    // Every line must run, whole and in order: a dropped line or a
    // fragment (` 61*p`) changes the sum or is an error.
    let home = temp_home();
    let mut term = Terminal::start(home.path(), &["--no-timing"]);
    term.expect(PROMPT);
    term.enter("state q, p", PROMPT);
    term.enter("param eps", PROMPT);
    term.enter("s0 = 0", "s0: scalar");
    let mut burst = String::new();
    // A statement that runs a moment, so that the lines after it arrive
    // while the terminal is not in the editor's raw mode.
    burst.push_str("average eps*[p, -q + cos(t)*q^2] to 6 in eps\r");
    for i in 1..=200 {
        burst.push_str(&format!("s{i} = s{} + {i}*p\r", i - 1));
    }
    burst.push_str("check s200 == 20100*p\r");
    let mut writer = term.master.try_clone().expect("a second handle");
    let typing = std::thread::spawn(move || {
        writer.write_all(burst.as_bytes()).expect("typing");
        writer.flush().expect("typing");
    });
    term.expect("s200: scalar");
    let reply = term.expect("holds");
    typing.join().expect("the typing thread");
    let transcript = term.transcript();
    assert!(!transcript.contains("error"), "{transcript}");
    assert!(!reply.contains("check failed"), "{reply}");
    for i in [1, 61, 137, 200] {
        assert!(
            transcript.contains(&format!("s{i}: scalar")),
            "line {i} did not run:\n{transcript}"
        );
    }
    term.send("quit\r");
    assert!(term.wait_exit().success());
}

#[test]
fn a_dumb_terminal_gets_no_colour() {
    let home = temp_home();
    let mut term = Terminal::start_with(home.path(), &[], &[("TERM", "dumb")]);
    term.expect(PROMPT);
    term.enter("state q", PROMPT);
    term.enter("check q == 2*q", "difference");
    term.send("quit\r");
    assert!(term.wait_exit().success());
    let raw = String::from_utf8_lossy(&term.raw).into_owned();
    assert!(
        !raw.contains("\u{1b}["),
        "escape sequences on TERM=dumb: {raw:?}"
    );
}
