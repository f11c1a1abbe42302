//! [`Predictor`]: what the query commands ask of a language model, so that
//! `prob`, `next` and `score` serve a store's estimator
//! (`crate::query::Estimator`) and a frozen model (`crate::model::Model`)
//! alike. Each implements it in its own module: both depend on this
//! layer, never the reverse.

use std::collections::HashSet;

use crate::error::Result;
use crate::tokenize::Preparation;
use crate::topk::PrefixMatch;
use crate::words::WordId;

use super::{Method, Next, Prob};

/// A language model that answers queries over word ids.
pub trait Predictor {
    /// The method it computes.
    fn method(&self) -> Method;
    /// Highest order N.
    fn order(&self) -> usize;
    /// |V|.
    fn vocabulary_size(&self) -> u64;
    /// How query text is prepared (as the store's text was at ingest).
    fn preparation(&self) -> Preparation;
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

    /// The `k` most probable next words that begin with `prefix` (Unicode
    /// scalar values; prepared first as one token by
    /// [`Predictor::preparation`]: normalized, lowercased, digits),
    /// exact. `<s>` and `<unk>` are never suggested; `</s>` only when the
    /// prefix is empty. `rest` is 1 − the sum shown, over all of V.
    ///
    /// Ties are broken by the words' bytes, as everywhere. This default
    /// scores all of V ([`Predictor::distribution`]): exact but slow;
    /// implementations override it with a faster exact search.
    fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        self.complete_matching(context, prefix, PrefixMatch::Exact, k)
    }

    /// [`Predictor::complete`], the prefix matching as `matching` says:
    /// with [`PrefixMatch::Folded`], the words whose folded text begins
    /// with the folded prefix (case and accents aside:
    /// [`crate::topk::fold`]), each shown as the model has it.
    fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        let prefix = self.preparation().prefix(prefix);
        let folded = crate::topk::fold(&prefix);
        let matches = |text: &str| match matching {
            PrefixMatch::Exact => text.starts_with(prefix.as_str()),
            PrefixMatch::Folded => crate::topk::fold(text).starts_with(folded.as_str()),
        };
        let (bos, unk, eos) = (
            crate::words::bos_id(),
            crate::words::unk_id(),
            crate::words::eos_id(),
        );
        let dist = self.distribution(context)?;
        let scored = dist.len();
        let mut texts: Vec<(WordId, String)> = Vec::new();
        let mut top = crate::topk::TopK::new(k);
        for (w, p) in dist {
            if w == bos || w == unk || (w == eos && !prefix.is_empty()) {
                continue;
            }
            let Some(text) = self.word(w)? else { continue };
            if matches(&text) {
                top.take_all([Ok::<_, std::convert::Infallible>((p, texts.len()))])
                    .unwrap_or_else(|e| match e {});
                texts.push((w, text));
            }
        }
        let (best, _) = top.finish(|a, b| texts[a].1.as_bytes().cmp(texts[b].1.as_bytes()));
        let best = best.into_iter().map(|(p, i)| (p, texts[i].0)).collect();
        let ctx = self.next(context, 0)?.context;
        Ok(Next::from_best(ctx, best, scored))
    }

    /// [`Predictor::complete_matching`] with the words of `never` left
    /// out (offensive or private words): the best `k` of the others,
    /// exact (the best `k + |never|` hold them), their probabilities
    /// unchanged; `rest` is 1 − the sum shown.
    fn suggest(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        never: &HashSet<WordId>,
        k: usize,
    ) -> Result<Next> {
        if never.is_empty() {
            return self.complete_matching(context, prefix, matching, k);
        }
        let mut next =
            self.complete_matching(context, prefix, matching, k.saturating_add(never.len()))?;
        next.items.retain(|(w, _)| !never.contains(w));
        next.items.truncate(k);
        next.rest = 1.0 - next.items.iter().map(|x| x.1).sum::<f64>();
        Ok(next)
    }
}

/// A borrowed predictor is one: a model lent to worker threads, or a
/// `&dyn Predictor`, goes wherever a predictor is asked for.
impl<P: Predictor + ?Sized> Predictor for &P {
    fn method(&self) -> Method {
        (**self).method()
    }
    fn order(&self) -> usize {
        (**self).order()
    }
    fn vocabulary_size(&self) -> u64 {
        (**self).vocabulary_size()
    }
    fn preparation(&self) -> Preparation {
        (**self).preparation()
    }
    fn notes(&self) -> &[String] {
        (**self).notes()
    }
    fn constants(&self) -> serde_json::Value {
        (**self).constants()
    }
    fn word(&self, id: WordId) -> Result<Option<String>> {
        (**self).word(id)
    }
    fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        (**self).prob(context, word)
    }
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        (**self).prob_batch(queries)
    }
    fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        (**self).next(context, k)
    }
    fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        (**self).distribution(context)
    }
    fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        (**self).complete(context, prefix, k)
    }
    fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        (**self).complete_matching(context, prefix, matching, k)
    }
}
