//! Independent reference counter, written from /tmp/contract.md only.
//!
//! Single pass over the input into plain `HashMap<Vec<String>, u64>` tables
//! (one per order), then everything else (continuation counts, left-type
//! counts, context statistics, count-of-counts, totals, discounts) is derived
//! from those tables. Readability matters more than speed here.

#![allow(dead_code)]

use std::collections::{BTreeMap, HashMap};
use std::io::Read;
use std::path::{Path, PathBuf};

use serde_json::{json, Value};

use crate::common::{files_under, StoreView};

pub const BOS: &str = "<s>";
pub const EOS: &str = "</s>";
pub const UNK: &str = "<unk>";

/// Counting settings (contract: `--order`, `--lowercase`, `--max-line-bytes`).
#[derive(Clone, Copy, Debug)]
pub struct Settings {
    pub order: usize,
    pub lowercase: bool,
    pub max_line_bytes: usize,
}

impl Settings {
    /// Contract defaults except the order: no lowercase, 1 MiB line limit.
    pub fn order(order: usize) -> Settings {
        Settings {
            order,
            lowercase: false,
            max_line_bytes: 1 << 20,
        }
    }
    pub fn lowercase(mut self, yes: bool) -> Settings {
        self.lowercase = yes;
        self
    }
    pub fn max_line_bytes(mut self, n: usize) -> Settings {
        self.max_line_bytes = n;
        self
    }
}

/// Raw counts plus the line-level totals gathered while reading.
pub struct Reference {
    pub settings: Settings,
    /// `counts[k - 1]` maps each k-gram to its raw count c(g).
    pub counts: Vec<HashMap<Vec<String>, u64>>,
    pub sentences: u64,
    pub marker_tokens: u64,
    pub skipped_lines: u64,
    pub invalid_utf8_lines: u64,
}

/// Context statistics of one context h (contract: C, T, A, N1, N2, N3+).
#[derive(Clone, Copy, Default, Debug, PartialEq, Eq)]
pub struct ContextStats {
    pub c: u64,
    pub t: u64,
    pub a: u64,
    pub n1: u64,
    pub n2: u64,
    pub n3plus: u64,
}

/// Everything derived from the raw counts.
pub struct Derived {
    /// `continuation[k - 1]` maps a k-gram g (k < N) to N1+(. g); absent
    /// means 0.
    pub continuation: Vec<HashMap<Vec<String>, u64>>,
    /// Context statistics keyed by context (possibly empty).
    pub contexts: HashMap<Vec<String>, ContextStats>,
    /// Per order k: raw and left-type count-of-counts r -> n_r, unigram `<s>`
    /// excluded.
    pub raw_coc: Vec<BTreeMap<u64, u64>>,
    pub left_type_coc: Vec<BTreeMap<u64, u64>>,
}

impl Reference {
    pub fn new(settings: Settings) -> Reference {
        assert!(settings.order >= 1);
        Reference {
            settings,
            counts: (0..settings.order).map(|_| HashMap::new()).collect(),
            sentences: 0,
            marker_tokens: 0,
            skipped_lines: 0,
            invalid_utf8_lines: 0,
        }
    }

    /// Counts every input of `paths` (files or directories walked
    /// recursively in sorted order; `.gz` and `.zst` decompressed).
    pub fn from_paths(settings: Settings, paths: &[PathBuf]) -> Reference {
        let mut r = Reference::new(settings);
        for p in paths {
            r.add_path(p);
        }
        r
    }

    pub fn add_path(&mut self, path: &Path) {
        if path.is_dir() {
            for f in files_under(path) {
                self.add_file(&f);
            }
        } else {
            self.add_file(path);
        }
    }

    /// Reads one file, decompressing by its extension.
    pub fn add_file(&mut self, path: &Path) {
        let raw = std::fs::read(path).unwrap_or_else(|e| panic!("read {}: {e}", path.display()));
        let name = path.to_string_lossy();
        let data = if name.ends_with(".gz") {
            let mut out = Vec::new();
            flate2::read::MultiGzDecoder::new(&raw[..])
                .read_to_end(&mut out)
                .unwrap_or_else(|e| panic!("gunzip {}: {e}", path.display()));
            out
        } else if name.ends_with(".zst") {
            zstd::stream::decode_all(&raw[..])
                .unwrap_or_else(|e| panic!("unzstd {}: {e}", path.display()))
        } else {
            raw
        };
        self.add_bytes(&data);
    }

