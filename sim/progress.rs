//! Progress lines for long commands, drawn by `indicatif` on standard error,
//! and only when standard error is a terminal: a pipe, a log file or a
//! scheduler's output file receives no progress and no escape codes at all.
//!
//! One type for every command (`run`, `fleet`, `roundtrip --suite`,
//! `audit --matrix`), so they look alike and none draws by hand.

use indicatif::{ProgressBar, ProgressDrawTarget, ProgressState, ProgressStyle};
use std::io::IsTerminal;

/// A progress line on a terminal's standard error, or nothing.
pub struct Progress {
    bar: ProgressBar,
}

impl Progress {
    /// A line that counts `what` done out of a total (fleet homes), with the
    /// rate and the time left.
    pub fn counter(what: &str) -> Progress {
        let template = format!("  {what} {{pos}}/{{len}}  {{rate}} {what}/s  ~{{eta}} left");
        let style = ProgressStyle::with_template(&template)
            .unwrap_or_else(|_| ProgressStyle::default_bar())
            .with_key("rate", |s: &ProgressState, w: &mut dyn std::fmt::Write| {
                let _ = write!(w, "{:.2}", s.per_sec());
            });
        Progress::with_style(style)
    }

    /// A line that shows how much of `what` is done as a percentage (fed by
    /// [`Progress::fraction`]), with the time elapsed and left.
    pub fn share(what: &str) -> Progress {
        Progress::templated(&format!(
            "  {what} {{percent:>3}} %  {{elapsed}} elapsed, ~{{eta}} left"
        ))
    }

    /// A line that is never drawn (`--quiet`, `--json`).
    pub fn hidden() -> Progress {
        Progress::to(false, ProgressStyle::default_bar())
    }

    fn templated(template: &str) -> Progress {
        let style =
            ProgressStyle::with_template(template).unwrap_or_else(|_| ProgressStyle::default_bar());
        Progress::with_style(style)
    }

    /// A line that shows the latest message (the step a long job is on)
    /// and the time since it started.
    pub fn messages() -> Progress {
        let style = ProgressStyle::with_template("  [{elapsed}] {wide_msg}")
            .unwrap_or_else(|_| ProgressStyle::default_spinner());
        Progress::with_style(style)
    }

    fn with_style(style: ProgressStyle) -> Progress {
        Progress::to(std::io::stderr().is_terminal(), style)
    }

    /// Draws on standard error when `visible`, else nowhere (the test seam
    /// for piped output; the decision is made once, here).
    fn to(visible: bool, style: ProgressStyle) -> Progress {
        let target = if visible {
            ProgressDrawTarget::stderr()
        } else {
            ProgressDrawTarget::hidden()
        };
        let bar = ProgressBar::with_draw_target(None, target).with_style(style);
        Progress { bar }
    }

    /// `done` of `total` units.
    pub fn count(&self, done: u64, total: u64) {
        self.bar.set_length(total);
        self.bar.set_position(done);
    }

    /// A fraction of the work in 0 … 1, shown as per-mille units.
    pub fn fraction(&self, f: f64) {
        let f = if f.is_finite() {
            f.clamp(0.0, 1.0)
        } else {
            0.0
        };
        self.count((f * 1000.0).round() as u64, 1000);
    }

    /// Redraws twice a second, so the elapsed time keeps moving while one
    /// long step (a solver) runs without reporting anything.
    pub fn ticking(self) -> Progress {
        if !self.bar.is_hidden() {
            self.bar
                .enable_steady_tick(std::time::Duration::from_millis(500));
        }
        self
    }

    /// The step the job is on.
    pub fn say(&self, message: impl Into<String>) {
        self.bar.set_message(message.into());
    }

    /// Removes the line, so the command's own output starts on a clean line.
    pub fn finish(&self) {
        self.bar.finish_and_clear();
    }

    /// Whether anything is drawn at all.
    pub fn is_hidden(&self) -> bool {
        self.bar.is_hidden()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hidden_when_not_a_terminal() {
        // The visible flag is what `is_terminal` decides; hidden means the
        // bar draws nothing whatever it is told.
        let p = Progress::to(false, ProgressStyle::default_bar());
        p.count(3, 10);
        p.say("step");
        assert!(p.is_hidden());
        p.finish();
    }
}
