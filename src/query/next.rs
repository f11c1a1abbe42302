//! The most probable next words: exact top K touching only the children of
//! the context's suffixes and a ranking of the unigrams.
//!
//! For every method, a word that is not a child of any non-empty suffix of
//! the context gets a probability that is a non-decreasing function of its
//! probability after the empty context: the interpolated methods multiply
//! it by the product of the back-off weights γ (or 1 − λ) of the suffixes,
//! Katz by F/denominator factors (or gives every such word the same share),
//! `add-k` and `mle` give every such word the same value, `stupid` α^L
//! times it. So the unigram ranking, with the children of the suffixes
//! left out, is a ranked group in the sense of [`crate::topk`]; so are the
//! children of the last word alone that no longer suffix has, in the order
//! of P(w | last word); the children of the longer suffixes are scored
//! all. The search itself is [`Estimator::complete`]'s, with every word
//! allowed.

use crate::error::Result;
use crate::words::WordId;

use super::Estimator;

/// The K most probable next words.
#[derive(Clone, Debug, PartialEq)]
pub struct Next {
    /// The context as used: cut to N − 1 words, OOV words as `<unk>`.
    pub context: Vec<WordId>,
    /// `(word, probability)`, most probable first (ties by the words'
    /// bytes).
    pub items: Vec<(WordId, f64)>,
    /// 1 − the sum of the probabilities shown (for `stupid`, of the scores:
    /// meaningless there, as the scores do not sum to 1).
    pub rest: f64,
    /// How many words were scored to find them.
    pub scored: usize,
}

impl Next {
    /// The answer from the chosen `(probability, word)` pairs, best first
    /// (as [`crate::topk::TopK::finish`] gives them), and how many words
    /// were scored to find them.
    pub fn from_best(context: Vec<WordId>, best: Vec<(f64, WordId)>, scored: usize) -> Next {
        let sum: f64 = best.iter().map(|x| x.0).sum();
        Next {
            context,
            items: best.into_iter().map(|(p, w)| (w, p)).collect(),
            rest: 1.0 - sum,
            scored,
        }
    }
}

impl Estimator<'_> {
    /// V ordered by the method's probability after the empty context (most
    /// probable first, ties by id); computed once per estimator.
    pub fn unigram_ranking(&self) -> Result<&[WordId]> {
        if let Some(r) = self.ranking.get() {
            return Ok(r);
        }
        let cl = self.context_levels(&[])?;
        let mut buf = Vec::new();
        let mut scored = Vec::with_capacity(self.unigrams()?.vocab.len());
        for &w in &self.unigrams()?.vocab {
            scored.push((self.eval_mapped(&cl, w, &mut buf)?.0, w));
        }
        scored.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
        let _ = self.ranking.set(scored.into_iter().map(|x| x.1).collect());
        Ok(self.ranking.get().expect("just set"))
    }

    /// The `k` most probable words after `context` (raw ids; cut to N − 1,
    /// OOV words as `<unk>`), exact, every word of V allowed; ties by the
    /// words' bytes. See the module doc.
    pub fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        self.top_words(context, super::complete::Filter::All, k)
    }
}
