//! The bounded in-memory table that counting and merging accumulate into.
//!
//! Open addressing with linear probing over one flat array of records:
//! each slot is `width` ids (shorter keys are padded with zeros), `values`
//! sums and the key's length (0 = empty), so a probe touches one cache
//! line. Its memory is `capacity × slot_bytes`, and never more than the
//! byte budget given at creation:
//!
//! - a table made by [`Table::with_budget`] or [`Table::for_keys`] has its
//!   capacity from the start and never reallocates;
//! - a table made by [`Table::growable`] starts small and doubles its
//!   array (a reallocation, which may move it) each time it reaches
//!   [`MAX_LOAD`], up to the budget; the records are moved into the
//!   larger array in place ([`Table::add`] says when).
//!
//! When the load reaches [`MAX_LOAD`] at full capacity, the owner spills
//! the table: [`Table::sorted`] gives a [`SortedTable`], a view of the
//! records in key order that borrows the table, so nothing can be added
//! while the records are sorted; dropping the view empties the table for
//! the next round.
//!
//! Spilling sorts the records in place: they are first packed to the front
//! of the array, then sorted as fixed-size arrays, comparing the padded ids
//! and then the length (which is the lexicographic order with a prefix
//! before its extensions). Sorting the records themselves instead of an
//! index into them keeps every comparison in the data being sorted; the
//! index sort it replaced spent most of its time waiting for memory. The
//! sorts are in [`super::order`].

use super::order::{hash_of, home, sort_packed_by_hash, sort_records, with_stride};
use crate::key::{Key, MAX_ORDER};
use crate::shard::{Values, MAX_VALUES};

/// Load factor at which a table reports itself full.
pub const MAX_LOAD: f64 = 0.8;
/// Load factor beyond which a table must be emptied even in the middle of
/// a sentence (only a sentence of many thousand tokens gets there).
pub const CRITICAL_LOAD: f64 = 0.95;

/// Slots a [`Table::growable`] table starts with.
const INITIAL_SLOTS: usize = 1 << 18;

/// Bits of a slot's length field that hold the key's length (at most
/// [`MAX_ORDER`]); while a table grows, the bits above hold the record's
/// new slot ([`target_field`]).
const LEN_BITS: u32 = 8;
/// The new-slot value that marks a record wrapping past the end of the
/// grown table: the largest the length field's upper 56 bits can hold.
const WRAPS: u64 = u64::MAX >> LEN_BITS;
/// Most slots a table has: every slot number must fit in the length
/// field's upper 56 bits below [`WRAPS`] while the table grows.
pub const MAX_SLOTS: usize = WRAPS as usize;

/// A bounded n-gram → sums table.
pub struct Table {
    width: usize,
    values: usize,
    /// `width + values + 1`: u64s per slot.
    stride: usize,
    cap: usize,
    /// Largest capacity the budget allows (the table grows up to it).
    max_cap: usize,
    slots: Vec<u64>,
    used: usize,
    limit: usize,
    critical: usize,
}

impl Table {
    /// Bytes one slot costs.
    pub fn slot_bytes(width: usize, values: usize) -> usize {
        (width + values + 1) * 8
    }

    /// A table for keys of up to `width` ids and `values` sums, sized to
    /// spend at most `budget` bytes.
    pub fn with_budget(width: usize, values: usize, budget: usize) -> Table {
        Self::for_keys(width, values, budget, usize::MAX)
    }

    /// Like [`Table::with_budget`], but no larger than needed for `keys`
    /// distinct keys (a fresh table's pages cost a fault each when touched,
    /// so an oversized table is slow as well as large).
    pub fn for_keys(width: usize, values: usize, budget: usize, keys: usize) -> Table {
        assert!((1..=MAX_ORDER).contains(&width) && values <= MAX_VALUES);
        let cap = slots_for(budget, Self::slot_bytes(width, values), keys);
        let stride = width + values + 1;
        Table {
            width,
            values,
            stride,
            cap,
            max_cap: cap,
            slots: written_zeros(cap * stride),
            used: 0,
            limit: ((cap as f64) * MAX_LOAD) as usize,
            critical: ((cap as f64) * CRITICAL_LOAD) as usize,
        }
    }

