//! The count-table reader: one line of a count table to an n-gram and its
//! count (`ingest --counts`).
//!
//! A line is `n-gram<TAB>count`, or `n-gram<TAB>count<TAB>continuation` as
//! `quern dump` writes it (the third field, a number or `-`, is checked and
//! not used: continuation counts are derived again), or with a fourth
//! field, the documents `dump` writes for a store with document counts
//! (a positive number, checked and not used: a table holds no documents). The n-gram is 1 to N
//! words separated by single spaces (U+0020); no word is empty. `<s>`,
//! `</s>` and `<unk>` are the markers: `<s>` only as the first word, `</s>`
//! only as the last. The count is a positive decimal integer of at most
//! 2^64 − 1, ASCII digits only. The first line of a file may be the header
//! `quern dump` writes ([`is_header`]). Everything is pure: the caller
//! names the file and line of a [`BadCountLine`].

use crate::words::{BOS, EOS};

/// Why a line is no count-table line: what the format allows there and
/// what the line holds (the caller adds the file and line number).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BadCountLine {
    /// What the format allows.
    pub expected: String,
    /// What the line holds.
    pub found: String,
}

/// One count-table line, read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CountLine<'a> {
    /// The n-gram's words, separated by single spaces (checked).
    pub ngram: &'a str,
    /// The number of words.
    pub order: usize,
    /// The count (positive).
    pub count: u64,
}

impl<'a> CountLine<'a> {
    /// The n-gram's words.
    pub fn words(&self) -> impl Iterator<Item = &'a str> {
        self.ngram.split(' ')
    }
}

/// True for the header line `quern dump` writes (`ngram<TAB>count`,
/// optionally followed by `<TAB>continuation` and `<TAB>documents`), which
/// the first line of a count table may be.
pub fn is_header(line: &[u8]) -> bool {
    line == b"ngram\tcount\tcontinuation"
        || line == b"ngram\tcount"
        || line == b"ngram\tcount\tcontinuation\tdocuments"
}

/// At most this many bytes of a bad line are quoted in a message.
const QUOTED: usize = 60;

/// `s` quoted for a message, cut at [`QUOTED`] bytes.
fn quote(s: &str) -> String {
    match s.char_indices().nth(QUOTED) {
        Some((i, _)) => format!("{:?}…", &s[..i]),
        None => format!("{s:?}"),
    }
}

fn bad(expected: impl Into<String>, found: impl Into<String>) -> BadCountLine {
    BadCountLine {
        expected: expected.into(),
        found: found.into(),
    }
}

/// Reads one line (without its line end) of a table of orders
/// 1..=`max_order`.
pub fn read_line(line: &[u8], max_order: usize) -> Result<CountLine<'_>, BadCountLine> {
    let text = std::str::from_utf8(line).map_err(|e| {
        bad(
            "UTF-8 text",
            format!("a byte that is not UTF-8 at byte {}", e.valid_up_to() + 1),
        )
    })?;
    let mut fields = text.split('\t');
    let ngram = fields.next().unwrap_or("");
    let (count, cont, docs) = (fields.next(), fields.next(), fields.next());
    let extra = fields.count();
    let count = match (count, extra) {
        (Some(c), 0) => c,
        _ => {
            let n = 1
                + usize::from(count.is_some())
                + usize::from(cont.is_some())
                + usize::from(docs.is_some())
                + extra;
            return Err(bad(
                "n-gram<TAB>count, or n-gram<TAB>count<TAB>continuation(<TAB>documents) as `quern dump` writes",
                format!(
                    "{n} field{} in {}",
                    if n == 1 { "" } else { "s" },
                    quote(text)
                ),
            ));
        }
    };
    let mut order = 0;
    let mut prev = "";
    for (i, w) in ngram.split(' ').enumerate() {
        order += 1;
        if w.is_empty() {
            return Err(bad(
                "words separated by single spaces",
                format!(
                    "an empty word (word {}) in the n-gram {}",
                    i + 1,
                    quote(ngram)
                ),
            ));
        }
        if w == BOS && i > 0 {
            return Err(bad(
                "<s> only as the first word",
                format!("<s> as word {} of {}", i + 1, quote(ngram)),
            ));
        }
        if prev == EOS {
            return Err(bad(
                "</s> only as the last word",
                format!("</s> as word {i} of {}", quote(ngram)),
            ));
        }
        prev = w;
    }
    if order > max_order {
        return Err(bad(
            format!("an n-gram of at most {max_order} words (the order asked for)"),
            format!("{order} words in {}", quote(ngram)),
        ));
    }
    let count = number(count).ok_or_else(|| {
        bad(
            "a count: a positive whole number of at most 18446744073709551615 in decimal digits",
            quote(count),
        )
    })?;
    if count == 0 {
        return Err(bad("a positive count", "0"));
    }
    if let Some(c) = cont {
        if c != "-" && number(c).is_none() {
            return Err(bad(
                "a continuation count (a whole number, or - for the highest order) in the third field",
                quote(c),
            ));
        }
    }
    if let Some(d) = docs {
        if number(d).is_none_or(|d| d == 0) {
            return Err(bad(
                "a number of documents (a positive whole number) in the fourth field",
                quote(d),
            ));
        }
    }
    Ok(CountLine {
        ngram,
        order,
        count,
    })
}

