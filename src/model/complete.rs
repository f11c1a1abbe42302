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
//! within a group the order of q is the order of P. The top K of V are
//! among the top K of each group; the top K of a group are its first K
//! members in the order of q. So every level contributes at most K
//! candidates, found from an order of its list by q:
//!
//! - a context's children by q (most probable first, ties by word index,
//!   which is id order), sorted the first time a long list is asked for
//!   and kept in a cache shared by threads ([`Completion`]); short lists
//!   are scanned;
//! - V by the unigram q: the file's ranking for the whole of V; for a
//!   prefix, a tree of minima over V in text order, whose leaves are the
//!   words' places in that ranking, walked best first with a heap over
//!   the tree's nodes that cover the prefix's range (words with a common
//!   prefix are one range in text order).
//!
//! With a prefix, a child is a member only if it begins with the prefix;
//! when the prefix's range in V is much shorter than a children list, the
//! words of the range are looked up among the children instead.
//!
//! Markers: a completion never suggests `<s>` or `<unk>`, and `</s>` only
//! for an empty prefix. [`Model::next`] (the library's plain top K) is the
//! same search with every word of V allowed.
//!
//! The index over V in text order (word order, positions, the tree: 16
//! bytes a word, plus a ranking of V by the stored unigram q, 4 bytes a
//! word) is built on the first completion with a non-empty prefix; the
//! children orders are built per context on first use and dropped all at
//! once when they exceed [`RANKED_BUDGET`] entries.

use std::cmp::Reverse;
use std::collections::{BinaryHeap, HashMap};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::{Arc, Mutex, OnceLock};

use crate::error::Result;
use crate::query::Next;
use crate::words::{eos_id, WordId};

use super::query::State;
use super::reader::{u32_at, Model};

/// A children list longer than this is ranked once and cached; shorter
/// ones are scanned on each query.
const SCAN_MAX: usize = 48;

/// At most this many children entries are kept ranked (4 bytes each);
/// past it the cache is emptied and fills again.
pub const RANKED_BUDGET: usize = 1 << 25;

/// Shards of the children cache (fewer threads wait on one lock).
const SHARDS: usize = 16;

/// The lazily built search structures of a model, shared by threads.
#[derive(Default)]
pub struct Completion {
    text: OnceLock<TextIndex>,
    ranked: [Mutex<HashMap<u64, Arc<[u32]>>>; SHARDS],
    ranked_entries: AtomicUsize,
}

impl std::fmt::Debug for Completion {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Completion")
            .field("text_index_built", &self.text.get().is_some())
            .field(
                "ranked_entries",
                &self.ranked_entries.load(Ordering::Relaxed),
            )
            .finish()
    }
}

/// V without the markers in text order (UTF-8 bytes), with a tree of the
/// unigram ranks over it.
struct TextIndex {
    /// Word indices by text.
    by_text: Vec<u32>,
    /// Per word index: its place in `by_text` (`u32::MAX` for markers).
    pos: Vec<u32>,
    /// V by the stored unigram q (most probable first, ties by index).
    order: Vec<u32>,
    /// `tree[n + i]`: the place in `order` of `by_text[i]`; `tree[i]` for
    /// 1 ≤ i < n: the least of its two children (n = `by_text.len()`).
    tree: Vec<u32>,
}

/// Which words may be shown.
#[derive(Clone, Copy)]
enum Filter<'a> {
    /// Every word of V (the plain top K).
    All,
    /// Every word of V but `<unk>` (a completion with an empty prefix).
    NoUnk,
    /// The words at places `lo..hi` of the text index (a prefix).
    Range {
        ix: &'a TextIndex,
        lo: usize,
        hi: usize,
    },
}

impl Filter<'_> {
    #[inline]
    fn ok(&self, x: u32, unk: u32) -> bool {
        match *self {
            Filter::All => true,
            Filter::NoUnk => x != unk,
            Filter::Range { ix, lo, hi } => {
                let p = ix.pos.get(x as usize).copied().unwrap_or(u32::MAX) as usize;
                p >= lo && p < hi
            }
        }
    }
}

fn best(a: &(f64, u32), b: &(f64, u32)) -> std::cmp::Ordering {
    b.0.total_cmp(&a.0).then(a.1.cmp(&b.1))
}