    /// Like [`Table::with_budget`], but starting small and doubling (in
    /// place) while it fills, up to the budget: a small input then touches
    /// only the memory it needs. Growing puts the records in hash order
    /// (nearly their order already) and moves each once; it happens at
    /// most log2(budget / 14 MiB) times.
    pub fn growable(width: usize, values: usize, budget: usize) -> Table {
        let max_cap = slots_for(budget, Self::slot_bytes(width, values), usize::MAX);
        let mut t = Self::for_keys(
            width,
            values,
            budget,
            (INITIAL_SLOTS as f64 * MAX_LOAD) as usize,
        );
        t.max_cap = max_cap.max(t.cap);
        t
    }

    /// Slots the table has now.
    pub fn capacity(&self) -> usize {
        self.cap
    }

    /// Number of distinct keys held.
    pub fn len(&self) -> usize {
        self.used
    }

    /// True if no key is held.
    pub fn is_empty(&self) -> bool {
        self.used == 0
    }

    /// True once the load factor reached [`MAX_LOAD`].
    #[inline]
    pub fn is_full(&self) -> bool {
        self.used >= self.limit
    }

    /// True once the load factor reached [`CRITICAL_LOAD`].
    #[inline]
    pub fn is_critical(&self) -> bool {
        self.used >= self.critical
    }

    #[inline]
    fn slot_of(&self, key: &[u64]) -> usize {
        home(hash_of(key), self.cap)
    }

    /// Starts loading the slot `key` hashes to, so that a later
    /// [`Table::add`] of it finds the cache line there.
    #[inline]
    pub fn prefetch(&self, key: &[u64]) {
        crate::hint::prefetch(&self.slots[self.slot_of(key) * self.stride]);
    }

    /// Adds `add` to the sums of `key`. The caller checks [`Table::is_full`]
    /// between insertions; a table is never filled beyond its capacity. A
    /// growable table below its budget grows here when the load reaches
    /// [`MAX_LOAD`].
    #[inline]
    pub fn add(&mut self, key: &[u64], add: &[u64]) {
        debug_assert!(key.len() <= self.width && !key.is_empty());
        let (w, st) = (self.width, self.stride);
        let lenpos = w + self.values;
        let mut i = self.slot_of(key);
        loop {
            let rec = &mut self.slots[i * st..(i + 1) * st];
            let len = rec[lenpos] as usize;
            if len == 0 {
                rec[lenpos] = key.len() as u64;
                rec[..key.len()].copy_from_slice(key);
                rec[w..w + add.len()].copy_from_slice(add);
                self.used += 1;
                assert!(self.used < self.cap, "table filled beyond capacity");
                if self.used >= self.limit && self.cap < self.max_cap {
                    self.grow();
                }
                return;
            }
            // Compared word by word: a slice `==` calls `bcmp` for a few words.
            if len == key.len() && rec[..len].iter().zip(key).all(|(a, b)| a == b) {
                for (s, a) in rec[w..].iter_mut().zip(add) {
                    // Wrapping: a documents sum may add −1 (2⁶⁴ − 1).
                    *s = s.wrapping_add(*a);
                }
                return;
            }
            i += 1;
            if i == self.cap {
                i = 0;
            }
        }
    }

    /// Moves the records to the front of the array, in slot order.
    fn pack(&mut self) {
        let (st, lenpos) = (self.stride, self.width + self.values);
        let mut j = 0;
        for i in 0..self.cap {
            if self.slots[i * st + lenpos] != 0 {
                if i != j {
                    self.slots.copy_within(i * st..(i + 1) * st, j * st);
                    // Zero it whole: a shorter key stored here later is
                    // padded with zeros, which the sort relies on.
                    self.slots[i * st..(i + 1) * st].fill(0);
                }
                j += 1;
            }
        }
        debug_assert_eq!(j, self.used);
    }

