//! What each stage reports about its share of the work, and how the
//! store's metadata is summed from the partitions' reports.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use super::{ContextStats, OrderStats, Settings, StoreMeta, Totals, STORE_VERSION};

/// Counters of what the readers saw.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct ReadTotals {
    /// Sentences (lines with at least one token).
    pub sentences: u64,
    /// Lines skipped for exceeding the line limit.
    pub skipped_lines: u64,
    /// Lines that held invalid UTF-8 (decoded lossily).
    pub invalid_utf8_lines: u64,
    /// Literal tokens spelled like a marker (counted as `<unk>`).
    pub marker_tokens: u64,
    /// Tokens outside the word list (counted as `<unk>`).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub mapped_tokens: u64,
    /// Input bytes read (decompressed).
    pub bytes: u64,
    /// Lines that held no document (`ingest --jsonl`: not JSON, not an
    /// object, no text field, or not a string), skipped.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub bad_lines: u64,
    /// The counts read from count tables (`ingest --counts`), summed; for
    /// an appended store, its counts of every order summed. Kept below
    /// 2^64 so that no sum of counts overflows.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub counts_sum: u64,
    /// Sentences or documents skipped as duplicates (`ingest --unique`).
    #[serde(default, skip_serializing_if = "is_zero")]
    pub duplicate_units: u64,
    /// Their tokens, without `<s>`, with `</s>`.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub duplicate_tokens: u64,
    /// Documents counted (`ingest --document-counts`; 0 otherwise): those
    /// with at least one sentence counted.
    #[serde(default, skip_serializing_if = "is_zero")]
    pub documents: u64,
}

/// A bad line (see [`ReadTotals::bad_lines`]): where it starts and why it
/// holds no document. Kept for the first few of each spill, so that the
/// ingest's summary can name them.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct BadLineAt {
    /// Index of the input.
    pub file: u32,
    /// Offset of the line's first byte in the input's (decompressed)
    /// stream.
    pub offset: u64,
    /// Why the line holds no document.
    pub detail: String,
}

fn is_zero(x: &u64) -> bool {
    *x == 0
}

impl ReadTotals {
    /// Adds `o` into `self`.
    pub fn add(&mut self, o: &ReadTotals) {
        self.sentences += o.sentences;
        self.skipped_lines += o.skipped_lines;
        self.invalid_utf8_lines += o.invalid_utf8_lines;
        self.marker_tokens += o.marker_tokens;
        self.mapped_tokens += o.mapped_tokens;
        self.bytes += o.bytes;
        self.bad_lines += o.bad_lines;
        self.counts_sum = self.counts_sum.saturating_add(o.counts_sum);
        self.duplicate_units += o.duplicate_units;
        self.duplicate_tokens += o.duplicate_tokens;
        self.documents += o.documents;
    }
}

/// A partition whose runs were merged.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Merged {
    /// Merged counts of the partition (in `work/merged`).
    pub counts: String,
    /// Continuation contributions emitted to all partitions (in `work/merged`).
    pub suffix_runs: Vec<String>,
}

/// Statistics one partition contributes to the store's totals.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct PartitionStats {
    /// Stored n-grams per order (index 0 = unigrams).
    pub ngrams: Vec<u64>,
    /// Raw count-of-counts per order: count → number of n-grams.
    pub coc_raw: Vec<BTreeMap<u64, u64>>,
    /// Count-of-counts of the left-type counts per order (see
    /// `OrderStats::coc_left_type`).
    pub coc_left_type: Vec<BTreeMap<u64, u64>>,
    /// This partition's share of the empty context's statistics.
    pub root: ContextStats,
    /// True if the unigram `<unk>` is in this partition.
    pub unk_seen: bool,
}

/// A partition whose store files are written.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Joined {
    /// `(column family, file name in work/sst)`.
    pub ssts: Vec<(String, String)>,
    /// Totals.
    pub stats: PartitionStats,
}

/// The store's metadata from every partition's statistics and the readers'
/// totals.
pub fn store_meta<'a>(
    settings: Settings,
    partitions: impl IntoIterator<Item = &'a PartitionStats>,
    read: ReadTotals,
) -> StoreMeta {
    let n = settings.order;
    let mut ngrams = vec![0u64; n];
    let mut raw = vec![BTreeMap::<u64, u64>::new(); n];
    let mut adj = vec![BTreeMap::<u64, u64>::new(); n];
    let mut root = ContextStats::default();
    let mut unk_seen = false;
    for s in partitions {
        for k in 0..n {
            ngrams[k] += s.ngrams[k];
            for (r, c) in &s.coc_raw[k] {
                *raw[k].entry(*r).or_insert(0) += c;
            }
            for (r, c) in &s.coc_left_type[k] {
                *adj[k].entry(*r).or_insert(0) += c;
            }
        }
        root.merge(&s.root);
        unk_seen |= s.unk_seen;
    }
    let totals = Totals {
        sentences: read.sentences,
        tokens: root.count_sum,
        types: root.types,
        vocabulary: root.types + u64::from(!unk_seen),
        unk_seen,
        skipped_lines: read.skipped_lines,
        invalid_utf8_lines: read.invalid_utf8_lines,
        marker_tokens: read.marker_tokens,
        mapped_tokens: read.mapped_tokens,
        input_bytes: read.bytes,
        bad_lines: read.bad_lines,
        duplicate_units: read.duplicate_units,
        duplicate_tokens: read.duplicate_tokens,
        documents: read.documents,
    };
    let orders = (0..n)
        .map(|k| OrderStats {
            order: k + 1,
            ngrams: ngrams[k],
            coc_raw: raw[k].iter().map(|(a, b)| (*a, *b)).collect(),
            coc_left_type: adj[k].iter().map(|(a, b)| (*a, *b)).collect(),
        })
        .collect();
    StoreMeta {
        format_version: STORE_VERSION,
        settings,
        totals,
        orders,
        root,
        growth: None,
    }
}
