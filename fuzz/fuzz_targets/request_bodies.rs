//! The request bodies of the service (`quern serve`): every endpoint that
//! takes one (`/prob`, `/next`, `/score`, `/ngrams`) and an unknown path,
//! parsed and checked as the service does before any query runs. The first
//! byte picks the endpoint and the `/score` text limit; the rest is the
//! body. A body is either accepted within its limits or refused with a
//! 400, 404 or 413 and a message; never a panic.
//!
//! `src/serve/request.rs` is compiled here by path: it needs only serde
//! and serde_json, so the fuzz build needs neither the `serve` feature
//! (axum, tokio) nor RocksDB.

#![no_main]

#[allow(dead_code)]
#[path = "../../src/serve/request.rs"]
mod request;

use libfuzzer_sys::fuzz_target;
use request::{parse_for, Limits, Parsed, MAX_NGRAMS, MAX_TOP};

const PATHS: [&str; 5] = ["/prob", "/next", "/score", "/ngrams", "/nowhere"];

fuzz_target!(|data: &[u8]| {
    let Some((&first, body)) = data.split_first() else {
        return;
    };
    let path = PATHS[first as usize % PATHS.len()];
    let limits = Limits {
        max_texts: 1 + (first as usize >> 3),
    };
    match parse_for(path, body, &limits) {
        Ok(Parsed::Prob(q)) => assert_eq!(q.word.split_whitespace().count(), 1),
        Ok(Parsed::Next(q)) => {
            assert!((1..=MAX_TOP).contains(&q.top));
            assert!(!q.prefix.chars().any(char::is_whitespace));
        }
        Ok(Parsed::Score(q)) => assert!(q.texts.len() <= limits.max_texts),
        Ok(Parsed::Ngrams(q)) => assert!((1..=MAX_NGRAMS).contains(&q.limit)),
        Err(f) => {
            assert!(matches!(f.status, 400 | 404 | 413), "{}", f.status);
            assert!(!f.message.is_empty());
            assert_eq!(f.status == 404, path == "/nowhere");
        }
    }
});