    /// Packs the records to the front of the array in the order of their
    /// hashes. Linear probing leaves them nearly in that order already:
    /// homes are monotone in the hash, a record sits at or a little after
    /// its home, and only the cluster that wraps past the last slot is out
    /// of place as a whole. So the wrapped records are moved to the end and
    /// an insertion sort fixes the rest, computing about one hash a record
    /// (a comparison sort computed two hashes per comparison, some forty a
    /// record, and was the largest cost of the counting phase).
    fn pack_by_hash(&mut self) {
        let (st, lenpos) = (self.stride, self.width + self.values);
        // The records in slots 0..front, before the first free slot, are
        // packed to the same places; among them are the wrapped ones.
        let front = (0..self.cap)
            .find(|&i| self.slots[i * st + lenpos] == 0)
            .expect("a table is never full");
        self.pack();
        let (n, cap) = (self.used, self.cap);
        let recs = &mut self.slots[..n * st];
        with_stride!(st, N => {
            sort_packed_by_hash::<N>(recs, lenpos, cap, front);
        });
    }

    /// Packs the records to the front of the array and sorts them.
    fn pack_and_sort(&mut self) {
        self.pack();
        let st = self.stride;
        let recs = &mut self.slots[..self.used * st];
        let w = self.width;
        with_stride!(st, N => sort_records::<N>(recs, w));
    }

    /// Doubles the capacity (at most to `max_cap`) without a second array:
    /// the records are packed and sorted by hash, the array is extended,
    /// and each record moves (last first) to the slot linear probing gives
    /// it in the larger table. Homes are monotone in the hash, so the
    /// sorted records land in increasing slots, each at or after its
    /// current index; the few that would run past the end are inserted
    /// again at the start, as linear probing wraps. Between the two passes
    /// each record's new slot is kept above its length ([`target_field`]),
    /// which bounds a table to [`MAX_SLOTS`] slots.
    fn grow(&mut self) {
        let new_cap = (self.cap * 2).min(self.max_cap);
        assert!(
            new_cap <= MAX_SLOTS,
            "a table of {new_cap} slots is over the {MAX_SLOTS} its growth can number"
        );
        let (st, lenpos) = (self.stride, self.width + self.values);
        self.pack_by_hash();
        let n = self.used;
        self.slots.reserve_exact(new_cap * st - self.slots.len());
        crate::hint::huge_pages(&self.slots);
        self.slots.resize(new_cap * st, 0);
        self.cap = new_cap;
        self.limit = ((new_cap as f64) * MAX_LOAD) as usize;
        self.critical = ((new_cap as f64) * CRITICAL_LOAD) as usize;
        // Pass 1: each record's new slot, kept above its length.
        let mut next = 0usize;
        for r in 0..n {
            let rec = &mut self.slots[r * st..(r + 1) * st];
            let len = rec[lenpos] as usize;
            let pos = home(hash_of(&rec[..len]), new_cap).max(next);
            let target = if pos < new_cap {
                next = pos + 1;
                pos as u64
            } else {
                WRAPS
            };
            rec[lenpos] = target_field(target, len);
        }
        // Pass 2: move, last first (every target is free by then).
        let mut overflow = Vec::new();
        for r in (0..n).rev() {
            let (target, len) = split_target(self.slots[r * st + lenpos]);
            self.slots[r * st + lenpos] = len as u64;
            if target == WRAPS {
                overflow.extend_from_slice(&self.slots[r * st..(r + 1) * st]);
                self.slots[r * st..(r + 1) * st].fill(0);
                continue;
            }
            let pos = target as usize;
            if pos != r {
                self.slots.copy_within(r * st..(r + 1) * st, pos * st);
                self.slots[r * st..(r + 1) * st].fill(0);
            }
        }
        for rec in overflow.chunks_exact(st) {
            let key = &rec[..rec[lenpos] as usize];
            let mut i = self.slot_of(key);
            while self.slots[i * st + lenpos] != 0 {
                i = if i + 1 == self.cap { 0 } else { i + 1 };
            }
            self.slots[i * st..(i + 1) * st].copy_from_slice(rec);
        }
    }

