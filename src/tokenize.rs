//! A document's text to the padded id sequences of its sentences, as the
//! store's [`Preparation`] says. Pure.
//!
//! The contract (see README, "What is counted" and "Preparing the text"):
//! invalid UTF-8 is decoded lossily (each bad sequence becomes U+FFFD) and
//! the text is reported; then, in this fixed order,
//!
//! 1. **normalize**: Unicode normalization of the whole text (NFC or NFKC,
//!    UAX #15), or none;
//! 2. **sentences**: the text is cut into sentences: at `\n` (one trailing
//!    `\r` dropped) (`lines`), at UAX #29 sentence boundaries (`split`), or
//!    not at all (`document`);
//! 3. **tokens**: the tokens of a sentence are the maximal runs of
//!    characters that are not Unicode White_Space (`whitespace`), or its
//!    UAX #29 word-boundary segments that are not entirely White_Space
//!    (`words`);
//! 4. **case**: `--lowercase` applies Unicode lowercasing to each token;
//! 5. **digits**: every decimal digit (general category Nd) becomes `0`,
//!    or digits are kept;
//! 6. **word list**: a token outside the ingest's word list becomes `<unk>`.
//!
//! A token spelled `<s>`, `</s>` or `<unk>` becomes `<unk>`. A sentence
//! `w1 … wm` becomes `<s> w1 … wm </s>`; a sentence without tokens yields
//! nothing. The default preparation (no normalization, lines, whitespace,
//! digits kept) is the tokenizer of stores built before it could be chosen.

use std::borrow::Cow;

use serde::{Deserialize, Serialize};
use unicode_normalization::{is_nfc_quick, is_nfkc_quick, IsNormalized, UnicodeNormalization};
use unicode_properties::{GeneralCategory, UnicodeGeneralCategory};
use unicode_segmentation::UnicodeSegmentation;

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

/// Unicode normalization of the text (step 1).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Normalize {
    /// The text as it is.
    #[default]
    None,
    /// Canonical composition (NFC).
    Nfc,
    /// Compatibility composition (NFKC).
    Nfkc,
}

/// Where sentences end (step 2).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Sentences {
    /// A line is a sentence.
    #[default]
    Lines,
    /// UAX #29 sentence boundaries.
    Split,
    /// A document (a JSON line's text, or an input line) is one sequence.
    Document,
}

/// What a token is (step 3).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Tokens {
    /// Maximal runs of characters that are not White_Space.
    #[default]
    Whitespace,
    /// UAX #29 word-boundary segments that are not entirely White_Space.
    Words,
}

/// What becomes of decimal digits (step 5).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Digits {
    /// Kept.
    #[default]
    Keep,
    /// Every character of general category Nd becomes `0`.
    Zero,
}

/// How text is prepared before it is counted or queried: chosen once at
/// ingest, recorded in the store and in every frozen model, and applied
/// the same way by every query path.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Preparation {
    /// Step 1.
    #[serde(default, skip_serializing_if = "is_default")]
    pub normalize: Normalize,
    /// Step 2.
    #[serde(default, skip_serializing_if = "is_default")]
    pub sentences: Sentences,
    /// Step 3.
    #[serde(default, skip_serializing_if = "is_default")]
    pub tokens: Tokens,
    /// Step 4.
    #[serde(default)]
    pub lowercase: bool,
    /// Step 5.
    #[serde(default, skip_serializing_if = "is_default")]
    pub digits: Digits,
}

/// The records that hold a preparation (the store's settings, a frozen
/// model's meta) write only the steps that are not the default, and
/// `lowercase` always, so the records of stores and models built with the
/// default preparation are those written before it could be chosen.
fn is_default<T: Default + PartialEq>(v: &T) -> bool {
    *v == T::default()
}

impl Preparation {
    /// The default preparation, lowercasing or not.
    pub fn lowercasing(lowercase: bool) -> Preparation {
        Preparation {
            lowercase,
            ..Preparation::default()
        }
    }

    /// The settings in words, in the order they apply: `normalize none,
    /// sentences lines, tokens whitespace, lowercase no, digits keep`.
    pub fn describe(&self) -> String {
        format!(
            "normalize {}, sentences {}, tokens {}, lowercase {}, digits {}",
            name(&self.normalize),
            name(&self.sentences),
            name(&self.tokens),
            if self.lowercase { "yes" } else { "no" },
            name(&self.digits)
        )
    }

    /// Every step's setting, in the order they apply, as JSON (the records
    /// leave out the defaults; reports show them all).
    pub fn to_json(&self) -> serde_json::Value {
        serde_json::json!({
            "normalize": name(&self.normalize),
            "sentences": name(&self.sentences),
            "tokens": name(&self.tokens),
            "lowercase": self.lowercase,
            "digits": name(&self.digits),
        })
    }

