//! K-way heap merge of sorted record streams, summing equal keys.

use std::cmp::Reverse;
use std::collections::BinaryHeap;

use crate::error::Result;
use crate::key::Key;
use crate::shard::{SectionReader, Values};

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
    heap: BinaryHeap<Reverse<(Key, usize)>>,
    heads: Vec<Values>,
}

impl<S: RecordSource> KWayMerge<S> {
    /// Starts the merge (reads the first record of each source).
    pub fn new(mut sources: Vec<S>) -> Result<Self> {
        let mut heap = BinaryHeap::with_capacity(sources.len());
        let mut heads = vec![[0; crate::shard::MAX_VALUES]; sources.len()];
        for (i, s) in sources.iter_mut().enumerate() {
            if let Some((k, v)) = s.next_record()? {
                heads[i] = v;
                heap.push(Reverse((k, i)));
            }
        }
        Ok(KWayMerge {
            sources,
            heap,
            heads,
        })
    }

    fn advance(&mut self, i: usize) -> Result<()> {
        if let Some((k, v)) = self.sources[i].next_record()? {
            self.heads[i] = v;
            self.heap.push(Reverse((k, i)));
        }
        Ok(())
    }
}

impl<S: RecordSource> RecordSource for KWayMerge<S> {
    fn next_record(&mut self) -> Result<Option<(Key, Values)>> {
        let Some(Reverse((key, i))) = self.heap.pop() else {
            return Ok(None);
        };
        let mut vals = self.heads[i];
        self.advance(i)?;
        while let Some(Reverse((k, j))) = self.heap.peek().copied() {
            if k != key {
                break;
            }
            self.heap.pop();
            for (a, b) in vals.iter_mut().zip(self.heads[j]) {
                *a += b;
            }
            self.advance(j)?;
        }
        Ok(Some((key, vals)))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    struct VecSource(std::vec::IntoIter<(Key, Values)>);
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
}