    /// The records in key order, as a view that borrows the table (so
    /// nothing is added while they are sorted); dropping the view empties
    /// the table, keeping its memory.
    pub fn sorted(&mut self) -> SortedTable<'_> {
        self.pack_and_sort();
        SortedTable { table: self }
    }
}

/// A table's records in key order ([`Table::sorted`]). The table it
/// borrows holds them packed and sorted, which is no hash table: it is
/// emptied when this view is dropped.
///
/// Adding to a table while its sorted view lives does not compile:
///
/// ```compile_fail
/// let mut t = quern::count::Table::with_budget(2, 1, 1 << 16);
/// t.add(&[1, 2], &[1]);
/// let sorted = t.sorted();
/// t.add(&[3], &[1]);
/// assert_eq!(sorted.records().len(), 1);
/// ```
///
/// Once the view is dropped, the table is empty and takes keys again:
///
/// ```
/// let mut t = quern::count::Table::with_budget(2, 1, 1 << 16);
/// t.add(&[1, 2], &[1]);
/// let sorted = t.sorted();
/// assert_eq!(sorted.records().len(), 1);
/// drop(sorted);
/// assert!(t.is_empty());
/// t.add(&[3], &[1]);
/// assert_eq!(t.len(), 1);
/// ```
pub struct SortedTable<'a> {
    table: &'a mut Table,
}

impl SortedTable<'_> {
    /// The records, for reading by position.
    pub fn records(&self) -> SortedRecords<'_> {
        let t = &*self.table;
        SortedRecords {
            flat: &t.slots[..t.used * t.stride],
            width: t.width,
            values: t.values,
            stride: t.stride,
        }
    }

    /// The entries in key order.
    pub fn iter(&self) -> impl Iterator<Item = (Key, Values)> + '_ {
        let recs = self.records();
        (0..recs.len()).map(move |i| (recs.key(i), recs.values(i)))
    }
}

impl Drop for SortedTable<'_> {
    /// Empties the table: only the packed prefix holds records.
    fn drop(&mut self) {
        let t = &mut *self.table;
        t.slots[..t.used * t.stride].fill(0);
        t.used = 0;
    }
}

/// A sorted table's records, read by position ([`SortedTable::records`]).
#[derive(Clone, Copy)]
pub struct SortedRecords<'a> {
    flat: &'a [u64],
    width: usize,
    values: usize,
    stride: usize,
}

impl SortedRecords<'_> {
    /// Number of records.
    #[inline]
    pub fn len(&self) -> usize {
        self.flat.len() / self.stride
    }

    /// True if there is none.
    #[inline]
    pub fn is_empty(&self) -> bool {
        self.flat.is_empty()
    }

    /// The ids of record `i`'s key.
    #[inline]
    pub fn ids(&self, i: usize) -> &[u64] {
        let rec = &self.flat[i * self.stride..(i + 1) * self.stride];
        &rec[..rec[self.width + self.values] as usize]
    }

    /// Record `i`'s sums (unused places zero).
    #[inline]
    pub fn values(&self, i: usize) -> Values {
        let rec = &self.flat[i * self.stride..(i + 1) * self.stride];
        let mut vals = [0u64; MAX_VALUES];
        vals[..self.values].copy_from_slice(&rec[self.width..self.width + self.values]);
        vals
    }

    /// Record `i`'s key.
    #[inline]
    pub fn key(&self, i: usize) -> Key {
        let rec = &self.flat[i * self.stride..(i + 1) * self.stride];
        // Copied as a padded array (the padding is zero): no copy of a
        // variable length.
        let mut ids = [0u64; MAX_ORDER];
        for (j, id) in ids.iter_mut().enumerate() {
            if j < self.width {
                *id = rec[j];
            }
        }
        Key::from_padded(ids, rec[self.width + self.values] as usize)
    }
}

