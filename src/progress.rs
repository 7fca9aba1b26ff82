//! Progress bars on stderr, shown only when stderr is a terminal and `--quiet` is off.

use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

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

    /// A callback that libraries call with the number of finished items.
    pub fn callback(&self) -> impl Fn(usize) + Sync + '_ {
        move |done| self.bar.set_position(done as u64)
    }

    /// Remove the bar.
    pub fn finish(self) {
        self.bar.finish_and_clear();
    }
}
