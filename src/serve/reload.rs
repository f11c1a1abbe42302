//! Reloading the source without a restart: open it again, check it, swap
//! it in ([`Current::swap`]), or keep the old one and say why.

use std::sync::atomic::Ordering;
use std::sync::{Arc, Mutex};
use std::time::{Instant, SystemTime};

use serde::Serialize;

use super::metrics::{self, Metrics};
use super::pool::{Current, Loaded, Owned};
use crate::error::Result;

/// Opens the source again from its path and checks it (a reload).
pub type Opener = Box<dyn Fn() -> Result<Owned> + Send + Sync>;

/// The last reload refused: when, and why.
#[derive(Clone, Debug, Serialize)]
pub(super) struct Refusal {
    at: String,
    error: String,
}

/// What reloads need, shared by the HTTP side and [`Reloader`].
pub(super) struct Reloads {
    open: Opener,
    current: Arc<Current>,
    metrics: Arc<Metrics>,
    /// Held while a reload runs: one at a time.
    running: Mutex<Option<Refusal>>,
}

impl Reloads {
    /// Reloads of `current` through `open`, counted in `metrics`.
    pub(super) fn new(open: Opener, current: Arc<Current>, metrics: Arc<Metrics>) -> Reloads {
        Reloads {
            open,
            current,
            metrics,
            running: Mutex::new(None),
        }
    }

    /// Opens, checks and swaps in the source; blocks. `by` names who asked
    /// (for the log line).
    pub(super) fn reload(&self, by: &str) -> std::result::Result<Arc<Loaded>, String> {
        let mut last = self.running.lock().unwrap_or_else(|p| p.into_inner());
        let before = self.current.get();
        let t0 = Instant::now();
        match (self.open)() {
            Ok(owned) => {
                let next = Loaded::new(
                    owned,
                    &before.path,
                    before.generation + 1,
                    t0.elapsed().as_secs_f64(),
                );
                self.current.swap(next);
                *last = None;
                self.metrics.reloads.fetch_add(1, Ordering::Relaxed);
                let now = self.current.get();
                eprintln!(
                    "quern: reloaded {} ({by}): generation {}, opened and checked in {:.3} s",
                    now.path, now.generation, now.load_seconds
                );
                Ok(now)
            }
            Err(e) => {
                let msg = format!(
                    "reloading {} failed, still serving generation {}: {e}",
                    before.path, before.generation
                );
                eprintln!("quern: {msg} ({by})");
                *last = Some(Refusal {
                    at: metrics::rfc3339(SystemTime::now()),
                    error: e.to_string(),
                });
                self.metrics.reloads_refused.fetch_add(1, Ordering::Relaxed);
                Err(msg)
            }
        }
    }

    /// The last reload's refusal, if it failed.
    pub(super) fn refused(&self) -> Option<Refusal> {
        self.running
            .try_lock()
            .map(|g| g.clone())
            .unwrap_or_default()
    }
}

/// Asks the running service to reload its source (see the module's
/// "Reloading"); the binary calls it on SIGHUP.
#[derive(Clone)]
pub struct Reloader {
    reloads: Arc<Reloads>,
    rt: tokio::runtime::Handle,
}

impl Reloader {
    /// Reloads through `reloads` on the runtime `rt`.
    pub(super) fn new(reloads: Arc<Reloads>, rt: tokio::runtime::Handle) -> Reloader {
        Reloader { reloads, rt }
    }

    /// Starts a reload in the background and returns at once; the outcome
    /// is written to standard error and shown by `/info` and `/metrics`.
    pub fn reload(&self, by: &'static str) {
        let r = self.reloads.clone();
        self.rt.spawn_blocking(move || {
            let _ = r.reload(by);
        });
    }
}
