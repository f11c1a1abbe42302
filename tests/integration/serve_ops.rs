//! `quern serve` as an operator runs it: the token (RFC 6750's bearer
//! scheme: `Authorization: Bearer <token>`, 401 without it), `/metrics`
//! read by the Prometheus project's own parser of its text format
//! (`prometheus_client.parser`, from PyPI, pinned in scripts/setup) with
//! counters equal to the requests sent, the access log a line per request
//! with the id echoed in `x-request-id`, and reloads (SIGHUP and `POST
//! /admin/reload`) under load: every answer is the old model's or the new
//! one's as `quern prob --json` gives it, and a damaged file is refused
//! while the model before it keeps serving.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::{Duration, Instant};

use serde_json::{json, Value};

use crate::common::{python3, run, run_ok, run_with_stdin};
use crate::serve::{fixture, parse, prob_queries, Conn, Server};

const TOKEN: &str = "s3cret-token_42";

fn work_dir(name: &str) -> PathBuf {
    let d = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(name);
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn token_file(dir: &Path) -> PathBuf {
    let f = dir.join("token");
    std::fs::write(&f, format!("{TOKEN}\n")).unwrap();
    f
}

fn bearer() -> String {
    format!("Authorization: Bearer {TOKEN}")
}

/// One request on a new connection with extra headers.
fn call(
    srv: &Server,
    method: &str,
    path: &str,
    headers: &[&str],
    body: Option<&str>,
) -> (u16, Vec<(String, String)>, String) {
    Conn::open(&srv.addr).call_with(method, path, headers, body.map(str::as_bytes))
}

#[test]
fn the_token_is_asked_for_everywhere_but_health_and_the_page() {
    let dir = work_dir("serve-token");
    let (_, model) = fixture();
    let tf = token_file(&dir);
    let srv = Server::start(&[
        "--model",
        model.to_str().unwrap(),
        "--token-file",
        tf.to_str().unwrap(),
    ]);
    let auth = bearer();
    let body = r#"{"context": "I am", "word": "not"}"#;
    // Missing, wrong (same length, one byte off; and a prefix), right.
    for (headers, want) in [
        (vec![], 401),
        (vec!["Authorization: Bearer s3cret-token_43"], 401),
        (vec!["Authorization: Bearer s3cret"], 401),
        (vec!["Authorization: Basic czNjcmV0"], 401),
        (vec![auth.as_str()], 200),
    ] {
        let (st, h, text) = call(&srv, "POST", "/prob", &headers, Some(body));
        assert_eq!(st, want, "{headers:?}: {text}");
        if want == 401 {
            assert!(
                parse(&text)["error"].as_str().unwrap().contains("token"),
                "{text}"
            );
            assert!(
                h.iter()
                    .any(|(k, v)| k == "www-authenticate" && v == "Bearer"),
                "{h:?}"
            );
        } else {
            assert_eq!(parse(&text)["words"], "I am not");
        }
    }
    for path in ["/info", "/metrics", "/stats.svg"] {
        assert_eq!(call(&srv, "GET", path, &[], None).0, 401, "{path}");
    }
    assert_eq!(call(&srv, "POST", "/admin/reload", &[], None).0, 401);
    // Open: /health for load balancers, and the page (which asks for the
    // token itself).
    let (st, _, text) = call(&srv, "GET", "/health", &[], None);
    assert_eq!((st, parse(&text)), (200, json!({"ok": true})));
    let (st, _, text) = call(&srv, "GET", "/", &[], None);
    assert_eq!(st, 200);
    assert!(text.contains("<html"), "{text:.80}");
}

#[test]
fn no_token_beyond_loopback_is_refused_at_start() {
    let (_, model) = fixture();
    let m = model.to_str().unwrap();
    let r = run(&["serve", "--model", m, "--listen", "0.0.0.0:0"]);
    assert!(!r.status.success(), "{}", r.stderr);
    assert!(r.stderr.contains("--token-file"), "{}", r.stderr);
    assert!(!r.stderr.contains("serving"), "{}", r.stderr);
    // An empty token file is refused too.
    let dir = work_dir("serve-token-empty");
    let f = dir.join("token");
    std::fs::write(&f, "\n").unwrap();
    let r = run(&[
        "serve",
        "--model",
        m,
        "--listen",
        "0.0.0.0:0",
        "--token-file",
        f.to_str().unwrap(),
    ]);
    assert!(!r.status.success(), "{}", r.stderr);
    assert!(r.stderr.contains("holds no token"), "{}", r.stderr);
    // --no-token starts, with a warning.
    let mut child = std::process::Command::new(crate::common::bin())
        .args(["serve", "--model", m, "--listen", "0.0.0.0:0", "--no-token"])
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut err = std::io::BufReader::new(child.stderr.take().unwrap());
    let mut seen = String::new();
    for _ in 0..2 {
        std::io::BufRead::read_line(&mut err, &mut seen).unwrap();
    }
    let _ = child.kill();
    let _ = child.wait();
    assert!(seen.contains("serving"), "{seen}");
    assert!(seen.contains("WARNING: no token"), "{seen}");
}

/// `/metrics` parsed by prometheus_client: the samples as
/// `name{label=value,...}` (labels sorted) → value.
fn parse_metrics(text: &str) -> BTreeMap<String, f64> {
    let script = r#"
import json, sys
from prometheus_client.parser import text_string_to_metric_families
out = {}
for fam in text_string_to_metric_families(sys.stdin.read()):
    for s in fam.samples:
        labels = ",".join(f"{k}={v}" for k, v in sorted(s.labels.items()))
        out[f"{s.name}{{{labels}}}"] = s.value
print(json.dumps(out))
"#;
    let mut child = std::process::Command::new(python3())
        .args(["-c", script])
        .stdin(std::process::Stdio::piped())
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    use std::io::Write;
    child
        .stdin
        .take()
        .unwrap()
        .write_all(text.as_bytes())
        .unwrap();
    let out = child.wait_with_output().unwrap();
    assert!(
        out.status.success(),
        "prometheus_client could not parse /metrics (run scripts/setup): {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).unwrap()
}

#[test]
fn metrics_count_the_requests_and_the_log_names_each() {
    let dir = work_dir("serve-metrics");
    let (_, model) = fixture();
    let tf = token_file(&dir);
    let srv = Server::start(&[
        "--model",
        model.to_str().unwrap(),
        "--token-file",
        tf.to_str().unwrap(),
        "--log",
        "json",
    ]);
    let auth = bearer();
    let mut ids = Vec::new();
    let mut send = |method: &str, path: &str, headers: &[&str], body: Option<&str>, want: u16| {
        let (st, h, text) = call(&srv, method, path, headers, body);
        assert_eq!(st, want, "{method} {path}: {text}");
        let id = h
            .iter()
            .find(|(k, _)| k == "x-request-id")
            .unwrap_or_else(|| panic!("no x-request-id: {h:?}"))
            .1
            .clone();
        ids.push((id, path.to_string(), st));
    };
    let good = r#"{"context": "I am", "word": "not"}"#;
    for _ in 0..5 {
        send("POST", "/prob", &[&auth], Some(good), 200);
    }
    send("POST", "/prob", &[&auth], Some("{not json"), 400);
    send("POST", "/prob", &[&auth], Some(r#"{"word": "a b"}"#), 400);
    for _ in 0..3 {
        send("GET", "/health", &[], None, 200);
    }
    send("GET", "/info", &[], None, 401);
    send(
        "POST",
        "/next",
        &[&auth, "x-request-id: my-id.7"],
        Some(r#"{"context": "I am"}"#),
        200,
    );
    send("GET", "/nowhere", &[&auth], None, 404);
    assert_eq!(ids.last().unwrap().0.len(), 15, "{ids:?}");
    assert_eq!(ids[ids.len() - 2].0, "my-id.7", "the client's id is echoed");
    let (st, _, text) = call(&srv, "GET", "/metrics", &[&auth], None);
    assert_eq!(st, 200);
    let m = parse_metrics(&text);
    let get = |k: &str| *m.get(k).unwrap_or_else(|| panic!("no {k} in {m:?}"));
    let req = |e: &str, s: u16| get(&format!("quern_requests_total{{endpoint={e},status={s}}}"));
    assert_eq!(req("/prob", 200), 5.0);
    assert_eq!(req("/prob", 400), 2.0);
    assert_eq!(req("/health", 200), 3.0);
    assert_eq!(req("/info", 401), 1.0);
    assert_eq!(req("/next", 200), 1.0);
    assert_eq!(req("other", 404), 1.0);
    let total: f64 = m
        .iter()
        .filter(|(k, _)| k.starts_with("quern_requests_total{"))
        .map(|(_, v)| v)
        .sum();
    assert_eq!(total, ids.len() as f64);
    // The histogram counts the same requests; its +Inf bucket is its count.
    assert_eq!(
        get("quern_request_duration_seconds_count{endpoint=/prob}"),
        7.0
    );
    assert_eq!(
        get("quern_request_duration_seconds_bucket{endpoint=/prob,le=+Inf}"),
        7.0
    );
    assert!(get("quern_request_duration_seconds_sum{endpoint=/prob}") > 0.0);
    // The /metrics request's own connection at least (the ones before may
    // not be seen closed yet).
    assert!(get("quern_connections_open{}") >= 1.0);
    assert_eq!(
        get("quern_connections_accepted_total{}"),
        ids.len() as f64 + 1.0
    );
    assert_eq!(get("quern_queue_waiting{}"), 0.0);
    assert_eq!(get("quern_source_generation{}"), 1.0);
    assert_eq!(get("quern_reload_failing{}"), 0.0);
    let info_key = m
        .keys()
        .find(|k| k.starts_with("quern_source_info{"))
        .expect("quern_source_info");
    assert!(
        info_key.contains(&format!("path={}", model.display())),
        "{info_key}"
    );
    assert!(info_key.contains("kind=model"), "{info_key}");
    // One JSON line per request, with the id of its answer.
    std::thread::sleep(Duration::from_millis(200));
    let err = srv.stderr();
    let lines: Vec<Value> = err
        .lines()
        .filter(|l| l.starts_with('{'))
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("{e}: {l}")))
        .collect();
    assert_eq!(lines.len(), ids.len() + 1, "{err}");
    for (line, (id, path, st)) in lines.iter().zip(&ids) {
        assert_eq!(line["id"], json!(id), "{line}");
        assert_eq!(line["path"], json!(path), "{line}");
        assert_eq!(line["status"], json!(st), "{line}");
        assert!(line["latency_ms"].as_f64().unwrap() >= 0.0, "{line}");
        assert!(line["bytes"].as_u64().unwrap() > 0, "{line}");
        assert!(line["time"].as_str().unwrap().ends_with('Z'), "{line}");
    }
}

/// `quern prob --json` over `model` for `qs`: one answer per query.
fn cli_answers(model: &Path, qs: &[(String, String)]) -> Vec<Value> {
    let input: String = qs.iter().map(|(c, w)| format!("{c} {w}\n")).collect();
    let r = run_with_stdin(
        &["prob", "--json", "--model", model.to_str().unwrap()],
        input.as_bytes(),
    );
    r.assert_success();
    r.stdout
        .lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .collect()
}

/// Puts `from`'s bytes at `to` by a rename (the served map keeps the old
/// file's bytes).
fn replace(from: &Path, to: &Path) {
    let tmp = to.with_extension("new");
    std::fs::copy(from, &tmp).unwrap();
    std::fs::rename(&tmp, to).unwrap();
}

#[test]
fn reload_under_load_swaps_the_model_and_refuses_a_damaged_one() {
    let dir = work_dir("serve-reload");
    let (store, model_a) = fixture();
    let model_b = dir.join("kn.qm");
    run_ok(&[
        "freeze",
        "--store",
        store.to_str().unwrap(),
        "--method",
        "kn",
        "--out",
        model_b.to_str().unwrap(),
    ]);
    let served = dir.join("served.qm");
    replace(model_a, &served);
    let qs = prob_queries();
    let (want_a, want_b) = (cli_answers(model_a, &qs), cli_answers(&model_b, &qs));
    assert!(
        want_a.iter().zip(&want_b).any(|(a, b)| a != b),
        "the two models must differ for the test to tell them apart"
    );
    let tf = token_file(&dir);
    let srv = Arc::new(Server::start(&[
        "--model",
        served.to_str().unwrap(),
        "--token-file",
        tf.to_str().unwrap(),
        "--log",
        "off",
    ]));
    let bodies: Vec<String> = qs
        .iter()
        .map(|(c, w)| json!({"context": c, "word": w}).to_string())
        .collect();
    let stop = Arc::new(AtomicBool::new(false));
    let (from_a, from_b) = (Arc::new(AtomicUsize::new(0)), Arc::new(AtomicUsize::new(0)));
    let shared = Arc::new((bodies, want_a.clone(), want_b.clone()));
    let clients: Vec<_> = (0..4)
        .map(|k| {
            let (srv, stop, shared) = (srv.clone(), stop.clone(), shared.clone());
            let (from_a, from_b) = (from_a.clone(), from_b.clone());
            std::thread::spawn(move || {
                let mut c = Conn::open(&srv.addr);
                let auth = bearer();
                let mut i = k;
                while !stop.load(Ordering::Relaxed) {
                    let q = i % shared.0.len();
                    let (st, _, text) =
                        c.call_with("POST", "/prob", &[&auth], Some(shared.0[q].as_bytes()));
                    assert_eq!(st, 200, "{text}");
                    let got = parse(&text);
                    if got == shared.1[q] {
                        from_a.fetch_add(1, Ordering::Relaxed);
                    } else if got == shared.2[q] {
                        from_b.fetch_add(1, Ordering::Relaxed);
                    } else {
                        panic!(
                            "{got} is neither model's answer ({} or {})",
                            shared.1[q], shared.2[q]
                        );
                    }
                    i += 1;
                }
            })
        })
        .collect();
    let auth = bearer();
    std::thread::sleep(Duration::from_millis(300));
    // SIGHUP to model B.
    replace(&model_b, &served);
    srv.signal(libc::SIGHUP);
    let t = Instant::now();
    loop {
        let (_, _, text) = call(&srv, "GET", "/info", &[&auth], None);
        if parse(&text)["reload"]["generation"] == 2 {
            break;
        }
        assert!(
            t.elapsed() < Duration::from_secs(20),
            "no reload after SIGHUP: {}",
            srv.stderr()
        );
        std::thread::sleep(Duration::from_millis(50));
    }
    let b_before = from_b.load(Ordering::Relaxed);
    std::thread::sleep(Duration::from_millis(300));
    assert!(
        from_b.load(Ordering::Relaxed) > b_before,
        "no answer from the new model"
    );
    // A damaged file: refused, and model B keeps serving.
    let mut bytes = std::fs::read(&model_b).unwrap();
    let mid = bytes.len() / 2;
    for b in &mut bytes[mid..mid + 64] {
        *b ^= 0x5a;
    }
    let damaged = dir.join("damaged.qm");
    std::fs::write(&damaged, &bytes).unwrap();
    replace(&damaged, &served);
    let (st, _, text) = call(&srv, "POST", "/admin/reload", &[&auth], None);
    assert_eq!(st, 500, "{text}");
    assert!(
        parse(&text)["error"]
            .as_str()
            .unwrap()
            .contains("still serving generation 2"),
        "{text}"
    );
    let a_now = from_a.load(Ordering::Relaxed);
    let b_now = from_b.load(Ordering::Relaxed);
    std::thread::sleep(Duration::from_millis(300));
    assert_eq!(from_a.load(Ordering::Relaxed), a_now, "model A came back");
    assert!(
        from_b.load(Ordering::Relaxed) > b_now,
        "model B stopped answering"
    );
    let (_, _, text) = call(&srv, "GET", "/info", &[&auth], None);
    let info = parse(&text);
    assert_eq!(info["reload"]["generation"], 2, "{info}");
    assert!(info["reload"]["refused"]["error"].is_string(), "{info}");
    assert_eq!(info["method"], "kn", "{info}");
    let (_, _, text) = call(&srv, "GET", "/metrics", &[&auth], None);
    let m = parse_metrics(&text);
    assert_eq!(m["quern_reload_failing{}"], 1.0);
    assert_eq!(m["quern_reloads_total{result=ok}"], 1.0);
    assert_eq!(m["quern_reloads_total{result=refused}"], 1.0);
    assert!(srv.stderr().contains("reloading"), "{}", srv.stderr());
    // A good file again, by POST: swapped in, the failure cleared.
    replace(model_a, &served);
    let (st, _, text) = call(&srv, "POST", "/admin/reload", &[&auth], None);
    assert_eq!(st, 200, "{text}");
    assert_eq!(parse(&text)["generation"], 3);
    stop.store(true, Ordering::Relaxed);
    for c in clients {
        c.join().expect("a client saw an error or a third answer");
    }
    let (_, _, text) = call(&srv, "GET", "/info", &[&auth], None);
    assert_eq!(parse(&text)["reload"]["refused"], Value::Null);
    assert!(from_a.load(Ordering::Relaxed) > 0 && from_b.load(Ordering::Relaxed) > 0);
}
