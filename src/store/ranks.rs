//! Word ranks: the dense numbering of a store's words in its keys.
//!
//! Counting names a word by its 64-bit hash ([`crate::words::word_id`]), so
//! that every run file means the same thing on its own. The store names a
//! word by its **rank**: its position among all the store's word ids in
//! increasing order. Ranks are written big-endian in the fewest whole bytes
//! that hold the largest one (3 bytes up to 16,777,216 words), so a 5-gram
//! key shrinks from 40 to 15 bytes.
//!
//! Ranking is monotone in the id, so the byte order of rank keys is the
//! byte order of id keys: key order, prefix scans and the partitions'
//! disjoint key ranges are all unchanged, and the join can write its
//! sorted output directly. The [`Store`](super::Store) translates ids to
//! ranks on every lookup and back on every scan, so nothing above it sees
//! ranks. Ids are uniform hashes, so a table indexed by an id's top bits
//! (a bucket of about four ids each) finds a rank with two memory reads
//! and a short scan, not a binary search.

use crate::error::Result;
use crate::key::{Key, MAX_ORDER};
use crate::search::IdDirectory;
use crate::shard::DictReader;
use crate::words::{bos_id, eos_id, unk_id, WordId};

/// The sorted word ids of a store and their key encoding.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Ranks {
    ids: Vec<WordId>,
    width: usize,
    /// About four ids a bucket, so the directory adds at most one byte
    /// per id.
    dir: IdDirectory,
}

impl Ranks {
    /// Ranks of `ids`, which must be strictly increasing.
    pub fn from_sorted(ids: Vec<WordId>) -> Ranks {
        debug_assert!(ids.windows(2).all(|w| w[0] < w[1]));
        let max = ids.len().saturating_sub(1) as u64;
        let width = (((64 - max.leading_zeros()) as usize).div_ceil(8)).max(1);
        let dir = IdDirectory::new(ids.len(), |i| ids[i], 4, 32);
        Ranks { ids, width, dir }
    }

    /// The ranks of every word in the dictionary files `paths` and of the
    /// three markers, read one file at a time and merged into one sorted
    /// list (memory: about twice 8 bytes per distinct word).
    pub fn from_dicts(paths: &[std::path::PathBuf]) -> Result<Ranks> {
        let mut ids = vec![bos_id(), eos_id(), unk_id()];
        ids.sort_unstable();
        for p in paths {
            let mut r = DictReader::open(p)?;
            let mut file = Vec::new();
            while let Some((id, _)) = r.next_entry()? {
                file.push(id);
            }
            ids = merge_sorted(&ids, &file);
        }
        Ok(Ranks::from_sorted(ids))
    }

    /// Number of words.
    pub fn len(&self) -> usize {
        self.ids.len()
    }

    /// No words at all.
    pub fn is_empty(&self) -> bool {
        self.ids.is_empty()
    }

    /// Bytes of one rank in a key.
    pub fn width(&self) -> usize {
        self.width
    }

    /// The sorted ids.
    pub fn ids(&self) -> &[WordId] {
        &self.ids
    }

    /// Bytes held.
    pub fn heap_bytes(&self) -> usize {
        self.ids.capacity() * 8 + self.dir.heap_bytes()
    }

    /// The rank of `id`, if it is one of the store's words.
    #[inline]
    pub fn rank(&self, id: WordId) -> Option<u32> {
        self.dir.find(|i| self.ids[i], id)
    }

    /// First step of a rank lookup issued ahead of time: asks for the cache
    /// line of `id`'s bucket start. Changes no result.
    #[inline]
    pub fn prefetch_bucket(&self, id: WordId) {
        self.dir.prefetch_bucket(id);
    }

    /// Second step, some records after [`Ranks::prefetch_bucket`]: reads
    /// the bucket's start (by now in the cache) and asks for the cache line
    /// of its first id. Changes no result.
    #[inline]
    pub fn prefetch_ids(&self, id: WordId) {
        if let Some(x) = self.dir.first_index(id).and_then(|i| self.ids.get(i)) {
            crate::hint::prefetch(x);
        }
    }

    /// The id of rank `r`.
    #[inline]
    pub fn id(&self, r: u32) -> Option<WordId> {
        self.ids.get(r as usize).copied()
    }

    /// Appends the key of `ids` to `out`; `false` (with `out` partly
    /// written) if a word is not in the store, so no n-gram with it is.
    #[inline]
    pub fn write_key(&self, ids: &[WordId], out: &mut Vec<u8>) -> bool {
        for &id in ids {
            match self.rank(id) {
                Some(r) => self.write_rank(r, out),
                None => return false,
            }
        }
        true
    }

    /// Appends one rank, big-endian in [`Ranks::width`] bytes.
    #[inline]
    pub fn write_rank(&self, r: u32, out: &mut Vec<u8>) {
        out.extend_from_slice(&r.to_be_bytes()[4 - self.width..]);
    }

    /// Reads one rank written by [`Ranks::write_rank`].
    #[inline]
    pub fn read_rank(&self, b: &[u8]) -> Option<u32> {
        (b.len() == self.width).then(|| b.iter().fold(0u32, |a, &x| (a << 8) | x as u32))
    }

    /// The ranks of a stored key's words, as a [`Key`] of ranks (which
    /// sort as the ids do), or `None` if it is malformed.
    pub fn read_ranks(&self, b: &[u8]) -> Option<Key> {
        if b.is_empty() || !b.len().is_multiple_of(self.width) || b.len() / self.width > MAX_ORDER {
            return None;
        }
        let mut rs = [0 as WordId; MAX_ORDER];
        let k = b.len() / self.width;
        for (i, c) in b.chunks_exact(self.width).enumerate() {
            let r = self.read_rank(c)?;
            if r as usize >= self.ids.len() {
                return None;
            }
            rs[i] = WordId::from(r);
        }
        Some(Key::new(&rs[..k]))
    }

