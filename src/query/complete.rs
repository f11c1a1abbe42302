//! Completion over a store: the exact top K next words that begin with a
//! prefix, by the same search as [`Estimator::next`] with the candidates
//! of each group limited to the prefix.
//!
//! The groups (see [`super::next`]): the children of the suffixes of two
//! words or more, scored all (those that begin with the prefix); the
//! children of the last word alone that no longer suffix has, whose order
//! by P(w | last word) is their order by P(w | context), so the first K of
//! that ranking that begin with the prefix (or, when the prefix's words
//! are far fewer than the children, each of those words looked up among
//! them); and the words that are children of no suffix, whose order is
//! the unigram ranking's, so the first K of it that begin with the prefix.
//! V in text order makes a prefix's words one range; a tree of minima of
//! the unigram ranks over that order gives the range's words best first
//! (a heap over the tree's nodes that cover the range). `katz` scores the
//! last word's children all, as in `next`.
//!
//! The index (V in text order with its texts, the place of each word, the
//! tree) is built on the first completion with a non-empty prefix and kept
//! by the estimator.

use std::cmp::Reverse;
use std::collections::BinaryHeap;

use crate::error::Result;
use crate::words::{eos_id, IdMap, WordId};

use super::next::best;
use super::{Estimator, Method, Next};

/// V without the markers in text order, with a tree of the unigram ranks.
pub(crate) struct TextIndex {
    texts: Vec<String>,
    ids: Vec<WordId>,
    pos: IdMap<u32>,
    /// `tree[n + i]`: the place of `ids[i]` in the unigram ranking;
    /// `tree[i]`, 1 ≤ i < n: the least of its two children.
    tree: Vec<u32>,
}

/// The words a completion may show: all but the markers `<s>` and `<unk>`
/// (empty prefix), or places `lo..hi` of the text index.
#[derive(Clone, Copy)]
enum Filter<'a> {
    NoMarkers,
    Range {
        ix: &'a TextIndex,
        lo: usize,
        hi: usize,
    },
}

