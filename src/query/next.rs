//! The most probable next words: exact top K touching only the children of
//! the context's suffixes and a ranking of the unigrams.
//!
//! For every method, a word that is not a child of any non-empty suffix of
//! the context gets a probability that is a non-decreasing function of its
//! probability after the empty context: the interpolated methods multiply
//! it by the product of the back-off weights γ (or 1 − λ) of the suffixes,
//! Katz by F/denominator factors (or gives every such word the same share),
//! `add-k` and `mle` give every such word the same value, `stupid` α^L
//! times it. So the best such words are the first ones of the unigram
//! ranking that are not children: the candidates are the children of the
//! suffixes plus the first K non-children of the ranking, each scored
//! exactly, and the best K of them are the true top K of V.

use crate::error::Result;
use crate::words::WordId;

use super::{Estimator, Method};

/// The K most probable next words.
#[derive(Clone, Debug, PartialEq)]
pub struct Next {
    /// The context as used: cut to N − 1 words, OOV words as `<unk>`.
    pub context: Vec<WordId>,
    /// `(word, probability)`, most probable first (ties by id).
    pub items: Vec<(WordId, f64)>,
    /// 1 − the sum of the probabilities shown (for `stupid`, of the scores:
    /// meaningless there, as the scores do not sum to 1).
    pub rest: f64,
    /// How many words were scored to find them.
    pub scored: usize,
}

/// Best first: higher probability, then lower id.
pub(crate) fn best(a: &(f64, WordId), b: &(f64, WordId)) -> std::cmp::Ordering {
    b.0.total_cmp(&a.0).then(a.1.cmp(&b.1))
}

impl Next {
    /// The answer from the chosen `(probability, word)` pairs (in any
    /// order) and how many words were scored to find them.
    pub(crate) fn from_scored(
        context: Vec<WordId>,
        mut scored: Vec<(f64, WordId)>,
        n_scored: usize,
    ) -> Next {
        scored.sort_unstable_by(best);
        let sum: f64 = scored.iter().map(|x| x.0).sum();
        Next {
            context,
            items: scored.into_iter().map(|(p, w)| (w, p)).collect(),
            rest: 1.0 - sum,
            scored: n_scored,
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
    /// OOV words as `<unk>`), exact.
    ///
    /// The candidates, each scored exactly and once:
    /// - every child of a suffix of two words or more, from the longest
    ///   suffix that has it (these lists are short);
    /// - the first `k` children of the last word alone that are children of
    ///   no longer suffix, in the order of P(w | last word) (computed once
    ///   per word and cached: [`Estimator::ranked_children`]). For such a
    ///   word, every longer level has count 0 and contributes only its
    ///   back-off factor, the same for all of them (or, for `add-k` and
    ///   `mle`, the same value), so its probability is a non-decreasing
    ///   function of P(w | last word), as for the unigram ranking above,
    ///   and these `k` hold the `k` best probabilities of that group
    ///   (`katz` scores the whole group: it may back off past the last
    ///   word's level);
    /// - the first `k` words of the unigram ranking that are children of no
    ///   suffix.
    pub fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        let cl = self.raw_context_levels(context)?;
        let l = cl.ctx.len();
        let mut buf = Vec::new();
        let mut scored: Vec<(f64, WordId)> = Vec::new();
        // Katz backs off past a level whose denominator vanishes, so there
        // the order of P(w | last word) does not carry over: it scores
        // every child of the last word.
        let lowest = if self.method == Method::Katz { 1 } else { 2 };
        for j in (lowest..=l).rev() {
            let Some(m) = &cl.maps[j] else { continue };
            for &(w, at, uni) in &m.list {
                if j < l && cl.child_from(j + 1, w) {
                    continue;
                }
                scored.push((self.eval_child(&cl, w, j, Some(at), uni, &mut buf)?.0, w));
            }
        }
        if lowest == 2 && l >= 1 && cl.maps[1].is_some() {
            if let Some(m) = self.ranked_children(cl.ctx[l - 1])? {
                let mut taken = 0;
                for &(w, at, uni) in m.ranked.get().expect("ranked by ranked_children") {
                    if taken == k {
                        break;
                    }
                    if cl.child_from(2, w) {
                        continue;
                    }
                    scored.push((self.eval_child(&cl, w, 1, Some(at), uni, &mut buf)?.0, w));
                    taken += 1;
                }
            }
        }
        let mut taken = 0;
        for &w in self.unigram_ranking()? {
            if taken == k {
                break;
            }
            if cl.child_from(1, w) {
                continue;
            }
            scored.push((self.eval_mapped(&cl, w, &mut buf)?.0, w));
            taken += 1;
        }
        let n_scored = scored.len();
        if scored.len() > k && k > 0 {
            scored.select_nth_unstable_by(k - 1, best);
        }
        scored.truncate(k);
        Ok(Next::from_scored(cl.ctx, scored, n_scored))
    }
}