    /// The n-gram of a stored key, or `None` if it is malformed.
    pub fn read_key(&self, b: &[u8]) -> Option<Key> {
        if b.is_empty() || !b.len().is_multiple_of(self.width) || b.len() / self.width > MAX_ORDER {
            return None;
        }
        let mut ids = [0 as WordId; MAX_ORDER];
        let k = b.len() / self.width;
        for (i, c) in b.chunks_exact(self.width).enumerate() {
            ids[i] = self.id(self.read_rank(c)?)?;
        }
        Some(Key::new(&ids[..k]))
    }
}

/// Translates the keys of one sorted stream of n-grams, remembering the
/// previous key's ranks: consecutive keys share leading words, and only
/// the words after the shared ones are looked up.
#[derive(Default)]
pub struct KeyWriter {
    prev: Key,
    ranks: [u32; MAX_ORDER],
}

impl KeyWriter {
    /// Writes the key of `key` to `out` (cleared first); `None` if a word
    /// is not among `ranks` (the join's input and vocabulary disagree).
    pub fn write(&mut self, ranks: &Ranks, key: &Key, out: &mut Vec<u8>) -> Option<()> {
        let ids = key.ids();
        let same = ids
            .iter()
            .zip(self.prev.ids())
            .take_while(|(a, b)| a == b)
            .count();
        for (i, &id) in ids.iter().enumerate().skip(same) {
            self.ranks[i] = ranks.rank(id)?;
        }
        self.prev = *key;
        out.clear();
        for &r in &self.ranks[..ids.len()] {
            ranks.write_rank(r, out);
        }
        Some(())
    }
}

/// The union of two strictly increasing lists.
fn merge_sorted(a: &[WordId], b: &[WordId]) -> Vec<WordId> {
    let mut out = Vec::with_capacity(a.len() + b.len());
    let (mut i, mut j) = (0, 0);
    while i < a.len() && j < b.len() {
        match a[i].cmp(&b[j]) {
            std::cmp::Ordering::Less => {
                out.push(a[i]);
                i += 1;
            }
            std::cmp::Ordering::Greater => {
                out.push(b[j]);
                j += 1;
            }
            std::cmp::Ordering::Equal => {
                out.push(a[i]);
                i += 1;
                j += 1;
            }
        }
    }
    out.extend_from_slice(&a[i..]);
    out.extend_from_slice(&b[j..]);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample(n: usize) -> Ranks {
        let mut ids: Vec<u64> = (0..n as u64)
            .map(|i| crate::words::word_id(&i.to_le_bytes()))
            .collect();
        ids.sort_unstable();
        ids.dedup();
        Ranks::from_sorted(ids)
    }

    #[test]
    fn every_id_finds_its_rank_and_others_none() {
        for n in [1, 2, 3, 100, 5000] {
            let r = sample(n);
            for (i, &id) in r.ids().iter().enumerate() {
                assert_eq!(r.rank(id), Some(i as u32));
                assert_eq!(r.id(i as u32), Some(id));
            }
            for x in 0..2000u64 {
                let id = crate::words::word_id(&(x + 1_000_000).to_le_bytes());
                assert_eq!(r.rank(id), None);
            }
            assert_eq!(r.rank(0), r.ids().binary_search(&0).ok().map(|i| i as u32));
            assert_eq!(r.rank(u64::MAX), None);
        }
    }

    #[test]
    fn width_is_the_fewest_bytes() {
        let w = |n: u64| Ranks::from_sorted((0..n).collect()).width();
        assert_eq!(w(1), 1);
        assert_eq!(w(256), 1);
        assert_eq!(w(257), 2);
        assert_eq!(w(65_536), 2);
        assert_eq!(w(65_537), 3);
    }

    #[test]
    fn keys_keep_the_order_of_ids_and_read_back() {
        let r = sample(70_000);
        assert_eq!(r.width(), 3);
        let ids = r.ids();
        let grams: Vec<Vec<u64>> = vec![
            vec![ids[5]],
            vec![ids[5], ids[0]],
            vec![ids[5], ids[69_999], ids[3]],
            vec![ids[6]],
            vec![ids[300], ids[70]],
        ];
        let mut prev: Option<Vec<u8>> = None;
        let mut kw = KeyWriter::default();
        for g in &grams {
            let mut b = Vec::new();
            assert!(r.write_key(g, &mut b));
            let mut b2 = Vec::new();
            kw.write(&r, &Key::new(g), &mut b2).unwrap();
            assert_eq!(b, b2);
            assert_eq!(r.read_key(&b).unwrap().ids(), &g[..]);
            if let Some(p) = prev {
                assert!(p < b);
            }
            prev = Some(b);
        }
        assert!(!r.write_key(&[ids[1], 12345], &mut Vec::new()));
        assert!(r.read_key(&[0, 0]).is_none());
        assert!(r.read_key(&[0xff, 0xff, 0xff]).is_none());
    }

    #[test]
    fn merge_is_a_sorted_union() {
        assert_eq!(merge_sorted(&[1, 4, 9], &[2, 4, 10]), vec![1, 2, 4, 9, 10]);
        assert_eq!(merge_sorted(&[], &[3]), vec![3]);
    }
}
