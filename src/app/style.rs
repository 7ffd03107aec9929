//! Colour for the binary's output: which report styles get which colour,
//! and whether colour is used at all.
//!
//! Colour is used on a stream only when that stream is a terminal, the
//! `NO_COLOR` environment variable is unset (or empty) and `TERM` names a
//! terminal that is not `dumb`. This module knows the
//! report styles of the language layer and the `colored` crate; it must not
//! know about sessions, files or the prompt.

use std::io::IsTerminal;

use colored::Colorize;

use crate::lang::Style;

/// Whether the environment allows colour at all: not when `NO_COLOR` is
/// set to anything non-empty, nor on a terminal that says it has no
/// escape sequences (`TERM=dumb`, or no `TERM` at all).
pub(crate) fn colour_allowed(
    no_color: Option<&std::ffi::OsStr>,
    term: Option<&std::ffi::OsStr>,
) -> bool {
    let no_color_set = no_color.is_some_and(|v| !v.is_empty());
    let dumb = term.is_none_or(|t| t.is_empty() || t == "dumb");
    !no_color_set && !dumb
}

/// Decides the colour of printed lines, per output stream.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub(crate) struct Painter {
    /// Colour lines written to standard output.
    stdout: bool,
    /// Colour lines written to standard error.
    stderr: bool,
}

impl Painter {
    /// A painter that never colours.
    #[cfg(test)]
    pub(crate) fn plain() -> Painter {
        Painter {
            stdout: false,
            stderr: false,
        }
    }

    /// Looks at the environment and the two output streams, and sets the
    /// `colored` crate's global switch to match.
    pub(crate) fn detect() -> Painter {
        let allowed = colour_allowed(
            std::env::var_os("NO_COLOR").as_deref(),
            std::env::var_os("TERM").as_deref(),
        );
        let painter = Painter {
            stdout: allowed && std::io::stdout().is_terminal(),
            stderr: allowed && std::io::stderr().is_terminal(),
        };
        // The painter decides per stream; `colored` only has to obey it.
        colored::control::set_override(painter.stdout || painter.stderr);
        painter
    }

    /// `text` as a report line of style `style`, for standard output.
    pub(crate) fn line(&self, style: Style, text: &str) -> String {
        if !self.stdout {
            return text.to_string();
        }
        match style {
            Style::Result | Style::Plain => text.to_string(),
            Style::Note => text.dimmed().to_string(),
            Style::Warn => text.yellow().to_string(),
            Style::Pass => text.green().to_string(),
            Style::Fail => text.red().to_string(),
        }
    }

    /// A rendered error (`place: error: message`, the line, the caret) for
    /// standard error: the first line in red, the rest as is.
    pub(crate) fn error(&self, rendered: &str) -> String {
        if !self.stderr {
            return rendered.to_string();
        }
        match rendered.split_once('\n') {
            Some((head, rest)) => format!("{}\n{rest}", head.red().bold()),
            None => rendered.red().bold().to_string(),
        }
    }

    /// A one-line note written by the binary itself (banner, resume notes)
    /// to standard output.
    pub(crate) fn note(&self, text: &str) -> String {
        self.line(Style::Note, text)
    }

    /// A one-line warning written by the binary itself to standard error.
    pub(crate) fn warning(&self, text: &str) -> String {
        if self.stderr {
            text.yellow().to_string()
        } else {
            text.to_string()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn plain_painter_leaves_text_alone() {
        let painter = Painter::plain();
        for style in [
            Style::Result,
            Style::Note,
            Style::Warn,
            Style::Pass,
            Style::Fail,
            Style::Plain,
        ] {
            assert_eq!(painter.line(style, "holds"), "holds");
        }
        assert_eq!(
            painter.error("1:2: error: x\n  y\n  ^"),
            "1:2: error: x\n  y\n  ^"
        );
        assert_eq!(painter.warning("w"), "w");
        assert_eq!(painter.note("n"), "n");
    }

    #[test]
    fn no_color_and_dumb_terminals_get_no_colour() {
        use std::ffi::OsStr;
        let xterm = Some(OsStr::new("xterm-256color"));
        assert!(colour_allowed(None, xterm));
        assert!(colour_allowed(Some(OsStr::new("")), xterm));
        assert!(!colour_allowed(Some(OsStr::new("1")), xterm));
        assert!(!colour_allowed(None, Some(OsStr::new("dumb"))));
        assert!(!colour_allowed(None, None));
    }

    #[test]
    fn colouring_painter_adds_escapes_but_keeps_text() {
        colored::control::set_override(true);
        let painter = Painter {
            stdout: true,
            stderr: true,
        };
        let failed = painter.line(Style::Fail, "check failed");
        assert!(failed.contains("\u{1b}["), "{failed:?}");
        assert!(failed.contains("check failed"));
        // Results stay uncoloured so they can be pasted back.
        assert_eq!(painter.line(Style::Result, "[p, -q]"), "[p, -q]");
        let error = painter.error("1:2: error: x\n  y\n  ^");
        assert!(error.starts_with("\u{1b}["), "{error:?}");
        assert!(error.ends_with("\n  y\n  ^"), "{error:?}");
    }
}
