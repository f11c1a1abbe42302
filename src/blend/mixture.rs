//! [`Blend`]: the linear mixture P(w | h) = Σᵢ λᵢ Pᵢ(w | h) of several
//! predictors, itself a [`Predictor`].
//!
//! # The vocabulary of a blend
//!
//! A blend's vocabulary is the union of its parts' vocabularies. A word
//! outside part i's vocabulary gets part i's `<unk>` probability
//! Pᵢ(`<unk>` | h), as that part alone would score it. So over the union a
//! context's probabilities sum to 1 + Σᵢ λᵢ · |U \ Vᵢ| · Pᵢ(`<unk>` | h),
//! not exactly 1, when the vocabularies differ (the same holds of every
//! single model's `<unk>`, which stands for many words).
//!
//! # The exact top K
//!
//! [`Blend::next`] and [`Blend::complete`] find the exact top K by the
//! threshold algorithm over the parts' own exact rankings (Fagin, Lotem &
//! Naor 2003): ask every part for its best d words, score every word any
//! part listed under the whole mixture, and bound what an unlisted word
//! can reach. An unlisted word w lies in the vocabulary of at least one
//! part whose list is not exhausted (one shorter than d holds every word of
//! that part); in such a part Pᵢ(w | h) is at most the last value listed,
//! in every other part it is Pᵢ(`<unk>` | h) or (unlisted in that part's
//! vocabulary) at most the last value listed. The bound is the largest
//! such sum over the possible sets of parts holding w. When the K-th best
//! listed word is above the bound, no unlisted word can enter the top K;
//! otherwise d grows fourfold. Once every list is exhausted every word of
//! the union has been scored, so the search always ends exact.

use std::cell::OnceCell;
use std::collections::HashMap;

use crate::error::{Error, Result};
use crate::predict::{Method, Next, Predictor, Prob};
use crate::tokenize::Preparation;
use crate::topk::{PrefixMatch, TopK};
use crate::words::{unk_id, WordId};

/// The weights of a blend must sum to 1 within this.
pub const WEIGHT_SUM_TOLERANCE: f64 = 1e-9;

/// A linear mixture of predictors with fixed weights.
pub struct Blend<'a> {
    parts: Vec<Box<dyn Predictor + 'a>>,
    weights: Vec<f64>,
    preparation: Preparation,
    order: usize,
    notes: Vec<String>,
    /// The union of the parts' vocabularies, in id order (on first use).
    union: OnceCell<Vec<WordId>>,
}

