//! `bench-serve`: requests a second and latency of `POST /next` (top 10)
//! from a running `quern serve`, under many concurrent clients on
//! keep-alive loopback connections; printed as JSON.
//!
//! ```sh
//! bench-serve --addr 127.0.0.1:PORT --text HELDOUT.txt [--clients 32] [--requests 20000] [--warmup 2000] [--prefix-share 0]
//! ```
//!
//! The contexts are the held-out text's words: every position's last three
//! words (so that an order-4 or order-5 model uses them all), in text
//! order. A warm-up of `--warmup` requests (not measured) comes first; then
//! each client sends its share of `--requests`, one at a time, and every
//! answer must be 200 with a list of words (else the run fails). With
//! `--prefix-share F`, that share of requests also carries the first letter
//! of the word that followed. Loopback only; bounded in count.

#[path = "../integration/http_client.rs"]
mod http_client;

use std::time::{Duration, Instant};

use http_client::Conn;
use serde_json::json;

fn main() {
    let (mut addr, mut text) = (None, None);
    let (mut clients, mut requests, mut warmup, mut prefix_share) =
        (32usize, 20000usize, 2000usize, 0.0f64);
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        let v = it.next().unwrap_or_else(|| panic!("{a} needs a value"));
        match a.as_str() {
            "--addr" => addr = Some(v),
            "--text" => text = Some(v),
            "--clients" => clients = v.parse().expect("number"),
            "--requests" => requests = v.parse().expect("number"),
            "--warmup" => warmup = v.parse().expect("number"),
            "--prefix-share" => prefix_share = v.parse().expect("number"),
            _ => panic!("unknown flag {a}"),
        }
    }
    let addr = addr.expect("--addr ADDR:PORT");
    assert!(
        addr.starts_with("127.") || addr.starts_with("[::1]") || addr.starts_with("localhost"),
        "--addr must be a loopback address, not {addr}"
    );
    let text = std::fs::read_to_string(text.expect("--text FILE")).expect("reading --text");
    let words: Vec<&str> = text.split_whitespace().collect();
    assert!(words.len() > 4, "--text holds too few words");
    let bodies: Vec<String> = (3..words.len())
        .map(|i| {
            let ctx = words[i - 3..i].join(" ");
            // Every 1/share-th request carries a prefix (deterministic).
            let every = if prefix_share > 0.0 {
                (1.0 / prefix_share).round() as usize
            } else {
                0
            };
            if every > 0 && i % every == 0 {
                let p: String = words[i].chars().take(1).collect();
                json!({ "context": ctx, "prefix": p, "top": 10 }).to_string()
            } else {
                json!({ "context": ctx, "top": 10 }).to_string()
            }
        })
        .collect();
    let call = |conn: &mut Conn, i: usize| {
        let body = &bodies[i % bodies.len()];
        let (st, answer) = conn.call("POST", "/next", Some(body.as_bytes()));
        assert_eq!(st, 200, "{body}: {answer}");
        assert!(answer.contains("\"words\":["), "{body}: {answer}");
    };
    {
        let mut conn = Conn::open(&addr);
        for i in 0..warmup {
            call(&mut conn, i + requests);
        }
    }
    let per = requests.div_ceil(clients.max(1));
    let start = Instant::now();
    let mut lat: Vec<Duration> = std::thread::scope(|s| {
        let hs: Vec<_> = (0..clients)
            .map(|c| {
                let addr = addr.clone();
                let call = &call;
                s.spawn(move || {
                    let mut conn = Conn::open(&addr);
                    let mut lat = Vec::with_capacity(per);
                    for i in c * per..((c + 1) * per).min(requests) {
                        let t = Instant::now();
                        call(&mut conn, i);
                        lat.push(t.elapsed());
                    }
                    lat
                })
            })
            .collect();
        hs.into_iter().flat_map(|h| h.join().unwrap()).collect()
    });
    let wall = start.elapsed().as_secs_f64();
    assert_eq!(lat.len(), requests, "answers lost");
    lat.sort();
    let pct = |p: f64| {
        let i = ((p / 100.0) * lat.len() as f64).ceil() as usize;
        lat[i.clamp(1, lat.len()) - 1].as_secs_f64() * 1e3
    };
    let mut load = [0f64; 3];
    // SAFETY: getloadavg writes at most 3 doubles into the array given.
    #[allow(unsafe_code)]
    let n = unsafe { libc::getloadavg(load.as_mut_ptr(), 3) };
    let out = json!({
        "clients": clients,
        "requests": requests,
        "prefix_share": prefix_share,
        "seconds": wall,
        "requests_per_second": requests as f64 / wall,
        "p50_ms": pct(50.0),
        "p90_ms": pct(90.0),
        "p99_ms": pct(99.0),
        "max_ms": lat.last().unwrap().as_secs_f64() * 1e3,
        "load_average_end": if n == 3 { json!(load) } else { json!(null) },
    });
    println!("{out}");
}