    /// Counts the content of one input: lines end at `\n`.
    pub fn add_bytes(&mut self, data: &[u8]) {
        let mut pieces: Vec<&[u8]> = data.split(|&b| b == b'\n').collect();
        // A final `\n` ends the last line; it does not start an empty one.
        if data.ends_with(b"\n") || data.is_empty() {
            pieces.pop();
        }
        for line in pieces {
            self.add_line(line);
        }
    }

    /// Counts one line (without its `\n`).
    pub fn add_line(&mut self, line: &[u8]) {
        // Contract: lines longer than max-line-bytes (excluding the `\n`)
        // are skipped entirely and reported.
        if line.len() > self.settings.max_line_bytes {
            self.skipped_lines += 1;
            return;
        }
        // Contract: a trailing `\r` is dropped.
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        // Contract: invalid UTF-8 is decoded lossily (U+FFFD).
        if std::str::from_utf8(line).is_err() {
            self.invalid_utf8_lines += 1;
        }
        let text = String::from_utf8_lossy(line);
        // Contract: tokens are maximal runs of non-whitespace chars
        // (char::is_whitespace); optional str::to_lowercase; literal marker
        // spellings become `<unk>`.
        let mut tokens: Vec<String> = Vec::new();
        for piece in text.split(char::is_whitespace) {
            if piece.is_empty() {
                continue;
            }
            let mut tok = piece.to_string();
            if self.settings.lowercase {
                tok = tok.to_lowercase();
            }
            if tok == BOS || tok == EOS || tok == UNK {
                self.marker_tokens += 1;
                tok = UNK.to_string();
            }
            tokens.push(tok);
        }
        // Contract: a line with no tokens is not a sentence.
        if tokens.is_empty() {
            return;
        }
        self.sentences += 1;
        let mut padded = Vec::with_capacity(tokens.len() + 2);
        padded.push(BOS.to_string());
        padded.extend(tokens);
        padded.push(EOS.to_string());
        // Contract: every contiguous k-gram, 1 <= k <= N.
        for k in 1..=self.settings.order {
            let table = &mut self.counts[k - 1];
            for window in padded.windows(k) {
                // (Look up by slice first to avoid allocating a key for an
                // n-gram already seen.)
                match table.get_mut(window) {
                    Some(c) => *c += 1,
                    None => {
                        table.insert(window.to_vec(), 1);
                    }
                }
            }
        }
    }

    fn key(words: &[&str]) -> Vec<String> {
        words.iter().map(|s| s.to_string()).collect()
    }

    /// Raw count c(g).
    pub fn count(&self, words: &[&str]) -> u64 {
        self.counts[words.len() - 1]
            .get(&Self::key(words))
            .copied()
            .unwrap_or(0)
    }

    /// Derives continuation counts, context statistics and count-of-counts.
    pub fn derive(&self) -> Derived {
        let n = self.settings.order;
        // N1+(. g) for g of order k < N: each distinct (k+1)-gram v.g adds a
        // distinct predecessor v of g. (For g starting with `<s>` there is
        // none, since `<s>` only opens a sentence, so it stays 0.)
        let mut continuation: Vec<HashMap<Vec<String>, u64>> =
            (1..n).map(|_| HashMap::new()).collect();
        for k in 1..n {
            for gram in self.counts[k].keys() {
                *continuation[k - 1].entry(gram[1..].to_vec()).or_insert(0) += 1;
            }
        }

        let mut contexts: HashMap<Vec<String>, ContextStats> = HashMap::new();
        let mut raw_coc: Vec<BTreeMap<u64, u64>> = (0..n).map(|_| BTreeMap::new()).collect();
        let mut left_type_coc: Vec<BTreeMap<u64, u64>> = (0..n).map(|_| BTreeMap::new()).collect();
        for k in 1..=n {
            for (gram, &c) in &self.counts[k - 1] {
                // Unigram `<s>` is no child of the empty context and is left
                // out of the count-of-counts.
                if k == 1 && gram[0] == BOS {
                    continue;
                }
                let a = left_type_of(n, &continuation, gram, c);
                *raw_coc[k - 1].entry(c).or_insert(0) += 1;
                *left_type_coc[k - 1].entry(a).or_insert(0) += 1;
                let st = contexts.entry(gram[..k - 1].to_vec()).or_default();
                st.c += c;
                st.t += 1;
                st.a += a;
                match a {
                    1 => st.n1 += 1,
                    2 => st.n2 += 1,
                    _ if a >= 3 => st.n3plus += 1,
                    _ => panic!("left-type count 0 for {gram:?}"),
                }
            }
        }
        Derived {
            continuation,
            contexts,
            raw_coc,
            left_type_coc,
        }
    }

