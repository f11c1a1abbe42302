//! The two orders a counting table puts its records in: by hash (to grow
//! in place, [`sort_packed_by_hash`]) and by key (to spill,
//! [`sort_records`]), and the hash and home slot that both rely on.
//!
//! Records are fixed-size arrays of `N` u64s (a table's stride): padded
//! ids, sums, and the key's length last. [`with_stride!`] turns a stride
//! known at run time into the `N` these functions take.

use std::cmp::Ordering;

/// Runs `$body` with `$n` bound to the stride `$st` as a constant (2 to
/// 13: one to [`crate::key::MAX_ORDER`] ids, up to
/// [`crate::shard::MAX_VALUES`] sums and the length), so that the sorts
/// work on arrays of a size known at compile time.
macro_rules! with_stride {
    ($st:expr, $n:ident => $body:expr) => {
        with_stride!(@arms $st, $n, $body, 2 3 4 5 6 7 8 9 10 11 12 13)
    };
    (@arms $st:expr, $n:ident, $body:expr, $($k:literal)*) => {
        match $st {
            $($k => {
                const $n: usize = $k;
                $body
            })*
            st => unreachable!("stride {st} out of range"),
        }
    };
}
pub(super) use with_stride;

/// The hash of a key; its slot in a table of `cap` slots is
/// [`home`]`(hash, cap)`, monotone in the hash.
#[inline]
pub(super) fn hash_of(key: &[u64]) -> u64 {
    let mut h = key.len() as u64;
    for &w in key {
        h = (h.rotate_left(23) ^ w).wrapping_mul(0x9E37_79B9_7F4A_7C15);
    }
    h ^ (h >> 29)
}

#[inline]
pub(super) fn home(hash: u64, cap: usize) -> usize {
    ((hash as u128 * cap as u128) >> 64) as usize
}

/// Sorts records of `N` u64s by the hash of their key (length at
/// `lenpos`), given that they are a table's records packed in slot order:
/// the table had `cap` slots and its first free slot was `front`.
///
/// A record in slot `i < front` whose home is after `i` wrapped around
/// the end of the table; those are moved to the end (keeping their order),
/// which leaves every record at most a cluster away from its place. An
/// insertion sort then places each record, keeping the hash of the last
/// sorted one; if it has moved records more than [`SHIFTS_PER_RECORD`]
/// times the count, which a table's layout does not produce, it stops and
/// a comparison sort finishes the job. Returns the moves the insertion sort
/// made, or `None` if the comparison sort took over.
pub(super) fn sort_packed_by_hash<const N: usize>(
    flat: &mut [u64],
    lenpos: usize,
    cap: usize,
    front: usize,
) -> Option<usize> {
    let (recs, _) = flat.as_chunks_mut::<N>();
    let hash = |r: &[u64; N]| hash_of(&r[..r[lenpos] as usize]);
    // One pass over the front, last first: the wrapped records are set
    // aside, the others move up to the end of the front in their order;
    // then the wrapped ones fill its start and the array turns so that
    // they come last.
    let front = front.min(recs.len());
    let mut wrapped: Vec<[u64; N]> = Vec::new();
    let mut j = front;
    for i in (0..front).rev() {
        if home(hash(&recs[i]), cap) > i {
            wrapped.push(recs[i]);
        } else {
            j -= 1;
            recs[j] = recs[i];
        }
    }
    if !wrapped.is_empty() {
        wrapped.reverse();
        recs[..wrapped.len()].copy_from_slice(&wrapped);
        recs.rotate_left(wrapped.len());
    }
    let Some(first) = recs.first() else {
        return Some(0);
    };
    let mut last = hash(first);
    let mut shifts = 0usize;
    let most = SHIFTS_PER_RECORD.saturating_mul(recs.len());
    for i in 1..recs.len() {
        let h = hash(&recs[i]);
        if h >= last {
            last = h;
            continue;
        }
        // recs[i - 1] (hash `last`) goes after it; find how far back it goes.
        let mut j = i - 1;
        while j > 0 && hash(&recs[j - 1]) > h {
            j -= 1;
        }
        shifts += i - j;
        recs[j..=i].rotate_right(1);
        if shifts > most {
            recs.sort_unstable_by_key(hash);
            return None;
        }
    }
    Some(shifts)
}

/// Most records an insertion sort in [`sort_packed_by_hash`] moves, per
/// record, before it gives way to a comparison sort.
const SHIFTS_PER_RECORD: usize = 64;

/// Sorts records of `N` u64s whose first `width` are padded ids and whose
/// last is the key length.
///
/// Large arrays are first distributed by the top byte of their first id
/// (one counting pass, then an in-place permutation, as in an American flag
/// sort), and each large bucket again by the next byte, up to
/// [`RADIX_LEVELS`] bytes: that is the first comparison of the key order, so
/// each bucket is then sorted on its own by comparison. A byte at a time
/// keeps the permutation's 256 write positions in the cache (one pass over
/// 2^16 buckets at once wrote each record to a random page); uniform ids
/// leave a few dozen records per bucket, a frequent first word a larger one.
pub(super) fn sort_records<const N: usize>(flat: &mut [u64], width: usize) {
    let (recs, rest) = flat.as_chunks_mut::<N>();
    debug_assert!(rest.is_empty());
    let cmp = |a: &[u64; N], b: &[u64; N]| -> Ordering {
        a[..width]
            .cmp(&b[..width])
            .then_with(|| a[N - 1].cmp(&b[N - 1]))
    };
    if recs.len() < RADIX_MIN {
        recs.sort_unstable_by(cmp);
        return;
    }
    distribute(recs, 0, &cmp);
}

/// One level of [`sort_records`]: distributes `recs` by byte `level` (from
/// the top) of their first id, then sorts each bucket (by the next byte
/// first if it is large enough).
fn distribute<const N: usize>(
    recs: &mut [[u64; N]],
    level: u32,
    cmp: &impl Fn(&[u64; N], &[u64; N]) -> Ordering,
) {
    let shift = 56 - 8 * level;
    let digit = |r: &[u64; N]| ((r[0] >> shift) & 0xFF) as usize;
    let mut start = [0usize; 257];
    for r in recs.iter() {
        start[digit(r) + 1] += 1;
    }
    for b in 0..256 {
        start[b + 1] += start[b];
    }
    let mut next = [0usize; 256];
    next.copy_from_slice(&start[..256]);
    for b in 0..256 {
        let end = start[b + 1];
        let mut i = next[b];
        while i < end {
            let d = digit(&recs[i]);
            if d == b {
                i += 1;
            } else {
                // Send the record to the next free place of its bucket;
                // the one found there is placed in the next round.
                recs.swap(i, next[d]);
                next[d] += 1;
            }
        }
        next[b] = end;
    }
    for b in 0..256 {
        let bucket = &mut recs[start[b]..start[b + 1]];
        if bucket.len() >= RADIX_BUCKET_MIN && level + 1 < RADIX_LEVELS {
            distribute(bucket, level + 1, cmp);
        } else {
            bucket.sort_unstable_by(cmp);
        }
    }
}

/// Fewest records for which [`sort_records`] distributes by the first id
/// before sorting.
pub(super) const RADIX_MIN: usize = 1 << 12;
/// Fewest records of a bucket that is distributed again by the next byte.
const RADIX_BUCKET_MIN: usize = 256;
/// Most bytes of the first id that [`sort_records`] distributes by.
const RADIX_LEVELS: u32 = 3;
