//! The store's [`Estimator`] is a [`Predictor`].

use crate::error::Result;
use crate::predict::{Method, Next, Predictor, Prob};
use crate::tokenize::Preparation;
use crate::topk::PrefixMatch;
use crate::words::WordId;

use super::Estimator;

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
    fn preparation(&self) -> Preparation {
        self.store().meta().settings.preparation
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
    fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        Estimator::complete(self, context, prefix, k)
    }
    fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        Estimator::complete_matching(self, context, prefix, matching, k)
    }
}
