//! Named fault points, for crash tests.
//!
//! With `QUERN_KILL_AT=<point>:<n>` in the environment, the process sends
//! itself SIGKILL the n-th time (1-based) it reaches `point`. Without the
//! variable a point costs one relaxed atomic load. Points: `spill`,
//! `committed`, `merge`, `join`, `build` of the ingest, and
//! `stage-written`, `stage-done` of a `quern stage` task, and
//! `score-batch` (a batch of scored documents handed to the output) of
//! `quern score` (see DEVELOPERS.md).
//!
//! With `QUERN_FULL_AT=<point>:<n>`, [`full`] returns an out-of-space I/O
//! error the n-th time and every later time it is reached at `point`, as a
//! full disk would: the fallback of the disk-full tests where no small file
//! system can be mounted. Points: `run` (a run file is created), `sst` (a
//! store file is created), `build` (the database is built).

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::OnceLock;

static TARGET: OnceLock<Option<(String, u64)>> = OnceLock::new();
static HITS: AtomicU64 = AtomicU64::new(0);

fn target() -> &'static Option<(String, u64)> {
    TARGET.get_or_init(|| {
        let v = std::env::var("QUERN_KILL_AT").ok()?;
        let (name, n) = v.rsplit_once(':')?;
        Some((name.to_string(), n.parse().ok()?))
    })
}

/// Marks that execution reached `name`.
pub fn point(name: &str) {
    if let Some((want, n)) = target() {
        if want == name && HITS.fetch_add(1, Ordering::SeqCst) + 1 == *n {
            // SAFETY-free: raising a signal on ourselves has no memory effects.
            unsafe_kill();
        }
    }
}

static FULL: OnceLock<Option<(String, u64)>> = OnceLock::new();
static FULL_HITS: AtomicU64 = AtomicU64::new(0);

/// An out-of-space error if `QUERN_FULL_AT` names `name` and it was reached
/// that often; `Ok` otherwise.
pub fn full(name: &str) -> std::io::Result<()> {
    let target = FULL.get_or_init(|| {
        let v = std::env::var("QUERN_FULL_AT").ok()?;
        let (name, n) = v.rsplit_once(':')?;
        Some((name.to_string(), n.parse().ok()?))
    });
    if let Some((want, n)) = target {
        if want == name && FULL_HITS.fetch_add(1, Ordering::SeqCst) + 1 >= *n {
            return Err(std::io::Error::from_raw_os_error(libc::ENOSPC));
        }
    }
    Ok(())
}

#[allow(unsafe_code)]
fn unsafe_kill() {
    // SAFETY: `raise` only delivers a signal to this process.
    unsafe {
        libc::raise(libc::SIGKILL);
    }
}
