//! The store's metadata record: settings, totals, count-of-counts, growth.

use serde::{Deserialize, Serialize};

use super::ContextStats;
use crate::tokenize::Preparation;

/// Format version of the store; checked on open. Version 2 is read too,
/// converted by [`super::upgrade_store_meta`].
pub const STORE_VERSION: u32 = 3;

/// Settings that change what is counted.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Settings {
    /// Highest order N.
    pub order: usize,
    /// How the text was prepared (its fields sit at this level of the
    /// record: `lowercase`, and the other steps when not the default).
    #[serde(flatten)]
    pub preparation: Preparation,
    /// Lines longer than this many bytes were skipped.
    pub max_line_bytes: usize,
    /// Tokens outside a fixed word list were counted as `<unk>`
    /// (`ingest --word-list`); absent in stores built without one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub word_list: Option<WordListInfo>,
    /// The counts were read from count tables (`ingest --counts`), not
    /// counted in text; absent in stores counted from text.
    #[serde(default, skip_serializing_if = "is_false")]
    pub from_counts: bool,
    /// Each distinct sentence or document was counted only the first time
    /// it occurred (`ingest --unique`); absent in stores that counted
    /// every occurrence.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unique: Option<Unique>,
    /// Each n-gram's number of documents was stored too (`ingest
    /// --document-counts`); absent in stores without them.
    #[serde(default, skip_serializing_if = "is_false")]
    pub document_counts: bool,
}

impl Settings {
    /// `--document-counts` or `no --document-counts`, for messages that
    /// name two settings.
    pub fn describe_document_counts(d: bool) -> &'static str {
        if d {
            "--document-counts"
        } else {
            "no --document-counts"
        }
    }
}

fn is_false(x: &bool) -> bool {
    !*x
}

/// The unit that `ingest --unique` counts once: a sentence, or a whole
/// document (a JSON line's text, or an input line), judged on its prepared
/// token sequence.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Unique {
    /// Each distinct sentence.
    Lines,
    /// Each distinct document.
    Documents,
}

impl Unique {
    /// The setting as written on the command line and in the records.
    pub fn name(self) -> &'static str {
        match self {
            Unique::Lines => "lines",
            Unique::Documents => "documents",
        }
    }

    /// What the unit is called in reports: `sentences` or `documents`.
    pub fn units(self) -> &'static str {
        match self {
            Unique::Lines => "sentences",
            Unique::Documents => "documents",
        }
    }

    /// `--unique lines`, `--unique documents` or `no --unique`.
    pub fn describe(u: Option<Unique>) -> String {
        match u {
            Some(u) => format!("--unique {}", u.name()),
            None => "no --unique".to_string(),
        }
    }
}

/// The fixed word list a store was counted with: its size and a checksum
/// of its words (as counted: lowercased with `--lowercase`, sorted by
/// bytes, each followed by a line end). The words are in the store's
/// folder, `word-list.txt`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct WordListInfo {
    /// Distinct words in the list.
    pub words: u64,
    /// xxh3-64 of the words as described above.
    pub xxh3: u64,
}

fn is_zero(x: &u64) -> bool {
    *x == 0
}

/// Corpus-wide totals.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Totals {
    /// Sentences counted.
    pub sentences: u64,
    /// T: raw unigram counts summed without `<s>`.
    pub tokens: u64,
    /// Distinct tokens seen, without `<s>`.
    pub types: u64,
    /// |V|: `types`, plus one if `<unk>` was not seen.
    pub vocabulary: u64,
    /// `<unk>` occurred in the counted text.
    pub unk_seen: bool,
    /// Lines skipped for exceeding the line limit.
    pub skipped_lines: u64,
    /// Lines with invalid UTF-8, decoded lossily.
    pub invalid_utf8_lines: u64,
    /// Literal tokens spelled like a marker, counted as `<unk>`.
    pub marker_tokens: u64,
    /// Tokens outside the word list, counted as `<unk>` (0, and absent
    /// from the JSON, without a word list).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub mapped_tokens: u64,
    /// Input bytes read (decompressed).
    pub input_bytes: u64,
    /// Input lines that held no document (`ingest --jsonl`), skipped (0,
    /// and absent from the JSON, when there were none).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub bad_lines: u64,
    /// Sentences or documents not counted because they occurred before
    /// (`ingest --unique`; 0, and absent from the JSON, when there were
    /// none).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub duplicate_units: u64,
    /// Tokens of those (counted as T is: without `<s>`, with `</s>`).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub duplicate_tokens: u64,
    /// Documents counted, those with at least one sentence counted (`ingest
    /// --document-counts`; 0, and absent from the JSON, without).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub documents: u64,
}

impl Totals {
    /// The share of the tokens read that `--unique` left out as
    /// duplicates: duplicate tokens / (T + duplicate tokens); 0 when
    /// nothing was read.
    pub fn duplicate_token_share(&self) -> f64 {
        let all = self.tokens + self.duplicate_tokens;
        if all == 0 {
            0.0
        } else {
            self.duplicate_tokens as f64 / all as f64
        }
    }
}

/// Statistics of one order.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct OrderStats {
    /// The order k.
    pub order: usize,
    /// Stored k-grams (for k = 1 including `<s>`).
    pub ngrams: u64,
    /// Raw count-of-counts `(r, n_r)`, r ascending, `<s>` left out.
    pub coc_raw: Vec<(u64, u64)>,
    /// Count-of-counts of the left-type counts `(r, n_r)` (the counts the
    /// lower orders of Kneser-Ney use: distinct left extensions, or the raw
    /// count where the n-gram starts with `<s>`), r ascending, `<s>` left
    /// out.
    pub coc_left_type: Vec<(u64, u64)>,
}

impl OrderStats {
    /// n_r of the left-type spectrum (0 where absent).
    pub fn left_type(&self, r: u64) -> u64 {
        lookup(&self.coc_left_type, r)
    }

    /// n_r of the raw spectrum (0 where absent).
    pub fn raw(&self, r: u64) -> u64 {
        lookup(&self.coc_raw, r)
    }
}

fn lookup(v: &[(u64, u64)], r: u64) -> u64 {
    v.binary_search_by_key(&r, |e| e.0).map_or(0, |i| v[i].1)
}

/// Everything the store knows besides its n-grams.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct StoreMeta {
    /// [`STORE_VERSION`].
    pub format_version: u32,
    /// Settings the store was built with.
    pub settings: Settings,
    /// Totals.
    pub totals: Totals,
    /// Per order, 1..=N.
    pub orders: Vec<OrderStats>,
    /// Statistics of the empty context (its children: all unigrams but `<s>`).
    pub root: ContextStats,
    /// Vocabulary growth, sampled during ingest (see [`crate::growth`]);
    /// `None` for a store built before curves were kept.
    #[serde(default)]
    pub growth: Option<GrowthCurve>,
}

/// Types seen against tokens read, in corpus order.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct GrowthCurve {
    /// `(tokens read, distinct types among them)`, tokens ascending: every
    /// sample point below T (20 per decade, see [`crate::growth`]) and then
    /// (T, types).
    pub points: Vec<(u64, u64)>,
}