/// `n` zeros, written now. `vec![0; n]` maps fresh pages to the shared zero
/// page, and a table reads a slot before it writes it: each page is then
/// copied at its first write, and the copy flushes that page from the TLB
/// of every core that runs a thread of the process (an interrupt to each).
/// Writing the zeros maps every page for writing at once (which is why
/// this is not the `vec!` that clippy suggests).
#[allow(clippy::slow_vector_initialization)]
fn written_zeros(n: usize) -> Vec<u64> {
    let mut v = Vec::with_capacity(n);
    crate::hint::huge_pages(&v);
    v.resize(n, 0);
    v
}

/// Slots for a table of `slot_bytes`-byte slots within `budget` bytes, no
/// more than `keys` distinct keys need (below [`MAX_LOAD`]), at least 64
/// and at most [`MAX_SLOTS`].
fn slots_for(budget: usize, slot_bytes: usize, keys: usize) -> usize {
    let need = ((keys as f64 / MAX_LOAD) as usize).saturating_add(64);
    (budget / slot_bytes).min(need).clamp(64, MAX_SLOTS)
}

/// A growing table's length field: the record's new slot `target` (below
/// [`WRAPS`], or [`WRAPS`] for a record that wraps) above its key length.
/// Panics (in release builds too) when either does not fit: a count would
/// otherwise land in another record's slot.
#[inline]
fn target_field(target: u64, len: usize) -> u64 {
    assert!(
        target <= WRAPS && len <= MAX_ORDER,
        "slot {target} or key length {len} does not fit a length field"
    );
    (target << LEN_BITS) | len as u64
}

/// The new slot and key length of a growing table's length field.
#[inline]
fn split_target(field: u64) -> (u64, usize) {
    (field >> LEN_BITS, (field & ((1 << LEN_BITS) - 1)) as usize)
}

#[cfg(test)]
mod tests {
    use super::super::order::RADIX_MIN;
    use super::*;
    use std::collections::BTreeMap;

    /// Advances the tests' random numbers (a 64-bit linear congruential
    /// generator).
    fn step(x: &mut u64) {
        *x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
    }

    #[test]
    fn capacity_follows_budget_and_key_bound() {
        let slot = Table::slot_bytes(5, 1);
        assert_eq!(slot, 56);
        assert_eq!(Table::with_budget(5, 1, 1000 * slot).cap, 1000);
        assert_eq!(Table::for_keys(5, 1, 1000 * slot, 80).cap, 164);
        assert_eq!(Table::for_keys(5, 1, 1000 * slot, usize::MAX).cap, 1000);
    }

    #[test]
    fn sums_and_sorts_like_a_btreemap() {
        let mut t = Table::with_budget(3, 1, 1 << 16);
        let mut m = BTreeMap::new();
        let mut x = 12345u64;
        for _ in 0..2000 {
            step(&mut x);
            let len = 1 + (x >> 60) as usize % 3;
            let key: Vec<u64> = (0..len).map(|j| (x >> (j * 7)) % 13).collect();
            if t.is_full() {
                break;
            }
            t.add(&key, &[1]);
            *m.entry(key).or_insert(0u64) += 1;
        }
        let got: Vec<(Vec<u64>, u64)> = t
            .sorted()
            .iter()
            .map(|(k, v)| (k.ids().to_vec(), v[0]))
            .collect();
        let want: Vec<(Vec<u64>, u64)> = m.into_iter().collect();
        assert_eq!(got, want);
    }

