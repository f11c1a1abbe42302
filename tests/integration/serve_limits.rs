//! `quern serve`'s limits, from outside as a client sees them: slow
//! clients (more half-open connections than `--max-connections`, a body
//! that never comes, an idle keep-alive connection) are cut off by the
//! read timeout while real requests are still answered within a bound, and
//! requests over a work limit get a 4xx status with our JSON error. The
//! statuses are those RFC 9110 gives: 503 (§15.6.4), 408 (§15.5.9), 413
//! (§15.5.14), 400 (§15.5.1).

use std::io::{Read, Write};
use std::net::TcpStream;
use std::time::{Duration, Instant};

use serde_json::{json, Value};

use crate::common::report;
use crate::serve::{parse, source_args, strs, Server};

/// Reads until the server closes the connection (EOF or a reset) or
/// `within` passes: what it sent, and whether it closed.
fn read_to_close(s: &mut TcpStream, within: Duration) -> (Vec<u8>, bool) {
    let end = Instant::now() + within;
    let mut got = Vec::new();
    let mut buf = [0u8; 4096];
    loop {
        let left = end.saturating_duration_since(Instant::now());
        if left.is_zero() {
            return (got, false);
        }
        s.set_read_timeout(Some(left)).unwrap();
        match s.read(&mut buf) {
            Ok(0) => return (got, true),
            Ok(n) => got.extend_from_slice(&buf[..n]),
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::WouldBlock | std::io::ErrorKind::TimedOut
                ) =>
            {
                return (got, false)
            }
            Err(_) => return (got, true),
        }
    }
}

fn model_server(extra: &[&str]) -> Server {
    let mut a = source_args(true);
    a.extend(extra.iter().map(|s| s.to_string()));
    a.extend(["--log".into(), "off".into()]);
    Server::start(&strs(&a))
}

/// The answer the real requests of the slow-client test must get: the
/// model's own answer to the same query before any slow client came.
fn real_request(srv: &Server) -> (u16, Value) {
    srv.post("/prob", &json!({"context": "I am", "word": "not"}))
}

#[test]
fn slow_clients_are_cut_off_and_real_requests_answered() {
    const CAP: usize = 16;
    const HALF_OPEN: usize = 3 * CAP;
    let timeout = Duration::from_secs(1);
    let srv = model_server(&["--max-connections", "16", "--read-timeout", "1"]);
    let (st, want) = real_request(&srv);
    assert_eq!(st, 200, "{want}");
    // Half a request head each, then nothing.
    let opened = Instant::now();
    let mut held: Vec<TcpStream> = (0..HALF_OPEN)
        .map(|_| {
            let mut s = TcpStream::connect(&srv.addr).unwrap();
            s.write_all(b"POST /prob HTTP/1.1\r\nHost: quern\r\nContent-Len")
                .unwrap();
            s
        })
        .collect();
    // Real requests: one refused while the cap is full is retried every
    // 20 ms; each must be answered 200, with the model's answer, within
    // the read timeout plus a margin of 2 s (the half-open ones leave by
    // then).
    let bound = timeout + Duration::from_secs(2);
    let mut waits = Vec::new();
    let mut refused_first = 0;
    let body = r#"{"context": "I am", "word": "not"}"#;
    for _ in 0..20 {
        let t = Instant::now();
        let mut first = true;
        loop {
            let got = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
                srv.call("POST", "/prob", Some(body))
            }));
            match got {
                Ok((200, text)) => {
                    assert_eq!(parse(&text), want);
                    break;
                }
                Ok((503, text)) => {
                    assert!(text.contains("--max-connections"), "{text}");
                }
                Ok((st, text)) => panic!("a real request got {st}: {text}"),
                // The refusal may reach the client as a reset instead.
                Err(_) => {}
            }
            if first {
                refused_first += 1;
                first = false;
            }
            assert!(
                t.elapsed() < bound,
                "a real request was not answered within {bound:?} of {HALF_OPEN} half-open connections"
            );
            std::thread::sleep(Duration::from_millis(20));
        }
        waits.push(t.elapsed());
    }
    // Every half-open connection is closed by the server: those over the
    // cap at once (with a 503, or a reset), the others by the read timeout.
    let mut answered_503 = 0;
    for s in &mut held {
        let left =
            (opened + timeout + Duration::from_secs(2)).saturating_duration_since(Instant::now());
        let (got, closed) = read_to_close(s, left);
        assert!(
            closed,
            "a half-open connection was still open {:?} after it was opened (read timeout {timeout:?})",
            opened.elapsed()
        );
        if got.starts_with(b"HTTP/1.1 503") {
            answered_503 += 1;
        }
    }
    let slowest = waits.iter().max().unwrap();
    report(&format!(
        "serve slow clients: {HALF_OPEN} half-open connections, --max-connections {CAP}, \
         --read-timeout 1: real requests answered within {slowest:?} (first tries refused: \
         {refused_first}), all half-open closed within {:?}, {answered_503} of them got a 503",
        opened.elapsed()
    ));
    // Still serving.
    assert_eq!(real_request(&srv), (200, want));
}

