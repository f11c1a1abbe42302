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

use crate::words::WordId;

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
