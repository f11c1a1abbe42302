//! [`PrefixIndex`]: words in byte order over a tree of minima of their
//! ranks, so that the words that begin with a prefix (one range in byte
//! order) come out best first.

use std::cmp::Reverse;
use std::collections::BinaryHeap;
use std::ops::Range;

/// Words named by their rank (their place in a back end's ranking, best
/// first), held in the byte order of their texts.
///
/// Memory: 12 bytes a word (the tree's two halves and the place of each
/// rank). The texts stay with the back end: [`PrefixIndex::range`] reads
/// them through a closure.
#[derive(Debug, Clone, Default)]
pub struct PrefixIndex {
    /// `tree[n + i]`: the rank of the i-th word in byte order; `tree[i]`
    /// for 1 ≤ i < n: the least of its two children.
    tree: Vec<u32>,
    /// `place[r]`: where rank r is in byte order (`u32::MAX`: not held).
    place: Vec<u32>,
}

impl PrefixIndex {
    /// The index of the ranks `0..ranks` that `text` names (`None`: left
    /// out, for example a marker that is never completed).
    pub fn new<'t>(ranks: usize, text: impl Fn(u32) -> Option<&'t [u8]>) -> PrefixIndex {
        let mut words: Vec<(&[u8], u32)> = (0..ranks as u32)
            .filter_map(|r| text(r).map(|t| (t, r)))
            .collect();
        words.sort_unstable();
        let n = words.len();
        let mut tree = vec![u32::MAX; 2 * n];
        let mut place = vec![u32::MAX; ranks];
        for (i, &(_, r)) in words.iter().enumerate() {
            tree[n + i] = r;
            place[r as usize] = i as u32;
        }
        for i in (1..n).rev() {
            tree[i] = tree[2 * i].min(tree[2 * i + 1]);
        }
        PrefixIndex { tree, place }
    }

    /// Number of words held.
    pub fn len(&self) -> usize {
        self.tree.len() / 2
    }

    /// The ranks in byte order of their texts.
    pub fn by_bytes(&self) -> &[u32] {
        &self.tree[self.len()..]
    }

    /// Where rank `r` is in byte order, if held.
    #[inline]
    pub fn place(&self, r: u32) -> Option<u32> {
        self.place
            .get(r as usize)
            .copied()
            .filter(|&p| p != u32::MAX)
    }

    /// The places (in byte order) of the words that begin with `prefix`;
    /// `text` gives the text of a rank.
    pub fn range<'t>(&self, prefix: &[u8], text: impl Fn(u32) -> &'t [u8]) -> Range<usize> {
        let words = self.by_bytes();
        let lo = words.partition_point(|&r| text(r) < prefix);
        let hi = lo + words[lo..].partition_point(|&r| text(r).starts_with(prefix));
        lo..hi
    }

    /// The ranks of the words at `places`, least (best) first.
    pub fn best_first(&self, places: Range<usize>) -> BestFirst<'_> {
        let n = self.len();
        let mut heap = BinaryHeap::new();
        let (mut a, mut z) = (places.start.min(n) + n, places.end.min(n) + n);
        // The O(log n) nodes that cover the range exactly.
        while a < z {
            if a & 1 == 1 {
                heap.push(Reverse((self.tree[a], a)));
                a += 1;
            }
            if z & 1 == 1 {
                z -= 1;
                heap.push(Reverse((self.tree[z], z)));
            }
            a >>= 1;
            z >>= 1;
        }
        BestFirst { ix: self, heap }
    }
}

/// The words of a range of a [`PrefixIndex`], best rank first.
#[derive(Debug)]
pub struct BestFirst<'a> {
    ix: &'a PrefixIndex,
    heap: BinaryHeap<Reverse<(u32, usize)>>,
}

impl Iterator for BestFirst<'_> {
    type Item = u32;

    fn next(&mut self) -> Option<u32> {
        let n = self.ix.len();
        while let Some(Reverse((r, node))) = self.heap.pop() {
            if node >= n {
                return Some(r);
            }
            let t = &self.ix.tree;
            self.heap.push(Reverse((t[2 * node], 2 * node)));
            self.heap.push(Reverse((t[2 * node + 1], 2 * node + 1)));
        }
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_prefix_range_comes_out_in_rank_order() {
        // Ranks by invented frequency; texts include non-ASCII and a word
        // left out (rank 3, a marker).
        let texts = [
            "the", "ferry", "fog", "</s>", "fé", "f", "harbour", "ferries", "a",
        ];
        let ix = PrefixIndex::new(texts.len(), |r| {
            (r != 3).then(|| texts[r as usize].as_bytes())
        });
        assert_eq!(ix.len(), texts.len() - 1);
        assert_eq!(ix.place(3), None);
        for prefix in ["", "f", "fe", "fé", "fo", "g", "h", "the", "zz", "\u{e9}"] {
            let range = ix.range(prefix.as_bytes(), |r| texts[r as usize].as_bytes());
            let got: Vec<u32> = ix.best_first(range).collect();
            let want: Vec<u32> = (0..texts.len() as u32)
                .filter(|&r| r != 3 && texts[r as usize].starts_with(prefix))
                .collect();
            assert_eq!(got, want, "prefix {prefix:?}");
        }
        // Byte order: "f" < "ferries" < "ferry" < "fog" < "fé" (0xC3 > 'o').
        let order: Vec<&str> = ix.by_bytes().iter().map(|&r| texts[r as usize]).collect();
        assert_eq!(
            order,
            ["a", "f", "ferries", "ferry", "fog", "fé", "harbour", "the"]
        );
    }

    #[test]
    fn every_range_of_a_larger_index_matches_a_scan() {
        // 300 words of two to four letters over {a, b, c}, ranked by a
        // seeded shuffle: every range's ranks, best first.
        let mut texts: Vec<String> = Vec::new();
        for len in 2..=4u32 {
            for i in 0..3u32.pow(len) {
                let mut x = i;
                let mut w = String::new();
                for _ in 0..len {
                    w.push((b'a' + (x % 3) as u8) as char);
                    x /= 3;
                }
                texts.push(w);
            }
        }
        let mut s = 11u64;
        for i in (1..texts.len()).rev() {
            s = s
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            texts.swap(i, (s >> 33) as usize % (i + 1));
        }
        let ix = PrefixIndex::new(texts.len(), |r| Some(texts[r as usize].as_bytes()));
        let n = ix.len();
        for lo in (0..=n).step_by(7) {
            for hi in (lo..=n).step_by(5) {
                let got: Vec<u32> = ix.best_first(lo..hi).collect();
                let mut want: Vec<u32> = ix.by_bytes()[lo..hi].to_vec();
                want.sort_unstable();
                assert_eq!(got, want, "{lo}..{hi}");
            }
        }
    }
}