    #[test]
    fn large_tables_sort_like_a_btreemap() {
        // Enough records for the distribution by the first id's top bits:
        // first words over the whole 64-bit range, one of them frequent
        // (a large bucket), and short keys whose zero padding must sort
        // before longer keys with the same words. Checked against a BTreeMap.
        let mut t = Table::with_budget(4, 1, Table::slot_bytes(4, 1) << 17);
        let mut m = BTreeMap::new();
        let words: Vec<u64> = (0..3000u64)
            .map(|i| (i + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15))
            .collect();
        let mut x = 5u64;
        while !t.is_full() {
            step(&mut x);
            let len = 1 + (x >> 62) as usize;
            let first = if x.is_multiple_of(5) {
                words[7]
            } else {
                words[(x >> 20) as usize % 3000]
            };
            let mut key = vec![first];
            key.extend((1..len).map(|j| words[(x >> (j * 9)) as usize % 40]));
            t.add(&key, &[1]);
            *m.entry(key).or_insert(0u64) += 1;
        }
        assert!(t.len() > RADIX_MIN);
        let got: Vec<(Vec<u64>, u64)> = t
            .sorted()
            .iter()
            .map(|(k, v)| (k.ids().to_vec(), v[0]))
            .collect();
        let want: Vec<(Vec<u64>, u64)> = m.into_iter().collect();
        assert_eq!(got, want);
    }

    #[test]
    fn refills_after_a_sorted_spill() {
        // Two fill-sort-clear rounds with different keys (and ids of 0,
        // which are also the padding): the second round must see none of
        // the first round's records. Checked against a BTreeMap.
        let mut t = Table::with_budget(4, 2, 1 << 15);
        let mut x = 99u64;
        for round in 0..2u64 {
            let mut m = BTreeMap::new();
            while !t.is_full() {
                step(&mut x);
                let len = 1 + (x >> 61) as usize % 4;
                let key: Vec<u64> = (0..len).map(|j| (x >> (j * 5)) % 7 + round).collect();
                t.add(&key, &[1, round + 1]);
                let e = m.entry(key).or_insert([0u64; 2]);
                e[0] += 1;
                e[1] += round + 1;
            }
            let got: Vec<(Vec<u64>, [u64; 2])> = t
                .sorted()
                .iter()
                .map(|(k, v)| (k.ids().to_vec(), [v[0], v[1]]))
                .collect();
            let want: Vec<(Vec<u64>, [u64; 2])> = m.into_iter().collect();
            assert_eq!(got, want, "round {round}");
            // Dropping the sorted view emptied the table.
            assert!(t.is_empty());
        }
    }

    /// The hashes of packed records (stride 5: 3 ids, 1 value, length).
    fn hashes(flat: &[u64]) -> Vec<u64> {
        flat.chunks_exact(5)
            .map(|r| hash_of(&r[..r[4] as usize]))
            .collect()
    }

    /// The records of `flat` in a canonical order, to compare as sets.
    fn canonical(flat: &[u64]) -> Vec<Vec<u64>> {
        let mut v: Vec<Vec<u64>> = flat.chunks_exact(5).map(|r| r.to_vec()).collect();
        v.sort();
        v
    }