#[test]
fn a_late_body_gets_408_and_an_idle_connection_is_closed() {
    let srv = model_server(&["--read-timeout", "1"]);
    // The head in full, then 10 of the 100 bytes it announces.
    let mut s = TcpStream::connect(&srv.addr).unwrap();
    let t = Instant::now();
    s.write_all(b"POST /prob HTTP/1.1\r\nHost: quern\r\nContent-Type: application/json\r\nContent-Length: 100\r\n\r\n{\"word\": \"")
        .unwrap();
    let (got, closed) = read_to_close(&mut s, Duration::from_secs(4));
    let text = String::from_utf8_lossy(&got);
    assert!(text.starts_with("HTTP/1.1 408"), "{text}");
    assert!(text.contains("--read-timeout"), "{text}");
    assert!(closed, "the connection stayed open after the 408");
    assert!(
        t.elapsed() >= Duration::from_millis(900),
        "{:?}",
        t.elapsed()
    );
    // A keep-alive connection that asks nothing more is closed after the
    // read timeout.
    let t = Instant::now();
    let mut raw = TcpStream::connect(&srv.addr).unwrap();
    raw.write_all(b"GET /health HTTP/1.1\r\nHost: quern\r\n\r\n")
        .unwrap();
    let mut first = [0u8; 12];
    raw.read_exact(&mut first).unwrap();
    assert_eq!(&first, b"HTTP/1.1 200");
    let (_, closed) = read_to_close(&mut raw, Duration::from_secs(4));
    assert!(
        closed,
        "an idle keep-alive connection was kept open past 4 s"
    );
    assert!(
        t.elapsed() >= Duration::from_millis(900),
        "{:?}",
        t.elapsed()
    );
}

#[test]
fn work_over_a_limit_gets_a_clear_error() {
    let srv = model_server(&["--max-texts", "3", "--max-request-bytes", "2KiB"]);
    let texts = |n: usize| json!({ "texts": vec!["I am not"; n] });
    let (st, ok) = srv.post("/score", &texts(3));
    assert_eq!(st, 200, "{ok}");
    assert_eq!(ok["results"].as_array().unwrap().len(), 3);
    let (st, e) = srv.post("/score", &texts(4));
    assert_eq!(st, 413, "{e}");
    assert!(e["error"].as_str().unwrap().contains("--max-texts"), "{e}");
    let (st, e) = srv.post("/next", &json!({"context": "I am", "top": 1001}));
    assert_eq!(st, 400, "{e}");
    assert!(e["error"].as_str().unwrap().contains("top"), "{e}");
    let big = json!({ "texts": ["x".repeat(3000)] });
    let (st, e) = srv.post("/score", &big);
    assert_eq!(st, 413, "{e}");
    assert!(
        e["error"].as_str().unwrap().contains("--max-request-bytes"),
        "{e}"
    );
}
