//! The byte layout of a model file: header, sections, directory, trailer
//! (see the module doc of [`crate::model`] for the whole picture), and the
//! metadata record.

use serde::{Deserialize, Serialize};

use crate::predict::{Method, Params};

/// The first 8 bytes of every model file.
pub const MAGIC: [u8; 8] = *b"qrnmodl\x1a";
/// The last 8 bytes of every model file.
pub const END_MAGIC: [u8; 8] = *b"\x1aldomnrq";
/// The layout version this build writes and reads.
pub const MODEL_VERSION: u32 = 2;
/// Header: magic, version (u32), reserved (u32, 0).
pub const HEADER_BYTES: usize = 16;
/// Trailer: directory offset (u64), entries (u64), xxh3 of the directory
/// (u64), end magic.
pub const TRAILER_BYTES: usize = 32;
/// One directory entry: kind (u32), order (u32), offset, length, xxh3 (u64 each).
pub const ENTRY_BYTES: usize = 32;
/// Sections start at multiples of this.
pub const ALIGN: u64 = 8;

/// What a section holds. Every integer and float is little-endian.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(u32)]
pub enum SectionKind {
    /// The [`ModelMeta`] record as JSON.
    Meta = 1,
    /// The word ids (u64), increasing: word index i is the i-th.
    Ids = 2,
    /// Offsets (u64, one more than the words) into `WordText`.
    WordOffsets = 3,
    /// The words' UTF-8 bytes, one after another.
    WordText = 4,
    /// The word indices of V (u32), most probable after the empty context
    /// first, ties by index.
    Ranking = 5,
    /// Per order k ≥ 2: the last word's index of every kept n-gram, in
    /// key order (by context, then word), bit-packed at the width of the
    /// largest word index ([`super::packed`]).
    Words = 16,
    /// Per order: q, the probability (f32) of every kept n-gram's last
    /// word given its context.
    Probs = 17,
    /// Per order k < N: the back-off weight β (f32) of every kept n-gram
    /// as a context.
    Weights = 18,
    /// Per order k < N: where every kept n-gram's children start among the
    /// n-grams of order k + 1, plus one entry for the end, coded
    /// Elias–Fano ([`super::packed`]).
    Children = 19,
    /// Per order k < N, `katz` only, and only where some context needs
    /// it: how many words (u8) a context drops when it backs off (1: to
    /// h'; Katz passes a context's mass further down where its children
    /// take all of h''s probability).
    Skips = 20,
    /// Per order k ≥ 2 of a quantized model, in place of `Probs`: the code
    /// of every q, bit-packed at `value_bits`.
    ProbCodes = 21,
    /// Per order k ≥ 2 of a quantized model: the value (f32) of every
    /// code, ascending.
    ProbBins = 22,
    /// Per order k < N of a model whose weights are quantized, in place of
    /// `Weights`: the code of every β, bit-packed at `weight_bits`.
    WeightCodes = 23,
    /// The value (f32) of every β code, ascending.
    WeightBins = 24,
}

impl SectionKind {
    /// From its stored number.
    pub fn from_u32(x: u32) -> Option<SectionKind> {
        Some(match x {
            1 => SectionKind::Meta,
            2 => SectionKind::Ids,
            3 => SectionKind::WordOffsets,
            4 => SectionKind::WordText,
            5 => SectionKind::Ranking,
            16 => SectionKind::Words,
            17 => SectionKind::Probs,
            18 => SectionKind::Weights,
            19 => SectionKind::Children,
            20 => SectionKind::Skips,
            21 => SectionKind::ProbCodes,
            22 => SectionKind::ProbBins,
            23 => SectionKind::WeightCodes,
            24 => SectionKind::WeightBins,
            _ => return None,
        })
    }

