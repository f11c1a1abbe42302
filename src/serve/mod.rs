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
//! | `GET /metrics` | counters and gauges in the Prometheus text format ([`metrics`]) |
//! | `POST /admin/reload` | opens the source again from its path, checks it and swaps it in: `{"reloaded": true, "generation", "path", "load_seconds"}`, or 500 and the error (the source before is kept) |
//!
//! A bad request (a body that is not JSON, a missing field, a wrong type,
//! an unknown field or method, a body over the size limit, more work than
//! a request may ask for, an unknown path) gets a 4xx status and
//! `{"error": "..."}`. With a token ([`Options::token`]), every request but
//! `GET /health` and `GET /` (the page, which asks for the token) needs
//! `Authorization: Bearer <token>`; without it or with another, 401. Every
//! answer carries an `x-request-id` header (the request's own, if it sent a
//! short one of letters, digits, `-`, `_` and `.`; else a new one), which
//! the access log names.
//!
//! # Limits
//!
//! A connection must send each request's head within the read timeout of
//! starting to wait for it (which also bounds how long a keep-alive
//! connection may sit idle), and its body within the read timeout of the
//! head; else it is closed (a late body gets 408). At most
//! [`Options::max_connections`] connections are open: another one is
//! answered 503 and closed at once. A `/score` request holds at most
//! [`request::Limits::max_texts`] texts (more: 413), a `/next` at most
//! [`request::MAX_TOP`] words, and any body at most
//! [`Options::max_request_bytes`] (more: 413).
//!
//! # How it runs
//!
//! The network side is axum's router on a small tokio runtime, each
//! connection served by hyper's HTTP/1 connection (for its head timeout)
//! from an accept loop that holds the connection cap; the queries run on a
//! pool of query threads ([`pool`]), each with its own estimators over the
//! one store (or the one shared model), fed through a bounded queue (full:
//! 503). [`run`] owns no part of the process: when the shutdown future its
//! caller gives resolves (the binary's resolves on SIGTERM or SIGINT), it
//! stops taking connections, lets the requests under way finish, joins the
//! query threads and returns. The statistics figure is drawn in memory.
//!
//! # Reloading
//!
//! [`Reloader::reload`] (the binary calls it on SIGHUP) and `POST
//! /admin/reload` call the opener [`run`] was given, which opens the
//! source again from its path and checks it (the binary's reads a model
//! whole and checks every checksum). If it opens, it is swapped in
//! ([`pool::Current`]): requests under way finish on the old source, new
//! ones get the new. If not, the old source goes on serving, the refusal is
//! written to standard error, `/info`'s `reload` says why and
//! `quern_reload_failing` is 1. One reload runs at a time.

pub mod api;
mod info;
pub mod metrics;
pub mod pool;
mod reload;
pub mod request;

use std::future::Future;
use std::io::Write as _;
use std::net::SocketAddr;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant, SystemTime};

use axum::body::{Body, Bytes, HttpBody};
use axum::extract::rejection::BytesRejection;
use axum::extract::{DefaultBodyLimit, Request, State};
use axum::http::{header, HeaderValue, Method as HttpMethod, StatusCode, Uri};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::Router;
use hyper_util::rt::{TokioIo, TokioTimer};
use hyper_util::service::TowerToHyperService;
use serde::Serialize;
use serde_json::json;

use crate::error::{Error, Result};
use crate::stats::plot::write_svg;
use crate::stats::{report, ReportOptions};
pub use api::Fail;
pub use info::Info;
use metrics::Metrics;
pub use pool::{Current, Jobs, Loaded, Local, Owned, Source};
pub use reload::{Opener, Reloader};
use reload::{Refusal, Reloads};
use request::{same_secret, Checked, Limits};

/// The page, embedded in the binary.
const PAGE: &str = include_str!("page.html");