impl<'a> Blend<'a> {
    /// The mixture of `parts` with `weights` (one each, each in [0, 1],
    /// summing to 1). The parts must prepare text alike and give
    /// probabilities (not `stupid`'s scores).
    pub fn new(parts: Vec<Box<dyn Predictor + 'a>>, weights: Vec<f64>) -> Result<Blend<'a>> {
        check_weights(&weights, parts.len())?;
        let preparation = parts[0].preparation();
        let mut notes = Vec::new();
        for (i, p) in parts.iter().enumerate() {
            if !p.method().is_probability() {
                return Err(Error::Config(format!(
                    "part {}: {} gives scores, not probabilities: it cannot be mixed",
                    i + 1,
                    p.method()
                )));
            }
            if p.preparation() != preparation {
                return Err(Error::Config(format!(
                    "part {} prepares text differently from part 1 ({}; {})",
                    i + 1,
                    p.preparation().describe(),
                    preparation.describe()
                )));
            }
            notes.extend(p.notes().iter().map(|n| format!("part {}: {n}", i + 1)));
        }
        let order = parts.iter().map(|p| p.order()).max().unwrap_or(1);
        Ok(Blend {
            parts,
            weights,
            preparation,
            order,
            notes,
            union: OnceCell::new(),
        })
    }

    /// The parts, in the blend's order.
    pub fn parts(&self) -> &[Box<dyn Predictor + 'a>] {
        &self.parts
    }

    /// The weights λᵢ, in the parts' order.
    pub fn weights(&self) -> &[f64] {
        &self.weights
    }

    /// The mixture of one prediction's part probabilities (in the parts'
    /// order): p = Σ λᵢ pᵢ; the word is outside the blend's vocabulary
    /// when it is outside every part's; `order` is the longest n-gram any
    /// part holds for it.
    pub fn combine(&self, probs: impl IntoIterator<Item = Prob>) -> Prob {
        let mut p = 0.0;
        let (mut order, mut order_any) = (0, 0);
        let mut oov = true;
        let mut word = unk_id();
        for (&l, q) in self.weights.iter().zip(probs) {
            p += l * q.p;
            order_any = order_any.max(q.order);
            if !q.oov {
                if oov {
                    word = q.word;
                }
                oov = false;
                order = order.max(q.order);
            }
        }
        Prob {
            p,
            log10: p.log10(),
            order: if oov { order_any } else { order },
            oov,
            word,
        }
    }

    /// The union of the parts' vocabularies (the words their
    /// distributions are over), in id order.
    fn union(&self) -> Result<&[WordId]> {
        if let Some(u) = self.union.get() {
            return Ok(u);
        }
        let mut all: Vec<WordId> = Vec::new();
        for p in &self.parts {
            all.extend(p.distribution(&[])?.into_iter().map(|x| x.0));
        }
        all.sort_unstable();
        all.dedup();
        Ok(self.union.get_or_init(|| all))
    }

    /// The exact top `k` after `context` over the lists `list(part, d)`
    /// gives (each part's exact best d under its own filter); see the
    /// module doc.
    fn top(
        &self,
        context: &[WordId],
        k: usize,
        list: impl Fn(&dyn Predictor, usize) -> Result<Next>,
    ) -> Result<Next> {
        let firsts: Vec<Next> = self
            .parts
            .iter()
            .map(|p| list(p.as_ref(), k.max(1)))
            .collect::<Result<_>>()?;
        let used = self.context_used(context, &firsts);
        if k == 0 {
            return Ok(Next::from_best(used, Vec::new(), 0));
        }
        // What part i gives a word outside its vocabulary.
        let unk: Vec<f64> = self
            .parts
            .iter()
            .map(|p| Ok(p.prob(context, unk_id())?.p))
            .collect::<Result<_>>()?;
        let mut scored: HashMap<WordId, f64> = HashMap::new();
        let mut count = 0usize;
        let mut depth = k;
        let mut lists = firsts;
        loop {
            let mut fresh: Vec<WordId> = Vec::new();
            for l in &lists {
                count += l.scored;
                for &(w, _) in &l.items {
                    if let std::collections::hash_map::Entry::Vacant(e) = scored.entry(w) {
                        e.insert(f64::NAN);
                        fresh.push(w);
                    }
                }
            }
            let queries: Vec<Vec<WordId>> = fresh
                .iter()
                .map(|&w| {
                    let mut q = context.to_vec();
                    q.push(w);
                    q
                })
                .collect();
            let refs: Vec<&[WordId]> = queries.iter().map(|q| &q[..]).collect();
            for (w, p) in fresh.iter().zip(self.prob_batch(&refs)?) {
                scored.insert(*w, p.p);
            }
            count += fresh.len();
            let caps: Vec<usize> = self.parts.iter().map(|p| cap(p.as_ref(), depth)).collect();
            let bound = unlisted_bound(&self.weights, &lists, &caps, &unk);
            let done = match bound {
                None => true,
                Some(b) => kth_best(&scored, k).is_some_and(|x| x > b),
            };
            if done {
                break;
            }
            depth = depth.saturating_mul(4);
            lists = self
                .parts
                .iter()
                .map(|p| list(p.as_ref(), cap(p.as_ref(), depth)))
                .collect::<Result<_>>()?;
        }
        // The best k, ties by the words' bytes (texts read for the words
        // at or above the k-th value only).
        let cut = kth_best(&scored, k).unwrap_or(f64::NEG_INFINITY);
        let mut cands: Vec<(f64, WordId)> = scored
            .into_iter()
            .filter(|&(_, p)| p >= cut)
            .map(|(w, p)| (p, w))
            .collect();
        cands.sort_unstable_by_key(|&(_, w)| w);
        let mut texts: Vec<String> = Vec::with_capacity(cands.len());
        for &(_, w) in &cands {
            texts.push(self.word(w)?.unwrap_or_default());
        }
        let mut top = TopK::new(k);
        top.take_all(
            cands
                .iter()
                .enumerate()
                .map(|(i, &(p, _))| Ok::<_, std::convert::Infallible>((p, i))),
        )
        .unwrap_or_else(|e| match e {});
        let (best, _) = top.finish(|a, b| texts[a].as_bytes().cmp(texts[b].as_bytes()));
        let best = best.into_iter().map(|(p, i)| (p, cands[i].1)).collect();
        Ok(Next::from_best(used, best, count))
    }

    /// The context as the blend uses it: cut to N − 1 words (N the
    /// largest order of the parts), a word as `<unk>` when every part
    /// that reads it does so.
    fn context_used(&self, context: &[WordId], answers: &[Next]) -> Vec<WordId> {
        let n = context.len().min(self.order.saturating_sub(1));
        let mut used = context[context.len() - n..].to_vec();
        for (j, w) in used.iter_mut().rev().enumerate() {
            let readers: Vec<WordId> = answers
                .iter()
                .filter(|a| a.context.len() > j)
                .map(|a| a.context[a.context.len() - 1 - j])
                .collect();
            if !readers.is_empty() && readers.iter().all(|&x| x == unk_id()) {
                *w = unk_id();
            }
        }
        used
    }
}

/// The weights: one a part, each in [0, 1], summing to 1.
pub fn check_weights(weights: &[f64], parts: usize) -> Result<()> {
    if parts == 0 {
        return Err(Error::Config("a blend needs at least one part".into()));
    }
    if weights.len() != parts {
        return Err(Error::Config(format!(
            "{} weights for {parts} parts: give one weight a part",
            weights.len()
        )));
    }
    if let Some(w) = weights
        .iter()
        .find(|w| !(w.is_finite() && (0.0..=1.0).contains(*w)))
    {
        return Err(Error::Config(format!(
            "a weight is {w}: each weight is a number from 0 to 1"
        )));
    }
    let sum: f64 = weights.iter().sum();
    if (sum - 1.0).abs() > WEIGHT_SUM_TOLERANCE {
        return Err(Error::Config(format!("the weights sum to {sum}, not 1")));
    }
    Ok(())
}

/// The length of list to ask part `p` for at depth `d`: at most its
/// vocabulary and 2 more, so that a list shorter than asked is exhausted.
fn cap(p: &dyn Predictor, d: usize) -> usize {
    d.min(
        usize::try_from(p.vocabulary_size())
            .unwrap_or(usize::MAX)
            .saturating_add(2),
    )
}

/// The k-th best value scored, if k were scored.
fn kth_best(scored: &HashMap<WordId, f64>, k: usize) -> Option<f64> {
    if scored.len() < k || k == 0 {
        return None;
    }
    let mut v: Vec<f64> = scored.values().copied().collect();
    let (_, x, _) = v.select_nth_unstable_by(k - 1, |a, b| b.total_cmp(a));
    Some(*x)
}

/// The most a word that no list holds can get (`None`: there is no such
/// word, every list is exhausted). List i (asked for `caps[i]`) is
/// exhausted when shorter; otherwise an unlisted word of part i's
/// vocabulary gets at most its last value. A word outside part i's
/// vocabulary gets `unk[i]`; the word lies in at least one part's
/// vocabulary whose list is not exhausted.
fn unlisted_bound(weights: &[f64], lists: &[Next], caps: &[usize], unk: &[f64]) -> Option<f64> {
    let base: f64 = weights.iter().zip(unk).map(|(l, u)| l * u).sum();
    let mut gains: Vec<f64> = Vec::new();
    for (i, l) in lists.iter().enumerate() {
        if l.items.len() >= caps[i] {
            let last = l.items.last().map_or(0.0, |x| x.1);
            // In V_i and unlisted: at most `last`; outside: unk[i].
            gains.push(weights[i] * (last.max(unk[i]) - unk[i]));
        }
    }
    if gains.is_empty() {
        return None;
    }
    let positive: f64 = gains.iter().filter(|&&g| g > 0.0).sum();
    Some(base + positive)
}

impl Predictor for Blend<'_> {
    fn method(&self) -> Method {
        Method::Blend
    }
    fn order(&self) -> usize {
        self.order
    }
    fn vocabulary_size(&self) -> u64 {
        // The union (on first use); a part that cannot list its words
        // leaves the largest part's size.
        match self.union() {
            Ok(u) => u.len() as u64,
            Err(_) => self
                .parts
                .iter()
                .map(|p| p.vocabulary_size())
                .max()
                .unwrap_or(0),
        }
    }
    fn preparation(&self) -> Preparation {
        self.preparation
    }
    fn notes(&self) -> &[String] {
        &self.notes
    }
    fn constants(&self) -> serde_json::Value {
        serde_json::json!({
            "weights": self.weights,
            "parts": self.parts.iter().map(|p| serde_json::json!({
                "method": p.method().name(),
                "order": p.order(),
                "constants": p.constants(),
            })).collect::<Vec<_>>(),
        })
    }
    fn word(&self, id: WordId) -> Result<Option<String>> {
        for p in &self.parts {
            if let Some(w) = p.word(id)? {
                return Ok(Some(w));
            }
        }
        Ok(None)
    }
    fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        let mut q = context.to_vec();
        q.push(word);
        Ok(self.prob_batch(&[&q])?[0])
    }
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        let all: Vec<Vec<Prob>> = self
            .parts
            .iter()
            .map(|p| p.prob_batch(queries))
            .collect::<Result<_>>()?;
        Ok((0..queries.len())
            .map(|t| self.combine(all.iter().map(|v| v[t])))
            .collect())
    }
    fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        self.top(context, k, |p, d| p.next(context, d))
    }
    fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        let union = self.union()?;
        let mut out: Vec<(WordId, f64)> = union.iter().map(|&w| (w, 0.0)).collect();
        for (p, &l) in self.parts.iter().zip(&self.weights) {
            let d = p.distribution(context)?;
            let unk = match d.binary_search_by_key(&unk_id(), |x| x.0) {
                Ok(i) => d[i].1,
                Err(_) => p.prob(context, unk_id())?.p,
            };
            let mut at = 0;
            for (w, slot) in out.iter_mut() {
                while at < d.len() && d[at].0 < *w {
                    at += 1;
                }
                let pi = if at < d.len() && d[at].0 == *w {
                    d[at].1
                } else {
                    unk
                };
                *slot += l * pi;
            }
        }
        Ok(out)
    }
    fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        self.complete_matching(context, prefix, PrefixMatch::Exact, k)
    }
    /// The same search over the parts' own completions: a word's text, and
    /// so whether it matches the prefix (exact or folded), is the same in
    /// every part.
    fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        self.top(context, k, |p, d| {
            p.complete_matching(context, prefix, matching, d)
        })
    }
}
