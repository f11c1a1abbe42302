//! Completion over a store: the exact top K next words that begin with a
//! prefix, and the search that [`Estimator::next`] shares.
//!
//! The groups (see [`crate::topk`] and [`super::next`]): the children of
//! the suffixes of two words or more, scored all (those that begin with
//! the prefix); the children of the last word alone that no longer suffix
//! has, ranked by P(w | last word) (or, when the prefix's words are far
//! fewer than the children, each of those words looked up among them and
//! scored all); and the words that are children of no suffix, ranked by
//! the unigram ranking, which for a prefix is walked best first through a
//! [`PrefixIndex`] over V in byte order. `katz` scores the last word's
//! children all: it may back off past the last word's level, so there
//! the order of P(w | last word) does not carry over.
//!
//! The text index (V's texts, their byte order, each word's rank) is built
//! on the first query that needs it (every top K with K > 0: ties are
//! broken by the words' bytes) and kept by the estimator.

use std::ops::Range;

use crate::error::Result;
use crate::topk::{fold, PrefixIndex, PrefixMatch, TopK};
use crate::words::{eos_id, IdMap, WordId};

use super::cache::ChildEntry;
use super::text_index::TextIndex;
use super::{Estimator, Method, Next};

/// The words a top K may show.
#[derive(Clone)]
pub(crate) enum Filter {
    /// Every word of V.
    All,
    /// All but the markers `<s>` and `<unk>` (a completion, empty prefix).
    NoMarkers,
    /// The words at these places of the text index, markers excepted.
    Range(Range<usize>),
    /// The words at these places of the folded text index, markers
    /// excepted.
    Folded(Range<usize>),
}

