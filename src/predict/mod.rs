//! What every language model answers, with no store behind it: the
//! [`Predictor`] trait, the [`Method`]s and their [`Params`], one
//! probability ([`Prob`]), the top next words ([`Next`]), held-out scoring
//! ([`Scorer`]) and the JSON shapes of answers.
//!
//! This layer sits below the store: a store's estimator
//! (`crate::query::Estimator`) and a frozen model (`crate::model::Model`)
//! both implement [`Predictor`], and a build without RocksDB
//! (`--no-default-features --features model`) has all of it.

pub mod json;
mod method;
mod next;
pub mod params;
mod predictor;
mod prob;
pub mod score;

pub use json::{jnum, ProbJson, WordJson};
pub use method::Method;
pub use next::Next;
pub use params::{DiscountPolicy, Params, ParamsFile};
pub use predictor::Predictor;
pub use prob::Prob;
pub use score::{ScoreReport, Scorer, SentenceScore};

use crate::words::WordId;

/// Below this, a freed probability mass or a denominator counts as zero
/// (Katz's back-off mass, the weight of a context recomputed after a
/// reduction).
pub const EPS: f64 = 1e-12;

/// The n-gram of the words before position `i` of a padded sentence and
/// the word at `i`, cut to the last `n` words: what predicting token `i`
/// asks for.
pub fn prediction(padded: &[WordId], i: usize, n: usize) -> &[WordId] {
    &padded[(i + 1).saturating_sub(n)..=i]
}
