//! The exact top K next words of a frozen model, optionally only those that
//! begin with a prefix (completing a word being typed), without scoring all
//! of V.
//!
//! # Why it is exact
//!
//! Along the levels a word backs off through after a context
//! ([`Model::walk`]: M, …, 0, each with the product f_j of the back-off
//! weights passed before reaching it), a word w whose longest kept n-gram
//! under the walked levels ends at level j gets P = q(h_j·w) · f_j. So the
//! words fall into one group per walked level (the children of h_j that
//! are kept at no longer walked level; at level 0 the rest of V), and
//! within a group the order of q is the order of P: each group is ranked
//! by q, and [`crate::topk`] takes its best K (ties at the boundary
//! included, and broken by the words' bytes):
//!
//! - a context's children by q (most probable first, ties by word index),
//!   sorted the first time a long list is asked for and kept in a cache
//!   shared by threads ([`super::cache::Completion`]); short lists are
//!   scanned whole;
//! - V by the unigram q: the file's ranking for the whole of V; for a
//!   prefix, a [`PrefixIndex`] over V in byte order (words with a common
//!   prefix are one range), walked best first.
//!
//! With a prefix, a child is a member only if it begins with the prefix;
//! when searching the children for each word of the prefix's range costs
//! less than walking the ranked children until K are in the range (about
//! K · |V| / |range| of them), the range's words are looked up instead.
//! A group stops at the K-th best of the groups before it, and the test
//! "not kept under a longer context" is asked only of candidates that can
//! still be among the best K ([`TopK::take_ranked_if`]).
//!
//! Markers: a completion never suggests `<s>` or `<unk>`, and `</s>` only
//! for an empty prefix. [`Model::next`] (the library's plain top K) is the
//! same search with every word of V allowed. Neither shows the metadata's
//! never-suggest words: the best K + |list| are found and the listed words
//! dropped.
//!
//! The text index (V by q, its prefix index, each word's place: 20 bytes
//! a word) is built on the first completion with a non-empty prefix; the
//! children orders are built per context on first use and dropped all at
//! once when they exceed [`super::cache::RANKED_BUDGET`] entries.

use std::convert::Infallible;
use std::ops::Range;

use crate::error::Result;
use crate::predict::Next;
use crate::topk::{fold, PrefixIndex, PrefixMatch, TopK};
use crate::words::{eos_id, WordId};

use super::cache::TextIndex;
use super::file::Model;
use super::query::State;

/// A children list longer than this is ranked once and cached; shorter
/// ones are scanned on each query.
const SCAN_MAX: usize = 48;

/// What one search among a context's children costs, in steps of the walk
/// down its ranked children (measured on the 1 GiB benchmark model: about
/// 0.75 µs a search, 20 to 40 ns a step).
const SEARCH_COST: usize = 16;

/// Whether looking each word of a prefix's range up among a context's
/// children (one search each) costs less than walking the children best
/// first until K of them are in the range: the walk meets a word of the
/// range about once every |V| / |range| children, and reads at most the
/// whole list.
fn lookups_pay(range: usize, children: usize, k: usize, v: usize) -> bool {
    let walk = (k.max(1).saturating_mul(v) / range.max(1)).min(children);
    range.saturating_mul(SEARCH_COST) < walk
}

/// Which words may be shown.
#[derive(Clone)]
enum Filter<'a> {
    /// Every word of V (the plain top K).
    All,
    /// Every word of V but `<unk>` (a completion with an empty prefix).
    NoUnk,
    /// The words at these places of the text index (a prefix).
    Range(&'a TextIndex, Range<usize>),
}

impl Filter<'_> {
    #[inline]
    fn ok(&self, x: u32, unk: u32) -> bool {
        match self {
            Filter::All => true,
            Filter::NoUnk => x != unk,
            Filter::Range(ix, places) => ix
                .place
                .get(x as usize)
                .is_some_and(|&p| places.contains(&(p as usize))),
        }
    }
}

