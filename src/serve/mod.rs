//! The HTTP query service (`quern serve`): JSON answers over one store or
//! frozen model shared by every request, and a page to explore it.
//!
//! # The API (stable: scripts rely on it)
//!
//! | request | answer |
//! |---|---|
//! | `GET /health` | `{"ok": true}` |
//! | `GET /info` | what is served: `source`, `order`, `method`, `methods`, `vocabulary_size`, `ngrams` per order, … |
//! | `POST /prob` `{"context", "word", "method"?}` | `{"words", "probability" (or "score"), "log10", "matched"}`: the fields of `quern prob --json` (`matched`: how many words of the n-gram matched, 0 for a word outside V) |
//! | `POST /next` `{"context", "prefix"?, "top"?, "method"?}` | `{"context", "prefix", "method", "words": [{"word", "probability", "log10"}…], "rest", "words_scored"}`: the `words` of `quern next --json` |
//! | `POST /score` `{"texts": […], "method"?}` | `{"method", "results": […]}`, one scored-document record per text |
//! | `POST /ngrams` `{"words", "order"?, "limit"?, "after"?}` | `{"order", "ngrams": [{"words", "count", "continuation"}…], "more", "next"}`: a store's n-grams that begin with the words, with counts, a page at a time (`next` is the cursor to pass as `after`, as `quern ngrams --after` takes it) |
//! | `GET /stats.svg` | a store's statistics figure (as `quern stats --plot`) |
//! | `GET /` | the page |
//!
//! A bad request (a body that is not JSON, a missing field, a wrong type,
//! an unknown field or method, a body over the size limit, an unknown
//! path) gets a 4xx status and `{"error": "..."}`.
//!
//! # How it runs
//!
//! The network side is axum on a small tokio runtime; the queries run on a
//! pool of query threads ([`pool`]), each with its own estimators over the
//! one store (or the one shared model), fed through a bounded queue (full:
//! 503). [`run`] owns no part of the process: when the shutdown future its
//! caller gives resolves (the binary's resolves on SIGTERM or SIGINT), it
//! stops taking connections, lets the requests under way finish, joins the
//! query threads and returns. The statistics figure is drawn in memory.

pub mod api;
mod info;
pub mod pool;

use std::future::Future;
use std::net::SocketAddr;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, OnceLock};

use axum::body::Bytes;
use axum::extract::rejection::BytesRejection;
use axum::extract::{DefaultBodyLimit, Request, State};
use axum::http::{header, Method as HttpMethod, StatusCode, Uri};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::Router;
use serde::de::DeserializeOwned;
use serde_json::json;

use crate::error::{Error, Result};
use crate::stats::plot::write_svg;
use crate::stats::{report, ReportOptions};
pub use api::Fail;
pub use info::Info;
pub use pool::{Jobs, Local, Source};

/// The page, embedded in the binary.
const PAGE: &str = include_str!("page.html");

/// How the service runs.
#[derive(Clone, Debug)]
pub struct Options {
    /// Address to listen on (port 0: any free port).
    pub listen: SocketAddr,
    /// Query threads.
    pub threads: usize,
    /// Largest request body in bytes (larger: 413).
    pub max_request_bytes: usize,
    /// Requests waiting for a query thread at most (more: 503).
    pub queue: usize,
}

impl Options {
    /// Defaults: one query thread per core, 1 MiB requests, a queue of 1024.
    pub fn new(listen: SocketAddr) -> Options {
        Options {
            listen,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            max_request_bytes: 1 << 20,
            queue: 1024,
        }
    }
}

/// What the service did, when it stopped.
#[derive(Clone, Copy, Debug)]
pub struct Served {
    /// Requests answered (any status).
    pub requests: u64,
}

struct Shared {
    jobs: Jobs,
    /// The answer to `/info`, as JSON.
    info: String,
    figure: OnceLock<std::result::Result<Arc<Vec<u8>>, String>>,
    requests: AtomicU64,
}

type St = Arc<Shared>;

/// Serves `src` until `shutdown` resolves, then lets the requests under
/// way finish and returns. `path` is what `/info` names as the source;
/// `ready` is called with the bound address once requests are accepted.
/// `shutdown` is first polled inside the service's runtime, so it may
/// install tokio signal handlers there.
pub fn run(
    src: Source<'_>,
    path: &str,
    opts: &Options,
    ready: impl FnOnce(SocketAddr),
    shutdown: impl Future<Output = ()> + Send + 'static,
) -> Result<Served> {
    let io = |e: std::io::Error| Error::Io {
        path: format!("{}", opts.listen).into(),
        op: "serve",
        source: e,
    };
    let listener = std::net::TcpListener::bind(opts.listen).map_err(io)?;
    listener.set_nonblocking(true).map_err(io)?;
    let addr = listener.local_addr().map_err(io)?;
    let info = serde_json::to_string(&Info::of(src, path)).expect("/info serializes");
    pool::with_pool(src, opts.threads, opts.queue, |jobs| {
        let state = Arc::new(Shared {
            jobs,
            info,
            figure: OnceLock::new(),
            requests: AtomicU64::new(0),
        });
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .thread_name("quern-http")
            .enable_all()
            .build()
            .map_err(io)?;
        let app = router(state.clone(), opts.max_request_bytes);
        rt.block_on(async {
            let l = tokio::net::TcpListener::from_std(listener)?;
            ready(addr);
            axum::serve(l, app).with_graceful_shutdown(shutdown).await
        })
        .map_err(io)?;
        rt.shutdown_timeout(std::time::Duration::from_secs(5));
        Ok(Served {
            requests: state.requests.load(Ordering::Relaxed),
        })
    })
}

