//! N-gram keys: up to [`MAX_ORDER`] word ids, compared lexicographically.
//!
//! The order of keys everywhere in quern (tables after sorting, run files,
//! merges, the store) is the lexicographic order of the id sequences, a
//! prefix before its extensions. The store writes each id as its rank
//! among the store's ids, big-endian ([`crate::store::Ranks`]), which keeps
//! that order as the byte order RocksDB compares with, so all n-grams that
//! share a prefix are contiguous. Partitions are ranges of the first word's
//! id, so partition order agrees with key order.

use std::cmp::Ordering;

use crate::words::WordId;

/// Highest order quern counts.
pub const MAX_ORDER: usize = 8;

/// A fixed-width n-gram key (no heap allocation).
#[derive(Clone, Copy, PartialEq, Eq, Hash, Debug, Default)]
pub struct Key {
    len: u8,
    ids: [WordId; MAX_ORDER],
}

impl Key {
    /// The key of `ids` (at most [`MAX_ORDER`] of them).
    #[inline]
    pub fn new(ids: &[WordId]) -> Self {
        let mut k = Key {
            len: ids.len() as u8,
            ids: [0; MAX_ORDER],
        };
        k.ids[..ids.len()].copy_from_slice(ids);
        k
    }

    /// The key of the first `len` of `ids`, whose other entries must be 0
    /// (the padding every key keeps).
    #[inline]
    pub fn from_padded(ids: [WordId; MAX_ORDER], len: usize) -> Self {
        debug_assert!(len <= MAX_ORDER && ids[len..].iter().all(|&x| x == 0));
        Key {
            len: len as u8,
            ids,
        }
    }

    /// The ids.
    #[inline]
    pub fn ids(&self) -> &[WordId] {
        &self.ids[..self.len as usize]
    }

    /// All [`MAX_ORDER`] slots: the ids, then zeros.
    #[inline]
    pub fn padded(&self) -> &[WordId; MAX_ORDER] {
        &self.ids
    }

    /// Number of words.
    #[inline]
    pub fn order(&self) -> usize {
        self.len as usize
    }
}

impl Ord for Key {
    #[inline]
    fn cmp(&self, other: &Self) -> Ordering {
        // Both are padded with zeros, the smallest id, so comparing the
        // slots up to the longer length and then the lengths orders keys
        // as their id slices do (a key sorts before its extensions).
        let n = self.len.max(other.len) as usize;
        for i in 0..n.min(MAX_ORDER) {
            if self.ids[i] != other.ids[i] {
                return self.ids[i].cmp(&other.ids[i]);
            }
        }
        self.len.cmp(&other.len)
    }
}

impl PartialOrd for Key {
    #[inline]
    fn partial_cmp(&self, other: &Self) -> Option<Ordering> {
        Some(self.cmp(other))
    }
}

/// The partition (of `parts`) that owns n-grams whose first word is `first`.
/// Monotone in `first`, so partitions are contiguous key ranges.
#[inline]
pub fn partition_of(first: WordId, parts: u32) -> u32 {
    ((first as u128 * parts as u128) >> 64) as u32
}

/// The smallest first-word id of partition `p` (of `parts`).
#[cfg(test)]
pub fn partition_start(p: u32, parts: u32) -> WordId {
    // Smallest x with floor(x * parts / 2^64) >= p, i.e. ceil(p * 2^64 / parts).
    let num = (p as u128) << 64;
    num.div_ceil(parts as u128) as WordId
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn prefix_sorts_first() {
        let a = Key::new(&[5, 1]);
        let b = Key::new(&[5]);
        let c = Key::new(&[5, 1, 0]);
        let d = Key::new(&[6]);
        let mut v = vec![d, c, a, b];
        v.sort();
        assert_eq!(v, vec![b, a, c, d]);
    }

    #[test]
    fn order_is_the_slice_order_even_with_zero_ids() {
        // Every key of up to 3 words over {0, 1, 2}: zero is a real id here,
        // the value the padding also holds.
        let mut keys = Vec::new();
        for len in 0..=3usize {
            for n in 0..3usize.pow(len as u32) {
                let ids: Vec<WordId> = (0..len)
                    .map(|i| (n / 3usize.pow(i as u32) % 3) as WordId)
                    .collect();
                keys.push(ids);
            }
        }
        for a in &keys {
            for b in &keys {
                assert_eq!(Key::new(a).cmp(&Key::new(b)), a.cmp(b), "{a:?} {b:?}");
            }
        }
    }

    #[test]
    fn partitions_are_ranges() {
        for parts in [1u32, 3, 7, 64] {
            for p in 0..parts {
                let s = partition_start(p, parts);
                assert_eq!(partition_of(s, parts), p);
                if s > 0 {
                    assert_eq!(partition_of(s - 1, parts), p - 1);
                }
            }
            assert_eq!(partition_of(u64::MAX, parts), parts - 1);
        }
    }
}
