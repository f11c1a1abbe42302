//! One line of text to the padded id sequence of its sentence. Pure.
//!
//! The contract (see README, "What is counted"): tokens are the maximal runs
//! of characters that are not Unicode White_Space (`char::is_whitespace`);
//! invalid UTF-8 is decoded lossily (each bad sequence becomes U+FFFD) and
//! the line is reported; `--lowercase` applies Unicode lowercasing; a token
//! spelled `<s>`, `</s>` or `<unk>` becomes `<unk>`. A sentence
//! `w1 … wm` becomes `<s> w1 … wm </s>`; a line without tokens yields nothing.

use std::borrow::Cow;

use crate::error::Result;
use crate::words::{bos_id, eos_id, unk_id, word_id, Dictionary, WordId, BOS, EOS, UNK};

/// What a line looked like, for the ingest report.
#[derive(Debug, Default, Clone, Copy, PartialEq, Eq)]
pub struct LineReport {
    /// The line held invalid UTF-8 (decoded lossily).
    pub invalid_utf8: bool,
    /// Number of literal tokens spelled like a marker (mapped to `<unk>`).
    pub marker_tokens: u64,
    /// Number of tokens outside the word list (mapped to `<unk>`).
    pub mapped_tokens: u64,
}

/// A fixed vocabulary (`ingest --word-list`): every other token is counted
/// as `<unk>`. The words are as counted (lowercased by the caller when the
/// ingest lowercases).
#[derive(Debug, Default, Clone)]
pub struct WordSet {
    words: std::collections::HashSet<Box<str>>,
}

impl WordSet {
    /// The set of `words`.
    pub fn new<I: IntoIterator<Item = String>>(words: I) -> Self {
        WordSet {
            words: words.into_iter().map(String::into_boxed_str).collect(),
        }
    }

    /// Whether `w` is in the list.
    pub fn contains(&self, w: &str) -> bool {
        self.words.contains(w)
    }

    /// Distinct words.
    pub fn len(&self) -> usize {
        self.words.len()
    }

    /// No words.
    pub fn is_empty(&self) -> bool {
        self.words.is_empty()
    }
}

/// Turns lines into id sequences, remembering every word it saw.
pub struct Tokenizer<'w> {
    lowercase: bool,
    list: Option<&'w WordSet>,
    bos: WordId,
    eos: WordId,
    unk: WordId,
}

impl<'w> Tokenizer<'w> {
    /// A tokenizer; `lowercase` applies Unicode lowercasing to every token.
    pub fn new(lowercase: bool) -> Self {
        Tokenizer {
            lowercase,
            list: None,
            bos: bos_id(),
            eos: eos_id(),
            unk: unk_id(),
        }
    }

    /// The same tokenizer, counting every token outside `list` (after
    /// lowercasing) as `<unk>`.
    pub fn with_word_list(mut self, list: Option<&'w WordSet>) -> Self {
        self.list = list;
        self
    }

    /// Writes the padded ids of `line` (without its line end) into `out`,
    /// registering each word in `dict`. `out` is left empty for a line
    /// without tokens.
    pub fn sentence(
        &self,
        line: &[u8],
        dict: &mut Dictionary,
        out: &mut Vec<WordId>,
    ) -> Result<LineReport> {
        out.clear();
        let mut report = LineReport::default();
        let text = String::from_utf8_lossy(line);
        report.invalid_utf8 = matches!(text, Cow::Owned(_));
        for raw in text.split_whitespace() {
            if out.is_empty() {
                out.push(self.bos);
            }
            let tok = normalise(raw, self.lowercase);
            if tok == BOS || tok == EOS || tok == UNK {
                report.marker_tokens += 1;
                out.push(self.unk);
                continue;
            }
            if self.list.is_some_and(|l| !l.contains(&tok)) {
                report.mapped_tokens += 1;
                out.push(self.unk);
                continue;
            }
            let id = word_id(tok.as_bytes());
            dict.insert(id, &tok)?;
            out.push(id);
        }
        if !out.is_empty() {
            out.push(self.eos);
        }
        Ok(report)
    }
}