/// A candidate for the collector (the model's lookups cannot fail).
fn cand(p: f64, x: u32) -> std::result::Result<(f64, u32), Infallible> {
    Ok((p, x))
}

impl Model {
    /// The `k` most probable words after `context` (raw ids; cut to N − 1,
    /// words outside V as `<unk>`) that begin with `prefix` (lowercased
    /// first if the model's store was), exact; ties by the words' bytes:
    /// see the module doc. Never `<s>` or `<unk>`; `</s>` only for an
    /// empty prefix.
    pub fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        self.complete_matching(context, prefix, PrefixMatch::Exact, k)
    }

    /// [`Model::complete`], the prefix matching as `matching` says: with
    /// [`PrefixMatch::Folded`], the words whose folded text begins with the
    /// folded prefix ([`crate::topk::fold`]), each shown as the model has
    /// it. The index of the folded texts is built on first use.
    pub fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        if prefix.is_empty() {
            return Ok(self.top_words(context, Filter::NoUnk, k));
        }
        let prefix = self.preparation().prefix(prefix);
        let (ix, places) = match matching {
            PrefixMatch::Exact => {
                let ix = self.text_index();
                let text = |r: u32| self.word_bytes(ix.order[r as usize]);
                (ix, ix.index.range(prefix.as_bytes(), text))
            }
            PrefixMatch::Folded => {
                let ix = self.folded_index();
                let text = |r: u32| ix.folded[r as usize].as_bytes();
                (ix, ix.index.range(fold(&prefix).as_bytes(), text))
            }
        };
        Ok(self.top_words(context, Filter::Range(ix, places), k))
    }

    /// The `k` most probable words after `context`, exact, every word of V
    /// allowed (`<unk>` and `</s>` included); ties by the words' bytes.
    pub(crate) fn top_next(&self, context: &[WordId], k: usize) -> Next {
        self.top_words(context, Filter::All, k)
    }

    fn text_index(&self) -> &TextIndex {
        self.completion().text(|| self.build_text_index(false))
    }

    fn folded_index(&self) -> &TextIndex {
        self.completion().folded(|| self.build_text_index(true))
    }

    /// V by q with a prefix index over the words' texts, or over their
    /// folded texts.
    fn build_text_index(&self, folded: bool) -> TextIndex {
        let eos = self.index_of(eos_id());
        let mut order: Vec<u32> = (0..self.words_with_bos() as u32)
            .filter(|&x| x != self.bos_index())
            .collect();
        order.sort_unstable_by(|&a, &b| self.q(1, b).total_cmp(&self.q(1, a)).then(a.cmp(&b)));
        let marker = |x: u32| x == self.unk_index() || Some(x) == eos;
        let texts: Vec<Box<str>> = if folded {
            order
                .iter()
                .map(|&x| fold(&self.text_at(x)).into())
                .collect()
        } else {
            Vec::new()
        };
        let index = PrefixIndex::new(order.len(), |r| {
            let x = order[r as usize];
            (!marker(x)).then(|| match texts.get(r as usize) {
                Some(t) => t.as_bytes(),
                None => self.word_bytes(x),
            })
        });
        let mut place = vec![u32::MAX; self.words_with_bos()];
        for (r, &x) in order.iter().enumerate() {
            if let Some(p) = index.place(r as u32) {
                place[x as usize] = p;
            }
        }
        TextIndex {
            order,
            index,
            place,
            folded: texts,
        }
    }

    /// The entries of the children of entry `e` of order `j`, by q (most
    /// probable first, ties by entry, which is word order): cached.
    fn ranked_children(&self, j: usize, e: u32) -> std::sync::Arc<[u32]> {
        let key = ((j as u64) << 32) | e as u64;
        self.completion().ranked(key, || {
            let r = self.children(j, e);
            let mut v: Vec<u32> = (r.start as u32..r.end as u32).collect();
            v.sort_unstable_by(|&a, &b| {
                self.q(j + 1, b)
                    .total_cmp(&self.q(j + 1, a))
                    .then(a.cmp(&b))
            });
            v
        })
    }

    /// Whether word `x` is kept at one of the walked levels `above` (of one
    /// word or more).
    #[inline]
    fn kept_at(&self, st: &State, above: &[(usize, f64)], x: u32) -> bool {
        above
            .iter()
            .any(|&(j, _)| j >= 1 && self.child(j, st.nodes[j - 1], x).is_some())
    }

    /// The best `k` allowed by `filter` but the words never suggested:
    /// the best `k + |never|` hold them, so the answer stays exact.
    fn top_words(&self, context: &[WordId], filter: Filter<'_>, k: usize) -> Next {
        let never = self.never_suggested();
        if never.is_empty() {
            return self.top_words_of_all(context, filter, k);
        }
        let mut next = self.top_words_of_all(context, filter, k.saturating_add(never.len()));
        next.items.retain(|&(w, _)| {
            self.index_of(w)
                .is_none_or(|x| never.binary_search(&x).is_err())
        });
        next.items.truncate(k);
        next.rest = 1.0 - next.items.iter().map(|x| x.1).sum::<f64>();
        next
    }

    fn top_words_of_all(&self, context: &[WordId], filter: Filter<'_>, k: usize) -> Next {
        let st = self.state(context);
        let walk: Vec<(usize, f64)> = self.walk(&st).collect();
        let unk = self.unk_index();
        let mut top = TopK::new(k);
        let done = |r: std::result::Result<(), Infallible>| r.unwrap_or_else(|e| match e {});
        for (i, &(j, f)) in walk.iter().enumerate() {
            if k == 0 {
                break;
            }
            let above = &walk[..i];
            let fresh = |x: u32| filter.ok(x, unk) && !self.kept_at(&st, above, x);
            if j >= 1 {
                let node = st.nodes[j - 1];
                let r = self.children(j, node);
                let entry = |e: usize| (e, self.word_of(j + 1, e));
                let score = |(e, x): (usize, u32)| cand(self.q(j + 1, e as u32) * f, x);
                match &filter {
                    _ if r.len() <= SCAN_MAX => {
                        done(top.take_all(r.map(entry).filter(|c| fresh(c.1)).map(score)));
                    }
                    Filter::Range(ix, places)
                        if lookups_pay(places.len(), r.len(), k, self.words_with_bos()) =>
                    {
                        let found = ix.index.by_bytes()[places.clone()]
                            .iter()
                            .filter_map(|&rk| {
                                let x = ix.order[rk as usize];
                                self.child(j, node, x).map(|e| (e as usize, x))
                            });
                        let found = found.filter(|c| !self.kept_at(&st, above, c.1));
                        done(top.take_all(found.map(score)));
                    }
                    _ => {
                        let ranked = self.ranked_children(j, node);
                        let ranked = ranked.iter().map(|&e| score(entry(e as usize)));
                        done(top.take_ranked_if(ranked, fresh));
                    }
                }
            } else {
                let score = |x: u32| cand(self.q(1, x) * f, x);
                match &filter {
                    Filter::Range(ix, places) => {
                        let words = ix.index.best_first(places.clone());
                        let words = words.map(|rk| score(ix.order[rk as usize]));
                        done(top.take_ranked_if(words, fresh));
                    }
                    _ => {
                        let words = self.unigram_ranking().map(score);
                        done(top.take_ranked_if(words, fresh));
                    }
                }
            }
        }
        let (best, scored) = top.finish(|a, b| self.word_bytes(a).cmp(self.word_bytes(b)));
        let ctx = &context[context.len().saturating_sub(self.order() - 1)..];
        let ctx = ctx
            .iter()
            .map(|&id| self.id_at(self.index_of(id).unwrap_or(unk)))
            .collect();
        let best = best.into_iter().map(|(p, x)| (p, self.id_at(x))).collect();
        Next::from_best(ctx, best, scored)
    }
}
