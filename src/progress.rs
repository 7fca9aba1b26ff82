//! Progress bars and notes on stderr; bars are shown only when stderr is a terminal and
//! `--quiet` is off.

use std::io::IsTerminal;
use std::sync::Mutex;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use triage_pipeline::orchestration::Observer;

/// A progress bar that draws nothing when hidden.
pub struct Progress {
    bar: ProgressBar,
}

impl Progress {
    /// A bar of `total` steps labelled `what`.
    pub fn new(quiet: bool, total: u64, what: &str) -> Self {
        let bar = ProgressBar::new(total);
        if quiet || !std::io::stderr().is_terminal() {
            bar.set_draw_target(ProgressDrawTarget::hidden());
        } else {
            bar.set_style(
                ProgressStyle::with_template(
                    "{msg:>12} [{bar:32}] {pos}/{len} ({elapsed}, about {eta} left)",
                )
                .expect("static template")
                .progress_chars("=> "),
            );
        }
        bar.set_message(what.to_string());
        Self { bar }
    }

    /// Remove the bar.
    pub fn finish(self) {
        self.bar.finish_and_clear();
    }
}

/// The terminal as a run's observer: one bar per stage, notes on stderr, never cancelled
/// (Ctrl-C ends the process; finished work units stay in the checkpoint).
pub struct Terminal {
    quiet: bool,
    bar: Mutex<Option<Progress>>,
}

impl Terminal {
    /// Bars hidden when `quiet`.
    pub fn new(quiet: bool) -> Self {
        Self {
            quiet,
            bar: Mutex::new(None),
        }
    }
}

impl Observer for Terminal {
    fn begin(&self, what: &str, total: u64) {
        let old = self
            .bar
            .lock()
            .expect("bar lock")
            .replace(Progress::new(self.quiet, total, what));
        if let Some(old) = old {
            old.finish();
        }
    }

    fn advance(&self, done: u64) {
        if let Some(p) = &*self.bar.lock().expect("bar lock") {
            p.bar.set_position(done);
        }
    }

    fn end(&self) {
        if let Some(p) = self.bar.lock().expect("bar lock").take() {
            p.finish();
        }
    }

    fn note(&self, text: &str) {
        eprintln!("{text}");
    }
}