impl Filter {
    /// The prefix index and the places a prefix filter allows.
    fn places<'a>(&self, ix: &'a TextIndex) -> Option<(&'a PrefixIndex, Range<usize>)> {
        match self {
            Filter::Range(p) => Some((&ix.index, p.clone())),
            Filter::Folded(p) => Some((&ix.folded().1, p.clone())),
            _ => None,
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
        self.top_words(context, Filter::All, k)
    }

    /// [`Estimator::complete`], the prefix matching as `matching` says:
    /// with [`PrefixMatch::Folded`], the words whose folded text begins
    /// with the folded prefix ([`crate::topk::fold`]).
    pub fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        if prefix.is_empty() {
            return self.top_words(context, Filter::NoMarkers, k);
        }
        let prefix = self.store.meta().settings.preparation.prefix(prefix);
        let ix = self.text_index()?;
        let filter = match matching {
            PrefixMatch::Exact => Filter::Range(
                ix.index
                    .range(prefix.as_bytes(), |r| ix.texts[r as usize].as_bytes()),
            ),
            PrefixMatch::Folded => {
                let (texts, index) = ix.folded();
                let prefix = fold(&prefix);
                Filter::Folded(index.range(prefix.as_bytes(), |r| texts[r as usize].as_bytes()))
            }
        };
        self.top_words(context, filter, k)
    }

    /// The `k` most probable words after `context` (raw ids; cut to N − 1,
    /// OOV words as `<unk>`) that begin with `prefix` (lowercased first if
    /// the store was built with `--lowercase`), exact; ties by the words'
    /// bytes. Never `<s>` or `<unk>`; `</s>` only for an empty prefix. See
    /// the module doc.
    pub fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        self.complete_matching(context, prefix, PrefixMatch::Exact, k)
    }

    fn text_index(&self) -> Result<&TextIndex> {
        if let Some(ix) = self.text_index.get() {
            return Ok(ix);
        }
        let ranking = self.unigram_ranking()?;
        let mut voc = self.store.vocabulary()?;
        let mut rank: IdMap<u32> = IdMap::default();
        let mut texts = Vec::with_capacity(ranking.len());
        for (r, &w) in ranking.iter().enumerate() {
            rank.insert(w, r as u32);
            texts.push(voc.remove(&w).unwrap_or_default().into_boxed_str());
        }
        let index = PrefixIndex::new(texts.len(), |r| Some(texts[r as usize].as_bytes()));
        let _ = self.text_index.set(TextIndex {
            texts,
            rank,
            index,
            folded: Default::default(),
        });
        Ok(self.text_index.get().expect("just set"))
    }

    /// The search of [`Estimator::next`] and [`Estimator::complete`].
    pub(crate) fn top_words(&self, context: &[WordId], filter: Filter, k: usize) -> Result<Next> {
        let (bos, unk, eos) = (self.bos, self.unk, eos_id());
        let cl = self.raw_context_levels(context)?;
        if k == 0 {
            return Ok(Next::from_best(cl.ctx, Vec::new(), 0));
        }
        let ix = self.text_index()?;
        let ok = |w: WordId| match &filter {
            Filter::All => true,
            Filter::NoMarkers => w != bos && w != unk,
            Filter::Range(places) => {
                w != bos && w != unk && w != eos && ix.place(w).is_some_and(|p| places.contains(&p))
            }
            Filter::Folded(places) => {
                w != bos
                    && w != unk
                    && w != eos
                    && ix.folded_place(w).is_some_and(|p| places.contains(&p))
            }
        };
        let l = cl.ctx.len();
        let mut buf = Vec::new();
        let mut top = TopK::new(k);
        if let Some(j) = self.tied_beyond(&cl) {
            // Every word but the children of level j has one probability:
            // those children, then the first K others in byte order.
            let kids = cl.maps.get(j).cloned().flatten();
            let kid = |w: WordId| kids.as_ref().is_some_and(|m| m.contains(w));
            let score = |&(w, at, uni): &ChildEntry| {
                Ok((self.eval_child(&cl, w, j, Some(at), uni, &mut buf)?.0, w))
            };
            match &kids {
                // The last word's children, ranked by P(w | last word),
                // which is P(w | context) here.
                Some(_) if j == 1 => {
                    let m = self.ranked_children(cl.ctx[l - 1])?.expect("has children");
                    let ranked = m.ranked.get().expect("ranked by ranked_children");
                    top.take_ranked(ranked.iter().filter(|e| ok(e.0)).map(score))?;
                }
                Some(m) => top.take_all(m.list.iter().filter(|e| ok(e.0)).map(score))?,
                None => {}
            }
            let (index, places) = filter.places(ix).unwrap_or((&ix.index, 0..ix.index.len()));
            let words = index.by_bytes()[places].iter().map(|&r| self.ranking_at(r));
            let rest = words.filter(|&w| ok(w) && !kid(w));
            top.take_tied(rest.map(|w| Ok((self.eval_mapped(&cl, w, &mut buf)?.0, w))))?;
            let (best, scored) = top.finish(|a, b| ix.bytes_order(a, b));
            return Ok(Next::from_best(cl.ctx, best, scored));
        }
        let lowest = if self.method == Method::Katz { 1 } else { 2 };
        for j in (lowest..=l).rev() {
            let Some(m) = &cl.maps[j] else { continue };
            top.take_all(
                m.list
                    .iter()
                    .filter(|e| ok(e.0) && !(j < l && cl.child_from(j + 1, e.0)))
                    .map(|&(w, at, uni)| {
                        Ok((self.eval_child(&cl, w, j, Some(at), uni, &mut buf)?.0, w))
                    }),
            )?;
        }
        if lowest == 2 && l >= 1 && cl.maps[1].is_some() {
            if let Some(m) = self.ranked_children(cl.ctx[l - 1])? {
                let group = |e: &&ChildEntry| ok(e.0) && !cl.child_from(2, e.0);
                let score = |&(w, at, uni): &ChildEntry| {
                    Ok((self.eval_child(&cl, w, 1, Some(at), uni, &mut buf)?.0, w))
                };
                match filter.places(ix) {
                    Some((index, places)) if places.len() * 8 < m.list.len() => {
                        let found = index.by_bytes()[places].iter().filter_map(|&r| {
                            let i = m.list.binary_search_by_key(&self.ranking_at(r), |e| e.0);
                            i.ok().map(|i| &m.list[i])
                        });
                        top.take_all(found.filter(group).map(score))?;
                    }
                    _ => {
                        let ranked = m.ranked.get().expect("ranked by ranked_children");
                        top.take_ranked(ranked.iter().filter(group).map(score))?;
                    }
                }
            }
        }
        let ranking = self.unigram_ranking()?;
        let group = |w: &WordId| ok(*w) && !cl.child_from(1, *w);
        let score = |w: WordId| Ok((self.eval_mapped(&cl, w, &mut buf)?.0, w));
        match filter.places(ix) {
            Some((index, places)) => {
                let words = index.best_first(places).map(|r| ranking[r as usize]);
                top.take_ranked(words.filter(group).map(score))?;
            }
            _ => top.take_ranked(ranking.iter().copied().filter(group).map(score))?,
        }
        let (best, scored) = top.finish(|a, b| ix.bytes_order(a, b));
        Ok(Next::from_best(cl.ctx, best, scored))
    }

    /// The level j whose non-children all have one probability, if there
    /// is one: `add-k` after a context of one word or more (j = its
    /// length: every word unseen after it gets k / (C(h) + k|V|), or 1/|V|
    /// after an unseen context), and `mle` after a context with a seen
    /// suffix (j = the longest: every word unseen after it gets 0).
    fn tied_beyond(&self, cl: &super::probability::ContextLevels) -> Option<usize> {
        let l = cl.ctx.len();
        match self.method {
            Method::AddK if l >= 1 => Some(l),
            Method::Mle => (1..=l)
                .rev()
                .find(|&j| cl.infos[j].stats.is_some_and(|s| s.count_sum > 0)),
            _ => None,
        }
    }

    /// The word of rank `r` in the unigram ranking (built by then).
    fn ranking_at(&self, r: u32) -> WordId {
        self.ranking.get().expect("ranked before the text index")[r as usize]
    }
}
