//! What an estimator keeps between queries: context facts, the unigram
//! table, children lists, and the hasher of their maps. Bounded: each cache
//! is cleared when it passes its entry limit.

use std::cell::OnceCell;
use std::collections::HashMap;
use std::rc::Rc;

use crate::key::Key;
use crate::store::{ContextStats, NgramRecord};
use crate::words::{IdMap, WordId};

/// Cached facts about one context.
#[derive(Clone, Copy, Debug)]
pub(crate) struct CtxInfo {
    pub(crate) stats: Option<ContextStats>,
    pub(crate) hc: u64,
}

impl CtxInfo {
    /// A non-empty context's facts from its own n-gram record.
    pub(super) fn of(r: Option<NgramRecord>) -> CtxInfo {
        CtxInfo {
            stats: r.and_then(|r| r.context),
            hc: r.map_or(0, |r| r.count),
        }
    }
}

/// The unigram table: every stored unigram but `<s>`, with raw and
/// left-type count, and V in id order.
pub(crate) struct Unigrams {
    pub map: IdMap<(u64, u64)>,
    pub vocab: Vec<WordId>,
    /// `counts[i]`: raw and left-type count of `vocab[i]` ((0, 0) for an
    /// unseen `<unk>`).
    pub counts: Vec<(u64, u64)>,
}

impl Unigrams {
    /// The counts of `w`, searched from `vocab[*from..]` and leaving
    /// `*from` at `w`'s place: for ids asked in increasing order, a short
    /// gallop through memory in order instead of a random probe.
    pub(super) fn counts_from(&self, w: WordId, from: &mut usize) -> (u64, u64) {
        let v = &self.vocab;
        if *from > v.len() || (*from > 0 && v[*from - 1] >= w) {
            *from = 0;
        }
        let mut step = 1;
        let mut hi = *from;
        while hi < v.len() && v[hi] < w {
            *from = hi;
            hi += step;
            step *= 2;
        }
        let hi = hi.min(v.len());
        let i = *from + v[*from..hi].partition_point(|&x| x < w);
        *from = i;
        match v.get(i) {
            Some(&x) if x == w => self.counts[i],
            _ => (0, 0),
        }
    }
}

/// The children w of one context h in key order (which is id order), each
/// with its counts and its unigram counts side by side, so that scoring
/// every child reads memory in order, not at random.
pub(crate) struct Children {
    /// The children, ids increasing.
    pub list: Vec<ChildEntry>,
    /// For a one-word context: the children ordered by their probability
    /// after that word alone, most probable first (ties by id), made on
    /// first use by [`Estimator::ranked_children`].
    pub ranked: OnceCell<Vec<ChildEntry>>,
}

impl Children {
    /// (c(h·w), a(h·w)), if w is a child.
    pub fn get(&self, w: WordId) -> Option<(u64, u64)> {
        self.list
            .binary_search_by_key(&w, |e| e.0)
            .ok()
            .map(|i| self.list[i].1)
    }

    /// w is a child.
    pub fn contains(&self, w: WordId) -> bool {
        self.get(w).is_some()
    }
}

/// One child w of a context h: (w, (c(h·w), a(h·w)), (c(w), a(w))).
pub(crate) type ChildEntry = (WordId, (u64, u64), (u64, u64));

pub(crate) type ChildMap = Rc<Children>;

/// A fast hasher for [`Key`]s (multiply-rotate over the ids; the ids are
/// already hashes).
#[derive(Default, Clone, Copy)]
pub(crate) struct KeyHasher(u64);

impl std::hash::Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(b as u64);
        }
    }
    fn write_u8(&mut self, v: u8) {
        self.write_u64(v as u64);
    }
    fn write_usize(&mut self, v: usize) {
        self.write_u64(v as u64);
    }
    fn write_u64(&mut self, v: u64) {
        self.0 = (self.0.rotate_left(5) ^ v).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
}

/// A `HashMap` keyed by n-gram keys.
pub(crate) type KeyMap<V> = HashMap<Key, V, std::hash::BuildHasherDefault<KeyHasher>>;

/// Records of n-grams up to this order are kept in the record cache.
pub(super) const REC_CACHE_MAX_ORDER: usize = 3;
pub(super) const REC_CACHE_ENTRIES: usize = 1 << 20;
pub(super) const WORD_CACHE_ENTRIES: usize = 1 << 20;
/// Children kept in the children cache (40 bytes each).
pub(super) const CHILD_CACHE_ENTRIES: usize = 8 << 20;
