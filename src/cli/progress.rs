//! Progress on standard error for the long stages.

use std::io::IsTerminal;
use std::time::{Duration, Instant};

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};

/// A progress bar on standard error that appears only once a run has taken about a
/// second, and never with `--quiet` or when standard error is not a terminal.
pub struct Progress {
    bar: ProgressBar,
    start: Instant,
    allowed: bool,
}

impl Progress {
    /// A bar for `scenarios` scenarios labelled `stage`, hidden for the first second.
    pub fn new(stage: &str, scenarios: u64, quiet: bool) -> Progress {
        let bar = ProgressBar::with_draw_target(Some(scenarios), ProgressDrawTarget::hidden());
        if let Ok(style) = ProgressStyle::with_template(&format!(
            "{stage} {{bar:40}} {{pos}}/{{len}} scenarios, {{elapsed}} elapsed, about {{eta}} left"
        )) {
            bar.set_style(style);
        }
        Progress {
            bar,
            start: Instant::now(),
            allowed: !quiet && std::io::stderr().is_terminal(),
        }
    }

    /// Counts `scenarios` more as done.
    pub fn advance(&self, scenarios: u64) {
        self.bar.inc(scenarios);
        if self.allowed && self.bar.is_hidden() && self.start.elapsed() > Duration::from_secs(1) {
            self.bar.set_draw_target(ProgressDrawTarget::stderr());
        }
    }

    /// Clears the bar.
    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }
}
