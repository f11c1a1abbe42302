//! The threads that answer queries. A store's [`Estimator`] keeps its
//! caches in `RefCell`s and borrows the store, so it is neither shared nor
//! sent: each query thread builds its own estimators (one per method, on
//! first use) over the one store that every thread borrows, and keeps them
//! warm across requests. A frozen [`Model`] is shared as it is. The HTTP
//! side hands a thread a job through a bounded queue and awaits its answer
//! on a one-shot channel, so that no query blocks the network threads.

use crossbeam::channel::{self, Receiver, Sender, TrySendError};

use crate::blend::{Blend, Opened};
use crate::error::{Error, Result};
use crate::model::Model;
use crate::query::{Estimator, Method, Params, Predictor};
use crate::scoring::DocModel;
use crate::store::Store;

/// What is served: a store or a frozen model.
#[derive(Clone, Copy)]
pub enum Source<'s> {
    /// A store: every method, each with its default parameters.
    Store(&'s Store),
    /// A frozen model: its one method.
    Model(&'s Model),
    /// A blend file's parts: the method `blend`, each thread with its own
    /// mixture over them.
    Blend(&'s Opened),
}

impl Source<'_> {
    /// The method of a request that names none: the model's, or `mkn`.
    pub fn default_method(&self) -> Method {
        match self {
            Source::Store(_) => Method::Mkn,
            Source::Model(m) => m.meta().method,
            Source::Blend(_) => Method::Blend,
        }
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
    /// The predictor of `method`: the thread's estimator over the store
    /// (built on first use), or the model if it was frozen with `method`.
    fn get(&mut self, method: Method) -> Result<Lent<'_>>;
}

struct Thread<'s> {
    src: Source<'s>,
    ests: Vec<Estimator<'s>>,
    blend: Option<Blend<'s>>,
}

impl Local for Thread<'_> {
    fn source(&self) -> Source<'_> {
        self.src
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
}

/// Runs `body` with a queue served by `threads` query threads over `src`;
/// the threads end when every [`Jobs`] is dropped, and are joined before
/// this returns.
pub fn with_pool<R>(
    src: Source<'_>,
    threads: usize,
    queue: usize,
    body: impl FnOnce(Jobs) -> R,
) -> R {
    let (tx, rx) = channel::bounded::<Job>(queue.max(1));
    std::thread::scope(|scope| {
        for i in 0..threads.max(1) {
            let rx: Receiver<Job> = rx.clone();
            std::thread::Builder::new()
                .name(format!("quern-query-{i}"))
                .spawn_scoped(scope, move || {
                    let mut t = Thread {
                        src,
                        ests: Vec::new(),
                        blend: None,
                    };
                    for job in rx.iter() {
                        // A panic fails its request (its answer channel is
                        // dropped: a 500), not the thread.
                        let _ =
                            std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| job(&mut t)));
                    }
                })
                .expect("starting a query thread");
        }
        drop(rx);
        body(Jobs { tx })
    })
}
