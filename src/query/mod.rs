//! Smoothed probabilities from a finished store, chosen at query time.
//!
//! An [`Estimator`] wraps an open [`Store`] with one [`Method`] and its
//! [`Params`]. Everything an estimator needs (counts, continuation counts,
//! context statistics, count-of-counts) was computed at ingest; building an
//! estimator only derives the per-order constants (discounts, Good-Turing
//! factors, weights) and checks them, so trying another method needs no
//! re-ingest.
//!
//! Every distribution is over the vocabulary V of the store: the distinct
//! tokens seen except `<s>`, with `</s>`, and with `<unk>` even if the text
//! never held it. A word outside V is scored as `<unk>`; a context longer
//! than N − 1 words is cut to its last N − 1. The formulas of each method
//! are in its module ([`kneser_ney`], [`witten_bell`], [`katz`],
//! [`jelinek_mercer`], [`simple`]).
//!
//! ```no_run
//! use quern::query::{Estimator, Method, Params, query_ids};
//! use quern::store::Store;
//!
//! let store = Store::open("/tmp/store".as_ref())?;
//! let est = Estimator::new(&store, Method::Mkn, Params::default())?;
//! let ids = query_ids("<s> the ferry", &store.meta().settings.preparation);
//! let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1])?;
//! println!("P = {} (longest match: order {})", p.p, p.order);
//! let top = est.next(&ids, 5)?;
//! for (w, p) in &top.items {
//!     println!("{} {p}", store.word(*w)?.unwrap_or_default());
//! }
//! # Ok::<(), quern::Error>(())
//! ```
//!
//! An estimator keeps small caches (context statistics, words, children
//! lists) behind `RefCell`s: use one estimator per thread.

pub mod backoff;
mod cache;
pub mod complete;
mod estimator;
pub mod jelinek_mercer;
pub mod katz;
mod katz_eval;
pub mod keystrokes;
pub mod kneser_ney;
mod level;
pub mod ngrams;
pub mod predictor;
mod probability;
pub mod simple;
mod text_index;
pub mod tune;
pub mod witten_bell;

pub use crate::predict::{
    jnum, json, params, prediction, score, DiscountPolicy, Method, Next, Params, ParamsFile,
    Predictor, Prob, ProbJson, ScoreReport, Scorer, SentenceScore, WordJson,
};
pub use crate::tokenize::query_ids;
pub use estimator::Estimator;
pub(crate) use level::Level;
pub use ngrams::{cursor, parse_cursor, prefix_page, Page};
