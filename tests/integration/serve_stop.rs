//! Stopping `quern serve` with SIGTERM: an idle keep-alive connection
//! does not hold the stop, a request under way is answered in full (README,
//! "quern serve": it "finishes the requests under way"), every
//! answered request is counted, and the port is closed.

use std::net::TcpStream;
use std::time::Duration;

use serde_json::json;

use crate::serve::{parse, source_args, strs, Conn, Server};

#[test]
fn sigterm_stops_cleanly() {
    let srv = Server::start(&strs(&source_args(false)));
    let addr = srv.addr.clone();
    // A connection left open (keep-alive, idle) must not hold the stop.
    let mut idle = Conn::open(&addr);
    assert_eq!(idle.call("GET", "/health", None).0, 200);
    for _ in 0..5 {
        assert_eq!(srv.post("/next", &json!({ "context": "I am" })).0, 200);
    }
    let t = std::time::Instant::now();
    let (status, err) = srv.terminate();
    assert!(status.success(), "exit {status:?}\n{err}");
    assert!(
        t.elapsed() < Duration::from_secs(10),
        "took {:?}",
        t.elapsed()
    );
    // Every request answered is counted: 1 + 5.
    assert!(err.contains("stopped after 6 requests"), "{err}");
    // The port is closed.
    assert!(
        TcpStream::connect(&addr).is_err(),
        "{addr} still accepts connections"
    );
}

/// A request under way when SIGTERM comes (its head and half its body
/// sent, the rest after the signal) is answered in full, with what the
/// same request got before (README: on SIGTERM it "finishes the requests
/// under way"), and counted; then the service stops.
#[test]
fn sigterm_lets_a_request_under_way_finish() {
    use std::io::{Read, Write};
    let srv = Server::start(&strs(&source_args(false)));
    let body = json!({ "context": "she could not", "top": 7 }).to_string();
    let (st, before) = srv.call("POST", "/next", Some(&body));
    assert_eq!(st, 200, "{before}");
    let mut c = TcpStream::connect(&srv.addr).unwrap();
    c.set_read_timeout(Some(Duration::from_secs(20))).unwrap();
    let head = format!(
        "POST /next HTTP/1.1\r\nHost: {}\r\nContent-Type: application/json\r\nContent-Length: {}\r\nConnection: close\r\n\r\n",
        srv.addr,
        body.len()
    );
    let (first, rest) = body.as_bytes().split_at(body.len() / 2);
    c.write_all(head.as_bytes()).unwrap();
    c.write_all(first).unwrap();
    c.flush().unwrap();
    std::thread::sleep(Duration::from_millis(300));
    srv.sigterm();
    std::thread::sleep(Duration::from_millis(300));
    c.write_all(rest).unwrap();
    let mut answer = Vec::new();
    c.read_to_end(&mut answer).unwrap();
    let answer = String::from_utf8_lossy(&answer).into_owned();
    assert!(
        answer.starts_with("HTTP/1.1 200"),
        "the request under way got {answer:?}"
    );
    let (head, got) = answer.split_once("\r\n\r\n").unwrap();
    let got = if head
        .to_ascii_lowercase()
        .contains("transfer-encoding: chunked")
    {
        // Chunked (RFC 9112, 7.1): size line, data, up to the chunk of 0.
        let mut out = String::new();
        let mut s = got;
        loop {
            let (size, r) = s.split_once("\r\n").unwrap();
            let n = usize::from_str_radix(size.trim(), 16).unwrap();
            if n == 0 {
                break;
            }
            out.push_str(&r[..n]);
            s = &r[n + 2..];
        }
        out
    } else {
        got.to_string()
    };
    assert_eq!(parse(&got), parse(&before), "the answer under way");
    let (status, err) = srv.wait_exit();
    assert!(status.success(), "exit {status:?}\n{err}");
    assert!(err.contains("stopped after 2 requests"), "{err}");
}