    /// Step 1: the text normalized (borrowed when that changes nothing).
    pub fn normalized<'a>(&self, text: &'a str) -> Cow<'a, str> {
        let quick = match self.normalize {
            Normalize::None => return Cow::Borrowed(text),
            _ if text.is_ascii() => return Cow::Borrowed(text),
            Normalize::Nfc => is_nfc_quick(text.chars()),
            Normalize::Nfkc => is_nfkc_quick(text.chars()),
        };
        if quick == IsNormalized::Yes {
            return Cow::Borrowed(text);
        }
        Cow::Owned(match self.normalize {
            Normalize::Nfc => text.nfc().collect(),
            _ => text.nfkc().collect(),
        })
    }

    /// Step 2: calls `f` with each sentence of a (normalized) text.
    pub fn each_sentence<'a>(&self, text: &'a str, mut f: impl FnMut(&'a str)) {
        match self.sentences {
            Sentences::Lines => {
                for s in text.split('\n') {
                    f(s.strip_suffix('\r').unwrap_or(s));
                }
            }
            Sentences::Split => text.split_sentence_bounds().for_each(f),
            Sentences::Document => f(text),
        }
    }

    /// Steps 3 to 5: calls `f` with each token of a sentence, as counted.
    pub fn each_token<'a>(&self, sentence: &'a str, mut f: impl FnMut(Cow<'a, str>)) {
        match self.tokens {
            Tokens::Whitespace => {
                for raw in sentence.split_whitespace() {
                    f(self.token(raw));
                }
            }
            Tokens::Words => {
                for raw in sentence.split_word_bounds() {
                    if !raw.chars().all(char::is_whitespace) {
                        f(self.token(raw));
                    }
                }
            }
        }
    }

    /// A word's beginning typed for completion, prepared as one token
    /// (normalized, lowercased, digits).
    pub fn prefix(&self, typed: &str) -> String {
        self.token(&self.normalized(typed)).into_owned()
    }

    /// Steps 4 and 5 on one token.
    pub fn token<'a>(&self, raw: &'a str) -> Cow<'a, str> {
        let t = normalise(raw, self.lowercase);
        if self.digits == Digits::Keep || !t.chars().any(is_decimal_digit) {
            return t;
        }
        Cow::Owned(
            t.chars()
                .map(|c| if is_decimal_digit(c) { '0' } else { c })
                .collect(),
        )
    }
}

/// General category Nd (UAX #44), with an ASCII fast path.
fn is_decimal_digit(c: char) -> bool {
    c.is_ascii_digit() || (!c.is_ascii() && c.general_category() == GeneralCategory::DecimalNumber)
}

/// A setting's name as written on the command line (its serde name).
fn name<T: Serialize>(v: &T) -> String {
    serde_json::to_value(v)
        .ok()
        .and_then(|v| v.as_str().map(String::from))
        .unwrap_or_default()
}

/// The Unicode versions of the tables behind the preparation: UAX #15
/// normalization, UAX #29 segmentation, general categories.
pub fn unicode_versions() -> [(&'static str, String); 3] {
    let v = |(a, b, c): (u64, u64, u64)| format!("{a}.{b}.{c}");
    let (a, b, c) = unicode_normalization::UNICODE_VERSION;
    [
        ("normalization", v((a.into(), b.into(), c.into()))),
        ("segmentation", v(unicode_segmentation::UNICODE_VERSION)),
        ("general category", v(unicode_properties::UNICODE_VERSION)),
    ]
}

/// Turns lines into id sequences, remembering every word it saw.
pub struct Tokenizer<'w> {
    prep: Preparation,
    list: Option<&'w WordSet>,
    bos: WordId,
    eos: WordId,
    unk: WordId,
}

impl<'w> Tokenizer<'w> {
    /// A tokenizer preparing text as `prep` says.
    pub fn new(prep: Preparation) -> Self {
        Tokenizer {
            prep,
            list: None,
            bos: bos_id(),
            eos: eos_id(),
            unk: unk_id(),
        }
    }

    /// The same tokenizer, counting every token outside `list` (after
    /// the preparation) as `<unk>`.
    pub fn with_word_list(mut self, list: Option<&'w WordSet>) -> Self {
        self.list = list;
        self
    }

