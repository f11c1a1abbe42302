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
//! 503). SIGTERM or SIGINT stops taking connections, lets the requests under
//! way finish, joins the query threads and returns.

pub mod api;
pub mod pool;

use std::net::SocketAddr;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, OnceLock};

use axum::body::Bytes;
use axum::extract::rejection::BytesRejection;
use axum::extract::{DefaultBodyLimit, State};
use axum::http::{header, Method as HttpMethod, StatusCode, Uri};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::Router;
use serde::de::DeserializeOwned;
use serde_json::{json, Value};

use crate::error::{Error, Result};
use crate::stats::plot::write_figure;
use crate::stats::{report, ReportOptions};
pub use api::Fail;
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
    info: Value,
    figure: OnceLock<std::result::Result<Arc<Vec<u8>>, String>>,
    requests: AtomicU64,
}

type St = Arc<Shared>;

/// Serves `src` until SIGTERM or SIGINT. `path` is what `/info` names as
/// the source; `ready` is called with the bound address once requests are
/// accepted.
pub fn run(
    src: Source<'_>,
    path: &str,
    opts: &Options,
    ready: impl FnOnce(SocketAddr),
) -> Result<Served> {
    let io = |e: std::io::Error| Error::Io {
        path: format!("{}", opts.listen).into(),
        op: "serve",
        source: e,
    };
    let listener = std::net::TcpListener::bind(opts.listen).map_err(io)?;
    listener.set_nonblocking(true).map_err(io)?;
    let addr = listener.local_addr().map_err(io)?;
    let info = api::info(src, path);
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
            axum::serve(l, app).with_graceful_shutdown(stopped()).await
        })
        .map_err(io)?;
        rt.shutdown_timeout(std::time::Duration::from_secs(5));
        Ok(Served {
            requests: state.requests.load(Ordering::Relaxed),
        })
    })
}

/// Resolves on SIGTERM or SIGINT.
async fn stopped() {
    let mut term = tokio::signal::unix::signal(tokio::signal::unix::SignalKind::terminate())
        .expect("installing the SIGTERM handler");
    tokio::select! {
        _ = term.recv() => {}
        _ = tokio::signal::ctrl_c() => {}
    }
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
        .with_state(state)
}

/// A JSON answer with `status`.
fn reply(st: &Shared, status: u16, body: String) -> Response {
    st.requests.fetch_add(1, Ordering::Relaxed);
    let status = StatusCode::from_u16(status).unwrap_or(StatusCode::INTERNAL_SERVER_ERROR);
    (status, [(header::CONTENT_TYPE, "application/json")], body).into_response()
}

fn error(st: &Shared, status: u16, message: &str) -> Response {
    reply(st, status, json!({ "error": message }).to_string())
}

async fn page(State(st): State<St>) -> Response {
    st.requests.fetch_add(1, Ordering::Relaxed);
    ([(header::CONTENT_TYPE, "text/html; charset=utf-8")], PAGE).into_response()
}

async fn health(State(st): State<St>) -> Response {
    reply(&st, 200, json!({ "ok": true }).to_string())
}

async fn info(State(st): State<St>) -> Response {
    reply(&st, 200, st.info.to_string())
}

async fn not_found(State(st): State<St>, method: HttpMethod, uri: Uri) -> Response {
    error(
        &st,
        404,
        &format!("no such endpoint: {method} {}", uri.path()),
    )
}

async fn not_allowed(State(st): State<St>, method: HttpMethod, uri: Uri) -> Response {
    error(
        &st,
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
        return Err(error(st, 503, msg));
    }
    rx.await
        .map_err(|_| error(st, 500, "the query failed (the server's log says why)"))
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
            return error(&st, r.status().as_u16(), &msg);
        }
    };
    let q: Q = match serde_json::from_slice(&bytes) {
        Ok(q) => q,
        Err(e) => return error(&st, 400, &format!("bad request body: {e}")),
    };
    match on_pool(&st, move |l| f(l, q)).await {
        Ok(Ok(v)) => reply(&st, 200, v),
        Ok(Err(fail)) => error(&st, fail.status, &fail.message),
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
        Ok(svg) => {
            st.requests.fetch_add(1, Ordering::Relaxed);
            (
                [(header::CONTENT_TYPE, "image/svg+xml")],
                svg.as_ref().clone(),
            )
                .into_response()
        }
        Err(msg) => error(&st, 404, msg),
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
    static SEQ: AtomicU64 = AtomicU64::new(0);
    let path = std::env::temp_dir().join(format!(
        "quern-serve-{}-{}.svg",
        std::process::id(),
        SEQ.fetch_add(1, Ordering::Relaxed)
    ));
    let out = write_figure(&path, &[(label.as_str(), &rep)])
        .map_err(|e| e.to_string())
        .and_then(|()| std::fs::read(&path).map_err(|e| format!("{}: {e}", path.display())));
    let _ = std::fs::remove_file(&path);
    out.map(Arc::new)
}
