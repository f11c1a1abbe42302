//! `GET /metrics`: what the service has done, in the Prometheus text
//! exposition format (version 0.0.4: `# HELP` and `# TYPE` lines, then one
//! sample a line, label values escaped), and the access log's line.
//!
//! Requests are counted by endpoint and status; their latency (from the
//! request's head, read, to the answer's head) goes into one histogram per
//! endpoint with the buckets of [`BUCKETS`]. Any path that is not an
//! endpoint counts as `other`, so that a scan of random paths cannot grow
//! the label set.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use super::pool::Loaded;

/// The endpoints, as the `endpoint` label names them; the last one is
/// every other path.
pub const ENDPOINTS: [&str; 11] = [
    "/",
    "/health",
    "/info",
    "/stats.svg",
    "/prob",
    "/next",
    "/score",
    "/ngrams",
    "/metrics",
    "/admin/reload",
    "other",
];

/// The upper bounds of the latency histogram's buckets, in seconds.
pub const BUCKETS: [f64; 14] = [
    0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0,
];

/// The index of `path` in [`ENDPOINTS`].
pub fn endpoint(path: &str) -> usize {
    ENDPOINTS[..ENDPOINTS.len() - 1]
        .iter()
        .position(|&e| e == path)
        .unwrap_or(ENDPOINTS.len() - 1)
}

#[derive(Default)]
struct Histogram {
    /// Observations at or under each bound of [`BUCKETS`] (not cumulative).
    buckets: [AtomicU64; BUCKETS.len()],
    count: AtomicU64,
    nanos: AtomicU64,
}

/// The service's counters.
#[derive(Default)]
pub struct Metrics {
    statuses: Mutex<BTreeMap<(usize, u16), u64>>,
    latency: [Histogram; ENDPOINTS.len()],
    /// Connections open now.
    pub open: AtomicU64,
    /// Connections taken.
    pub accepted: AtomicU64,
    /// Connections refused (over `--max-connections`).
    pub refused: AtomicU64,
    /// Connections closed because a request's head did not arrive in time.
    pub timed_out: AtomicU64,
    /// Reloads that swapped in a new source.
    pub reloads: AtomicU64,
    /// Reloads refused (the new source did not open or check).
    pub reloads_refused: AtomicU64,
}

impl Metrics {
    /// Counts one request to endpoint `e` answered `status` after `took`.
    pub fn observe(&self, e: usize, status: u16, took: Duration) {
        *self
            .statuses
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .entry((e, status))
            .or_default() += 1;
        let h = &self.latency[e];
        let s = took.as_secs_f64();
        if let Some(b) = BUCKETS.iter().position(|&b| s <= b) {
            h.buckets[b].fetch_add(1, Ordering::Relaxed);
        }
        h.count.fetch_add(1, Ordering::Relaxed);
        h.nanos.fetch_add(
            took.as_nanos().min(u64::MAX as u128) as u64,
            Ordering::Relaxed,
        );
    }

    /// Requests answered, of every endpoint and status.
    pub fn requests(&self) -> u64 {
        self.statuses
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .values()
            .sum()
    }
}

/// What `/metrics` reports beside the counters.
pub struct Gauges<'a> {
    /// The source served now.
    pub loaded: &'a Loaded,
    /// The last reload was refused (and the source before it kept).
    pub reload_failing: bool,
    /// Jobs waiting for a query thread.
    pub queue_waiting: usize,
    /// Room in the queue.
    pub queue_capacity: usize,
    /// Query threads.
    pub threads: usize,
    /// `--max-connections`.
    pub max_connections: usize,
}

/// A label value, escaped as the format asks (`\\`, `\"`, `\n`).
fn label(v: &str) -> String {
    v.replace('\\', "\\\\")
        .replace('"', "\\\"")
        .replace('\n', "\\n")
}

fn head(out: &mut String, name: &str, kind: &str, help: &str) {
    let _ = writeln!(out, "# HELP {name} {help}");
    let _ = writeln!(out, "# TYPE {name} {kind}");
}

/// Seconds since the Unix epoch.
pub fn unix_seconds(t: SystemTime) -> f64 {
    t.duration_since(UNIX_EPOCH)
        .map_or(0.0, |d| d.as_secs_f64())
}

