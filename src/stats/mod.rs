//! Statistics of a store for people choosing discounts and pruning
//! thresholds, comparing corpora and spotting a broken crawl: per order the
//! count-of-counts spectra, the Good-Turing table with Katz's d_r and the
//! Kneser-Ney discounts (each with why the data leave it undefined);
//! corpus-wide the totals, the type-token ratio, the vocabulary growth curve
//! with Heaps' law fitted to it, and the rank-frequency curve with Zipf's
//! law fitted to it.
//!
//! Everything is computed from the store's metadata alone ([`report`] is a
//! pure function of [`StoreMeta`]): the rank-frequency curve of the unigrams
//! is their raw count-of-counts read from the highest count down, so no scan
//! of the n-grams is needed.
//!
//! One job per file: [`tables`] (per-order tables), [`fits`] (least-squares
//! fits), [`compare`] (differences between two stores), [`plot`] (figures).

pub mod compare;
pub mod fits;
#[cfg(feature = "plot")]
pub mod plot;
pub mod tables;

use crate::tokenize::Preparation;
use serde::Serialize;

use crate::store::StoreMeta;
pub use fits::PowerFit;
pub use tables::{order_report, OrderReport};

/// Version of the report's JSON schema (README.md, "Statistics").
///
/// 2: the Kneser-Ney count-of-counts are `count_of_counts.left_type` and the
/// TSV/CSV section `coc_left_type` (schema 1 used another word), the earlier
/// `mkn_discounts` object was dropped (`discounts` holds each discount with
/// why it is unusable), and a discount's reason is worded anew.
pub const REPORT_SCHEMA: u32 = 2;

/// Settings the store was built with.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReportSettings {
    /// Highest order N.
    pub order: usize,
    /// Tokens were lowercased.
    pub lowercase: bool,
    /// The other steps of the text's preparation, where not the default
    /// (absent for the default preparation).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub preparation: Option<serde_json::Value>,
    /// The fixed word list the store was counted with (`--word-list`);
    /// `None` (JSON `null`) when every token counted.
    pub word_list: Option<ReportWordList>,
    /// The store was built from count tables (`ingest --counts`); absent
    /// for a store counted from text. Such a store has no growth curve.
    #[serde(skip_serializing_if = "is_false")]
    pub from_counts: bool,
    /// `lines` or `documents` for a store that counted each distinct
    /// sentence or document once (`ingest --unique`); absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub unique: Option<crate::records::Unique>,
    /// The store holds each n-gram's number of documents (`ingest
    /// --document-counts`); absent otherwise.
    #[serde(skip_serializing_if = "is_false")]
    pub document_counts: bool,
}

fn is_false(x: &bool) -> bool {
    !*x
}

/// What `ingest --unique` left out.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReportDuplicates {
    /// Sentences (or documents) not counted: they occurred before.
    pub units: u64,
    /// Their tokens (as T counts them: without `<s>`, with `</s>`).
    pub tokens: u64,
    /// tokens / (T + tokens).
    pub token_share: f64,
}

/// A store's fixed word list, as the report shows it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReportWordList {
    /// Distinct words in the list (the markers are not among them).
    pub words: u64,
}

/// Corpus-wide totals.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ReportTotals {
    /// Sentences.
    pub sentences: u64,
    /// Tokens T (words and one `</s>` per sentence).
    pub tokens: u64,
    /// |V| (types, and `<unk>` if it was not seen).
    pub vocabulary: u64,
    /// Distinct tokens but `<s>`.
    pub types: u64,
    /// types / tokens.
    pub type_token_ratio: Option<f64>,
    /// Literal marker tokens counted as `<unk>`.
    pub marker_tokens: u64,
    /// Tokens outside the word list counted as `<unk>`; `None` (JSON
    /// `null`) for a store without a word list.
    pub mapped_tokens: Option<u64>,
    /// Lines skipped for their length.
    pub skipped_lines: u64,
    /// Lines with invalid UTF-8.
    pub invalid_utf8_lines: u64,
    /// Input lines that held no document (`ingest --jsonl`), skipped;
    /// absent when there were none.
    #[serde(skip_serializing_if = "is_zero")]
    pub bad_lines: u64,
    /// What `--unique` left out; absent for a store without it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub duplicates: Option<ReportDuplicates>,
    /// Documents counted (those with a sentence counted), for a store with
    /// document counts; absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub documents: Option<u64>,
}

