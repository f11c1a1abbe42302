//! The threads that answer queries. A store's [`Estimator`] keeps its
//! caches in `RefCell`s and borrows the store, so it is neither shared nor
//! sent: each query thread builds its own estimators (one per method, on
//! first use) over the one store that every thread borrows, and keeps them
//! warm across requests. A frozen [`Model`] is shared as it is. The HTTP
//! side hands a thread a job through a bounded queue and awaits its answer
//! on a one-shot channel, so that no query blocks the network threads.
//!
//! What is served is a [`Loaded`] source behind [`Current`], which a reload
//! swaps. A thread takes the current source when it takes a job: a job
//! taken before a swap finishes on the old source (the thread's `Arc`
//! keeps it open), every job taken after it runs on the new one, and the
//! thread's estimators are built anew over it. An idle thread lets go of
//! an old source within a second.

use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, OnceLock, RwLock};
use std::time::{Duration, SystemTime};

use crossbeam::channel::{self, Receiver, RecvTimeoutError, Sender, TrySendError};

pub use super::info::Source;
use crate::blend::{Blend, Opened};
use crate::error::{Error, Result};
use crate::model::Model;
use crate::query::{Estimator, Method, Params, Predictor};
use crate::scoring::DocModel;
use crate::store::Store;

/// An opened store, model or blend, owned.
pub enum Owned {
    /// A store.
    Store(Store),
    /// A frozen model.
    Model(Model),
    /// A blend file's parts.
    Blend(Opened),
}

impl Owned {
    /// Borrowed, as the queries take it.
    pub fn source(&self) -> Source<'_> {
        match self {
            Owned::Store(s) => Source::Store(s),
            Owned::Model(m) => Source::Model(m),
            Owned::Blend(b) => Source::Blend(b),
        }
    }
}

/// The statistics figure of a source, drawn once (or why not).
pub type Figure = OnceLock<std::result::Result<Arc<Vec<u8>>, String>>;

/// A source as served: opened, with what `/info` and `/metrics` say of it.
pub struct Loaded {
    owned: Owned,
    /// The path it was opened from, as `/info` names it.
    pub path: String,
    /// The answer of `/info` (without the reload state).
    pub info: super::info::Info,
    /// The statistics figure, drawn on first request.
    pub figure: Figure,
    /// 1 for the source the service started with, one more at each reload.
    pub generation: u64,
    /// When it was opened (wall clock).
    pub loaded_at: SystemTime,
    /// How long opening and checking it took, in seconds.
    pub load_seconds: f64,
}

impl Loaded {
    /// `owned`, opened from `path` in `load_seconds`.
    pub fn new(owned: Owned, path: &str, generation: u64, load_seconds: f64) -> Loaded {
        let info = super::info::Info::of(owned.source(), path);
        Loaded {
            owned,
            path: path.to_string(),
            info,
            figure: OnceLock::new(),
            generation,
            loaded_at: SystemTime::now(),
            load_seconds,
        }
    }

    /// Borrowed, as the queries take it.
    pub fn source(&self) -> Source<'_> {
        self.owned.source()
    }
}

/// The source served now; a reload swaps it.
pub struct Current {
    now: RwLock<Arc<Loaded>>,
    generation: AtomicU64,
}

impl Current {
    /// Serving `first`.
    pub fn new(first: Loaded) -> Current {
        let g = first.generation;
        Current {
            now: RwLock::new(Arc::new(first)),
            generation: AtomicU64::new(g),
        }
    }

    /// The source served now.
    pub fn get(&self) -> Arc<Loaded> {
        self.now.read().unwrap_or_else(|p| p.into_inner()).clone()
    }

    /// The generation served now (cheaper than [`Current::get`]).
    pub fn generation(&self) -> u64 {
        self.generation.load(Ordering::Acquire)
    }

    /// Serves `next` from now on: jobs taken from the queue after this
    /// returns run on it.
    pub fn swap(&self, next: Loaded) {
        let mut now = self.now.write().unwrap_or_else(|p| p.into_inner());
        let g = next.generation;
        *now = Arc::new(next);
        self.generation.store(g, Ordering::Release);
    }
}

/// A predictor lent to a job: an estimator of the calling thread, or the
/// model.
pub enum Lent<'a> {
    /// A method over the store.
    Est(&'a Estimator<'a>),
    /// The frozen model.
    Model(&'a Model),
    /// The thread's blend.
    Blend(&'a Blend<'a>),
}

impl<'a> Lent<'a> {
    /// As a [`Predictor`].
    pub fn pred(&self) -> &'a dyn Predictor {
        match *self {
            Lent::Est(e) => e,
            Lent::Model(m) => m,
            Lent::Blend(b) => b,
        }
    }

    /// As a document scorer ([`crate::docs`]).
    pub fn doc(&self) -> &'a dyn DocModel {
        match *self {
            Lent::Est(e) => e,
            Lent::Model(m) => m,
            Lent::Blend(b) => b,
        }
    }
}

