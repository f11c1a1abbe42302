//! Reading the ARPA back-off text format: a model made elsewhere, checked
//! line by line as it is read.
//!
//! ```text
//! (free text)
//! \data\
//! ngram 1=<n1>
//! …
//! ngram N=<nN>
//!
//! \1-grams:
//! <log10 q>  <w1>  [<log10 β>]
//! …
//! \N-grams:
//! <log10 q>  <w1> … <wN>
//!
//! \end\
//! ```
//!
//! Fields are separated by spaces or tabs. What is checked, each failure
//! an [`Error::BadLine`] with the file, the line number and what was
//! expected there:
//!
//! 1. the header: `\data\`, then `ngram k=<count>` for k = 1, 2, … in
//!    turn (at most [`MAX_ORDER`]);
//! 2. the sections: `\k-grams:` for every order of the header, in order,
//!    each with exactly the header's count of lines, then `\end\` and
//!    nothing but blank lines after it;
//! 3. every n-gram line: a number, k words, and a back-off weight only
//!    below the top order (it may be left out: log10 β = 0, β = 1);
//! 4. values: log10 q a finite number ≤ 0 (q ≤ 1; the trade writes `-99`
//!    for 0, which is 10^−99 here), log10 β a finite number ≤ 38 (β
//!    within a 32-bit float);
//! 5. no n-gram twice; closure: the prefix (all words but the last) and
//!    the suffix (all words but the first) of every n-gram of order k ≥ 2
//!    are n-grams of order k − 1, so every word is a unigram.
//!
//! Memory: the words' text, and per n-gram its context's entry, its word,
//! q and β (24 bytes) and one hash-table slot (about 16 bytes): a model of
//! 100 million n-grams needs about 4 GB.

use std::collections::HashMap;
use std::io::BufRead;
use std::path::{Path, PathBuf};

use crate::error::{Error, IoContext, Result};
use crate::key::MAX_ORDER;

/// The n-grams of one order, in file order.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ArpaOrder {
    /// The entry of each n-gram's prefix among the n-grams of the order
    /// below (for order 1: 0).
    pub context: Vec<u32>,
    /// Each n-gram's last word, as an index into [`ArpaModel::words`].
    pub word: Vec<u32>,
    /// q = P(last word | prefix), from 10^(log10 q).
    pub q: Vec<f64>,
    /// β of the n-gram as a context (1 where the line gives none; empty
    /// at the top order).
    pub beta: Vec<f64>,
}

impl ArpaOrder {
    /// Its n-grams.
    pub fn len(&self) -> usize {
        self.word.len()
    }

    /// Whether it has none.
    pub fn is_empty(&self) -> bool {
        self.word.is_empty()
    }
}

/// A back-off model read from ARPA text.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ArpaModel {
    /// The text before `\data\`, lines joined with newlines.
    pub preamble: String,
    /// The unigrams' words, in file order (word index i is unigram i).
    pub words: Vec<String>,
    /// Every order 1..=N (index k − 1).
    pub orders: Vec<ArpaOrder>,
}

impl ArpaModel {
    /// The highest order N.
    pub fn order(&self) -> usize {
        self.orders.len()
    }
}

/// Reads and checks the ARPA file at `path`, gzip-compressed if its name
/// ends in `.gz`.
pub fn read_arpa_file(path: &Path) -> Result<ArpaModel> {
    let f = std::fs::File::open(path).at(path, "open")?;
    let buf = std::io::BufReader::with_capacity(1 << 20, f);
    if path.extension().is_some_and(|e| e == "gz") {
        let dec = flate2::read::MultiGzDecoder::new(buf);
        read_arpa(std::io::BufReader::with_capacity(1 << 20, dec), path)
    } else {
        read_arpa(buf, path)
    }
}

/// Where the reader is.
#[derive(Clone, Copy, PartialEq)]
enum Phase {
    Preamble,
    Header,
    /// Expecting the `\k-grams:` line of this order, or blank lines.
    Between(usize),
    /// Inside the section of this order.
    Section(usize),
    End,
}

struct Reader {
    path: PathBuf,
    line: u64,
}

impl Reader {
    fn bad(&self, expected: impl Into<String>, found: &str) -> Error {
        let mut found: String = found.chars().take(80).collect();
        if found.is_empty() {
            found = "an empty line".into();
        } else {
            found = format!("{found:?}");
        }
        Error::BadLine {
            path: self.path.clone(),
            line: self.line,
            expected: expected.into(),
            found,
        }
    }
}