fn router(state: St, max_body: usize) -> Router {
    Router::new()
        .route("/", get(page))
        .route("/health", get(health))
        .route("/info", get(info))
        .route("/stats.svg", get(figure))
        .route("/prob", post(prob))
        .route("/next", post(next))
        .route("/score", post(score))
        .route("/ngrams", post(ngrams))
        .fallback(not_found)
        .method_not_allowed_fallback(not_allowed)
        .layer(DefaultBodyLimit::max(max_body))
        // Last, so that it wraps every route and both fallbacks.
        .layer(middleware::from_fn_with_state(state.clone(), counted))
        .with_state(state)
}

/// Counts every request, whatever answers it.
async fn counted(State(st): State<St>, request: Request, next: Next) -> Response {
    st.requests.fetch_add(1, Ordering::Relaxed);
    next.run(request).await
}

/// A JSON answer with `status`.
fn reply(status: u16, body: String) -> Response {
    let status = StatusCode::from_u16(status).unwrap_or(StatusCode::INTERNAL_SERVER_ERROR);
    (status, [(header::CONTENT_TYPE, "application/json")], body).into_response()
}

fn error(status: u16, message: &str) -> Response {
    reply(status, json!({ "error": message }).to_string())
}

async fn page() -> Response {
    ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], PAGE).into_response()
}

async fn health() -> Response {
    reply(200, json!({ "ok": true }).to_string())
}

async fn info(State(st): State<St>) -> Response {
    reply(200, st.info.clone())
}

async fn not_found(method: HttpMethod, uri: Uri) -> Response {
    error(404, &format!("no such endpoint: {method} {}", uri.path()))
}

async fn not_allowed(method: HttpMethod, uri: Uri) -> Response {
    error(
        405,
        &format!(
            "{} does not take {method} (GET /health, /info, /stats.svg; POST /prob, /next, /score, /ngrams)",
            uri.path()
        ),
    )
}

/// Runs `f` on a query thread and waits for its answer.
async fn on_pool<T: Send + 'static>(
    st: &Shared,
    f: impl FnOnce(&mut dyn Local) -> T + Send + 'static,
) -> std::result::Result<T, Response> {
    let (tx, rx) = tokio::sync::oneshot::channel();
    let job = Box::new(move |l: &mut dyn Local| {
        let _ = tx.send(f(l));
    });
    if let Err(why) = st.jobs.submit(job) {
        let msg = match why {
            pool::Refused::Busy => "too many requests are waiting: try again",
            pool::Refused::Stopped => "the service is stopping",
        };
        return Err(error(503, msg));
    }
    rx.await
        .map_err(|_| error(500, "the query failed (the server's log says why)"))
}

/// Parses a JSON body into `Q`, answers it with `f` on a query thread.
async fn answer<Q: DeserializeOwned + Send + 'static>(
    st: St,
    body: std::result::Result<Bytes, BytesRejection>,
    f: fn(&mut dyn Local, Q) -> api::Answer,
) -> Response {
    let bytes = match body {
        Ok(b) => b,
        Err(r) => {
            let msg = if r.status() == StatusCode::PAYLOAD_TOO_LARGE {
                "the request body is larger than the limit (--max-request-bytes)".to_string()
            } else {
                r.body_text()
            };
            return error(r.status().as_u16(), &msg);
        }
    };
    let q: Q = match serde_json::from_slice(&bytes) {
        Ok(q) => q,
        Err(e) => return error(400, &format!("bad request body: {e}")),
    };
    match on_pool(&st, move |l| f(l, q)).await {
        Ok(Ok(v)) => reply(200, v),
        Ok(Err(fail)) => error(fail.status, &fail.message),
        Err(resp) => resp,
    }
}

async fn prob(State(st): State<St>, body: std::result::Result<Bytes, BytesRejection>) -> Response {
    answer(st, body, api::prob).await
}

async fn next(State(st): State<St>, body: std::result::Result<Bytes, BytesRejection>) -> Response {
    answer(st, body, api::next).await
}

async fn score(State(st): State<St>, body: std::result::Result<Bytes, BytesRejection>) -> Response {
    answer(st, body, api::score).await
}

async fn ngrams(
    State(st): State<St>,
    body: std::result::Result<Bytes, BytesRejection>,
) -> Response {
    answer(st, body, api::ngrams).await
}

/// `GET /stats.svg`: the statistics figure of a store, drawn on first
/// request (on a query thread) and kept.
async fn figure(State(st): State<St>) -> Response {
    if st.figure.get().is_none() {
        let made = match on_pool(&st, draw_figure).await {
            Ok(r) => r,
            Err(resp) => return resp,
        };
        let _ = st.figure.set(made);
    }
    match st.figure.get().expect("set above") {
        Ok(svg) => (
            [(header::CONTENT_TYPE, "image/svg+xml")],
            svg.as_ref().clone(),
        )
            .into_response(),
        Err(msg) => error(404, msg),
    }
}

fn draw_figure(l: &mut dyn Local) -> std::result::Result<Arc<Vec<u8>>, String> {
    let Source::Store(store) = l.source() else {
        return Err(
            "a frozen model keeps no count-of-counts: the statistics figure \
                    needs a store (--store); /info gives the model's n-grams per order"
                .into(),
        );
    };
    let rep = report(store.meta(), &ReportOptions::default());
    let label = store
        .dir()
        .file_name()
        .map_or("store".into(), |n| n.to_string_lossy().into_owned());
    let mut svg = Vec::new();
    write_svg(
        &mut svg,
        std::path::Path::new("/stats.svg"),
        &[(label.as_str(), &rep)],
    )
    .map_err(|e| e.to_string())?;
    Ok(Arc::new(svg))
}
