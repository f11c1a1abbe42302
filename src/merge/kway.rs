//! K-way merge of sorted record streams, summing equal keys.
//!
//! A loser tree: the sources are the leaves of a complete binary tree whose
//! inner nodes remember the loser of the match played there, so replacing
//! the winner's record replays one path of log2(k) matches, comparing only
//! the new record with the stored losers (a binary heap's pop and push do
//! about twice as many comparisons and move whole entries).

use crate::error::Result;
use crate::key::Key;
use crate::shard::{SectionReader, Values, MAX_VALUES};

/// A stream of records in strictly increasing key order.
pub trait RecordSource {
    /// The next record, or `None` at the end.
    fn next_record(&mut self) -> Result<Option<(Key, Values)>>;
}

impl RecordSource for SectionReader {
    fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
        SectionReader::next_record(self)
    }
}

/// Merges sources into one stream in key order; records with equal keys in
/// several sources come out once, their values summed.
pub struct KWayMerge<S> {
    sources: Vec<S>,
    /// Each source's current record (meaningless once it is not `live`).
    keys: Vec<Key>,
    vals: Vec<Values>,
    live: Vec<bool>,
    /// `tree[0]`: the winner; `tree[j]` (1 ≤ j < k): the loser at node j.
    /// Leaf of source i is node k + i; the parent of node j is j / 2.
    tree: Vec<usize>,
}

impl<S: RecordSource> KWayMerge<S> {
    /// Starts the merge (reads the first record of each source).
    pub fn new(mut sources: Vec<S>) -> Result<Self> {
        let k = sources.len();
        let mut keys = vec![Key::default(); k];
        let mut vals = vec![[0; MAX_VALUES]; k];
        let mut live = vec![false; k];
        for (i, s) in sources.iter_mut().enumerate() {
            if let Some((key, v)) = s.next_record()? {
                keys[i] = key;
                vals[i] = v;
                live[i] = true;
            }
        }
        let mut m = KWayMerge {
            sources,
            keys,
            vals,
            live,
            tree: vec![0; k.max(1)],
        };
        if k > 0 {
            m.tree[0] = m.build(1);
        }
        Ok(m)
    }

    /// True if source `a`'s record comes before source `b`'s (an ended
    /// source comes last; equal keys in source order).
    #[inline]
    fn before(&self, a: usize, b: usize) -> bool {
        if !self.live[a] {
            return false;
        }
        if !self.live[b] {
            return true;
        }
        match self.keys[a].cmp(&self.keys[b]) {
            std::cmp::Ordering::Less => true,
            std::cmp::Ordering::Greater => false,
            std::cmp::Ordering::Equal => a < b,
        }
    }

    /// Plays the matches below node `j`; returns the winner.
    fn build(&mut self, j: usize) -> usize {
        let k = self.sources.len();
        if j >= k {
            return j - k;
        }
        let (a, b) = (self.build(2 * j), self.build(2 * j + 1));
        let (win, lose) = if self.before(a, b) { (a, b) } else { (b, a) };
        self.tree[j] = lose;
        win
    }

    /// Reads source `i`'s next record and replays its path to the root.
    fn advance(&mut self, i: usize) -> Result<()> {
        match self.sources[i].next_record()? {
            Some((key, v)) => {
                self.keys[i] = key;
                self.vals[i] = v;
            }
            None => self.live[i] = false,
        }
        let mut win = i;
        let mut j = (i + self.sources.len()) / 2;
        while j > 0 {
            let other = self.tree[j];
            if self.before(other, win) {
                self.tree[j] = win;
                win = other;
            }
            j /= 2;
        }
        self.tree[0] = win;
        Ok(())
    }
}

impl<S: RecordSource> RecordSource for KWayMerge<S> {
    fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
        let Some(&i) = self.tree.first() else {
            return Ok(None);
        };
        if self.sources.is_empty() || !self.live[i] {
            return Ok(None);
        }
        let key = self.keys[i];
        let mut vals = self.vals[i];
        self.advance(i)?;
        loop {
            let j = self.tree[0];
            if !self.live[j] || self.keys[j] != key {
                break;
            }
            for (a, b) in vals.iter_mut().zip(self.vals[j]) {
                *a += b;
            }
            self.advance(j)?;
        }
        Ok(Some((key, vals)))
    }
}

#[cfg(test)]
pub(super) mod tests {
    use super::*;

    /// Records from a vector, for tests of what reads a record source.
    pub(in crate::merge) struct VecSource(pub std::vec::IntoIter<(Key, Values)>);
    impl RecordSource for VecSource {
        fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
            Ok(self.0.next())
        }
    }

    fn src(keys: &[(&[u64], u64)]) -> VecSource {
        VecSource(
            keys.iter()
                .map(|(k, v)| (Key::new(k), [*v, 0, 0, 0]))
                .collect::<Vec<_>>()
                .into_iter(),
        )
    }

    #[test]
    fn merges_and_sums() {
        let mut m = KWayMerge::new(vec![
            src(&[(&[1], 1), (&[1, 2], 2), (&[3], 1)]),
            src(&[(&[1], 4), (&[2], 1)]),
            src(&[]),
            src(&[(&[1, 2], 1), (&[3], 10)]),
        ])
        .unwrap();
        let mut got = Vec::new();
        while let Some((k, v)) = m.next_record().unwrap() {
            got.push((k.ids().to_vec(), v[0]));
        }
        assert_eq!(
            got,
            vec![(vec![1], 5), (vec![1, 2], 3), (vec![2], 1), (vec![3], 11)]
        );
    }

    #[test]
    fn any_number_of_sources_merges_like_a_btreemap() {
        // 0 to 9 sources (powers of two and not), random sorted keys with
        // repeats across sources, checked against a BTreeMap of the sums.
        let mut x = 42u64;
        for k in 0..10usize {
            let mut want = std::collections::BTreeMap::new();
            let mut sources = Vec::new();
            for _ in 0..k {
                let mut m = std::collections::BTreeMap::new();
                for _ in 0..50 {
                    x = x
                        .wrapping_mul(6364136223846793005)
                        .wrapping_add(1442695040888963407);
                    let key = [(x >> 40) % 7, (x >> 20) % 5];
                    let len = 1 + (x >> 62) as usize % 2;
                    let key = key[..len].to_vec();
                    m.insert(key.clone(), 1 + (x >> 50) % 3);
                }
                for (key, v) in &m {
                    *want.entry(key.clone()).or_insert(0u64) += v;
                }
                let recs: Vec<(Key, Values)> = m
                    .iter()
                    .map(|(k, v)| (Key::new(k), [*v, 0, 0, 0]))
                    .collect();
                sources.push(VecSource(recs.into_iter()));
            }
            let mut m = KWayMerge::new(sources).unwrap();
            let mut got = Vec::new();
            while let Some((key, v)) = m.next_record().unwrap() {
                got.push((key.ids().to_vec(), v[0]));
            }
            assert_eq!(got, want.into_iter().collect::<Vec<_>>(), "{k} sources");
        }
    }
}
