//! Progress on standard error, only when it is a terminal.

use std::io::IsTerminal;
use std::sync::Mutex;

use indicatif::{ProgressBar, ProgressStyle};
use quern::ingest::{Phase, Progress};

/// Shows one bar per phase.
pub struct Bar {
    bar: Mutex<Option<ProgressBar>>,
    enabled: bool,
}

impl Bar {
    /// A bar that draws only if `!quiet` and stderr is a terminal.
    pub fn new(quiet: bool) -> Bar {
        Bar {
            bar: Mutex::new(None),
            enabled: !quiet && std::io::stderr().is_terminal(),
        }
    }

    /// Removes the bar.
    pub fn finish(&self) {
        if let Some(b) = self.bar.lock().unwrap_or_else(|e| e.into_inner()).take() {
            b.finish_and_clear();
        }
    }
}

impl Progress for Bar {
    fn phase(&self, phase: Phase, total: u64) {
        if !self.enabled {
            return;
        }
        let mut slot = self.bar.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(b) = slot.take() {
            b.finish_and_clear();
        }
        let template = if matches!(phase, Phase::Counting | Phase::Hashing) {
            "{prefix:>9} [{bar:30}] {binary_bytes}/{binary_total_bytes} {binary_bytes_per_sec} eta {eta}"
        } else {
            "{prefix:>9} [{bar:30}] {pos}/{len} partitions, eta {eta}"
        };
        let b = ProgressBar::new(total).with_prefix(phase.name());
        b.set_style(
            ProgressStyle::with_template(template)
                .expect("valid template")
                .progress_chars("=> "),
        );
        *slot = Some(b);
    }

    fn advance(&self, done: u64) {
        if let Some(b) = self.bar.lock().unwrap_or_else(|e| e.into_inner()).as_ref() {
            b.set_position(done);
        }
    }
}
