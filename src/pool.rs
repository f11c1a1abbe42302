//! Worker threads, on `rayon`: the one place that starts them.
//!
//! Two shapes of parallel work occur: independent tasks (a partition's
//! merge or join) and long-lived workers that pull from a shared queue and
//! keep state between items (counting workers, whose table spans several
//! chunks). Both stop at the first error and return it; work already
//! running finishes first.

use rayon::prelude::*;

use crate::error::{Error, Result};

fn pool(threads: usize) -> Result<rayon::ThreadPool> {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads.max(1))
        .build()
        .map_err(|e| Error::Config(format!("cannot start {threads} worker threads: {e}")))
}

/// Runs `job` on every item of `items` on `threads` threads. Stops taking
/// new items at the first error, which is returned.
pub fn try_for_each<T: Send>(
    threads: usize,
    items: Vec<T>,
    job: impl Fn(T) -> Result<()> + Sync + Send,
) -> Result<()> {
    pool(threads)?.install(|| items.into_par_iter().try_for_each(job))
}

/// Runs `worker` once on each of `threads` threads and returns the first
/// error any of them returned.
pub fn on_each_thread(threads: usize, worker: impl Fn() -> Result<()> + Sync) -> Result<()> {
    pool(threads)?
        .broadcast(|_| worker())
        .into_iter()
        .collect::<Result<Vec<()>>>()
        .map(|_| ())
}
