//! The best `limit` items of a stream, in a heap of at most `limit`
//! entries: the memory bound of every list of this module.
//!
//! "Best" is "least" in the item's order (so a list by descending count
//! orders its items by `(Reverse(count), text)`). Each item costs
//! O(log limit); the items come out best first. Ties in the order keep the
//! item that sorts first, so the result does not depend on the order of
//! the stream (the items are totally ordered).

use std::collections::BinaryHeap;

/// The `limit` least items seen so far.
#[derive(Debug)]
pub struct Best<T: Ord> {
    limit: usize,
    heap: BinaryHeap<T>,
}

impl<T: Ord> Best<T> {
    /// An empty collector of the best `limit` items.
    pub fn new(limit: usize) -> Self {
        Best {
            limit,
            heap: BinaryHeap::with_capacity(limit.min(1 << 16) + 1),
        }
    }

    /// The worst item kept, once `limit` are kept (an item not better than
    /// it is not taken).
    pub fn threshold(&self) -> Option<&T> {
        if self.heap.len() >= self.limit {
            self.heap.peek()
        } else {
            None
        }
    }

    /// Offers `item`; kept if fewer than `limit` are kept or it is better
    /// than the worst kept.
    pub fn push(&mut self, item: T) {
        if self.limit == 0 {
            return;
        }
        if self.heap.len() < self.limit {
            self.heap.push(item);
        } else if let Some(mut worst) = self.heap.peek_mut() {
            if item < *worst {
                *worst = item;
            }
        }
    }

    /// Adds every item of `other` (the best of both streams).
    pub fn merge(&mut self, other: Best<T>) {
        for x in other.heap {
            self.push(x);
        }
    }

    /// The kept items, best first.
    pub fn into_sorted(self) -> Vec<T> {
        self.heap.into_sorted_vec()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keeps_the_least_and_sorts_them() {
        // Checked against a full sort of the same stream (std's slice sort).
        let xs: Vec<u64> = (0..1000u64).map(|i| (i * 7919) % 1009).collect();
        for limit in [0, 1, 5, 999, 2000] {
            let mut b = Best::new(limit);
            let (left, right) = xs.split_at(400);
            let mut other = Best::new(limit);
            left.iter().for_each(|&x| b.push(x));
            right.iter().for_each(|&x| other.push(x));
            b.merge(other);
            let mut all = xs.clone();
            all.sort();
            all.truncate(limit);
            assert_eq!(b.into_sorted(), all, "limit {limit}");
        }
    }
}
