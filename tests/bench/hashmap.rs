//! `bench-hashmap`: the tests' in-memory reference counter
//! (`tests/integration/reference.rs`, included as is) as a program, the
//! peer "(a)" of `scripts/bench`: one thread, one pass, one `HashMap` per
//! order, memory unbounded. It prints JSON: the counting time, and per
//! order the number of distinct n-grams and the sum of their counts, which
//! the benchmark compares with quern's store.
//!
//! ```sh
//! bench-hashmap --order 5 FILE_OR_DIR...
//! ```

#[path = "../integration/reference.rs"]
mod reference;

/// The two items of the tests' `common` module that the reference uses.
mod common {
    use std::path::{Path, PathBuf};

    /// Files under `dir`, walked recursively in sorted order.
    pub fn files_under(dir: &Path) -> Vec<PathBuf> {
        let mut out = Vec::new();
        let mut stack = vec![dir.to_path_buf()];
        while let Some(d) = stack.pop() {
            let mut entries: Vec<PathBuf> = std::fs::read_dir(&d)
                .unwrap_or_else(|e| panic!("read {}: {e}", d.display()))
                .map(|e| e.expect("directory entry").path())
                .collect();
            entries.sort();
            for p in entries.into_iter().rev() {
                if p.is_dir() {
                    stack.push(p);
                } else {
                    out.push(p);
                }
            }
        }
        out.sort();
        out
    }

    /// What a store holds, as the tests compare it.
    #[allow(dead_code)]
    pub struct StoreView {
        pub dump: Vec<String>,
        pub contexts: Vec<String>,
        pub stats: serde_json::Value,
    }
}

use std::path::PathBuf;
use std::time::Instant;

fn main() {
    let mut order = 5usize;
    let mut paths = Vec::new();
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        if a == "--order" {
            order = it
                .next()
                .and_then(|v| v.parse().ok())
                .expect("--order needs a number");
        } else {
            paths.push(PathBuf::from(a));
        }
    }
    assert!(
        !paths.is_empty(),
        "usage: bench-hashmap --order N FILE_OR_DIR..."
    );
    let t = Instant::now();
    let r = reference::Reference::from_paths(reference::Settings::order(order), &paths);
    let seconds = t.elapsed().as_secs_f64();
    let orders: Vec<serde_json::Value> = r
        .counts
        .iter()
        .enumerate()
        .map(|(k, m)| {
            serde_json::json!({
                "order": k + 1,
                "ngrams": m.len(),
                "count_sum": m.values().sum::<u64>(),
            })
        })
        .collect();
    let out = serde_json::json!({
        "seconds": seconds,
        "sentences": r.sentences,
        "orders": orders,
        "peak_rss_bytes": quern::memory::peak_rss(),
    });
    println!("{out}");
    // The maps are large; the benchmark does not need them freed.
    std::mem::forget(r);
}
