//! Frozen models: a store's method written once in back-off form into a
//! read-only, memory-mapped file, and queried from it.
//!
//! [`freeze()`] streams a store through an [`Estimator`](crate::query::Estimator)
//! into a model file; [`Model::open`] maps it; [`Model`] answers the same
//! questions as the estimator (`prob`, `prob_batch`, `next`,
//! `distribution`), [`arpa`] writes it as ARPA text, and [`import`] writes
//! ARPA text read by [`crate::arpa`] as a model file.
//!
//! # The back-off form
//!
//! For every kept n-gram h·w the file holds q(h·w) = P(w | h) under the
//! method, and for every kept n-gram h of order < N a weight β(h). Then
//! P(w | h) = q(h·w) if h·w is kept; otherwise β(h)·P(w | h') if h is kept,
//! and P(w | h') if not (β0·P(w | h') for `stupid`, whose every context
//! backs off with α), down to the unigrams, every word of V being one. The
//! kept n-grams are closed under prefixes and suffixes: with h·w kept, h
//! and h'·w are kept. See [`crate::query::backoff`] for how each method's
//! q and β are computed.
//!
//! # Reductions
//!
//! A model can be made smaller after it is frozen ([`FreezeOptions`]):
//! relative-entropy pruning (Stolcke 1998; `prune`), with a threshold or
//! a size target, and quantization of the probabilities to B-bit bins
//! (Whittaker & Raj 2001; `quantize`). Both work model to model (`reduce`):
//! the whole model is written first, then the kept entries are written
//! again, renumbered, and the back-off weight of every context whose
//! distribution changed is recomputed so that it sums to 1. Quantized
//! values are stored as B-bit codes into per-order bins; the back-off
//! weights can be quantized too (`weight_bits`), at the cost of exact
//! normalisation (the freeze reports the largest error).
//!
//! # Byte layout (version 2)
//!
//! Little-endian throughout; sections start at multiples of 8 bytes.
//!
//! ```text
//! header     8  magic "qrnmodl\x1a"
//!            4  version (u32) = 2
//!            4  reserved (0)
//! sections   one after another, each found through the directory (a
//!            freeze writes them in this order; a reduced model writes the
//!            orders' sections first and the five small ones last, since
//!            the metadata needs the kept counts) (see SectionKind):
//!            Meta         JSON: method, parameters, constants, notes,
//!                         order N, |V|, n-grams kept per order, value
//!                         bits, whether the values are probabilities,
//!                         the weight of a context that is not kept
//!            Ids          u64 × W: the word ids (xxh3-64 of the word),
//!                         increasing; word index i = position i (W = |V|
//!                         + 1: V and <s>)
//!            WordOffsets  u64 × (W + 1) into WordText
//!            WordText     the words' UTF-8 bytes
//!            Ranking      u32 × |V|: V by q of the unigram, best first
//!            per order k = 1..N:
//!              Words      (k ≥ 2) n_k word indices bit-packed at
//!                         ⌈log2 W⌉ bits into u64 words (one spare word
//!                         at the end); the last word of each kept n-gram;
//!                         the n-grams are in key order, i.e. grouped by
//!                         context (in the context's own order among the
//!                         n-grams of order k − 1), then by word
//!              Probs      f32 × n_k: q (entry i of order 1 is word i);
//!                         or, for k ≥ 2 of a quantized model,
//!              ProbCodes  n_k codes bit-packed at value_bits, and
//!              ProbBins   f32 × (at most 2^value_bits): each code's q
//!              Weights    (k < N) f32 × n_k: β of each n-gram as a
//!                         context; or WeightCodes and WeightBins, as
//!                         for q, at weight_bits
//!              Children   (k < N) n_k + 1 increasing starts, Elias–Fano
//!                         coded: u64 header (count, low bits l, upper
//!                         words, samples), the low l bits of each start
//!                         bit-packed, the upper bits (start >> l) as
//!                         unary gaps, and the position of every 64th set
//!                         upper bit; the children of entry i of order k
//!                         are entries start[i] .. start[i + 1] of
//!                         order k + 1
//!              Skips      (k < N, katz only, where needed) u8 × n_k
//! directory  32 bytes per section: kind (u32), order (u32), offset (u64),
//!            length (u64), xxh3-64 of the section (u64)
//! trailer    directory offset (u64), entry count (u64), xxh3-64 of the
//!            directory (u64), end magic "\x1aldomnrq"
//! ```
//!
//! # Why this shape
//!
//! A prediction walks from a context's entries to their children: with the
//! context's kept suffixes h_1 … h_M known as entries, P(w | h) needs one
//! search for w among the children of each h_j, from j = 1 up until one
//! fails. The search runs over a run of sorted u32 word indices, which are
//! ranks of hashes and so spread evenly: interpolation finds a word in a
//! few probes even among the hundred thousand children of a frequent word.
//! In running text the next context's kept suffixes are exactly the entries
//! just found, so a [`State`] carries them and no context is looked up
//! twice. Structure of arrays (words apart from values) keeps the searched
//! bytes dense. Words take ⌈log2 W⌉ bits rather than 32, and a children
//! start about 2 + log2(n_{k+1} / n_k) bits rather than 32 (Elias–Fano:
//! the starts increase by the number of children, mostly 1 to 3): a
//! top-order n-gram costs ⌈log2 W⌉ + 32 bits and a lower one about
//! ⌈log2 W⌉ + 67, against 64 and 128 for byte-aligned arrays. Reading a
//! word is one two-word load and a shift; finding a children range is a
//! sampled select over the upper bits, a few popcounts. The checksummed
//! directory lets a reader refuse a truncated or damaged file without
//! reading the arrays; opening then decodes only the lowest orders'
//! children starts into plain arrays (0.1 s for a 3.9 GB model), and
//! [`Model::verify`] reads everything.
//!
//! Precision: q and β are stored as 32-bit floats (relative error below
//! 6e-8 each); a probability is a product of at most N of them, computed in
//! 64 bits, so it is within about 3e-7 relative of the estimator's.

// Reading a model: all a runtime needs (the `model` feature).
pub mod arpa;
mod bytes;
mod cache;
pub mod complete;
mod file;
pub mod format;
pub mod packed;
pub mod query;
mod sections;
mod seek;
mod verify;

// Writing one (freezing a store, reading ARPA text, pruning and
// quantizing) needs the store.
#[cfg(feature = "store")]
mod built;
#[cfg(feature = "store")]
pub mod freeze;
#[cfg(feature = "store")]
pub mod import;
#[cfg(feature = "store")]
mod lower;
#[cfg(feature = "store")]
mod orders;
#[cfg(feature = "store")]
mod pass;
#[cfg(feature = "store")]
pub(crate) mod prune;
#[cfg(feature = "store")]
pub(crate) mod quantize;
#[cfg(feature = "store")]
pub(crate) mod reduce;
#[cfg(feature = "store")]
mod spill;
#[cfg(feature = "store")]
pub mod writer;

pub use bytes::Residence;
pub use file::Model;
pub use format::ModelMeta;
#[cfg(feature = "store")]
pub use freeze::{freeze, FreezeOptions, FreezeReport};
#[cfg(feature = "store")]
pub use import::{freeze_arpa, write_backoff, Origin};
pub use query::State;