/// What a job sees of its thread: the source and the thread's predictors.
pub trait Local {
    /// The source served.
    fn source(&self) -> Source<'_>;
    /// The source served, with what is known of it.
    fn loaded(&self) -> &Loaded;
    /// The predictor of `method`: the thread's estimator over the store
    /// (built on first use), or the model if it was frozen with `method`.
    fn get(&mut self, method: Method) -> Result<Lent<'_>>;
}

struct Thread<'s> {
    loaded: &'s Loaded,
    src: Source<'s>,
    ests: Vec<Estimator<'s>>,
    blend: Option<Blend<'s>>,
}

impl Local for Thread<'_> {
    fn source(&self) -> Source<'_> {
        self.src
    }

    fn loaded(&self) -> &Loaded {
        self.loaded
    }

    fn get(&mut self, method: Method) -> Result<Lent<'_>> {
        match self.src {
            Source::Model(m) => {
                if m.meta().method != method {
                    return Err(Error::Config(format!(
                        "the model was frozen with {}, not {method}",
                        m.meta().method
                    )));
                }
                Ok(Lent::Model(m))
            }
            Source::Store(store) => {
                let i = match self.ests.iter().position(|e| e.method() == method) {
                    Some(i) => i,
                    None => {
                        self.ests
                            .push(Estimator::new(store, method, Params::default())?);
                        self.ests.len() - 1
                    }
                };
                Ok(Lent::Est(&self.ests[i]))
            }
            Source::Blend(o) => {
                if method != Method::Blend {
                    return Err(Error::Config(format!(
                        "a blend answers with the method blend, not {method}"
                    )));
                }
                if self.blend.is_none() {
                    self.blend = Some(o.blend()?);
                }
                Ok(Lent::Blend(self.blend.as_ref().expect("just made")))
            }
        }
    }
}

/// A job: runs on a query thread.
pub type Job = Box<dyn FnOnce(&mut dyn Local) + Send>;

/// The sending end of the queue of jobs.
#[derive(Clone)]
pub struct Jobs {
    tx: Sender<Job>,
}

/// Why a job was not queued.
pub enum Refused {
    /// The queue is full.
    Busy,
    /// The query threads are gone (the service is stopping).
    Stopped,
}

impl Jobs {
    /// Queues `job` without waiting.
    pub fn submit(&self, job: Job) -> std::result::Result<(), Refused> {
        self.tx.try_send(job).map_err(|e| match e {
            TrySendError::Full(_) => Refused::Busy,
            TrySendError::Disconnected(_) => Refused::Stopped,
        })
    }

    /// Jobs waiting for a thread.
    pub fn waiting(&self) -> usize {
        self.tx.len()
    }
}

/// Runs `body` with a queue served by `threads` query threads over the
/// source `current` serves; the threads end when every [`Jobs`] is
/// dropped, and are joined before this returns.
pub fn with_pool<R>(
    current: &Arc<Current>,
    threads: usize,
    queue: usize,
    body: impl FnOnce(Jobs) -> R,
) -> R {
    let (tx, rx) = channel::bounded::<Job>(queue.max(1));
    std::thread::scope(|scope| {
        for i in 0..threads.max(1) {
            let rx: Receiver<Job> = rx.clone();
            let current = current.clone();
            std::thread::Builder::new()
                .name(format!("quern-query-{i}"))
                .spawn_scoped(scope, move || serve_jobs(&current, &rx))
                .expect("starting a query thread");
        }
        drop(rx);
        body(Jobs { tx })
    })
}

/// A query thread: runs jobs on the current source until the queue is
/// closed, moving to a new source when a reload has swapped one in.
fn serve_jobs(current: &Current, rx: &Receiver<Job>) {
    let mut pending: Option<Job> = None;
    loop {
        let loaded = current.get();
        let mut t = Thread {
            loaded: &loaded,
            src: loaded.source(),
            ests: Vec::new(),
            blend: None,
        };
        loop {
            let job = match pending.take() {
                Some(j) => j,
                None => match rx.recv_timeout(Duration::from_secs(1)) {
                    Ok(j) => j,
                    Err(RecvTimeoutError::Timeout) => {
                        if current.generation() != loaded.generation {
                            break;
                        }
                        continue;
                    }
                    Err(RecvTimeoutError::Disconnected) => return,
                },
            };
            if current.generation() != loaded.generation {
                pending = Some(job);
                break;
            }
            // A panic fails its request (its answer channel is dropped: a
            // 500), not the thread.
            let _ = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| job(&mut t)));
        }
    }
}
