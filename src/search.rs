//! Searches in sorted numbers: the one interpolation search ([`find_in`])
//! and the one bucket directory over sorted 64-bit word ids
//! ([`IdDirectory`]), used by the store's word ranks and the frozen
//! model's word list alike.
//!
//! Word ids are uniform hashes, so a table indexed by an id's top bits
//! sends a lookup to a bucket of a few ids: two memory reads (the bucket's
//! start, then its ids) and a short scan instead of a binary search. Word
//! positions in a model's children lists are not uniform but close to it
//! within a list, so interpolation with bisection steps finds them in few
//! probes and stays logarithmic in the worst case.

use std::ops::Range;

/// Numbers [`find_in`] can interpolate between.
pub trait Sorted: Copy + Ord {
    /// Where `w` falls between `a` (at offset 0) and `z` (at offset
    /// `span`), as an offset in `0..=span`; `a ≤ w ≤ z`.
    fn interpolate(a: Self, z: Self, w: Self, span: usize) -> usize;
}

impl Sorted for u32 {
    #[inline(always)]
    fn interpolate(a: u32, z: u32, w: u32, span: usize) -> usize {
        ((w - a) as u64 * span as u64 / ((z - a) as u64).max(1)) as usize
    }
}

impl Sorted for u64 {
    #[inline(always)]
    fn interpolate(a: u64, z: u64, w: u64, span: usize) -> usize {
        ((w - a) as u128 * span as u128 / ((z - a) as u128).max(1)) as usize
    }
}

/// The position of `w` among the increasing values `at(lo..hi)`:
/// interpolation steps, each followed by a bisection step (so a skewed
/// range still halves), then a scan once at most `scan` are left. On
/// values that do not increase (a damaged file) it gives a wrong answer
/// or none, never a position outside `lo..hi`.
#[inline(always)]
pub fn find_in<T: Sorted>(
    at: impl Fn(usize) -> T,
    mut lo: usize,
    mut hi: usize,
    w: T,
    scan: usize,
) -> Option<usize> {
    let scan = scan.max(2);
    while hi.saturating_sub(lo) > scan {
        let a = at(lo);
        let z = at(hi - 1);
        if w < a || w > z {
            return None;
        }
        let m = (lo + T::interpolate(a, z, w, hi - 1 - lo)).clamp(lo, hi - 1);
        let x = at(m);
        if x == w {
            return Some(m);
        }
        if x < w {
            lo = m + 1;
        } else {
            hi = m;
        }
        if hi.saturating_sub(lo) > scan {
            let mid = lo + (hi - lo) / 2;
            let x = at(mid);
            if x == w {
                return Some(mid);
            }
            if x < w {
                lo = mid + 1;
            } else {
                hi = mid;
            }
        }
    }
    // Increasing values: the scan stops at the first one not below w.
    for i in lo..hi {
        let x = at(i);
        if x >= w {
            return (x == w).then_some(i);
        }
    }
    None
}

/// Where each bucket of a sorted list of 64-bit ids starts: bucket b holds
/// the ids whose top bits are b. The ids themselves stay with the owner
/// (a vector, or a section of a mapped file) and are read through a
/// closure.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct IdDirectory {
    /// `starts[b]`: the first index whose id's top bits are `b` or more
    /// (`2^bits + 1` entries, the last is the number of ids).
    starts: Vec<u32>,
    /// `64 − bits`.
    shift: u32,
}

impl IdDirectory {
    /// The directory of the `n` ids `at(0..n)`, with about `per_bucket`
    /// ids a bucket and at most `2^max_bits` buckets. One pass; on ids
    /// that do not increase (a damaged file) it is still a valid,
    /// non-decreasing directory, whose lookups may miss but never read
    /// outside `0..n`.
    pub fn new(n: usize, at: impl Fn(usize) -> u64, per_bucket: usize, max_bits: u32) -> Self {
        let bits = (usize::BITS - (n / per_bucket.max(1)).max(1).leading_zeros())
            .clamp(1, max_bits.max(1));
        let shift = 64 - bits;
        let buckets = 1usize << bits;
        let mut starts = Vec::with_capacity(buckets + 1);
        let mut i = 0usize;
        for b in 0..buckets {
            while i < n && ((at(i) >> shift) as usize) < b {
                i += 1;
            }
            starts.push(i as u32);
        }
        starts.push(n as u32);
        IdDirectory { starts, shift }
    }