fn is_blank(s: &str) -> bool {
    s.trim().is_empty()
}

/// Reads and checks ARPA text from `input`; `path` names it in errors.
pub fn read_arpa(mut input: impl BufRead, path: &Path) -> Result<ArpaModel> {
    let mut r = Reader {
        path: path.to_path_buf(),
        line: 0,
    };
    let mut model = ArpaModel::default();
    let mut counts: Vec<u64> = Vec::new();
    let mut phase = Phase::Preamble;
    // Order 1: word → index; order k ≥ 2 (index k − 2): (context entry,
    // word) → entry.
    let mut unigrams: HashMap<String, u32> = HashMap::new();
    let mut entries: Vec<HashMap<(u32, u32), u32>> = Vec::new();
    let mut raw = Vec::new();
    let mut preamble: Vec<String> = Vec::new();
    let mut ids: Vec<u32> = Vec::with_capacity(MAX_ORDER);
    loop {
        raw.clear();
        let got = input.read_until(b'\n', &mut raw).at(path, "read")?;
        if got == 0 {
            break;
        }
        r.line += 1;
        if raw.last() == Some(&b'\n') {
            raw.pop();
        }
        if raw.last() == Some(&b'\r') {
            raw.pop();
        }
        let text = std::str::from_utf8(&raw).map_err(|e| {
            r.bad(
                "UTF-8 text",
                &format!("a byte that is not UTF-8 at column {}", e.valid_up_to() + 1),
            )
        })?;
        match phase {
            Phase::Preamble => {
                if text.trim() == "\\data\\" {
                    phase = Phase::Header;
                } else {
                    preamble.push(text.to_string());
                }
            }
            Phase::Header => {
                if is_blank(text) && !counts.is_empty() {
                    continue;
                }
                let t = text.trim();
                if let Some(rest) = t.strip_prefix("ngram ") {
                    let want = counts.len() + 1;
                    let (k, c) = rest
                        .split_once('=')
                        .and_then(|(k, c)| {
                            Some((
                                k.trim().parse::<usize>().ok()?,
                                c.trim().parse::<u64>().ok()?,
                            ))
                        })
                        .ok_or_else(|| r.bad(format!("\"ngram {want}=<count>\""), text))?;
                    if k != want {
                        return Err(r.bad(format!("the count of order {want}"), text));
                    }
                    if k > MAX_ORDER {
                        return Err(r.bad(format!("at most order {MAX_ORDER}"), text));
                    }
                    if k > 1 && c > u64::from(u32::MAX) {
                        return Err(r.bad("at most 2^32 − 1 n-grams of an order", text));
                    }
                    if k == 1 && c == 0 {
                        return Err(r.bad("at least one unigram", text));
                    }
                    counts.push(c);
                } else if t == "\\1-grams:" && !counts.is_empty() {
                    phase = Phase::Section(1);
                    model.orders.push(ArpaOrder::default());
                } else if counts.is_empty() {
                    return Err(r.bad("\"ngram 1=<count>\"", text));
                } else {
                    return Err(r.bad(
                        format!("\"ngram {}=<count>\" or \"\\1-grams:\"", counts.len() + 1),
                        text,
                    ));
                }
            }
            Phase::Between(k) => {
                if is_blank(text) {
                    continue;
                }
                let t = text.trim();
                let n = counts.len();
                if k > n {
                    if t == "\\end\\" {
                        phase = Phase::End;
                        continue;
                    }
                    return Err(r.bad("\"\\end\\\"", text));
                }
                if t != format!("\\{k}-grams:") {
                    return Err(r.bad(format!("\"\\{k}-grams:\""), text));
                }
                model.orders.push(ArpaOrder::default());
                phase = Phase::Section(k);
            }
            Phase::Section(k) => {
                let n = counts.len();
                let have = model.orders[k - 1].len() as u64;
                let t = text.trim();
                if have == counts[k - 1] {
                    // The section is complete: a blank line, the next
                    // section or the end.
                    if is_blank(text) {
                        phase = Phase::Between(k + 1);
                        continue;
                    }
                    if k < n && t == format!("\\{}-grams:", k + 1) {
                        model.orders.push(ArpaOrder::default());
                        phase = Phase::Section(k + 1);
                        continue;
                    }
                    if k == n && t == "\\end\\" {
                        phase = Phase::End;
                        continue;
                    }
                    return Err(r.bad(
                        format!(
                            "no more {k}-grams (the header gives {}), then {}",
                            counts[k - 1],
                            if k < n {
                                format!("\"\\{}-grams:\"", k + 1)
                            } else {
                                "\"\\end\\\"".into()
                            }
                        ),
                        text,
                    ));
                }
                if is_blank(text) || t.starts_with('\\') {
                    return Err(r.bad(
                        format!(
                            "{} more {k}-grams (the header gives {})",
                            counts[k - 1] - have,
                            counts[k - 1]
                        ),
                        text,
                    ));
                }
                let mut fields = t.split([' ', '\t']).filter(|f| !f.is_empty());
                let nf = t.split([' ', '\t']).filter(|f| !f.is_empty()).count();
                let shape = if k < n {
                    format!(
                        "log10 q, {k} word{}, then a log10 back-off weight or nothing",
                        if k > 1 { "s" } else { "" }
                    )
                } else {
                    format!("log10 q and {k} word{}", if k > 1 { "s" } else { "" })
                };
                if nf != k + 1 && !(k < n && nf == k + 2) {
                    return Err(r.bad(format!("{shape} ({nf} fields)"), text));
                }
                let lq = fields.next().expect("counted");
                let lq: f64 = lq
                    .parse()
                    .map_err(|_| r.bad(format!("{shape}: a number first"), text))?;
                if !lq.is_finite() || lq > 0.0 {
                    return Err(r.bad(
                        "log10 q finite and at most 0 (a probability at most 1)",
                        text,
                    ));
                }
                ids.clear();
                let mut last = "";
                for (i, w) in fields.by_ref().take(k).enumerate() {
                    if k == 1 {
                        last = w;
                        break;
                    }
                    let x = unigrams.get(w).copied().ok_or_else(|| {
                        r.bad(
                            format!(
                                "n-grams closed under prefixes and suffixes: word {} ({w:?}) is not a unigram",
                                i + 1
                            ),
                            text,
                        )
                    })?;
                    ids.push(x);
                }
                let beta = match fields.next() {
                    None => 1.0,
                    Some(b) => {
                        let lb: f64 = b.parse().map_err(|_| {
                            r.bad(format!("{shape}: a number for the back-off weight"), text)
                        })?;
                        if !(lb.is_finite() && lb <= 38.0) {
                            return Err(r.bad(
                                "a finite log10 back-off weight of at most 38 (a weight a 32-bit float holds)",
                                text,
                            ));
                        }
                        10f64.powf(lb)
                    }
                };
                let o = &mut model.orders[k - 1];
                let e = o.len() as u32;
                if k == 1 {
                    if unigrams.insert(last.to_string(), e).is_some() {
                        return Err(r.bad(
                            format!("each unigram once ({last:?} is listed twice)"),
                            text,
                        ));
                    }
                    model.words.push(last.to_string());
                    o.context.push(0);
                    o.word.push(e);
                } else {
                    // The entry of ids[a..b] among the n-grams of order b − a.
                    let find = |a: usize, b: usize| -> Option<u32> {
                        let mut x = ids[a];
                        for (j, &w) in ids[a + 1..b].iter().enumerate() {
                            x = *entries[j].get(&(x, w))?;
                        }
                        Some(x)
                    };
                    let prefix = find(0, k - 1).ok_or_else(|| {
                        r.bad(
                            format!("n-grams closed under prefixes: the first {} words are not a {}-gram of the file", k - 1, k - 1),
                            text,
                        )
                    })?;
                    if find(1, k).is_none() {
                        return Err(r.bad(
                            format!("n-grams closed under suffixes: the last {} words are not a {}-gram of the file", k - 1, k - 1),
                            text,
                        ));
                    }
                    if entries.len() < k - 1 {
                        entries.push(HashMap::new());
                    }
                    let w = ids[k - 1];
                    if entries[k - 2].insert((prefix, w), e).is_some() {
                        return Err(r.bad("each n-gram once (this one is listed twice)", text));
                    }
                    o.context.push(prefix);
                    o.word.push(w);
                }
                o.q.push(10f64.powf(lq));
                if k < n {
                    o.beta.push(beta);
                }
            }
            Phase::End => {
                if !is_blank(text) {
                    return Err(r.bad("nothing after \"\\end\\\"", text));
                }
            }
        }
    }
    if phase != Phase::End {
        r.line += 1;
        let expected = match phase {
            Phase::Preamble => "\"\\data\\\"".to_string(),
            Phase::Header => "the n-gram counts, then \"\\1-grams:\"".to_string(),
            Phase::Between(k) if k > counts.len() => "\"\\end\\\"".to_string(),
            Phase::Between(k) => format!("\"\\{k}-grams:\""),
            Phase::Section(k) => {
                let have = model.orders[k - 1].len() as u64;
                if have < counts[k - 1] {
                    format!(
                        "{} more {k}-grams (the header gives {})",
                        counts[k - 1] - have,
                        counts[k - 1]
                    )
                } else {
                    "\"\\end\\\"".to_string()
                }
            }
            Phase::End => unreachable!(),
        };
        return Err(Error::BadLine {
            path: path.to_path_buf(),
            line: r.line,
            expected,
            found: "the end of the file".into(),
        });
    }
    model.preamble = preamble.join("\n");
    Ok(model)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<ArpaModel> {
        read_arpa(text.as_bytes(), Path::new("t.arpa"))
    }

    fn line_of(text: &str) -> (u64, String) {
        match read(text) {
            Err(Error::BadLine { line, expected, .. }) => (line, expected),
            other => panic!("not refused by line: {other:?}"),
        }
    }

    const GOOD: &str = "made by hand\n\n\\data\\\nngram 1=3\nngram 2=2\n\n\\1-grams:\n-0.5\ta\t-0.1\n-0.3\tb\n-99\t<s>\t-0.2\n\n\\2-grams:\n-0.2\t<s> a\n-0.1\ta b\n\n\\end\\\n";

    /// A small file by hand: words, contexts, q = 10^x, β = 1 where absent.
    #[test]
    fn reads_a_small_file() {
        let m = read(GOOD).unwrap();
        assert_eq!(m.order(), 2);
        assert_eq!(m.words, ["a", "b", "<s>"]);
        assert_eq!(m.orders[1].context, [2, 0]);
        assert_eq!(m.orders[1].word, [0, 1]);
        assert!((m.orders[0].q[0] - 10f64.powf(-0.5)).abs() < 1e-15);
        assert_eq!(m.orders[0].beta[1], 1.0);
        assert!(m.orders[1].beta.is_empty());
        assert_eq!(m.preamble, "made by hand\n");
    }

    /// Each malformed variant of the file is refused at its line.
    #[test]
    fn refuses_at_the_line() {
        let cases: [(&str, &str, u64); 12] = [
            ("ngram 2=2\n", "ngram 2=x\n", 5),
            ("ngram 2=2\n", "ngram 3=2\n", 5),
            ("-0.3\tb\n", "0.3\tb\n", 9),
            ("-0.3\tb\n", "-0.3\tb\t-0.1\t7\n", 9),
            ("-0.3\tb\n", "-0.3\ta\n", 9),
            ("-0.1\ta b\n", "-0.1\ta c\n", 14),
            ("-0.1\ta b\n", "-0.1\ta\n", 14),
            ("-0.1\ta b\n", "-0.1\ta b\t-0.5\n", 14),
            ("-0.1\ta b\n", "-0.2\t<s> a\n", 14),
            ("\\end\\\n", "\\end\\\nmore\n", 17),
            ("-0.3\tb\n", "-0.3\tb\tnan\n", 9),
            ("\\2-grams:\n", "\\3-grams:\n", 12),
        ];
        for (from, to, line) in cases {
            let bad = GOOD.replacen(from, to, 1);
            assert_ne!(bad, GOOD);
            assert_eq!(line_of(&bad).0, line, "{to:?}");
        }
        // Too few lines: the section's end comes early.
        let short = GOOD.replacen("ngram 2=2", "ngram 2=3", 1);
        assert_eq!(line_of(&short).0, 15);
        // Cut off: the end of the file is one past the last line.
        let cut = &GOOD[..GOOD.find("\\end\\").unwrap()];
        assert_eq!(line_of(cut).0, 16);
        assert_eq!(line_of("").0, 1);
        // A 3-gram whose prefix is listed and whose suffix is not.
        let tri = "\\data\\\nngram 1=2\nngram 2=2\nngram 3=1\n\\1-grams:\n-0.3\ta\n-0.3\tb\n\\2-grams:\n-0.3\ta b\n-0.3\tb a\n\\3-grams:\n-0.1\ta b b\n\\end\\\n";
        let (line, expected) = line_of(tri);
        assert_eq!(line, 12);
        assert!(expected.contains("suffixes"), "{expected}");
    }
}