impl Estimator<'_> {
    /// The `k` most probable words after `context` (raw ids; cut to N − 1,
    /// OOV words as `<unk>`) that begin with `prefix` (lowercased first if
    /// the store was built with `--lowercase`), exact. Never `<s>` or
    /// `<unk>`; `</s>` only for an empty prefix. See the module doc.
    pub fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        if prefix.is_empty() {
            return self.complete_in(context, Filter::NoMarkers, k);
        }
        let prefix = self.store.meta().settings.preparation.prefix(prefix);
        let ix = self.text_index()?;
        let lo = ix.texts.partition_point(|t| t.as_str() < prefix.as_str());
        let hi = lo + ix.texts[lo..].partition_point(|t| t.starts_with(prefix.as_str()));
        self.complete_in(context, Filter::Range { ix, lo, hi }, k)
    }

    fn text_index(&self) -> Result<&TextIndex> {
        if let Some(ix) = self.text_index.get() {
            return Ok(ix);
        }
        let ranking = self.unigram_ranking()?;
        let mut rank: IdMap<u32> = IdMap::default();
        for (r, &w) in ranking.iter().enumerate() {
            rank.insert(w, r as u32);
        }
        let voc = self.store.vocabulary()?;
        let eos = eos_id();
        let mut words: Vec<(String, WordId)> = Vec::with_capacity(ranking.len());
        for &w in self.vocabulary()? {
            if w == self.unk || w == eos || w == self.bos {
                continue;
            }
            if let Some(t) = voc.get(&w) {
                words.push((t.clone(), w));
            }
        }
        words.sort_unstable();
        let n = words.len();
        let mut pos = IdMap::default();
        let mut tree = vec![u32::MAX; 2 * n];
        for (i, (_, w)) in words.iter().enumerate() {
            pos.insert(*w, i as u32);
            tree[n + i] = rank.get(w).copied().unwrap_or(u32::MAX);
        }
        for i in (1..n).rev() {
            tree[i] = tree[2 * i].min(tree[2 * i + 1]);
        }
        let (texts, ids) = words.into_iter().unzip();
        let _ = self.text_index.set(TextIndex {
            texts,
            ids,
            pos,
            tree,
        });
        Ok(self.text_index.get().expect("just set"))
    }

    fn complete_in(&self, context: &[WordId], filter: Filter<'_>, k: usize) -> Result<Next> {
        let (bos, unk) = (self.bos, self.unk);
        let ok = |w: WordId| match filter {
            Filter::NoMarkers => w != bos && w != unk,
            Filter::Range { ix, lo, hi } => ix
                .pos
                .get(&w)
                .is_some_and(|&p| (p as usize) >= lo && (p as usize) < hi),
        };
        let cl = self.raw_context_levels(context)?;
        let l = cl.ctx.len();
        let mut buf = Vec::new();
        let mut scored: Vec<(f64, WordId)> = Vec::new();
        let keep = |v: &mut Vec<(f64, WordId)>| {
            if v.len() > k && k > 0 {
                v.select_nth_unstable_by(k - 1, best);
            }
            v.truncate(k);
        };
        let lowest = if self.method == Method::Katz { 1 } else { 2 };
        if k > 0 {
            for j in (lowest..=l).rev() {
                let Some(m) = &cl.maps[j] else { continue };
                for &(w, at, uni) in &m.list {
                    if !ok(w) || (j < l && cl.child_from(j + 1, w)) {
                        continue;
                    }
                    scored.push((self.eval_child(&cl, w, j, Some(at), uni, &mut buf)?.0, w));
                }
            }
        }
        let mut n_scored = scored.len();
        if k > 0 && lowest == 2 && l >= 1 && cl.maps[1].is_some() {
            if let Some(m) = self.ranked_children(cl.ctx[l - 1])? {
                let mut level = Vec::new();
                match filter {
                    Filter::Range { ix, lo, hi } if (hi - lo) * 8 < m.list.len() => {
                        for &w in &ix.ids[lo..hi] {
                            let Ok(i) = m.list.binary_search_by_key(&w, |e| e.0) else {
                                continue;
                            };
                            if cl.child_from(2, w) {
                                continue;
                            }
                            let (_, at, uni) = m.list[i];
                            level.push((self.eval_child(&cl, w, 1, Some(at), uni, &mut buf)?.0, w));
                        }
                        n_scored += level.len();
                        keep(&mut level);
                    }
                    _ => {
                        for &(w, at, uni) in m.ranked.get().expect("ranked by ranked_children") {
                            if level.len() == k {
                                break;
                            }
                            if !ok(w) || cl.child_from(2, w) {
                                continue;
                            }
                            level.push((self.eval_child(&cl, w, 1, Some(at), uni, &mut buf)?.0, w));
                        }
                        n_scored += level.len();
                    }
                }
                scored.extend(level);
            }
        }
        if k > 0 {
            let ranking = self.unigram_ranking()?;
            let mut taken = 0;
            let mut take = |w: WordId| -> Result<bool> {
                if cl.child_from(1, w) {
                    return Ok(false);
                }
                scored.push((self.eval_mapped(&cl, w, &mut buf)?.0, w));
                taken += 1;
                Ok(taken == k)
            };
            match filter {
                Filter::NoMarkers => {
                    for &w in ranking {
                        if ok(w) && take(w)? {
                            break;
                        }
                    }
                }
                Filter::Range { ix, lo, hi } => {
                    let n = ix.ids.len();
                    let mut heap: BinaryHeap<Reverse<(u32, usize)>> = BinaryHeap::new();
                    let (mut a, mut z) = (lo + n, hi + n);
                    while a < z {
                        if a & 1 == 1 {
                            heap.push(Reverse((ix.tree[a], a)));
                            a += 1;
                        }
                        if z & 1 == 1 {
                            z -= 1;
                            heap.push(Reverse((ix.tree[z], z)));
                        }
                        a >>= 1;
                        z >>= 1;
                    }
                    while let Some(Reverse((r, node))) = heap.pop() {
                        if node < n {
                            heap.push(Reverse((ix.tree[2 * node], 2 * node)));
                            heap.push(Reverse((ix.tree[2 * node + 1], 2 * node + 1)));
                        } else if let Some(&w) = ranking.get(r as usize) {
                            if take(w)? {
                                break;
                            }
                        }
                    }
                }
            }
            n_scored += taken;
        }
        keep(&mut scored);
        Ok(Next::from_scored(cl.ctx, scored, n_scored))
    }
}