/// Keeps the best `k` of `v` (unordered).
fn keep_best(v: &mut Vec<(f64, u32)>, k: usize) {
    if v.len() > k && k > 0 {
        v.select_nth_unstable_by(k - 1, best);
    }
    v.truncate(k);
}

impl Model {
    /// The `k` most probable words after `context` (raw ids; cut to N − 1,
    /// words outside V as `<unk>`) that begin with `prefix` (lowercased
    /// first if the model's store was), exact: see the module doc. Never
    /// `<s>` or `<unk>`; `</s>` only for an empty prefix.
    pub fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        if prefix.is_empty() {
            return Ok(self.top_words(context, Filter::NoUnk, k));
        }
        let prefix = self.preparation().prefix(prefix);
        let ix = self.text_index();
        let lo = ix
            .by_text
            .partition_point(|&x| self.text_at(x).as_str() < prefix.as_str());
        let hi = lo
            + ix.by_text[lo..].partition_point(|&x| self.text_at(x).starts_with(prefix.as_str()));
        Ok(self.top_words(context, Filter::Range { ix, lo, hi }, k))
    }

    /// The `k` most probable words after `context`, exact, every word of V
    /// allowed (`<unk>` and `</s>` included).
    pub(crate) fn top_next(&self, context: &[WordId], k: usize) -> Next {
        self.top_words(context, Filter::All, k)
    }

    fn text_index(&self) -> &TextIndex {
        self.completion.text.get_or_init(|| {
            let eos = self.index_of(eos_id());
            let mut words: Vec<(String, u32)> = (0..self.nw as u32)
                .filter(|&x| x != self.bos && x != self.unk && Some(x) != eos)
                .map(|x| (self.text_at(x), x))
                .collect();
            words.sort_unstable();
            let by_text: Vec<u32> = words.into_iter().map(|w| w.1).collect();
            let mut pos = vec![u32::MAX; self.nw];
            for (i, &x) in by_text.iter().enumerate() {
                pos[x as usize] = i as u32;
            }
            let mut order: Vec<u32> = (0..self.nw as u32).filter(|&x| x != self.bos).collect();
            order.sort_unstable_by(|&a, &b| self.q(1, b).total_cmp(&self.q(1, a)).then(a.cmp(&b)));
            let mut rank = vec![u32::MAX; self.nw];
            for (r, &x) in order.iter().enumerate() {
                rank[x as usize] = r as u32;
            }
            let n = by_text.len();
            let mut tree = vec![u32::MAX; 2 * n];
            for (i, &x) in by_text.iter().enumerate() {
                tree[n + i] = rank[x as usize];
            }
            for i in (1..n).rev() {
                tree[i] = tree[2 * i].min(tree[2 * i + 1]);
            }
            TextIndex {
                by_text,
                pos,
                order,
                tree,
            }
        })
    }

    /// The entries of the children of entry `e` of order `j`, by q (most
    /// probable first, ties by entry, which is word order): cached.
    fn ranked_children(&self, j: usize, e: u32) -> Arc<[u32]> {
        let key = ((j as u64) << 32) | e as u64;
        let shard = &self.completion.ranked[(e as usize ^ j) % SHARDS];
        if let Some(r) = shard.lock().expect("cache lock").get(&key) {
            return r.clone();
        }
        let r = self.children(j, e);
        let mut v: Vec<u32> = (r.start as u32..r.end as u32).collect();
        v.sort_unstable_by(|&a, &b| {
            self.q(j + 1, b)
                .total_cmp(&self.q(j + 1, a))
                .then(a.cmp(&b))
        });
        let v: Arc<[u32]> = v.into();
        let c = &self.completion;
        if c.ranked_entries.fetch_add(v.len(), Ordering::Relaxed) + v.len() > RANKED_BUDGET {
            for s in &c.ranked {
                s.lock().expect("cache lock").clear();
            }
            c.ranked_entries.store(v.len(), Ordering::Relaxed);
        }
        shard.lock().expect("cache lock").insert(key, v.clone());
        v
    }

    /// Whether word `x` is kept at one of the walked levels `above` (of one
    /// word or more).
    #[inline]
    fn kept_at(&self, st: &State, above: &[(usize, f64)], x: u32) -> bool {
        above
            .iter()
            .any(|&(j, _)| j >= 1 && self.child(j, st.nodes[j - 1], x).is_some())
    }

    fn top_words(&self, context: &[WordId], filter: Filter<'_>, k: usize) -> Next {
        let st = self.state(context);
        let walk = self.walk(&st);
        let unk = self.unk;
        let mut scored: Vec<(f64, u32)> = Vec::new();
        let mut n_scored = 0;
        for (i, &(j, f)) in walk.iter().enumerate() {
            let above = &walk[..i];
            let mut level: Vec<(f64, u32)> = Vec::new();
            if k == 0 {
                break;
            }
            if j >= 1 {
                let node = st.nodes[j - 1];
                let r = self.children(j, node);
                let range_small = match filter {
                    Filter::Range { lo, hi, .. } => (hi - lo) * 8 < r.len(),
                    _ => false,
                };
                if r.len() <= SCAN_MAX {
                    for e in r {
                        let x = self.word_of(j + 1, e);
                        if filter.ok(x, unk) && !self.kept_at(&st, above, x) {
                            level.push((self.q(j + 1, e as u32) * f, x));
                        }
                    }
                    n_scored += level.len();
                    keep_best(&mut level, k);
                } else if let (true, Filter::Range { ix, lo, hi }) = (range_small, filter) {
                    for &x in &ix.by_text[lo..hi] {
                        if let Some(e) = self.child(j, node, x) {
                            if !self.kept_at(&st, above, x) {
                                level.push((self.q(j + 1, e) * f, x));
                            }
                        }
                    }
                    n_scored += level.len();
                    keep_best(&mut level, k);
                } else {
                    for &e in self.ranked_children(j, node).iter() {
                        let x = self.word_of(j + 1, e as usize);
                        if filter.ok(x, unk) && !self.kept_at(&st, above, x) {
                            level.push((self.q(j + 1, e) * f, x));
                            if level.len() == k {
                                break;
                            }
                        }
                    }
                    n_scored += level.len();
                }
            } else if let Filter::Range { ix, lo, hi } = filter {
                let n = ix.by_text.len();
                let mut heap: BinaryHeap<Reverse<(u32, usize)>> = BinaryHeap::new();
                let (mut l, mut r) = (lo + n, hi + n);
                while l < r {
                    if l & 1 == 1 {
                        heap.push(Reverse((ix.tree[l], l)));
                        l += 1;
                    }
                    if r & 1 == 1 {
                        r -= 1;
                        heap.push(Reverse((ix.tree[r], r)));
                    }
                    l >>= 1;
                    r >>= 1;
                }
                while let Some(Reverse((rank, node))) = heap.pop() {
                    if node < n {
                        heap.push(Reverse((ix.tree[2 * node], 2 * node)));
                        heap.push(Reverse((ix.tree[2 * node + 1], 2 * node + 1)));
                        continue;
                    }
                    let x = ix.order[rank as usize];
                    if !self.kept_at(&st, above, x) {
                        level.push((self.q(1, x) * f, x));
                        if level.len() == k {
                            break;
                        }
                    }
                }
                n_scored += level.len();
            } else {
                let rk = &self.map[self.ranking.clone()];
                for i in 0..self.meta.vocabulary as usize {
                    let x = u32_at(rk, i);
                    if filter.ok(x, unk) && !self.kept_at(&st, above, x) {
                        level.push((self.q(1, x) * f, x));
                        if level.len() == k {
                            break;
                        }
                    }
                }
                n_scored += level.len();
            }
            scored.extend(level);
        }
        keep_best(&mut scored, k);
        scored.sort_unstable_by(best);
        let sum: f64 = scored.iter().map(|x| x.0).sum();
        let ctx = &context[context.len().saturating_sub(self.n - 1)..];
        Next {
            context: ctx
                .iter()
                .map(|&id| self.id_at(self.index_of(id).unwrap_or(self.unk)))
                .collect(),
            items: scored
                .into_iter()
                .map(|(p, x)| (self.id_at(x), p))
                .collect(),
            rest: 1.0 - sum,
            scored: n_scored,
        }
    }
}
