//! [`Predictor`]: what the query commands ask of a language model, so that
//! `prob`, `next` and `score` serve a store's [`Estimator`] and a frozen
//! model (`crate::model::Model`, which implements it there: the model
//! depends on the query layer, never the reverse) alike.

use crate::error::Result;
use crate::words::WordId;

use super::{Estimator, Method, Next, Prob};

/// A language model that answers queries over word ids.
pub trait Predictor {
    /// The method it computes.
    fn method(&self) -> Method;
    /// Highest order N.
    fn order(&self) -> usize;
    /// |V|.
    fn vocabulary_size(&self) -> u64;
    /// Whether query words are lowercased (the store was built with
    /// `--lowercase`).
    fn lowercase(&self) -> bool;
    /// Notes for the user (fallback discounts, Katz's K lowered, …).
    fn notes(&self) -> &[String];
    /// The per-order constants in use, for reports.
    fn constants(&self) -> serde_json::Value;
    /// The word with id `id` (markers included), if known.
    fn word(&self, id: WordId) -> Result<Option<String>>;
    /// P(word | context).
    fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob>;
    /// Many probabilities: each query is the context followed by the word.
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>>;
    /// The `k` most probable next words, exact.
    fn next(&self, context: &[WordId], k: usize) -> Result<Next>;
    /// P(· | context) over V, in id order.
    fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>>;
}

impl Predictor for Estimator<'_> {
    fn method(&self) -> Method {
        Estimator::method(self)
    }
    fn order(&self) -> usize {
        Estimator::order(self)
    }
    fn vocabulary_size(&self) -> u64 {
        Estimator::vocabulary_size(self)
    }
    fn lowercase(&self) -> bool {
        self.store().meta().settings.lowercase
    }
    fn notes(&self) -> &[String] {
        Estimator::notes(self)
    }
    fn constants(&self) -> serde_json::Value {
        Estimator::constants(self)
    }
    fn word(&self, id: WordId) -> Result<Option<String>> {
        self.store().word(id)
    }
    fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        Estimator::prob(self, context, word)
    }
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        Estimator::prob_batch(self, queries)
    }
    fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        Estimator::next(self, context, k)
    }
    fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        Estimator::distribution(self, context)
    }
}