    /// `quern dump` lines, sorted: `words<TAB>count<TAB>continuation`.
    pub fn dump_lines(&self, d: &Derived) -> Vec<String> {
        let n = self.settings.order;
        let mut lines = Vec::new();
        for k in 1..=n {
            for (gram, c) in &self.counts[k - 1] {
                let cont = if k == n {
                    "-".to_string()
                } else {
                    d.continuation[k - 1]
                        .get(gram)
                        .copied()
                        .unwrap_or(0)
                        .to_string()
                };
                lines.push(format!("{}\t{}\t{}", gram.join(" "), c, cont));
            }
        }
        lines.sort();
        lines
    }

    /// `quern dump --contexts` lines, sorted:
    /// `context<TAB>C<TAB>T<TAB>A<TAB>N1<TAB>N2<TAB>N3+`.
    pub fn context_lines(&self, d: &Derived) -> Vec<String> {
        let mut lines: Vec<String> = d
            .contexts
            .iter()
            .map(|(h, s)| {
                format!(
                    "{}\t{}\t{}\t{}\t{}\t{}\t{}",
                    h.join(" "),
                    s.c,
                    s.t,
                    s.a,
                    s.n1,
                    s.n2,
                    s.n3plus
                )
            })
            .collect();
        lines.sort();
        lines
    }

    /// `quern stats --json`, in the contract's shape.
    pub fn stats_json(&self, d: &Derived) -> Value {
        let unigrams = &self.counts[0];
        let tokens: u64 = unigrams
            .iter()
            .filter(|(g, _)| g[0] != BOS)
            .map(|(_, c)| *c)
            .sum();
        let types = unigrams.keys().filter(|g| g[0] != BOS).count() as u64;
        let unk_seen = unigrams.contains_key(&vec![UNK.to_string()]);
        let vocabulary = types + if unk_seen { 0 } else { 1 };
        let coc =
            |m: &BTreeMap<u64, u64>| Value::Array(m.iter().map(|(r, n)| json!([r, n])).collect());
        let orders: Vec<Value> = (1..=self.settings.order)
            .map(|k| {
                let adj = &d.left_type_coc[k - 1];
                let nr = |r: u64| adj.get(&r).copied().unwrap_or(0);
                json!({
                    "order": k,
                    "ngrams": self.counts[k - 1].len(),
                    "count_of_counts": {"raw": coc(&d.raw_coc[k - 1]), "left_type": coc(adj)},
                    "discounts": discounts(nr(1), nr(2), nr(3), nr(4)),
                })
            })
            .collect();
        json!({
            "format_version": 3,
            "settings": {"order": self.settings.order, "lowercase": self.settings.lowercase},
            "totals": {
                "sentences": self.sentences,
                "tokens": tokens,
                "vocabulary": vocabulary,
                "types": types,
                "marker_tokens": self.marker_tokens,
                "skipped_lines": self.skipped_lines,
                "invalid_utf8_lines": self.invalid_utf8_lines,
            },
            "orders": orders,
        })
    }

    /// Dump, contexts and stats together.
    pub fn view(&self) -> StoreView {
        let d = self.derive();
        StoreView {
            dump: self.dump_lines(&d),
            contexts: self.context_lines(&d),
            stats: self.stats_json(&d),
        }
    }
}

/// Left-type count a(g) = c(g) if order(g) = N or g starts with `<s>`, else
/// N1+(. g).
fn left_type_of(
    n: usize,
    continuation: &[HashMap<Vec<String>, u64>],
    gram: &[String],
    c: u64,
) -> u64 {
    if gram.len() == n || gram[0] == BOS {
        c
    } else {
        continuation[gram.len() - 1].get(gram).copied().unwrap_or(0)
    }
}

