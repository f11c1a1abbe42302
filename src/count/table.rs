//! The bounded in-memory table that counting and merging accumulate into.
//!
//! Open addressing with linear probing over flat arrays: `width` ids per
//! slot (shorter keys are padded), `values` sums per slot and one length
//! byte (0 = empty). Capacity is fixed at creation from a byte budget, so
//! the table never reallocates: its memory is `capacity × slot_bytes`, and
//! the pages of a fresh table are only touched when used. When the load
//! reaches [`MAX_LOAD`] the owner spills it (sorted, via [`Table::sorted`])
//! and clears it.

use crate::key::{Key, MAX_ORDER};
use crate::shard::{Values, MAX_VALUES};

/// Load factor at which a table reports itself full.
pub const MAX_LOAD: f64 = 0.8;
/// Load factor beyond which a table must be emptied even in the middle of
/// a sentence (only a sentence of many thousand tokens gets there).
pub const CRITICAL_LOAD: f64 = 0.95;

/// A fixed-capacity n-gram → sums table.
pub struct Table {
    width: usize,
    values: usize,
    cap: usize,
    ids: Vec<u64>,
    sums: Vec<u64>,
    lens: Vec<u8>,
    used: usize,
    limit: usize,
    critical: usize,
}

impl Table {
    /// Bytes one slot costs, including the sort index used when spilling.
    pub fn slot_bytes(width: usize, values: usize) -> usize {
        width * 8 + values * 8 + 1 + 4
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
        let need = ((keys as f64 / MAX_LOAD) as usize).saturating_add(64);
        let cap = (budget / Self::slot_bytes(width, values)).min(need).max(64);
        Table {
            width,
            values,
            cap,
            ids: vec![0; cap * width],
            sums: vec![0; cap * values],
            lens: vec![0; cap],
            used: 0,
            limit: ((cap as f64) * MAX_LOAD) as usize,
            critical: ((cap as f64) * CRITICAL_LOAD) as usize,
        }
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
        let mut h = key.len() as u64;
        for &w in key {
            h = (h.rotate_left(23) ^ w).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        }
        h ^= h >> 29;
        ((h as u128 * self.cap as u128) >> 64) as usize
    }

    /// Adds `add` to the sums of `key`. The caller checks [`Table::is_full`]
    /// between insertions; a table is never filled beyond its capacity.
    #[inline]
    pub fn add(&mut self, key: &[u64], add: &[u64]) {
        debug_assert!(key.len() <= self.width && !key.is_empty());
        let w = self.width;
        let mut i = self.slot_of(key);
        loop {
            let len = self.lens[i] as usize;
            if len == 0 {
                self.lens[i] = key.len() as u8;
                self.ids[i * w..i * w + key.len()].copy_from_slice(key);
                self.sums[i * self.values..i * self.values + add.len()].copy_from_slice(add);
                self.used += 1;
                assert!(self.used < self.cap, "table filled beyond capacity");
                return;
            }
            if len == key.len() && &self.ids[i * w..i * w + len] == key {
                for (s, a) in self.sums[i * self.values..].iter_mut().zip(add) {
                    *s += a;
                }
                return;
            }
            i += 1;
            if i == self.cap {
                i = 0;
            }
        }
    }

    fn key_at(&self, i: usize) -> &[u64] {
        &self.ids[i * self.width..i * self.width + self.lens[i] as usize]
    }

    /// The entries in key order; the table is emptied afterwards by
    /// [`Table::clear`].
    pub fn sorted(&self) -> impl Iterator<Item = (Key, Values)> + '_ {
        let mut idx: Vec<u32> = (0..self.cap as u32)
            .filter(|&i| self.lens[i as usize] != 0)
            .collect();
        idx.sort_unstable_by(|&a, &b| self.key_at(a as usize).cmp(self.key_at(b as usize)));
        idx.into_iter().map(move |i| {
            let i = i as usize;
            let mut v = [0u64; MAX_VALUES];
            v[..self.values].copy_from_slice(&self.sums[i * self.values..(i + 1) * self.values]);
            (Key::new(self.key_at(i)), v)
        })
    }

    /// Empties the table, keeping its memory.
    pub fn clear(&mut self) {
        self.lens.fill(0);
        self.used = 0;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::collections::BTreeMap;

    #[test]
    fn capacity_follows_budget_and_key_bound() {
        let slot = Table::slot_bytes(5, 1);
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
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let len = 1 + (x >> 60) as usize % 3;
            let key: Vec<u64> = (0..len).map(|j| (x >> (j * 7)) % 13).collect();
            if t.is_full() {
                break;
            }
            t.add(&key, &[1]);
            *m.entry(key).or_insert(0u64) += 1;
        }
        let got: Vec<(Vec<u64>, u64)> = t.sorted().map(|(k, v)| (k.ids().to_vec(), v[0])).collect();
        let want: Vec<(Vec<u64>, u64)> = m.into_iter().collect();
        assert_eq!(got, want);
    }
}