/// The access log: one line per request on standard error.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum LogFormat {
    /// A JSON object a line.
    Json,
    /// `TIME ID METHOD PATH STATUS LATENCY BYTES`, space-separated.
    Text,
    /// No access log.
    Off,
}

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
    /// Time to send a request's head (from when the connection waits for
    /// it: this bounds idle keep-alive connections too) and, apart, its
    /// body.
    pub read_timeout: Duration,
    /// Connections open at most (more: 503 and closed).
    pub max_connections: usize,
    /// The work one request may ask for.
    pub limits: Limits,
    /// Requests but `/health` and the page need `Authorization: Bearer`
    /// with this token; `None`: no token asked (and no `/admin/reload`).
    pub token: Option<String>,
    /// The access log.
    pub log: LogFormat,
}

impl Options {
    /// Defaults: one query thread per core, 1 MiB requests, a queue of
    /// 1024, a read timeout of 5 s, 512 connections, 1,000 texts a
    /// `/score`, no token, no access log.
    pub fn new(listen: SocketAddr) -> Options {
        Options {
            listen,
            threads: std::thread::available_parallelism().map_or(1, |n| n.get()),
            max_request_bytes: 1 << 20,
            queue: 1024,
            read_timeout: Duration::from_secs(5),
            max_connections: 512,
            limits: Limits::default(),
            token: None,
            log: LogFormat::Off,
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
    current: Arc<Current>,
    reloads: Arc<Reloads>,
    metrics: Arc<Metrics>,
    opts: Options,
    /// The requests' ids: a prefix for this run, then a count.
    id_prefix: u32,
    next_id: AtomicU64,
}

type St = Arc<Shared>;

/// Serves `first` (generation 1) until `shutdown` resolves, then lets the requests under way finish and
/// returns. `open` opens the source again for a reload. `ready` is called
/// inside the service's runtime with the bound address and a [`Reloader`]
/// once requests are accepted. `shutdown` is first polled inside the
/// service's runtime, so it may install tokio signal handlers there.
pub fn run(
    first: Loaded,
    open: Opener,
    opts: &Options,
    ready: impl FnOnce(SocketAddr, Reloader),
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
    let current = Arc::new(Current::new(first));
    let metrics = Arc::new(Metrics::default());
    let reloads = Arc::new(Reloads::new(open, current.clone(), metrics.clone()));
    pool::with_pool(&current, opts.threads, opts.queue, |jobs| {
        let started = SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .unwrap_or_default();
        let state = Arc::new(Shared {
            jobs,
            current: current.clone(),
            reloads: reloads.clone(),
            metrics: metrics.clone(),
            opts: opts.clone(),
            id_prefix: (started.as_secs() as u32) ^ started.subsec_nanos().rotate_left(16),
            next_id: AtomicU64::new(0),
        });
        let rt = tokio::runtime::Builder::new_multi_thread()
            .worker_threads(2)
            .thread_name("quern-http")
            .enable_all()
            .build()
            .map_err(io)?;
        let app = router(state.clone(), opts.max_request_bytes);
        let reloader = Reloader::new(reloads.clone(), rt.handle().clone());
        rt.block_on(async {
            let l = tokio::net::TcpListener::from_std(listener)?;
            ready(addr, reloader);
            accept_loop(l, app, state.clone(), shutdown).await;
            Ok::<(), std::io::Error>(())
        })
        .map_err(io)?;
        rt.shutdown_timeout(Duration::from_secs(5));
        Ok(Served {
            requests: metrics.requests(),
        })
    })
}

/// The answer to a connection over the cap, written as it is accepted.
const BUSY: &[u8] = b"HTTP/1.1 503 Service Unavailable\r\ncontent-type: application/json\r\n\
connection: close\r\ncontent-length: 73\r\n\r\n\
{\"error\":\"too many connections are open (--max-connections): try again\"}";

/// Takes connections until `shutdown` resolves, at most
/// `max_connections` open at once, each served by hyper's HTTP/1
/// connection with the head timeout; then waits (30 s at most) for the
/// connections to finish the requests under way.
async fn accept_loop(
    l: tokio::net::TcpListener,
    app: Router,
    st: St,
    shutdown: impl Future<Output = ()> + Send + 'static,
) {
    let permits = Arc::new(tokio::sync::Semaphore::new(st.opts.max_connections.max(1)));
    let graceful = hyper_util::server::graceful::GracefulShutdown::new();
    let mut http = hyper::server::conn::http1::Builder::new();
    http.timer(TokioTimer::new())
        .header_read_timeout(st.opts.read_timeout)
        .keep_alive(true);
    tokio::pin!(shutdown);
    loop {
        let (stream, _) = tokio::select! {
            _ = &mut shutdown => break,
            r = l.accept() => match r {
                Ok(c) => c,
                Err(_) => {
                    // Out of file descriptors or a connection reset before
                    // it was taken: wait a little, never give up.
                    tokio::time::sleep(Duration::from_millis(20)).await;
                    continue;
                }
            },
        };
        let Ok(permit) = permits.clone().try_acquire_owned() else {
            st.metrics.refused.fetch_add(1, Ordering::Relaxed);
            // The socket's send buffer is empty: this write does not wait.
            let _ = stream.try_write(BUSY);
            continue;
        };
        let _ = stream.set_nodelay(true);
        st.metrics.accepted.fetch_add(1, Ordering::Relaxed);
        st.metrics.open.fetch_add(1, Ordering::Relaxed);
        let conn =
            http.serve_connection(TokioIo::new(stream), TowerToHyperService::new(app.clone()));
        let conn = graceful.watch(conn);
        let m = st.metrics.clone();
        tokio::spawn(async move {
            if let Err(e) = conn.await {
                if e.is_timeout() {
                    m.timed_out.fetch_add(1, Ordering::Relaxed);
                }
            }
            m.open.fetch_sub(1, Ordering::Relaxed);
            drop(permit);
        });
    }
    drop(l);
    let _ = tokio::time::timeout(Duration::from_secs(30), graceful.shutdown()).await;
}

fn router(state: St, max_body: usize) -> Router {
    Router::new()
        .route("/", get(page))
        .route("/health", get(health))
        .route("/info", get(info))
        .route("/metrics", get(metrics_text))
        .route("/stats.svg", get(figure))
        .route("/prob", post(prob))
        .route("/next", post(next))
        .route("/score", post(score))
        .route("/ngrams", post(ngrams))
        .route("/admin/reload", post(admin_reload))
        .fallback(not_found)
        .method_not_allowed_fallback(not_allowed)
        .layer(DefaultBodyLimit::max(max_body))
        .layer(middleware::from_fn_with_state(state.clone(), read_body))
        .layer(middleware::from_fn_with_state(state.clone(), guard))
        // Last, so that it wraps every route, both fallbacks and the
        // refusals of the layers above.
        .layer(middleware::from_fn_with_state(state.clone(), observe))
        .with_state(state)
}

/// A request id sent by the client that is short and plain enough to echo.
fn plain_id(v: &HeaderValue) -> Option<&str> {
    let s = v.to_str().ok()?;
    (!s.is_empty()
        && s.len() <= 64
        && s.bytes()
            .all(|b| b.is_ascii_alphanumeric() || matches!(b, b'-' | b'_' | b'.')))
    .then_some(s)
}

/// Counts, times and logs every request, whatever answers it, and echoes
/// its id in `x-request-id`.
async fn observe(State(st): State<St>, request: Request, next: Next) -> Response {
    let t0 = Instant::now();
    let at = SystemTime::now();
    let id = match request.headers().get("x-request-id").and_then(plain_id) {
        Some(s) => s.to_string(),
        None => format!(
            "{:08x}-{:06x}",
            st.id_prefix,
            st.next_id.fetch_add(1, Ordering::Relaxed)
        ),
    };
    let method = request.method().clone();
    let path = request.uri().path().to_string();
    let e = metrics::endpoint(&path);
    let mut resp = next.run(request).await;
    let took = t0.elapsed();
    let status = resp.status().as_u16();
    st.metrics.observe(e, status, took);
    if let Ok(v) = HeaderValue::from_str(&id) {
        resp.headers_mut().insert("x-request-id", v);
    }
    if st.opts.log != LogFormat::Off {
        let bytes = resp.body().size_hint().exact().unwrap_or(0);
        let ms = took.as_secs_f64() * 1e3;
        let time = metrics::rfc3339(at);
        let line = if st.opts.log == LogFormat::Json {
            json!({
                "time": time,
                "id": id,
                "method": method.as_str(),
                "endpoint": metrics::ENDPOINTS[e],
                "path": path,
                "status": status,
                "latency_ms": (ms * 1000.0).round() / 1000.0,
                "bytes": bytes,
            })
            .to_string()
        } else {
            format!("{time} {id} {method} {path:?} {status} {ms:.3}ms {bytes}B")
        };
        let mut err = std::io::stderr().lock();
        let _ = writeln!(err, "{line}");
    }
    resp
}

/// Asks for the token on every path but `/health` and the page.
async fn guard(State(st): State<St>, request: Request, next: Next) -> Response {
    let Some(token) = &st.opts.token else {
        return next.run(request).await;
    };
    let path = request.uri().path();
    if path == "/health" || (path == "/" && request.method() == HttpMethod::GET) {
        return next.run(request).await;
    }
    let given = request
        .headers()
        .get(header::AUTHORIZATION)
        .and_then(|v| v.as_bytes().strip_prefix(b"Bearer "));
    let msg = match given {
        Some(t) if same_secret(t, token.as_bytes()) => return next.run(request).await,
        Some(_) => "the token is not the service's (Authorization: Bearer <token>)",
        None => "this service needs a token: send Authorization: Bearer <token>",
    };
    let mut resp = error(401, msg);
    resp.headers_mut()
        .insert(header::WWW_AUTHENTICATE, HeaderValue::from_static("Bearer"));
    resp
}

/// Reads a request's body within the read timeout and the size limit,
/// so that the handlers see it whole.
async fn read_body(State(st): State<St>, request: Request, next: Next) -> Response {
    if request.method() != HttpMethod::POST {
        return next.run(request).await;
    }
    let limit = st.opts.max_request_bytes;
    let too_large = || {
        error(
            413,
            "the request body is larger than the limit (--max-request-bytes)",
        )
    };
    let declared = request
        .headers()
        .get(header::CONTENT_LENGTH)
        .and_then(|v| v.to_str().ok()?.parse::<u64>().ok());
    if declared.is_some_and(|n| n > limit as u64) {
        return closing(too_large());
    }
    let (parts, mut body) = request.into_parts();
    let collect = async {
        let mut buf = Vec::new();
        while let Some(frame) =
            std::future::poll_fn(|cx| std::pin::Pin::new(&mut body).poll_frame(cx)).await
        {
            let frame = frame.map_err(|e| error(400, &format!("reading the request body: {e}")))?;
            if let Ok(data) = frame.into_data() {
                if buf.len() + data.len() > limit {
                    return Err(too_large());
                }
                buf.extend_from_slice(&data);
            }
        }
        Ok(buf)
    };
    match tokio::time::timeout(st.opts.read_timeout, collect).await {
        Ok(Ok(buf)) => next.run(Request::from_parts(parts, Body::from(buf))).await,
        Ok(Err(resp)) => closing(resp),
        Err(_) => closing(error(
            408,
            &format!(
                "the request body did not arrive within {:.1} s (--read-timeout)",
                st.opts.read_timeout.as_secs_f64()
            ),
        )),
    }
}

/// `resp`, and the connection closes after it (its body was not read).
fn closing(mut resp: Response) -> Response {
    resp.headers_mut()
        .insert(header::CONNECTION, HeaderValue::from_static("close"));
    resp
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

/// `/info`: what is served, and the state of reloads.
#[derive(Serialize)]
struct InfoAnswer<'a> {
    #[serde(flatten)]
    info: &'a Info,
    reload: ReloadState,
}

/// `/info`'s `reload`.
#[derive(Serialize)]
struct ReloadState {
    /// 1 for the source the service started with, one more at each reload.
    generation: u64,
    /// When the source served was opened.
    loaded_at: String,
    /// How long opening and checking it took.
    load_seconds: f64,
    /// The last reload, if it was refused.
    refused: Option<Refusal>,
}

async fn info(State(st): State<St>) -> Response {
    let now = st.current.get();
    let a = InfoAnswer {
        info: &now.info,
        reload: ReloadState {
            generation: now.generation,
            loaded_at: metrics::rfc3339(now.loaded_at),
            load_seconds: now.load_seconds,
            refused: st.reloads.refused(),
        },
    };
    match serde_json::to_string(&a) {
        Ok(t) => reply(200, t),
        Err(e) => error(500, &e.to_string()),
    }
}

async fn metrics_text(State(st): State<St>) -> Response {
    let now = st.current.get();
    let g = metrics::Gauges {
        loaded: &now,
        reload_failing: st.reloads.refused().is_some(),
        queue_waiting: st.jobs.waiting(),
        queue_capacity: st.opts.queue,
        threads: st.opts.threads,
        max_connections: st.opts.max_connections,
    };
    (
        [(
            header::CONTENT_TYPE,
            "text/plain; version=0.0.4; charset=utf-8",
        )],
        metrics::render(&st.metrics, &g),
    )
        .into_response()
}

/// `POST /admin/reload`: reloads now and answers how it went.
async fn admin_reload(State(st): State<St>) -> Response {
    if st.opts.token.is_none() {
        return error(
            403,
            "reloading over HTTP needs a token (--token-file); SIGHUP reloads",
        );
    }
    let r = st.reloads.clone();
    match tokio::task::spawn_blocking(move || r.reload("POST /admin/reload")).await {
        Ok(Ok(now)) => reply(
            200,
            json!({
                "reloaded": true,
                "generation": now.generation,
                "path": now.path,
                "load_seconds": now.load_seconds,
            })
            .to_string(),
        ),
        Ok(Err(msg)) => error(500, &msg),
        Err(_) => error(500, "the reload failed (the server's log says why)"),
    }
}

async fn not_found(method: HttpMethod, uri: Uri) -> Response {
    error(404, &format!("no such endpoint: {method} {}", uri.path()))
}

async fn not_allowed(method: HttpMethod, uri: Uri) -> Response {
    error(
        405,
        &format!(
            "{} does not take {method} (GET /health, /info, /metrics, /stats.svg; POST /prob, /next, /score, /ngrams, /admin/reload)",
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

/// Parses and checks a JSON body into `Q`, answers it with `f` on a query
/// thread.
async fn answer<Q: Checked + Send + 'static>(
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
    let q: Q = match request::parse(&bytes, &st.opts.limits) {
        Ok(q) => q,
        Err(fail) => return error(fail.status, &fail.message),
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
/// request (on a query thread) and kept with the source.
async fn figure(State(st): State<St>) -> Response {
    let made = on_pool(&st, |l| {
        l.loaded()
            .figure
            .get_or_init(|| draw_figure(l.source()))
            .clone()
    })
    .await;
    match made {
        Err(resp) => resp,
        Ok(made) => match made {
            Ok(svg) => (
                [(header::CONTENT_TYPE, "image/svg+xml")],
                svg.as_ref().clone(),
            )
                .into_response(),
            Err(msg) => error(404, &msg),
        },
    }
}

fn draw_figure(src: Source<'_>) -> std::result::Result<Arc<Vec<u8>>, String> {
    let Source::Store(store) = src else {
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
