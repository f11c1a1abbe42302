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

/// Runs `worker(i)` for i in 0..`threads`, each on its own thread, while
/// `main` runs on the calling thread (which is not one of them): the shape
/// of a pipeline whose reader and writer feed and drain the workers through
/// channels. `main` must end the workers (by closing their queue) before it
/// returns. Returns `main`'s result, else the first worker error.
pub fn with_workers<R>(
    threads: usize,
    worker: impl Fn(usize) -> Result<()> + Sync,
    main: impl FnOnce() -> Result<R>,
) -> Result<R> {
    let pool = pool(threads)?;
    let errors: std::sync::Mutex<Vec<Error>> = std::sync::Mutex::new(Vec::new());
    let out = pool.in_place_scope(|s| {
        for i in 0..threads.max(1) {
            let (worker, errors) = (&worker, &errors);
            s.spawn(move |_| {
                if let Err(e) = worker(i) {
                    errors.lock().unwrap_or_else(|p| p.into_inner()).push(e);
                }
            });
        }
        main()
    });
    let first = errors
        .into_inner()
        .unwrap_or_else(|p| p.into_inner())
        .into_iter()
        .next();
    match (out, first) {
        (Ok(r), None) => Ok(r),
        (Ok(_), Some(e)) => Err(e),
        (Err(e), _) => Err(e),
    }
}
