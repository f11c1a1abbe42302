//! `bench-lines`: every n-gram occurrence of the input as one line, for
//! the `sort | uniq -c` peer "(b)" of `scripts/bench`.
//!
//! Tokenization follows the counting contract (README, "What is
//! counted"): lines end at `\n` (a trailing `\r` dropped), lines over
//! 1 MiB are skipped, invalid UTF-8 is decoded lossily, tokens are the
//! runs of non-white-space characters, a token spelled `<s>`, `</s>` or
//! `<unk>` becomes `<unk>`, and each sentence is padded with `<s>` and
//! `</s>`. Every k-gram for 1 ≤ k ≤ N is written as its words joined by
//! single spaces, so `sort | uniq -c` yields the same n-grams and counts
//! as quern.
//!
//! ```sh
//! bench-lines --order 5 FILE... | LC_ALL=C sort | uniq -c
//! ```

use std::io::{BufRead, Write};

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
    let stdout = std::io::stdout();
    let mut out = std::io::BufWriter::with_capacity(1 << 20, stdout.lock());
    let mut toks: Vec<String> = Vec::new();
    for p in paths {
        let f = std::fs::File::open(&p).unwrap_or_else(|e| panic!("open {p}: {e}"));
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
            toks.clear();
            for t in text.split(char::is_whitespace).filter(|t| !t.is_empty()) {
                if toks.is_empty() {
                    toks.push("<s>".into());
                }
                let t = if t == "<s>" || t == "</s>" || t == "<unk>" {
                    "<unk>"
                } else {
                    t
                };
                toks.push(t.into());
            }
            if toks.is_empty() {
                continue;
            }
            toks.push("</s>".into());
            for k in 1..=order {
                for w in toks.windows(k) {
                    out.write_all(w.join(" ").as_bytes()).expect("write");
                    out.write_all(b"\n").expect("write");
                }
            }
        }
    }
    out.flush().expect("write");
}