/// `s` as a decimal number of ASCII digits that fits 64 bits.
fn number(s: &str) -> Option<u64> {
    if s.is_empty() || !s.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    s.parse().ok()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ok(line: &str, n: usize) -> (Vec<String>, u64) {
        let l = read_line(line.as_bytes(), n).unwrap();
        (l.words().map(String::from).collect(), l.count)
    }

    fn err(line: &[u8], n: usize) -> String {
        read_line(line, n).unwrap_err().expected
    }

    #[test]
    fn reads_what_dump_writes_and_two_fields() {
        assert_eq!(
            ok("<s> the ferry\t2\t-", 3),
            (vec!["<s>".into(), "the".into(), "ferry".into()], 2)
        );
        assert_eq!(ok("ferry left\t1\t1", 3).1, 1);
        assert_eq!(ok("dawn </s>\t7", 3).1, 7);
        assert_eq!(ok("</s>\t3\t3", 3).1, 3);
        assert_eq!(ok("x\t18446744073709551615", 1).1, u64::MAX);
        assert!(is_header(b"ngram\tcount\tcontinuation"));
        assert!(!is_header(b"ngram\tcount\t"));
        // A store with document counts: a fourth field, not used.
        assert_eq!(ok("ferry left\t4\t1\t3", 3).1, 4);
        assert!(is_header(b"ngram\tcount\tcontinuation\tdocuments"));
    }

    #[test]
    fn refuses_what_the_format_does_not_allow() {
        assert!(err(b"a b", 2).starts_with("n-gram<TAB>count"));
        assert!(err(b"a\t1\t1\t1\t1", 2).starts_with("n-gram<TAB>count"));
        assert!(err(b"a\t1\t1\t0", 2).starts_with("a number of documents"));
        assert!(err(b"a\t1\t1\t", 2).starts_with("a number of documents"));
        assert_eq!(err(b"a  b\t1", 2), "words separated by single spaces");
        assert_eq!(err(b" a\t1", 2), "words separated by single spaces");
        assert_eq!(err(b"\t1", 2), "words separated by single spaces");
        assert!(err(b"a b c\t1", 2).starts_with("an n-gram of at most 2"));
        assert!(err(b"a\t0", 2).starts_with("a positive count"));
        assert!(err(b"a\t-1", 2).starts_with("a count"));
        assert!(err(b"a\t+1", 2).starts_with("a count"));
        assert!(err(b"a\t1.0", 2).starts_with("a count"));
        assert!(err(b"a\t18446744073709551616", 2).starts_with("a count"));
        assert!(err(b"a\t1\tx", 2).starts_with("a continuation count"));
        assert_eq!(err(b"a <s>\t1", 2), "<s> only as the first word");
        assert_eq!(err(b"</s> a\t1", 2), "</s> only as the last word");
        assert_eq!(err(b"a\xff\t1", 2), "UTF-8 text");
    }
}
