//! A minimal HTTP/1.1 client on `std::net` (RFC 9112: a request line,
//! headers, a body of Content-Length bytes; answers with Content-Length or
//! chunked bodies) for the service's tests and benchmark, so that they
//! share no code with the server. Loopback only.

use std::io::{BufRead, BufReader, Read, Write};
use std::net::TcpStream;
use std::time::Duration;

/// A keep-alive HTTP/1.1 connection.
pub struct Conn {
    r: BufReader<TcpStream>,
    w: TcpStream,
}

impl Conn {
    /// Connects to `addr` (loopback).
    pub fn open(addr: &str) -> Conn {
        let s = TcpStream::connect(addr).unwrap_or_else(|e| panic!("connect {addr}: {e}"));
        s.set_nodelay(true).unwrap();
        s.set_read_timeout(Some(Duration::from_secs(60))).unwrap();
        Conn {
            r: BufReader::new(s.try_clone().unwrap()),
            w: s,
        }
    }

    /// Sends one request and reads the answer: status and body.
    pub fn call(&mut self, method: &str, path: &str, body: Option<&[u8]>) -> (u16, String) {
        let (st, _, text) = self.call_with(method, path, &[], body);
        (st, text)
    }

    /// Sends one request with extra header lines (`Name: value`) and reads
    /// the answer: status, headers (names lowercased) and body.
    pub fn call_with(
        &mut self,
        method: &str,
        path: &str,
        headers: &[&str],
        body: Option<&[u8]>,
    ) -> (u16, Vec<(String, String)>, String) {
        let body = body.unwrap_or(b"");
        let extra: String = headers.iter().map(|h| format!("{h}\r\n")).collect();
        let head = format!(
            "{method} {path} HTTP/1.1\r\nHost: quern\r\n{extra}Content-Type: application/json\r\nContent-Length: {}\r\n\r\n",
            body.len()
        );
        let mut req = head.into_bytes();
        req.extend_from_slice(body);
        self.w.write_all(&req).unwrap();
        let mut line = String::new();
        self.r.read_line(&mut line).unwrap();
        let status: u16 = line
            .split_whitespace()
            .nth(1)
            .unwrap_or_else(|| panic!("no status line: {line:?}"))
            .parse()
            .unwrap();
        let mut len = None;
        let mut chunked = false;
        let mut got = Vec::new();
        loop {
            line.clear();
            self.r.read_line(&mut line).unwrap();
            let l = line.trim_end();
            if l.is_empty() {
                break;
            }
            let (k, v) = l.split_once(':').unwrap();
            got.push((k.to_ascii_lowercase(), v.trim().to_string()));
            match k.to_ascii_lowercase().as_str() {
                "content-length" => len = Some(v.trim().parse::<usize>().unwrap()),
                "transfer-encoding" => chunked = v.trim().eq_ignore_ascii_case("chunked"),
                _ => {}
            }
        }
        let mut out = Vec::new();
        if chunked {
            loop {
                line.clear();
                self.r.read_line(&mut line).unwrap();
                let n = usize::from_str_radix(line.trim(), 16).unwrap();
                let mut chunk = vec![0; n + 2];
                self.r.read_exact(&mut chunk).unwrap();
                out.extend_from_slice(&chunk[..n]);
                if n == 0 {
                    break;
                }
            }
        } else {
            out.resize(len.expect("a Content-Length or chunked body"), 0);
            self.r.read_exact(&mut out).unwrap();
        }
        let text = String::from_utf8(out).expect("the answer is UTF-8");
        (status, got, text)
    }
}