    /// The indices of `id`'s bucket.
    #[inline(always)]
    pub fn bucket(&self, id: u64) -> Range<usize> {
        let b = (id >> self.shift) as usize;
        match (self.starts.get(b), self.starts.get(b + 1)) {
            (Some(&lo), Some(&hi)) => lo as usize..(hi as usize).max(lo as usize),
            _ => 0..0,
        }
    }

    /// The index of `id` among the ids `at(..)`, if it is one of them.
    #[inline(always)]
    pub fn find(&self, at: impl Fn(usize) -> u64, id: u64) -> Option<u32> {
        let r = self.bucket(id);
        find_in(at, r.start, r.end, id, 8).map(|i| i as u32)
    }

    /// First step of a lookup issued ahead of time: asks for the cache
    /// line of `id`'s bucket start. Changes no result.
    #[inline(always)]
    pub fn prefetch_bucket(&self, id: u64) {
        if let Some(s) = self.starts.get((id >> self.shift) as usize) {
            crate::hint::prefetch(s);
        }
    }

    /// Second step, some lookups after [`IdDirectory::prefetch_bucket`]:
    /// reads the bucket's start (by now in the cache) and gives the index
    /// of its first id, whose cache line the owner then asks for.
    #[inline(always)]
    pub fn first_index(&self, id: u64) -> Option<usize> {
        self.starts
            .get((id >> self.shift) as usize)
            .map(|&s| s as usize)
    }

    /// Bytes held.
    pub fn heap_bytes(&self) -> usize {
        self.starts.capacity() * 4
    }
}

/// A small deterministic generator for the tests of searches (splitmix64).
#[cfg(test)]
pub(crate) fn splitmix64(s: &mut u64) -> u64 {
    *s = s.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *s;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

#[cfg(test)]
mod tests {
    use super::splitmix64 as next;
    use super::*;

    #[test]
    fn find_in_finds_what_binary_search_finds() {
        let mut s = 3;
        for n in [0usize, 1, 2, 7, 16, 17, 100, 1000] {
            // Uniform, clustered and evenly spaced values.
            for shape in 0..3 {
                let mut v: Vec<u32> = (0..n)
                    .map(|i| match shape {
                        0 => (next(&mut s) % 1_000_000) as u32,
                        1 => (next(&mut s) % 50) as u32 + if i % 2 == 0 { 0 } else { 900_000 },
                        _ => (i * 3) as u32,
                    })
                    .collect();
                v.sort_unstable();
                v.dedup();
                for w in (0..40)
                    .map(|_| (next(&mut s) % 1_000_001) as u32)
                    .chain(v.iter().copied())
                {
                    for scan in [2, 8, 16] {
                        assert_eq!(
                            find_in(|i| v[i], 0, v.len(), w, scan),
                            v.binary_search(&w).ok(),
                            "n {n} shape {shape} w {w} scan {scan}"
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn the_directory_finds_every_id_and_only_those() {
        let mut s = 5;
        for n in [0usize, 1, 3, 4, 5, 64, 1000, 10_000] {
            let mut ids: Vec<u64> = (0..n).map(|_| next(&mut s)).collect();
            ids.sort_unstable();
            ids.dedup();
            for (per, max_bits) in [(4, 32), (16, 18), (16, 2)] {
                let d = IdDirectory::new(ids.len(), |i| ids[i], per, max_bits);
                for (i, &id) in ids.iter().enumerate() {
                    assert!(d.bucket(id).contains(&i), "{n}: id {i} outside its bucket");
                    assert_eq!(d.find(|i| ids[i], id), Some(i as u32));
                }
                for _ in 0..200 {
                    let id = next(&mut s);
                    assert_eq!(
                        d.find(|i| ids[i], id),
                        ids.binary_search(&id).ok().map(|i| i as u32)
                    );
                }
            }
        }
    }

    #[test]
    fn a_damaged_list_never_sends_a_lookup_outside_it() {
        // Ids that do not increase: lookups may miss, never panic.
        let mut s = 9;
        let ids: Vec<u64> = (0..500).map(|_| next(&mut s)).collect();
        let d = IdDirectory::new(ids.len(), |i| ids[i], 16, 18);
        for &id in &ids {
            let _ = d.find(|i| ids[i], id);
        }
    }
}
