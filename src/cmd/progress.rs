//! A progress bar on stderr for long runs; nothing at all when stderr is not
//! a terminal, and nothing on stdout, so a CSV piped or redirected stays
//! exactly the CSV.

use std::io::IsTerminal;
use std::time::{Duration, Instant};

/// Runs shorter than this never show a bar, so small batches do not flash.
const QUIET_FOR: Duration = Duration::from_secs(1);

pub struct Progress {
    bar: Option<indicatif::ProgressBar>,
    start: Instant,
    /// Shown from the first step (a run of several batches), not after a second.
    at_once: bool,
}

fn style(template: &str) -> Option<indicatif::ProgressStyle> {
    indicatif::ProgressStyle::with_template(template).ok()
}

impl Progress {
    /// A bar of `steps` steps.
    pub fn steps(steps: u64, at_once: bool) -> Progress {
        Progress::new(Some(steps), at_once)
    }

    /// A count whose end is not yet known (rows read so far).
    pub fn counting() -> Progress {
        Progress::new(None, false)
    }

    fn new(len: Option<u64>, at_once: bool) -> Progress {
        // LIMEN_PROGRESS=off: never a bar; =now: no second's wait first.
        let setting = std::env::var("LIMEN_PROGRESS").unwrap_or_default();
        let at_once = at_once || setting == "now";
        let wanted = setting != "off" && std::io::stderr().is_terminal();
        let bar = wanted.then(|| {
            let bar = indicatif::ProgressBar::with_draw_target(
                len,
                indicatif::ProgressDrawTarget::hidden(),
            );
            let s = match len {
                Some(_) => style("{bar:30} {pos}/{len} {msg}"),
                None => style("{spinner} {human_pos} {msg}"),
            };
            if let Some(s) = s {
                bar.set_style(s);
            }
            bar
        });
        Progress {
            bar,
            start: Instant::now(),
            at_once,
        }
    }

    fn show(&self, bar: &indicatif::ProgressBar) {
        if bar.is_hidden() && (self.at_once || self.start.elapsed() > QUIET_FOR) {
            bar.set_draw_target(indicatif::ProgressDrawTarget::stderr());
        }
    }

    /// One step done, saying what comes next.
    pub fn step(&self, message: &str) {
        if let Some(bar) = &self.bar {
            self.show(bar);
            bar.set_message(message.to_string());
            bar.inc(1);
        }
    }

    /// From here on a bar of `len` (a phase whose size is now known).
    pub fn phase(&self, len: u64, message: &str) {
        if let Some(bar) = &self.bar {
            if let Some(s) = style("{bar:30} {human_pos}/{human_len} {msg}") {
                bar.set_style(s);
            }
            bar.set_length(len);
            bar.set_position(0);
            bar.set_message(message.to_string());
            self.show(bar);
        }
    }

    pub fn message(&self, message: &str) {
        if let Some(bar) = &self.bar {
            bar.set_message(message.to_string());
        }
    }

    pub fn at(&self, done: u64) {
        if let Some(bar) = &self.bar {
            self.show(bar);
            bar.set_position(done);
        }
    }

    pub fn finish(&self) {
        if let Some(bar) = &self.bar {
            bar.finish_and_clear();
        }
    }
}
