//! quern counts every n-gram up to order N of a large corpus in bounded
//! memory, into an on-disk store that survives crashes, and serves counts,
//! continuation counts, context statistics and count-of-counts from it.
//!
//! # The pipeline
//!
//! ```text
//! inputs ──corpus──▶ lines ──tokenize──▶ ids ──count──▶ run files (shard)
//!        ──merge::merge_partition──▶ merged counts + continuation runs
//!        ──merge::join_partition──▶ SST files + statistics
//!        ──store::build──▶ RocksDB store ──▶ store::Store (queries)
//! ```
//!
//! * [`corpus`] finds inputs, cuts plain files into line-aligned chunks and
//!   reads lines with a hard length limit.
//! * [`tokenize`] turns a line into the padded ids of its sentence;
//!   [`words`] defines ids (xxh3-64 of the word) and collision detection.
//! * [`count`] counts spans of input into bounded [`count::Table`]s and
//!   spills them as [`shard`] run files: sorted, partitioned by the first
//!   word's id, zstd-compressed and checksummed.
//! * [`merge`] merges each partition's runs (k-way), shuffles continuation
//!   contributions once, and derives every statistic in one ordered pass.
//! * [`store`] writes and reads the RocksDB store.
//! * [`discount`] defines the Kneser-Ney discounts from count-of-counts,
//!   once, for the estimators and the statistics report.
//! * [`arpa`] reads ARPA back-off text (a model made elsewhere), checking
//!   every line; [`model`] turns it into a model file.
//! * [`blend`] mixes several stores and models linearly, with weights
//!   fitted on held-out text (EM), named by a blend file.
//! * [`model`] freezes a method into a memory-mapped back-off model file
//!   (and ARPA text) and answers queries from it.
//! * [`query`] turns the store's statistics into smoothed probabilities
//!   (nine estimators chosen at query time), top-K next words, prefix
//!   pages, held-out scoring and parameter tuning.
//! * [`scoring`] scores documents (JSON lines or plain lines) on many
//!   threads, one result each in input order, with the distribution of
//!   their perplexities and a split into kept and dropped ones (filtering
//!   a crawl).
//! * [`linguistics`] answers a corpus linguist from a store: frequency
//!   lists, n-grams that fit a pattern, collocations by association
//!   measure, keyness against a reference store; and streams concordance
//!   lines from the corpus files.
//! * [`vocab`] ranks a store's words for a vocabulary: coverage of the
//!   training tokens and held-out rate outside, per size.
//! * [`wordlist`] reads a fixed vocabulary (`--word-list`) and the copy a
//!   store or a staged plan keeps of it.
//! * [`growth`] records where each word is first seen while counting, and
//!   turns that into the vocabulary growth curve kept in the store.
//! * [`ingest`] drives the stages and records each durable step in a
//!   manifest, so that an interrupted ingest resumes where it stopped.
//! * [`serve`] answers queries over HTTP (JSON) from one shared store or
//!   model, and serves a page to explore it.
//! * [`stage`] runs the same stages as separate, idempotent tasks over a
//!   shared directory, for a cluster scheduler (`scripts/spark_ingest.py`).
//!
//! # Example
//!
//! ```no_run
//! use quern::ingest::{ingest, IngestOptions, Silent};
//! use quern::store::Store;
//!
//! let mut opts = IngestOptions::new("/tmp/store", vec!["corpus.txt".into()]);
//! opts.order = 3;
//! opts.memory = 256 << 20;
//! ingest(&opts, &Silent)?;
//! let store = Store::open("/tmp/store".as_ref())?;
//! println!("{} sentences", store.meta().totals.sentences);
//! # Ok::<(), quern::Error>(())
//! ```
#![deny(missing_docs)]
#![deny(unsafe_code)]

pub mod arpa;
#[cfg(feature = "store")]
pub mod blend;
pub mod corpus;
#[cfg(feature = "store")]
pub mod count;
pub mod discount;
pub mod error;
pub mod fault;
#[cfg(feature = "store")]
pub mod finish;
pub mod fsutil;
#[cfg(feature = "store")]
pub mod growth;
pub mod hint;
#[cfg(feature = "store")]
pub mod ingest;
pub mod key;
pub mod layout;
#[cfg(feature = "store")]
pub mod linguistics;
pub mod memory;
#[cfg(feature = "store")]
pub mod merge;
#[cfg(feature = "store")]
pub mod model;
pub mod pool;
#[cfg(feature = "python")]
pub mod python;
#[cfg(feature = "store")]
pub mod query;
pub mod records;
#[cfg(feature = "store")]
pub mod scoring;
pub mod search;
#[cfg(feature = "serve")]
pub mod serve;
pub mod shard;
#[cfg(feature = "store")]
pub mod stage;
#[cfg(feature = "store")]
pub mod stats;
#[cfg(feature = "store")]
pub mod store;
pub mod tokenize;
pub mod topk;
pub mod varint;
#[cfg(feature = "store")]
pub mod vocab;
pub mod wordlist;
pub mod words;

pub use error::{Error, Result};
