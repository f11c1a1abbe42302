//! A load test of `quern serve` on loopback, bounded in count (a fixed
//! number of requests per client) and in time (a deadline; the test fails
//! past it): many clients at once on keep-alive connections, every answer
//! compared with the CLI's (`prob --json`, `next --json`), nothing lost
//! (every request answered 200, and the server counts as many), and the
//! latency's median and 99th percentile printed.

use std::time::{Duration, Instant};

use serde_json::{json, Value};

use crate::common::{report, run_with_stdin};
use crate::serve::{cli_next, next_contexts, prob_queries, source_args, strs, Conn, Server};

/// One request and the answer it must get.
struct Case {
    path: &'static str,
    body: String,
    /// The CLI's answer (`/prob`: the whole object; `/next`: its words).
    want: Value,
}

fn cases(model: bool) -> Vec<Case> {
    let qs = prob_queries();
    let input: String = qs.iter().map(|(c, w)| format!("{c} {w}\n")).collect();
    let mut a = vec!["prob".to_string(), "--json".into()];
    a.extend(source_args(model));
    let cli = run_with_stdin(&a, input.as_bytes());
    cli.assert_success();
    let mut out: Vec<Case> = qs
        .iter()
        .zip(cli.stdout.lines())
        .map(|((c, w), line)| Case {
            path: "/prob",
            body: json!({ "context": c, "word": w }).to_string(),
            want: serde_json::from_str(line).unwrap(),
        })
        .collect();
    for ctx in next_contexts() {
        out.push(Case {
            path: "/next",
            body: json!({ "context": ctx, "top": 10 }).to_string(),
            want: cli_next(model, None, ctx, 10)["words"].clone(),
        });
    }
    out
}

fn percentile(sorted: &[Duration], p: f64) -> Duration {
    let i = ((p / 100.0) * sorted.len() as f64).ceil() as usize;
    sorted[i.clamp(1, sorted.len()) - 1]
}

fn load(model: bool, clients: usize, per_client: usize, deadline: Duration) {
    let cases = std::sync::Arc::new(cases(model));
    let srv = Server::start(&strs(&source_args(model)));
    let start = Instant::now();
    let results: Vec<Vec<Duration>> = std::thread::scope(|s| {
        let hs: Vec<_> = (0..clients)
            .map(|c| {
                let cases = cases.clone();
                let addr = srv.addr.clone();
                s.spawn(move || {
                    let mut conn = Conn::open(&addr);
                    let mut lat = Vec::with_capacity(per_client);
                    for i in 0..per_client {
                        assert!(
                            start.elapsed() < deadline,
                            "the load test passed its deadline of {deadline:?}"
                        );
                        let case = &cases[(c * 7 + i) % cases.len()];
                        let t = Instant::now();
                        let (st, text) = conn.call("POST", case.path, Some(case.body.as_bytes()));
                        lat.push(t.elapsed());
                        assert_eq!(st, 200, "{} {}: {text}", case.path, case.body);
                        let got: Value = serde_json::from_str(&text).unwrap();
                        let got = if case.path == "/next" {
                            &got["words"]
                        } else {
                            &got
                        };
                        // Source of truth: the CLI's answer to the same query.
                        assert_eq!(got, &case.want, "{} {}", case.path, case.body);
                    }
                    lat
                })
            })
            .collect();
        hs.into_iter().map(|h| h.join().unwrap()).collect()
    });
    let wall = start.elapsed();
    let mut all: Vec<Duration> = results.into_iter().flatten().collect();
    let sent = clients * per_client;
    assert_eq!(all.len(), sent, "answers lost");
    all.sort();
    let (status, err) = srv.terminate();
    assert!(status.success(), "{status:?}\n{err}");
    // Nothing lost on the server's side either: it counted every request.
    assert!(
        err.contains(&format!(
            "stopped after {} requests",
            crate::serve::thousands(sent as u64)
        )),
        "{err}"
    );
    report(&format!(
        "serve load ({}): {clients} clients x {per_client} requests (prob and next), {sent} answers equal to the CLI's in {:.2} s, {:.0} requests/s; latency p50 {:.3} ms, p99 {:.3} ms, max {:.3} ms",
        if model { "model" } else { "store" },
        wall.as_secs_f64(),
        sent as f64 / wall.as_secs_f64(),
        percentile(&all, 50.0).as_secs_f64() * 1e3,
        percentile(&all, 99.0).as_secs_f64() * 1e3,
        all.last().unwrap().as_secs_f64() * 1e3,
    ));
}

#[test]
fn load_on_the_model_many_clients_every_answer_the_clis() {
    load(true, 32, 100, Duration::from_secs(120));
}

#[test]
fn load_on_the_store_many_clients_every_answer_the_clis() {
    load(false, 16, 50, Duration::from_secs(120));
}
