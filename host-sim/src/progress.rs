//! A progress bar on stderr for long runs: shown only when stderr is a
//! terminal, and only once the run has taken [`PROGRESS_AFTER`], so short
//! runs and piped output stay clean (indicatif).

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::time::{Duration, Instant};

/// The bar appears once a run has taken this long.
pub const PROGRESS_AFTER: Duration = Duration::from_secs(2);

/// A bar over `len` units of work (samples, runs).
pub struct Progress {
    bar: ProgressBar,
    start: Instant,
    enabled: bool,
    shown: bool,
}

impl Progress {
    /// A hidden bar that shows itself on a terminal after [`PROGRESS_AFTER`]; `what` names the units.
    pub fn new(len: u64, what: &str) -> Self {
        let bar = ProgressBar::with_draw_target(Some(len), ProgressDrawTarget::hidden());
        let template = format!("{{bar:40}} {{percent}} % of {{len}} {what} {{elapsed_precise}} (about {{eta}} left)");
        bar.set_style(ProgressStyle::with_template(&template).unwrap_or_else(|_| ProgressStyle::default_bar()));
        Self { bar, start: Instant::now(), enabled: std::io::stderr().is_terminal(), shown: false }
    }

    /// Work done so far.
    pub fn set(&mut self, pos: u64) {
        if self.enabled && !self.shown && self.start.elapsed() >= PROGRESS_AFTER {
            self.bar.set_draw_target(ProgressDrawTarget::stderr());
            self.shown = true;
        }
        self.bar.set_position(pos);
    }
}

impl Drop for Progress {
    fn drop(&mut self) {
        self.bar.finish_and_clear();
    }
}