    /// Writes the padded ids of `line` (without its line end), taken as
    /// one sentence, into `out`, registering each word in `dict`. `out` is
    /// left empty for a line without tokens.
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
        let text = self.prep.normalized(&text);
        self.ids(&text, dict, out, &mut report)?;
        Ok(report)
    }

    /// Writes the padded ids of every sentence of a document's `text` into
    /// `out`, one after the other, and where each ends into `ends`
    /// (sentences without tokens are left out), registering each word in
    /// `dict`.
    pub fn document(
        &self,
        text: &[u8],
        dict: &mut Dictionary,
        out: &mut Vec<WordId>,
        ends: &mut Vec<usize>,
    ) -> Result<LineReport> {
        out.clear();
        ends.clear();
        let mut report = LineReport::default();
        let text = String::from_utf8_lossy(text);
        report.invalid_utf8 = matches!(text, Cow::Owned(_));
        let text = self.prep.normalized(&text);
        let mut one = Vec::new();
        let mut result = Ok(());
        self.prep.each_sentence(&text, |s| {
            if result.is_err() {
                return;
            }
            result = self.ids(s, dict, &mut one, &mut report);
            if !one.is_empty() {
                out.extend_from_slice(&one);
                ends.push(out.len());
            }
        });
        result.map(|()| report)
    }

    /// The padded ids of one prepared sentence.
    fn ids(
        &self,
        sentence: &str,
        dict: &mut Dictionary,
        out: &mut Vec<WordId>,
        report: &mut LineReport,
    ) -> Result<()> {
        out.clear();
        let mut result = Ok(());
        self.prep.each_token(sentence, |tok| {
            if result.is_err() {
                return;
            }
            if out.is_empty() {
                out.push(self.bos);
            }
            if tok == BOS || tok == EOS || tok == UNK {
                report.marker_tokens += 1;
                out.push(self.unk);
                return;
            }
            if self.list.is_some_and(|l| !l.contains(&tok)) {
                report.mapped_tokens += 1;
                out.push(self.unk);
                return;
            }
            let id = word_id(tok.as_bytes());
            result = dict.insert(id, &tok);
            out.push(id);
        });
        if !out.is_empty() {
            out.push(self.eos);
        }
        result
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

/// The ids of a query line (not a corpus line): one sentence, prepared
/// exactly as at ingest, but `<s>`, `</s>` and `<unk>` written as words
/// (between White_Space) mean the markers, so that a query can ask about
/// them; no padding.
pub fn query_ids(line: &str, prep: &Preparation) -> Vec<WordId> {
    let line = prep.normalized(line);
    let mut out = Vec::new();
    for chunk in line.split_whitespace() {
        match chunk {
            BOS => out.push(bos_id()),
            EOS => out.push(eos_id()),
            UNK => out.push(unk_id()),
            _ => prep.each_token(chunk, |t| {
                out.push(match &*t {
                    BOS => bos_id(),
                    EOS => eos_id(),
                    UNK => unk_id(),
                    w => word_id(w.as_bytes()),
                })
            }),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ids(words: &[&str]) -> Vec<WordId> {
        words.iter().map(|w| word_id(w.as_bytes())).collect()
    }

    #[test]
    fn pads_and_splits_on_unicode_whitespace() {
        let t = Tokenizer::new(Preparation::default());
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
        let t = Tokenizer::new(Preparation::default());
        let mut out = vec![1];
        t.sentence(b" \t ", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert!(out.is_empty());
    }

    #[test]
    fn literal_markers_become_unk() {
        let t = Tokenizer::new(Preparation::lowercasing(true));
        let mut out = Vec::new();
        let r = t
            .sentence(b"<S> x </s> <unk>", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert_eq!(r.marker_tokens, 3);
        assert_eq!(out, ids(&["<s>", "<unk>", "x", "<unk>", "<unk>", "</s>"]));
    }

    #[test]
    fn invalid_utf8_is_replaced_and_reported() {
        let t = Tokenizer::new(Preparation::default());
        let mut out = Vec::new();
        let r = t
            .sentence(b"ok \xff\xfe", &mut Dictionary::new(), &mut out)
            .unwrap();
        assert!(r.invalid_utf8);
        assert_eq!(out, ids(&["<s>", "ok", "\u{fffd}\u{fffd}", "</s>"]));
    }

    #[test]
    fn query_ids_split_and_lowercase_as_ingest_but_keep_markers() {
        let t = Tokenizer::new(Preparation::lowercasing(true));
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
            query_ids(line, &Preparation::lowercasing(true)),
            ids(&["<s>", "école", "straße", "</s>"])
        );
        assert_eq!(query_ids("ÉCOLE", &Preparation::default()), ids(&["ÉCOLE"]));
    }

    #[test]
    fn lowercase_is_unicode() {
        let t = Tokenizer::new(Preparation::lowercasing(true));
        let mut out = Vec::new();
        t.sentence("ÉCOLE Straße".as_bytes(), &mut Dictionary::new(), &mut out)
            .unwrap();
        assert_eq!(out, ids(&["<s>", "école", "straße", "</s>"]));
    }
}
