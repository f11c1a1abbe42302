//! Every k-gram's count from the counts of each position's longest k-gram.
//!
//! A counting worker adds one key per token: the k-gram that starts there
//! and is as long as the order and the sentence allow. Every shorter k-gram
//! that starts at that position is a prefix of it, so the count of any
//! k-gram g is the sum of the counts of the stored keys that g is a prefix
//! of (g itself included when it is stored). In key order those keys are one
//! contiguous group, which the first of them opens; [`each_with_prefixes`]
//! walks the sorted keys once and, at each key, emits the prefixes it opens
//! (those it does not share with the key before it), each with its group's
//! sum. The output is every k-gram in key order (a prefix before its
//! extensions), exactly what a table of every k-gram would have held, so run
//! files do not change.
//!
//! Each key is read once more for each prefix group it belongs to, at most
//! N times; the reads are sequential.

use super::table::SortedRecords;
use crate::key::{Key, MAX_ORDER};
use crate::shard::{Values, MAX_VALUES};

/// Calls `emit` for every prefix of every key in `recs` (keys included),
/// once each, in key order, with the sums of the keys it is a prefix of.
/// Stops at the first error `emit` returns.
pub fn each_with_prefixes<E>(
    recs: SortedRecords<'_>,
    mut emit: impl FnMut(Key, &Values) -> Result<(), E>,
) -> Result<(), E> {
    let n = recs.len();
    let mut prev: &[u64] = &[];
    for i in 0..n {
        let ids = recs.ids(i);
        let shared = ids.iter().zip(prev).take_while(|(a, b)| a == b).count();
        let mut padded = [0u64; MAX_ORDER];
        padded[..shared].copy_from_slice(&ids[..shared]);
        for d in shared + 1..=ids.len() {
            padded[d - 1] = ids[d - 1];
            let prefix = &ids[..d];
            let mut sums = [0u64; MAX_VALUES];
            let mut j = i;
            while j < n {
                let other = recs.ids(j);
                if other.len() < d || other[..d] != *prefix {
                    break;
                }
                for (s, v) in sums.iter_mut().zip(recs.values(j)) {
                    // Wrapping: a documents sum may hold −1s (see
                    // `Worker::add_document`); counts never reach 2⁶⁴.
                    *s = s.wrapping_add(v);
                }
                j += 1;
            }
            emit(Key::from_padded(padded, d), &sums)?;
        }
        prev = ids;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::count::Table;
    use std::collections::BTreeMap;

    /// A reference: every k-gram of every sentence counted in a map.
    fn all_kgrams(sentences: &[Vec<u64>], n: usize) -> BTreeMap<Vec<u64>, u64> {
        let mut m = BTreeMap::new();
        for s in sentences {
            for i in 0..s.len() {
                for k in 1..=n.min(s.len() - i) {
                    *m.entry(s[i..i + k].to_vec()).or_insert(0) += 1;
                }
            }
        }
        m
    }

    #[test]
    fn longest_kgrams_give_every_kgram() {
        // Small ids so that words repeat and prefixes are shared.
        let mut x: u64 = 7;
        let mut sentences = Vec::new();
        for _ in 0..300 {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let len = 1 + (x >> 60) as usize;
            let mut s = Vec::new();
            for _ in 0..len {
                x = x
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                s.push(1 + (x >> 61));
            }
            // Half the sentences end in a word of their own, half do not
            // (then a short longest k-gram can be a prefix of another).
            if len.is_multiple_of(2) {
                s.push(100);
            }
            sentences.push(s);
        }
        for n in 1..=5 {
            let mut t = Table::with_budget(n, 1, 1 << 20);
            for s in &sentences {
                for i in 0..s.len() {
                    t.add(&s[i..i + n.min(s.len() - i)], &[1]);
                }
            }
            let mut got = Vec::new();
            each_with_prefixes(t.sorted().records(), |k, v| {
                got.push((k.ids().to_vec(), v[0]));
                Ok::<(), ()>(())
            })
            .unwrap();
            let want: Vec<(Vec<u64>, u64)> = all_kgrams(&sentences, n).into_iter().collect();
            assert_eq!(got, want, "order {n}");
        }
    }
}