fn is_zero(x: &u64) -> bool {
    *x == 0
}

/// Vocabulary growth and Heaps' law.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Growth {
    /// `(tokens read, types seen)`.
    pub points: Vec<(u64, u64)>,
    /// V(n) = K n^β: `scale` is K, `exponent` β.
    pub heaps: Option<PowerFit>,
}

/// The rank-frequency curve of the unigrams and Zipf's law.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RankFrequency {
    /// `(rank, frequency)` at the sample ranks and the last rank.
    pub points: Vec<(u64, u64)>,
    /// f(r) = C r^(−s): `scale` is C, `exponent` s.
    pub zipf: Option<PowerFit>,
}

/// The whole report (the JSON of `quern stats --format json`).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Report {
    /// [`REPORT_SCHEMA`].
    pub schema: u32,
    /// The store's format version.
    pub format_version: u32,
    /// Settings.
    pub settings: ReportSettings,
    /// Totals.
    pub totals: ReportTotals,
    /// Per order.
    pub orders: Vec<OrderReport>,
    /// `None` for a store built before growth curves were kept, or from
    /// count tables.
    pub growth: Option<Growth>,
    /// Rank-frequency of the unigrams (without `<s>`).
    pub rank_frequency: RankFrequency,
}

/// What to compute.
#[derive(Clone, Copy, Debug)]
pub struct ReportOptions {
    /// Katz's K: the Good-Turing table has rows r = 1..=K.
    pub katz_k: usize,
    /// Keep only r ≤ this in the spectra.
    pub max_count: Option<u64>,
    /// Keep only this order.
    pub order: Option<usize>,
}

impl Default for ReportOptions {
    fn default() -> Self {
        ReportOptions {
            katz_k: 5,
            max_count: None,
            order: None,
        }
    }
}

/// The report of a store's metadata.
pub fn report(meta: &StoreMeta, opts: &ReportOptions) -> Report {
    let t = &meta.totals;
    let orders = meta
        .orders
        .iter()
        .filter(|o| opts.order.is_none_or(|k| o.order == k))
        .map(|o| {
            let mut r = order_report(o, opts.katz_k);
            if let Some(m) = opts.max_count {
                r.count_of_counts.raw.retain(|e| e.0 <= m);
                r.count_of_counts.left_type.retain(|e| e.0 <= m);
            }
            r
        })
        .collect();
    let rf = meta
        .orders
        .first()
        .map(|o| fits::rank_frequency(&o.coc_raw))
        .unwrap_or_default();
    Report {
        schema: REPORT_SCHEMA,
        format_version: meta.format_version,
        settings: ReportSettings {
            order: meta.settings.order,
            lowercase: meta.settings.preparation.lowercase,
            preparation: (meta.settings.preparation
                != Preparation::lowercasing(meta.settings.preparation.lowercase))
            .then(|| meta.settings.preparation.to_json()),
            word_list: meta
                .settings
                .word_list
                .map(|w| ReportWordList { words: w.words }),
            from_counts: meta.settings.from_counts,
            unique: meta.settings.unique,
            document_counts: meta.settings.document_counts,
        },
        totals: ReportTotals {
            sentences: t.sentences,
            tokens: t.tokens,
            vocabulary: t.vocabulary,
            types: t.types,
            type_token_ratio: (t.tokens > 0).then(|| t.types as f64 / t.tokens as f64),
            marker_tokens: t.marker_tokens,
            mapped_tokens: meta.settings.word_list.map(|_| t.mapped_tokens),
            skipped_lines: t.skipped_lines,
            invalid_utf8_lines: t.invalid_utf8_lines,
            bad_lines: t.bad_lines,
            duplicates: meta.settings.unique.map(|_| ReportDuplicates {
                units: t.duplicate_units,
                tokens: t.duplicate_tokens,
                token_share: t.duplicate_token_share(),
            }),
            documents: meta.settings.document_counts.then_some(t.documents),
        },
        orders,
        growth: meta.growth.as_ref().map(|g| Growth {
            points: g.points.clone(),
            heaps: fits::heaps(g),
        }),
        rank_frequency: RankFrequency {
            zipf: fits::zipf(&rf),
            points: rf,
        },
    }
}
