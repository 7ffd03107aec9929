//! Progress bars for long computations: shown on standard error only when
//! it is a terminal and only after a second, so quick commands and scripts
//! piped to files print nothing extra. A front end that shows progress its
//! own way (the notebook kernel) turns the bars off with [`use_bars`] and
//! installs a core progress hook instead; every report then goes there.

use std::cell::Cell;
use std::time::Instant;

thread_local! {
    static BARS: Cell<bool> = const { Cell::new(true) };
}

/// Chooses terminal bars (the default) or, with `false`, the core's
/// progress hook that the front end installed on this thread.
pub fn use_bars(on: bool) {
    BARS.with(|b| b.set(on));
}

fn bars() -> bool {
    BARS.with(Cell::get)
}

/// A progress bar that appears only after a second, on a terminal.
pub(crate) struct Progress {
    started: Instant,
    bar: Option<indicatif::ProgressBar>,
    total: u64,
    label: String,
}

impl Progress {
    pub(crate) fn new(total: u64, label: &str) -> Progress {
        Progress {
            started: Instant::now(),
            bar: None,
            total,
            label: label.to_string(),
        }
    }

    pub(crate) fn set(&mut self, pos: u64) {
        use std::io::IsTerminal;
        if !bars() {
            let (done, total) = (pos as usize, self.total as usize);
            crate::core::limits::progress(&self.label, done, total);
            return;
        }
        if self.bar.is_none()
            && self.started.elapsed().as_secs_f64() > 1.0
            && std::io::stderr().is_terminal()
        {
            let bar = indicatif::ProgressBar::new(self.total);
            if let Ok(style) =
                indicatif::ProgressStyle::with_template("  {msg} [{bar:30}] {pos}/{len} {elapsed}")
            {
                bar.set_style(style);
            }
            bar.set_message(self.label.clone());
            self.bar = Some(bar);
        }
        if let Some(b) = &self.bar {
            b.set_position(pos);
        }
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        if let Some(b) = &self.bar {
            b.finish_and_clear();
        }
    }
}

/// Installs the core's progress hook for one statement; the bar (if any)
/// disappears when the hook is removed.
pub(crate) fn install() {
    use std::io::IsTerminal;
    if !bars() || !std::io::stderr().is_terminal() {
        return;
    }
    let mut current: Option<(String, Progress)> = None;
    crate::core::limits::set_progress_hook(Some(Box::new(move |what, done, total| {
        if current.as_ref().is_none_or(|(w, _)| w != what) {
            current = Some((what.to_string(), Progress::new(total as u64, what)));
        }
        if let Some((_, p)) = current.as_mut() {
            p.set(done as u64);
        }
    })));
}

/// Removes the hook (and clears its bar).
pub(crate) fn remove() {
    if bars() {
        crate::core::limits::set_progress_hook(None);
    }
}
