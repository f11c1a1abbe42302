//! `bench-tuned`: a tuned in-memory n-gram counter, the peer "(c)" of
//! `scripts/bench`: one thread, one pass, memory unbounded. Words are
//! interned to dense 32-bit numbers (a `HashMap<Box<[u8]>, u32>`, one
//! probe per token); a k-gram's numbers (each plus one, so a shorter
//! n-gram never equals a longer one) are packed into one `u128`,
//! `128 / order` bits a word; all orders share one open-addressing table
//! of `(u128, u64)` with linear probing, doubled at a load of 1/2. It is
//! what a program that only counts, and has the memory, would do; quern
//! also bounds its memory, derives continuation counts and context
//! statistics, and writes a durable store.
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

use std::collections::HashMap;
use std::io::BufRead;
use std::time::Instant;

/// One open-addressing table of packed n-grams.
struct Table {
    keys: Vec<u128>,
    counts: Vec<u64>,
    used: usize,
    mask: usize,
}

impl Table {
    fn new() -> Table {
        let cap = 1 << 16;
        Table {
            keys: vec![0; cap],
            counts: vec![0; cap],
            used: 0,
            mask: cap - 1,
        }
    }

    #[inline]
    fn slot(key: u128, mask: usize) -> usize {
        let h = (key as u64 ^ (key >> 64) as u64 ^ ((key >> 64) as u64).rotate_left(29))
            .wrapping_mul(0x9E37_79B9_7F4A_7C15);
        (h >> 20) as usize & mask
    }

    #[inline]
    fn add(&mut self, key: u128) {
        let mut i = Self::slot(key, self.mask);
        loop {
            let k = self.keys[i];
            if k == key {
                self.counts[i] += 1;
                return;
            }
            if k == 0 {
                self.keys[i] = key;
                self.counts[i] = 1;
                self.used += 1;
                if self.used * 2 > self.mask {
                    self.grow();
                }
                return;
            }
            i = (i + 1) & self.mask;
        }
    }

    fn grow(&mut self) {
        let cap = (self.mask + 1) * 2;
        let keys = std::mem::replace(&mut self.keys, vec![0; cap]);
        let counts = std::mem::replace(&mut self.counts, vec![0; cap]);
        self.mask = cap - 1;
        for (k, c) in keys.into_iter().zip(counts) {
            if k != 0 {
                let mut i = Self::slot(k, self.mask);
                while self.keys[i] != 0 {
                    i = (i + 1) & self.mask;
                }
                self.keys[i] = k;
                self.counts[i] = c;
            }
        }
    }
}

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
    let mut words: HashMap<Box<[u8]>, u32> = HashMap::new();
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
    let mut table = Table::new();
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
                    table.add(key);
                }
            }
        }
    }
    let seconds = t.elapsed().as_secs_f64();
    let mut ngrams = vec![0u64; order];
    let mut sums = vec![0u64; order];
    let word_mask = (1u128 << bits) - 1;
    for (&k, &c) in table.keys.iter().zip(&table.counts) {
        if k != 0 {
            let len = (0..order)
                .take_while(|&j| (k >> (bits * j as u32)) & word_mask != 0)
                .count();
            ngrams[len - 1] += 1;
            sums[len - 1] += c;
        }
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