/// A token as counted: Unicode-lowercased when `lowercase` (borrowed when
/// that changes nothing).
pub fn normalise(raw: &str, lowercase: bool) -> Cow<'_, str> {
    if lowercase && raw.chars().any(|c| c.is_uppercase() || !c.is_ascii()) {
        Cow::Owned(raw.to_lowercase())
    } else {
        Cow::Borrowed(raw)
    }
}

/// The ids of a query line (not a corpus line): tokens split and lowercased
/// exactly as at ingest, but `<s>`, `</s>` and `<unk>` written as words mean
/// the markers, so that a query can ask about them; no padding.
pub fn query_ids(line: &str, lowercase: bool) -> Vec<WordId> {
    line.split_whitespace()
        .map(|raw| match &*normalise(raw, lowercase) {
            BOS => bos_id(),
            EOS => eos_id(),
            UNK => unk_id(),
            w => word_id(w.as_bytes()),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids(words: &[&str]) -> Vec<WordId> {
        words.iter().map(|w| word_id(w.as_bytes())).collect()
    }

    #[test]
    fn pads_and_splits_on_unicode_whitespace() {
        let t = Tokenizer::new(false);
        let mut d = Dictionary::new();
        let mut out = Vec::new();
        // U+3000 IDEOGRAPHIC SPACE and U+00A0 NO-BREAK SPACE are White_Space
        // (Unicode PropList.txt); U+001C is not.
        t.sentence("a\u{3000}b\u{a0}c\u{1c}d".as_bytes(), &mut d, &mut out)
            .unwrap();
        assert_eq!(out, ids(&["<s>", "a", "b", "c\u{1c}d", "</s>"]));
    }

    #[test]
    fn blank_line_is_no_sentence() {
        let t = Tokenizer::new(false);
        let mut out = vec![1];
        t.sentence(b" \t ", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert!(out.is_empty());
    }

    #[test]
    fn literal_markers_become_unk() {
        let t = Tokenizer::new(true);
        let mut out = Vec::new();
        let r = t
            .sentence(b"<S> x </s> <unk>", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert_eq!(r.marker_tokens, 3);
        assert_eq!(out, ids(&["<s>", "<unk>", "x", "<unk>", "<unk>", "</s>"]));
    }

    #[test]
    fn invalid_utf8_is_replaced_and_reported() {
        let t = Tokenizer::new(false);
        let mut out = Vec::new();
        let r = t
            .sentence(b"ok \xff\xfe", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert!(r.invalid_utf8);
        assert_eq!(out, ids(&["<s>", "ok", "\u{fffd}\u{fffd}", "</s>"]));
    }

    #[test]
    fn query_ids_split_and_lowercase_as_ingest_but_keep_markers() {
        let t = Tokenizer::new(true);
        let mut out = Vec::new();
        let line = "<s> ÉCOLE\u{3000}Straße </s>";
        t.sentence(line.as_bytes(), &mut Dictionary::new(), &mut out)
            .unwrap();
        // Ingest reads the literal markers as <unk>; a query means them.
        assert_eq!(
            out,
            ids(&["<s>", "<unk>", "école", "straße", "<unk>", "</s>"])
        );
        assert_eq!(
            query_ids(line, true),
            ids(&["<s>", "école", "straße", "</s>"])
        );
        assert_eq!(query_ids("ÉCOLE", false), ids(&["ÉCOLE"]));
    }

    #[test]
    fn lowercase_is_unicode() {
        let t = Tokenizer::new(true);
        let mut out = Vec::new();
        t.sentence("ÉCOLE Straße".as_bytes(), &mut Dictionary::new(), &mut out)
            .unwrap();
        assert_eq!(out, ids(&["<s>", "école", "straße", "</s>"]));
    }
}
