//! Reading one order of a store: a prefix scan when the leading words are
//! known, otherwise the whole order in parts, one thread a part.
//!
//! # Cost
//!
//! A scan with a prefix of fixed words reads only the n-grams that begin
//! with them (RocksDB seeks to the prefix): its time is in proportion to
//! their number. Without a prefix (a list of a whole order, a pattern with
//! a leading `*`, a left window of a collocation) every n-gram of the
//! order is read once, split by first word into parts that the threads of
//! the rayon pool read side by side; the time is in proportion to the
//! order's size divided by the cores.

use rayon::prelude::*;

use crate::error::Result;
use crate::key::Key;
use crate::store::{NgramRecord, Store};
use crate::words::WordId;

/// Calls `each(state, ids, record)` for every stored n-gram of order `k`
/// that begins with `prefix` (ids in key order within a part), with one
/// `state` from `init` per part; returns the states. Empty when `k` is not
/// an order of the store.
pub fn scan_order<S, I, F>(
    store: &Store,
    k: usize,
    prefix: &[WordId],
    init: I,
    each: F,
) -> Result<Vec<S>>
where
    S: Send,
    I: Fn() -> S + Sync,
    F: Fn(&mut S, &[WordId], &NgramRecord) + Sync,
{
    if !prefix.is_empty() {
        let mut st = init();
        for item in store.scan_records(k, prefix, None)? {
            let (key, rec) = item?;
            each(&mut st, key.ids(), &rec);
        }
        return Ok(vec![st]);
    }
    if k == 0 || k > store.order() {
        return Ok(Vec::new());
    }
    let ranks = store.rank_ids();
    let parts = (rayon::current_num_threads() * 4).clamp(1, ranks.len().max(1));
    let bounds: Vec<Option<WordId>> = (0..=parts)
        .map(|i| {
            let r = i * ranks.len() / parts;
            if i == 0 || i == parts {
                None
            } else {
                Some(ranks[r])
            }
        })
        .collect();
    (0..parts)
        .into_par_iter()
        .map(|p| {
            let mut st = init();
            let mut ids = [0 as WordId; crate::key::MAX_ORDER];
            for item in store.scan_first_ranks(k, bounds[p], bounds[p + 1])? {
                let (key, rec): (Key, _) = item?;
                for (slot, &r) in ids.iter_mut().zip(key.ids()) {
                    *slot = ranks[r as usize];
                }
                each(&mut st, &ids[..key.order()], &rec);
            }
            Ok(st)
        })
        .collect()
}
