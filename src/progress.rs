//! Progress: a bar on a terminal, nothing otherwise (log lines report the totals).

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;

/// A progress counter over participants.
pub struct Progress(Option<ProgressBar>);

impl Progress {
    /// A bar of `len` steps when standard error is a terminal; silent otherwise.
    pub fn new(len: u64) -> Self {
        if !std::io::stderr().is_terminal() {
            return Progress(None);
        }
        let bar = ProgressBar::with_draw_target(Some(len), ProgressDrawTarget::stderr());
        if let Ok(style) =
            ProgressStyle::with_template("{bar:40} {pos}/{len} participants {elapsed}")
        {
            bar.set_style(style);
        }
        Progress(Some(bar))
    }

    /// One participant done.
    pub fn tick(&self) {
        if let Some(b) = &self.0 {
            b.inc(1);
        }
    }

    /// Clears the bar.
    pub fn finish(&self) {
        if let Some(b) = &self.0 {
            b.finish_and_clear();
        }
    }
}