    #[test]
    fn packed_records_sort_by_hash_like_a_comparison_sort() {
        // Tables of 64 to 4096 slots filled to MAX_LOAD with random keys,
        // so that clusters form and often wrap past the last slot, packed
        // in slot order: the result must hold the same records in
        // non-decreasing hash order, in a few moves a record. Reversed, the
        // same records (past 129) take the comparison sort that the
        // insertion sort gives way to.
        let mut x = 99u64;
        let mut wraps = 0;
        for round in 0..210 {
            let slots = 64usize << (round % 7);
            let mut t = Table::with_budget(3, 1, Table::slot_bytes(3, 1) * slots);
            assert_eq!((t.cap, t.stride), (slots, 5));
            while !t.is_full() {
                step(&mut x);
                let len = 1 + (x >> 62) as usize % 3;
                let key: Vec<u64> = (0..len).map(|j| (x >> (j * 13)) % 100_000).collect();
                t.add(&key, &[1]);
            }
            let front = (0..t.cap).find(|&i| t.slots[i * 5 + 4] == 0).unwrap();
            let wrapped = (0..front)
                .filter(|&i| {
                    let r = &t.slots[i * 5..i * 5 + 5];
                    home(hash_of(&r[..r[4] as usize]), t.cap) > i
                })
                .count();
            wraps += usize::from(wrapped > 0);
            t.pack();
            let packed = t.slots[..t.used * 5].to_vec();
            let mut got = packed.clone();
            // Without the wrapped cluster moved first, its records would
            // each move back past nearly the whole array; with it, these
            // seeded tables need at most 2.4 moves a record.
            let moves = sort_packed_by_hash::<5>(&mut got, 4, t.cap, front);
            assert!(
                moves.is_some_and(|m| m <= 4 * t.used),
                "round {round}: {moves:?} moves for {} records",
                t.used
            );
            let h = hashes(&got);
            assert!(h.windows(2).all(|w| w[0] <= w[1]), "round {round}");
            assert_eq!(canonical(&got), canonical(&packed), "round {round}");

            let mut rev: Vec<u64> = packed.chunks_exact(5).rev().flatten().copied().collect();
            // Reversed, n records need n(n-1)/2 moves: past 64 a record
            // once n > 129, where the comparison sort takes over.
            let rmoves = sort_packed_by_hash::<5>(&mut rev, 4, t.cap, 0);
            assert_eq!(rmoves.is_none(), t.used > 129, "round {round}");
            assert!(
                hashes(&rev).windows(2).all(|w| w[0] <= w[1]),
                "round {round}"
            );
            assert_eq!(canonical(&rev), canonical(&packed), "round {round}");
        }
        assert!(wraps >= 20, "only {wraps} tables wrapped");
    }

    #[test]
    fn grows_in_place_and_keeps_every_sum() {
        // A growable table with a budget for 2^20 slots, fed many more
        // distinct keys than its first capacity: it must grow, and what it
        // holds must equal a BTreeMap fed the same keys.
        let budget = Table::slot_bytes(3, 1) << 20;
        let mut t = Table::growable(3, 1, budget);
        let first = t.capacity();
        assert!(first < 1 << 20);
        let mut m = BTreeMap::new();
        let mut x = 7u64;
        while !t.is_full() {
            step(&mut x);
            let len = 1 + (x >> 62) as usize % 3;
            let key: Vec<u64> = (0..len).map(|j| (x >> (j * 11)) % 5000).collect();
            t.add(&key, &[2]);
            *m.entry(key).or_insert(0u64) += 2;
        }
        assert_eq!(t.capacity(), 1 << 20);
        assert_eq!(t.len(), m.len());
        let got: Vec<(Vec<u64>, u64)> = t
            .sorted()
            .iter()
            .map(|(k, v)| (k.ids().to_vec(), v[0]))
            .collect();
        let want: Vec<(Vec<u64>, u64)> = m.into_iter().collect();
        assert_eq!(got, want);
    }

    #[test]
    fn growth_numbers_slots_within_the_length_field() {
        // The largest slot number and key length go in and come out again;
        // one past either is refused in any build, as a table of more slots
        // would put records in each other's slots.
        let top = (MAX_SLOTS - 1) as u64;
        assert_eq!(split_target(target_field(top, MAX_ORDER)), (top, MAX_ORDER));
        assert_eq!(split_target(target_field(WRAPS, 1)), (WRAPS, 1));
        assert!(std::panic::catch_unwind(|| target_field(WRAPS + 1, 1)).is_err());
        assert!(std::panic::catch_unwind(|| target_field(0, MAX_ORDER + 1)).is_err());
        // No budget gives a table more slots than the field can number.
        assert_eq!(slots_for(usize::MAX, 16, usize::MAX), MAX_SLOTS);
        assert_eq!(slots_for(usize::MAX, 16, 80), 164);
        assert_eq!(slots_for(0, 16, usize::MAX), 64);
    }
}