/// The Kneser-Ney discounts of one order from its left-type n1..n4, as the
/// stats JSON's `discounts` (values only): modified Kneser-Ney (Chen &
/// Goodman 1998) Y = n1/(n1+2 n2); D1 = 1 - 2Y n2/n1; D2 = 2 - 3Y n3/n2;
/// D3+ = 3 - 4Y n4/n3, and the single discount D = n1/(n1 + 2 n2) (Ney,
/// Essen & Kneser 1994).
///
/// D_r is null where n1, n2, n_r or n_(r+1) is 0 (its formula reads them)
/// or where it falls outside (0, r]; D is null where n1 or n2 is 0.
pub fn discounts(n1: u64, n2: u64, n3: u64, n4: u64) -> Value {
    let n = [n1, n2, n3, n4];
    let modified = |r: usize| -> Value {
        if [1, 2, r, r + 1].iter().any(|&i| n[i - 1] == 0) {
            return Value::Null;
        }
        let (f1, f2) = (n1 as f64, n2 as f64);
        let y = f1 / (f1 + 2.0 * f2);
        let d = r as f64 - (r + 1) as f64 * y * n[r] as f64 / n[r - 1] as f64;
        if d > 0.0 && d <= r as f64 {
            json!(d)
        } else {
            Value::Null
        }
    };
    let single = if n1 > 0 && n2 > 0 {
        json!(n1 as f64 / (n1 as f64 + 2.0 * n2 as f64))
    } else {
        Value::Null
    };
    json!({
        "d1": {"value": modified(1)},
        "d2": {"value": modified(2)},
        "d3plus": {"value": modified(3)},
        "kn": {"value": single},
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn lines(v: &[&str]) -> Vec<String> {
        let mut v: Vec<String> = v.iter().map(|s| s.to_string()).collect();
        v.sort();
        v
    }

    /// Source: hand computation over the contract.
    ///
    /// Corpus "a b\na b a\n", order 3. Padded sentences:
    ///   S1 = <s> a b </s>      S2 = <s> a b a </s>
    /// Unigrams: <s> 2, a 3 (S1:1, S2:2), b 2, </s> 2.
    /// Bigrams: <s> a 2, a b 2, b </s> 1 (S1), b a 1 (S2), a </s> 1 (S2).
    /// Trigrams: <s> a b 2, a b </s> 1, a b a 1, b a </s> 1.
    /// Continuations N1+(.g) from the distinct (k+1)-grams ending in g:
    ///   a: {<s> a, b a} -> 2;  b: {a b} -> 1;  </s>: {b </s>, a </s>} -> 2;
    ///   <s>: 0.  a b: {<s> a b} -> 1;  b </s>: {a b </s>} -> 1;
    ///   b a: {a b a} -> 1;  a </s>: {b a </s>} -> 1;  <s> a: 0.
    /// Adjusted: order 3 and <s>-initial keep raw counts:
    ///   a 2, b 1, </s> 2, <s> a 2, a b 1, b </s> 1, b a 1, a </s> 1,
    ///   trigrams 2,1,1,1.
    /// Contexts (C, T, A, N1, N2, N3+):
    ///   ""    children a(3/2) b(2/1) </s>(2/2): C 7, T 3, A 5, N1 1, N2 2
    ///   <s>   child <s> a (2/2):                 2 1 2 0 1 0
    ///   a     a b (2/1), a </s> (1/1):           3 2 2 2 0 0
    ///   b     b </s> (1/1), b a (1/1):           2 2 2 2 0 0
    ///   <s> a <s> a b (2/2):                     2 1 2 0 1 0
    ///   a b   a b </s> (1), a b a (1):           2 2 2 2 0 0
    ///   b a   b a </s> (1):                      1 1 1 1 0 0
    ///   (</s>, b </s>, a </s> have no children.)
    /// Count-of-counts (unigram <s> excluded):
    ///   order 1 raw {2:2, 3:1}, left-type {1:1, 2:2}
    ///   order 2 raw {1:3, 2:2}, left-type {1:4, 2:1}
    ///   order 3 raw {1:3, 2:1}, left-type {1:3, 2:1}
    /// Discounts: left-type n3 = 0 at every order, so D2 and D3+ are null.
    /// Totals: 2 sentences; tokens 3+2+2 = 7; types {a,b,</s>} = 3;
    ///   vocabulary 3 + 1 (no <unk>) = 4; n-grams per order 4, 5, 4.
    #[test]
    fn reference_hand_computed_tiny_corpus() {
        let mut r = Reference::new(Settings::order(3));
        r.add_bytes(b"a b\na b a\n");
        let view = r.view();
        assert_eq!(
            view.dump,
            lines(&[
                "<s>\t2\t0",
                "a\t3\t2",
                "b\t2\t1",
                "</s>\t2\t2",
                "<s> a\t2\t0",
                "a b\t2\t1",
                "b </s>\t1\t1",
                "b a\t1\t1",
                "a </s>\t1\t1",
                "<s> a b\t2\t-",
                "a b </s>\t1\t-",
                "a b a\t1\t-",
                "b a </s>\t1\t-",
            ])
        );
        assert_eq!(
            view.contexts,
            lines(&[
                "\t7\t3\t5\t1\t2\t0",
                "<s>\t2\t1\t2\t0\t1\t0",
                "a\t3\t2\t2\t2\t0\t0",
                "b\t2\t2\t2\t2\t0\t0",
                "<s> a\t2\t1\t2\t0\t1\t0",
                "a b\t2\t2\t2\t2\t0\t0",
                "b a\t1\t1\t1\t1\t0\t0",
            ])
        );
        let s = &view.stats;
        assert_eq!(s["format_version"], json!(3));
        assert_eq!(s["settings"], json!({"order": 3, "lowercase": false}));
        assert_eq!(
            s["totals"],
            json!({"sentences": 2, "tokens": 7, "vocabulary": 4, "types": 3,
                   "marker_tokens": 0, "skipped_lines": 0, "invalid_utf8_lines": 0})
        );
        let o = &s["orders"];
        assert_eq!(o.as_array().unwrap().len(), 3);
        assert_eq!(o[0]["order"], json!(1));
        assert_eq!(o[0]["ngrams"], json!(4));
        assert_eq!(o[1]["ngrams"], json!(5));
        assert_eq!(o[2]["ngrams"], json!(4));
        assert_eq!(
            o[0]["count_of_counts"],
            json!({"raw": [[2, 2], [3, 1]], "left_type": [[1, 1], [2, 2]]})
        );
        assert_eq!(
            o[1]["count_of_counts"],
            json!({"raw": [[1, 3], [2, 2]], "left_type": [[1, 4], [2, 1]]})
        );
        assert_eq!(
            o[2]["count_of_counts"],
            json!({"raw": [[1, 3], [2, 1]], "left_type": [[1, 3], [2, 1]]})
        );
        // D1 and D need only n1 and n2: order 1 (1, 2): Y = 1/5,
        // D1 = 1 - 2(1/5)(2/1) = 1/5; order 2 (4, 1): Y = 2/3, D1 = 2/3;
        // order 3 (3, 1): Y = 3/5, D1 = 1 - 2(3/5)(1/3) = 3/5.
        for (k, d) in [(0, 0.2), (1, 2.0 / 3.0), (2, 0.6)] {
            let ds = &o[k]["discounts"];
            assert!(
                (ds["d1"]["value"].as_f64().unwrap() - d).abs() < 1e-12,
                "{ds}"
            );
            assert!(
                (ds["kn"]["value"].as_f64().unwrap() - d).abs() < 1e-12,
                "{ds}"
            );
            assert!(
                ds["d2"]["value"].is_null() && ds["d3plus"]["value"].is_null(),
                "{ds}"
            );
        }
    }

    /// Source: hand computation of the contract's formulas.
    /// n = (4, 2, 1, 1): Y = 4/(4+4) = 0.5; D1 = 1 - 2(0.5)(2/4) = 0.5;
    /// D2 = 2 - 3(0.5)(1/2) = 1.25; D3+ = 3 - 4(0.5)(1/1) = 1.
    /// n = (6, 3, 2, 1): Y = 6/12 = 0.5; D1 = 1 - 2(0.5)(3/6) = 0.5;
    /// D2 = 2 - 3(0.5)(2/3) = 1; D3+ = 3 - 4(0.5)(1/2) = 2.
    /// A zero that a formula reads -> null; so is a value outside (0, r]:
    /// n = (2050, 243, 95, 96) (the demo corpus, order 2) gives
    /// D3+ = 3 - 4(2050/2536)(96/95) = -0.2675.
    #[test]
    fn reference_discount_formulas() {
        let values = |v: Value| -> Vec<Value> {
            ["d1", "d2", "d3plus", "kn"]
                .map(|k| v[k]["value"].clone())
                .to_vec()
        };
        assert_eq!(
            values(discounts(4, 2, 1, 1)),
            vec![json!(0.5), json!(1.25), json!(1.0), json!(0.5)]
        );
        assert_eq!(
            values(discounts(6, 3, 2, 1)),
            vec![json!(0.5), json!(1.0), json!(2.0), json!(0.5)]
        );
        assert!(values(discounts(2050, 243, 95, 96))[2].is_null());
        for (n, defined) in [
            ((0, 1, 1, 1), [false, false, false, false]),
            ((1, 0, 1, 1), [false, false, false, false]),
            ((1, 1, 0, 1), [true, false, false, true]),
            ((1, 1, 1, 0), [true, true, false, true]),
        ] {
            let got = values(discounts(n.0, n.1, n.2, n.3));
            let is: Vec<bool> = got.iter().map(|v| !v.is_null()).collect();
            assert_eq!(is, defined.to_vec(), "{n:?}: {got:?}");
        }
    }

    /// Source: hand tokenization over the contract.
    /// Lines (order 2, max_line_bytes 20; all other lines are shorter):
    ///   "Hello  World\r"      -> Hello World                (sentence 1)
    ///   ""                    -> blank, skipped
    ///   "   \t \r"            -> whitespace only, skipped
    ///   "<s> x </s> <unk>"    -> <unk> x <unk> <unk>, 3 marker tokens (2)
    ///   "caf\xff\xfe"         -> "caf\u{FFFD}\u{FFFD}", invalid UTF-8 (3)
    ///   "p\u{A0}q\u{200B}r"   -> NBSP is White_Space, ZWSP is not:
    ///                            p, "q\u{200B}r"                 (4)
    ///   "a\0b"                -> NUL is not whitespace: "a\0b" (5)
    ///   "0123456789012345678901" -> 22 bytes > 20: skipped and reported
    ///   "01234567890123456789" -> 20 bytes, kept                (6)
    ///   last line "Z" without a final newline                   (7)
    /// Words 2+4+1+2+1+1+1 = 12, tokens = 12 + 7 </s> = 19.
    /// Types: Hello World <unk> x caf.. p q.r a.b 0123..89 Z </s> = 11;
    /// <unk> seen, so vocabulary = 11.
    #[test]
    fn reference_tokenization() {
        let input: &[u8] = b"Hello  World\r\n\n   \t \r\n<s> x </s> <unk>\ncaf\xff\xfe\np\xc2\xa0q\xe2\x80\x8br\na\x00b\n0123456789012345678901\n01234567890123456789\nZ";
        let mut r = Reference::new(Settings::order(2).max_line_bytes(20));
        r.add_bytes(input);
        assert_eq!(r.sentences, 7);
        assert_eq!(r.marker_tokens, 3);
        assert_eq!(r.skipped_lines, 1);
        assert_eq!(r.invalid_utf8_lines, 1);
        assert_eq!(r.count(&["Hello"]), 1);
        assert_eq!(r.count(&["World", "</s>"]), 1);
        assert_eq!(r.count(&["<unk>"]), 3);
        assert_eq!(r.count(&["<s>", "<unk>"]), 1);
        assert_eq!(r.count(&["<unk>", "x"]), 1);
        assert_eq!(r.count(&["x", "<unk>"]), 1);
        assert_eq!(r.count(&["<unk>", "<unk>"]), 1);
        assert_eq!(r.count(&["caf\u{FFFD}\u{FFFD}"]), 1);
        assert_eq!(r.count(&["p", "q\u{200B}r"]), 1);
        assert_eq!(r.count(&["a\0b"]), 1);
        assert_eq!(r.count(&["0123456789012345678901"]), 0);
        assert_eq!(r.count(&["01234567890123456789"]), 1);
        assert_eq!(r.count(&["Z", "</s>"]), 1);
        assert_eq!(r.count(&["<s>"]), 7);
        assert_eq!(r.count(&["</s>"]), 7);
        let s = r.stats_json(&r.derive());
        assert_eq!(s["totals"]["tokens"], json!(19));
        assert_eq!(s["totals"]["types"], json!(11));
        assert_eq!(s["totals"]["vocabulary"], json!(11));

        // Lowercase: str::to_lowercase on every token.
        let mut l = Reference::new(Settings::order(1).lowercase(true));
        l.add_bytes("Hello HELLO \u{C0}B\n".as_bytes());
        assert_eq!(l.count(&["hello"]), 2);
        assert_eq!(l.count(&["\u{E0}b"]), 1);
        assert_eq!(l.count(&["Hello"]), 0);
    }
}
