//! quern counts every n-gram up to order N of a large corpus in bounded
//! memory, into an on-disk store that survives crashes, and answers
//! counts, smoothed probabilities, next words and document scores from it
//! or from a frozen, memory-mapped model.
//!
//! # The API
//!
//! Everything a program needs is named at the crate root:
//!
//! * building a store: [`ingest()`] with [`IngestOptions`] (progress
//!   through [`Progress`], or [`Silent`]), [`ingest_status`];
//! * reading one: [`Store`] (counts, continuation counts, statistics,
//!   words) and its [`StoreMeta`];
//! * probabilities: an [`Estimator`] is one [`Method`] with its [`Params`]
//!   over a store; a [`Model`] is a frozen one ([`freeze()`] with
//!   [`FreezeOptions`], or [`freeze_arpa`] from ARPA text). Both are a
//!   [`Predictor`]: [`Prob`], the top next words and completions
//!   ([`Next`], prefixes matched as [`PrefixMatch`] says), distributions;
//! * several sources: a [`Blend`] of stores and models, named by a
//!   [`BlendFile`] with weights fitted on held-out text, its parts opened
//!   by [`OpenedBlend`];
//! * held-out text: [`Scorer`] and its [`ScoreReport`]; documents on many
//!   threads: [`score_text`] and [`score_texts`];
//! * text: the [`Preparation`] a store records, applied to a query by
//!   [`query_ids`]; words are [`WordId`]s ([`word_id`]);
//! * errors: [`Error`] and [`Result`].
//!
//! With `default-features = false, features = ["model"]` the crate is the
//! model runtime alone (no RocksDB): [`Model`], [`Predictor`], [`Scorer`],
//! [`Preparation`], and a [`Blend`] of models (a store part is refused
//! there). The feature `capi` adds the C interface (`quern.h`).
//!
//! # Example
//!
//! ```no_run
//! use quern::{ingest, Estimator, IngestOptions, Method, Params, Predictor, Silent, Store};
//!
//! let mut opts = IngestOptions::new("/tmp/store", vec!["corpus.txt".into()]);
//! opts.order = 3;
//! opts.memory = 256 << 20;
//! ingest(&opts, &Silent)?;
//! let store = Store::open("/tmp/store".as_ref())?;
//! println!("{} sentences", store.meta().totals.sentences);
//! let est = Estimator::new(&store, Method::Mkn, Params::default())?;
//! let ids = quern::query_ids("<s> the ferry", &store.meta().settings.preparation);
//! let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1])?;
//! println!("P = {} ({} words matched)", p.p, p.matched());
//! # Ok::<(), quern::Error>(())
//! ```
//!
//! # Inside
//!
//! The modules are the crate's own (DEVELOPERS.md maps them); those the
//! tests, benchmarks and fuzz targets reach are public but hidden from
//! these docs, and are not part of the API.
//!
//! ```text
//! inputs ──corpus──▶ lines ──tokenize──▶ ids ──count──▶ run files (shard)
//!        ──merge──▶ merged counts + continuation runs ──▶ SST files + statistics
//!        ──store──▶ RocksDB store ──query──▶ probabilities ──model──▶ frozen model
//! ```
#![deny(missing_docs)]
#![deny(unsafe_code)]
// The internal modules are shaped for the binary (and the Python module);
// a build without the binary (the model runtime, the fuzz crate, a library
// user's `store`) leaves parts of them unused.
#![cfg_attr(not(feature = "cli"), allow(dead_code, unused_imports))]
// The modules' own docs link each other for the next engineer
// (`cargo doc --document-private-items`); the public docs do not show them.
#![allow(rustdoc::private_intra_doc_links)]

// The command line (`src/cli/`) is part of the library, so that the
// library's modules need not be public for it; it names them `quern::`,
// as a program using the crate would.
extern crate self as quern;

#[doc(hidden)]
pub mod arpa;
#[cfg(feature = "model")]
#[doc(hidden)]
pub mod blend;
#[cfg(feature = "capi")]
#[doc(hidden)]
pub mod capi;
#[cfg(feature = "cli")]
mod cli;
#[doc(hidden)]
pub mod corpus;
#[cfg(feature = "store")]
#[doc(hidden)]
pub mod count;
#[doc(hidden)]
pub mod discount;
#[doc(hidden)]
pub mod error;
#[doc(hidden)]
pub mod fault;
#[cfg(feature = "store")]
pub(crate) mod finish;
pub(crate) mod fsutil;
#[cfg(feature = "store")]
pub(crate) mod growth;
pub(crate) mod hint;
#[cfg(feature = "store")]
#[doc(hidden)]
pub mod ingest;
pub(crate) mod key;
pub(crate) mod layout;
#[cfg(feature = "store")]
pub(crate) mod linguistics;
#[doc(hidden)]
pub mod memory;
#[cfg(feature = "store")]
pub(crate) mod merge;
#[cfg(feature = "model")]
#[doc(hidden)]
pub mod model;
pub(crate) mod pool;
#[doc(hidden)]
pub mod predict;
#[cfg(feature = "python")]
pub(crate) mod python;
#[cfg(feature = "store")]
#[doc(hidden)]
pub mod query;
pub(crate) mod records;
#[cfg(feature = "model")]
#[doc(hidden)]
pub mod scoring;
pub(crate) mod search;
#[cfg(feature = "serve")]
#[doc(hidden)]
pub mod serve;
#[doc(hidden)]
pub mod shard;
#[cfg(feature = "store")]
pub(crate) mod stage;
#[cfg(feature = "store")]
#[doc(hidden)]
pub mod stats;
#[cfg(feature = "store")]
#[doc(hidden)]
pub mod store;
#[doc(hidden)]
pub mod tokenize;
pub(crate) mod topk;
#[doc(hidden)]
pub mod unique;
pub(crate) mod varint;
#[cfg(feature = "store")]
pub(crate) mod vocab;
pub(crate) mod wordlist;
#[doc(hidden)]
pub mod words;

#[cfg(feature = "model")]
pub use blend::{Blend, BlendFile, Opened as OpenedBlend};
pub use error::{Error, Result};
#[cfg(feature = "store")]
pub use ingest::{
    ingest, status as ingest_status, IngestOptions, IngestStatus, IngestSummary, Progress, Silent,
};
#[cfg(feature = "store")]
pub use model::{freeze, freeze_arpa, FreezeOptions, FreezeReport};
#[cfg(feature = "model")]
pub use model::{Model, ModelMeta, Residence};
pub use predict::{
    DiscountPolicy, Method, Next, Params, ParamsFile, Predictor, Prob, ScoreReport, Scorer,
    SentenceScore,
};
#[cfg(feature = "store")]
pub use query::Estimator;
#[cfg(feature = "model")]
pub use scoring::{score_text, score_texts};
#[cfg(feature = "store")]
pub use store::{Store, StoreMeta};
pub use tokenize::{query_ids, Preparation};
pub use topk::PrefixMatch;
pub use words::{word_id, WordId};

/// The `quern` binary's `main` (feature `cli`): parses the command line,
/// runs the command, prints an error and returns exit status 2 on failure.
#[cfg(feature = "cli")]
#[doc(hidden)]
pub fn run_cli() -> std::process::ExitCode {
    cli::main()
}