/// The answer of `/metrics`.
pub fn render(m: &Metrics, g: &Gauges<'_>) -> String {
    let mut out = String::new();
    head(
        &mut out,
        "quern_requests_total",
        "counter",
        "Requests answered, by endpoint and status.",
    );
    for (&(e, status), n) in m.statuses.lock().unwrap_or_else(|p| p.into_inner()).iter() {
        let _ = writeln!(
            out,
            "quern_requests_total{{endpoint=\"{}\",status=\"{status}\"}} {n}",
            ENDPOINTS[e]
        );
    }
    head(
        &mut out,
        "quern_request_duration_seconds",
        "histogram",
        "Time from a request's head to its answer, by endpoint.",
    );
    for (e, h) in m.latency.iter().enumerate() {
        let count = h.count.load(Ordering::Relaxed);
        if count == 0 {
            continue;
        }
        let name = ENDPOINTS[e];
        let mut cum = 0;
        for (b, n) in BUCKETS.iter().zip(&h.buckets) {
            cum += n.load(Ordering::Relaxed);
            let _ = writeln!(
                out,
                "quern_request_duration_seconds_bucket{{endpoint=\"{name}\",le=\"{b}\"}} {cum}"
            );
        }
        let _ = writeln!(
            out,
            "quern_request_duration_seconds_bucket{{endpoint=\"{name}\",le=\"+Inf\"}} {count}"
        );
        let _ = writeln!(
            out,
            "quern_request_duration_seconds_sum{{endpoint=\"{name}\"}} {}",
            h.nanos.load(Ordering::Relaxed) as f64 / 1e9
        );
        let _ = writeln!(
            out,
            "quern_request_duration_seconds_count{{endpoint=\"{name}\"}} {count}"
        );
    }
    let gauges: [(&str, &str, &str, f64); 12] = [
        (
            "quern_connections_open",
            "gauge",
            "Connections open now.",
            m.open.load(Ordering::Relaxed) as f64,
        ),
        (
            "quern_connections_max",
            "gauge",
            "Connections open at most (--max-connections).",
            g.max_connections as f64,
        ),
        (
            "quern_connections_accepted_total",
            "counter",
            "Connections taken.",
            m.accepted.load(Ordering::Relaxed) as f64,
        ),
        (
            "quern_connections_refused_total",
            "counter",
            "Connections refused with a 503 because --max-connections were open.",
            m.refused.load(Ordering::Relaxed) as f64,
        ),
        (
            "quern_connections_timed_out_total",
            "counter",
            "Connections closed because a request's head did not arrive within --read-timeout.",
            m.timed_out.load(Ordering::Relaxed) as f64,
        ),
        (
            "quern_queue_waiting",
            "gauge",
            "Queries waiting for a query thread.",
            g.queue_waiting as f64,
        ),
        (
            "quern_queue_capacity",
            "gauge",
            "Queries that may wait (more: 503).",
            g.queue_capacity as f64,
        ),
        (
            "quern_query_threads",
            "gauge",
            "Query threads.",
            g.threads as f64,
        ),
        (
            "quern_source_loaded_timestamp_seconds",
            "gauge",
            "When the source served was opened (Unix time).",
            unix_seconds(g.loaded.loaded_at),
        ),
        (
            "quern_source_load_seconds",
            "gauge",
            "How long opening and checking the source served took.",
            g.loaded.load_seconds,
        ),
        (
            "quern_source_generation",
            "gauge",
            "1 for the source the service started with, one more at each reload.",
            g.loaded.generation as f64,
        ),
        (
            "quern_reload_failing",
            "gauge",
            "1 if the last reload was refused (the source before it is still served).",
            if g.reload_failing { 1.0 } else { 0.0 },
        ),
    ];
    for (name, kind, help, v) in gauges {
        head(&mut out, name, kind, help);
        let _ = writeln!(out, "{name} {v}");
    }
    head(
        &mut out,
        "quern_reloads_total",
        "counter",
        "Reloads, by result: ok (swapped in) or refused (the source before kept).",
    );
    let _ = writeln!(
        out,
        "quern_reloads_total{{result=\"ok\"}} {}",
        m.reloads.load(Ordering::Relaxed)
    );
    let _ = writeln!(
        out,
        "quern_reloads_total{{result=\"refused\"}} {}",
        m.reloads_refused.load(Ordering::Relaxed)
    );
    head(
        &mut out,
        "quern_source_info",
        "gauge",
        "What is served: its kind, path, method and order (value 1).",
    );
    let (kind, method, order) = match &g.loaded.info {
        super::Info::Store(s) => ("store", s.method, s.order),
        super::Info::Model(m) => ("model", m.method, m.order),
        super::Info::Blend(b) => ("blend", b.method, b.order),
    };
    let _ = writeln!(
        out,
        "quern_source_info{{kind=\"{kind}\",path=\"{}\",method=\"{method}\",order=\"{order}\",generation=\"{}\"}} 1",
        label(&g.loaded.path),
        g.loaded.generation
    );
    out
}

/// `t` as RFC 3339 in UTC with milliseconds (`2026-01-31T08:05:09.123Z`).
/// The civil date from the day count is the algorithm of H. Hinnant's
/// "chrono-Compatible Low-Level Date Algorithms" (`civil_from_days`).
pub fn rfc3339(t: SystemTime) -> String {
    let d = t.duration_since(UNIX_EPOCH).unwrap_or_default();
    let secs = d.as_secs();
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let z = days as i64 + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    format!(
        "{year:04}-{month:02}-{day:02}T{:02}:{:02}:{:02}.{:03}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60,
        d.subsec_millis()
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rfc3339_matches_known_instants() {
        // Check values: `date -u -d @SECONDS +%Y-%m-%dT%H:%M:%S` (GNU
        // coreutils) for each count of seconds.
        for (secs, want) in [
            (0u64, "1970-01-01T00:00:00.000Z"),
            (951_782_400, "2000-02-29T00:00:00.000Z"),
            (1_234_567_890, "2009-02-13T23:31:30.000Z"),
            (4_107_542_399, "2100-02-28T23:59:59.000Z"),
        ] {
            let t = UNIX_EPOCH + Duration::from_secs(secs);
            assert_eq!(rfc3339(t), want, "{secs}");
        }
        let t = UNIX_EPOCH + Duration::from_millis(1_234_567_890_042);
        assert_eq!(rfc3339(t), "2009-02-13T23:31:30.042Z");
    }

    #[test]
    fn unknown_paths_share_one_label() {
        assert_eq!(ENDPOINTS[endpoint("/prob")], "/prob");
        assert_eq!(ENDPOINTS[endpoint("/prob/x")], "other");
        assert_eq!(ENDPOINTS[endpoint("/")], "/");
    }
}
