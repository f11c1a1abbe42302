//! `bench-tuned`: a tuned in-memory n-gram counter, the peer "(c)" of
//! `scripts/bench`: one thread, one pass, memory unbounded, counts only. It
//! is what a program that only counts, and has the memory, would do; quern
//! also bounds its memory, derives continuation counts and context
//! statistics, and writes a durable store.
//!
//! The design: words interned to dense numbers through rustc-hash's
//! `FxHashMap<Box<[u8]>, u32>`; a k-gram's numbers (each plus one, so a
//! shorter n-gram never equals a longer one) packed into one `u128`,
//! `128 / order` bits a word (25 at order 5); all orders in one
//! `FxHashMap<u128, u32>`, one insert a key. It was measured side by side
//! with two other designs on 40 MB of the benchmark's text at order 5
//! (`bench-corpus --size 40000000 --seed 1`; two clean alternating runs,
//! on a loaded 2-core machine): 8.4 and 8.6 s, against 14.6 and 14.7 s
//! for one open-addressing table of `(u128, u64)` in two arrays (linear
//! probing, load 1/2, words interned through the standard `HashMap`), and
//! 13.6 and 15.0 s for the same table with 32-byte slots and each key's
//! slot prefetched 16 keys ahead. The larger table (load 1/2 against 7/8,
//! one more doubling) costs more than the prefetches save.
//!
//! Tokenization follows the counting contract, as `bench-lines` does
//! (lines end at `\n`, a trailing `\r` dropped, lines over 1 MiB skipped,
//! lossy UTF-8, `char::is_whitespace` splits, the three markers spelled
//! in the text become `<unk>`, `<s>`/`</s>` padding). It prints JSON like
//! `bench-hashmap`: the counting time and, per order, the distinct
//! n-grams and the sum of their counts.
//!
//! ```sh
//! bench-tuned --order 5 FILE...
//! ```

use std::io::BufRead;
use std::time::Instant;

use rustc_hash::FxHashMap;

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
            paths.push(a);
        }
    }
    assert!((1..=8).contains(&order), "--order must be 1 to 8");
    let bits = 128 / order as u32;
    let max_words = (1u64 << bits.min(32)) - 2;
    let t = Instant::now();
    let mut words: FxHashMap<Box<[u8]>, u32> = FxHashMap::default();
    let mut number = |w: &[u8]| -> u128 {
        if let Some(&n) = words.get(w) {
            return n as u128;
        }
        let n = words.len() as u32 + 1;
        assert!(
            (n as u64) <= max_words,
            "more than {max_words} words for order {order}"
        );
        words.insert(w.into(), n);
        n as u128
    };
    let (bos, eos, unk) = (number(b"<s>"), number(b"</s>"), number(b"<unk>"));
    let mut table: FxHashMap<u128, u32> = FxHashMap::default();
    let mut ids: Vec<u128> = Vec::new();
    let mut sentences = 0u64;
    for p in &paths {
        let f = std::fs::File::open(p).unwrap_or_else(|e| panic!("open {p}: {e}"));
        let mut r = std::io::BufReader::with_capacity(1 << 20, f);
        let mut line = Vec::new();
        loop {
            line.clear();
            if r.read_until(b'\n', &mut line).expect("read") == 0 {
                break;
            }
            if line.last() == Some(&b'\n') {
                line.pop();
            }
            if line.len() > 1 << 20 {
                continue;
            }
            let l = line.strip_suffix(b"\r").unwrap_or(&line);
            let text = String::from_utf8_lossy(l);
            ids.clear();
            for w in text.split(char::is_whitespace).filter(|t| !t.is_empty()) {
                if ids.is_empty() {
                    ids.push(bos);
                }
                ids.push(match w {
                    "<s>" | "</s>" | "<unk>" => unk,
                    _ => number(w.as_bytes()),
                });
            }
            if ids.is_empty() {
                continue;
            }
            ids.push(eos);
            sentences += 1;
            for i in 0..ids.len() {
                let mut key = 0u128;
                for k in 0..order.min(ids.len() - i) {
                    key |= ids[i + k] << (bits * k as u32);
                    *table.entry(key).or_insert(0) += 1;
                }
            }
        }
    }
    let seconds = t.elapsed().as_secs_f64();
    let mut ngrams = vec![0u64; order];
    let mut sums = vec![0u64; order];
    let word_mask = (1u128 << bits) - 1;
    for (&k, &c) in &table {
        let len = (0..order)
            .take_while(|&j| (k >> (bits * j as u32)) & word_mask != 0)
            .count();
        ngrams[len - 1] += 1;
        sums[len - 1] += c as u64;
    }
    let orders: Vec<serde_json::Value> = (0..order)
        .map(|k| serde_json::json!({"order": k + 1, "ngrams": ngrams[k], "count_sum": sums[k]}))
        .collect();
    let out = serde_json::json!({
        "seconds": seconds,
        "sentences": sentences,
        "orders": orders,
        "peak_rss_bytes": quern::memory::peak_rss(),
    });
    println!("{out}");
}