    /// A name for errors.
    pub fn name(self) -> &'static str {
        match self {
            SectionKind::Meta => "metadata",
            SectionKind::Ids => "word ids",
            SectionKind::WordOffsets => "word offsets",
            SectionKind::WordText => "word text",
            SectionKind::Ranking => "unigram ranking",
            SectionKind::Words => "n-gram words",
            SectionKind::Probs => "probabilities",
            SectionKind::Weights => "back-off weights",
            SectionKind::Children => "children index",
            SectionKind::Skips => "back-off skips",
            SectionKind::ProbCodes => "probability codes",
            SectionKind::ProbBins => "probability bins",
            SectionKind::WeightCodes => "back-off weight codes",
            SectionKind::WeightBins => "back-off weight bins",
        }
    }
}

/// One entry of the directory.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Entry {
    /// What the section holds.
    pub kind: u32,
    /// Its order (0 for sections of the whole model).
    pub order: u32,
    /// Byte offset in the file.
    pub offset: u64,
    /// Byte length.
    pub len: u64,
    /// xxh3-64 of its bytes.
    pub hash: u64,
}

impl Entry {
    /// The 32 stored bytes.
    pub fn encode(&self, out: &mut Vec<u8>) {
        out.extend_from_slice(&self.kind.to_le_bytes());
        out.extend_from_slice(&self.order.to_le_bytes());
        out.extend_from_slice(&self.offset.to_le_bytes());
        out.extend_from_slice(&self.len.to_le_bytes());
        out.extend_from_slice(&self.hash.to_le_bytes());
    }

    /// From 32 stored bytes.
    pub fn decode(b: &[u8]) -> Entry {
        let u32_at = |i: usize| u32::from_le_bytes(b[i..i + 4].try_into().expect("4 bytes"));
        let u64_at = |i: usize| u64::from_le_bytes(b[i..i + 8].try_into().expect("8 bytes"));
        Entry {
            kind: u32_at(0),
            order: u32_at(4),
            offset: u64_at(8),
            len: u64_at(16),
            hash: u64_at(24),
        }
    }
}

/// What a model is: the method, its parameters and what the file holds.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ModelMeta {
    /// The method the model was frozen from.
    pub method: Method,
    /// Its parameters.
    pub params: Params,
    /// The per-order constants the method used (discounts, K, weights).
    pub constants: serde_json::Value,
    /// Notes made when the method was built or frozen.
    pub notes: Vec<String>,
    /// False for `stupid`: the values are scores, not probabilities, and
    /// do not sum to 1.
    pub probabilities: bool,
    /// The back-off weight of a context that is not kept: 1, or α for
    /// `stupid` (whose every context backs off with α).
    pub default_backoff: f64,
    /// The highest order N.
    pub order: usize,
    /// How the store's text was prepared (queries are prepared the same
    /// way): `lowercase`, and the other steps when not the default (a
    /// model written before they could be chosen reads as the default).
    #[serde(flatten)]
    pub preparation: crate::tokenize::Preparation,
    /// |V|: the words but `<s>`.
    pub vocabulary: u64,
    /// Whether `<unk>` was seen in the text (otherwise its count is 0).
    pub unk_seen: bool,
    /// Kept n-grams of every order (index k − 1).
    pub ngrams: Vec<u64>,
    /// The store's n-grams of every order.
    pub store_ngrams: Vec<u64>,
    /// Bits per stored probability of orders 2..N (32: f32 values;
    /// fewer: codes into per-order bins).
    pub value_bits: u32,
    /// Bits per stored back-off weight (32: f32 values; fewer: codes into
    /// per-order bins).
    #[serde(default = "bits32")]
    pub weight_bits: u32,
    /// The count thresholds applied per order (1 = none).
    pub min_counts: Vec<u64>,
    /// The relative-entropy threshold the model was pruned at (nats), if
    /// it was.
    #[serde(default)]
    pub relative_entropy: Option<f64>,
    /// Words that `next` and completion never show (offensive or private
    /// words): still used as context, their probabilities and everyone
    /// else's unchanged. Not written when empty.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub never_suggest: Vec<String>,
}

fn bits32() -> u32 {
    32
}
