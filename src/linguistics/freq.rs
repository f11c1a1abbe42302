//! Frequency lists: the n-grams of one order by descending count, ties by
//! their text in byte order, with rank and count per million words.
//!
//! # Memory
//!
//! The list is the best `limit` of a scan ([`super::best::Best`]): at most
//! `limit` entries per thread, plus the vocabulary (to write the n-grams
//! and break ties by text). An n-gram whose count is below the worst kept
//! is passed over without writing its text. The order is never sorted:
//! a list of a whole order is a `dump --order K` piped to an external sort.

use std::cmp::Reverse;

use super::best::Best;
use super::scan::scan_order;
use super::{per_million, words, Markers, Vocabulary};
use crate::error::{Error, Result};
use crate::store::Store;
use crate::words::WordId;

/// What to list.
#[derive(Clone, Debug)]
pub struct FreqOptions {
    /// The order of the n-grams.
    pub order: usize,
    /// Leave out n-grams seen fewer times.
    pub min_count: u64,
    /// Leave out n-grams seen in fewer documents (0: no such bound; above
    /// 0 the store must hold document counts).
    pub min_documents: u64,
    /// List at most this many (at least 1).
    pub limit: usize,
    /// N-grams with sentence markers or not.
    pub markers: Markers,
}

/// One line of a frequency list.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct FreqItem {
    /// 1 for the most frequent; consecutive (ties get consecutive ranks in
    /// text order).
    pub rank: u64,
    /// The words, space-separated.
    pub ngram: String,
    /// Occurrences in the store.
    pub count: u64,
    /// Occurrences per million words of the store's text.
    pub per_million: f64,
    /// Documents the n-gram occurs in, from a store that records them
    /// (`ingest --document-counts`); absent otherwise.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub documents: Option<u64>,
}

/// The n-grams of order `opts.order` that begin with `prefix` and satisfy
/// `keep`, by descending count then text, at most `opts.limit`.
pub fn best_counts(
    store: &Store,
    vocab: &Vocabulary,
    prefix: &[WordId],
    keep: &(dyn Fn(&[WordId]) -> bool + Sync),
    opts: &FreqOptions,
) -> Result<Vec<FreqItem>> {
    if opts.order == 0 || opts.order > store.order() {
        return Err(Error::Config(format!(
            "order {}: the store holds orders 1 to {}",
            opts.order,
            store.order()
        )));
    }
    if opts.limit == 0 {
        return Err(Error::Config("the limit must be at least 1".into()));
    }
    let docs = store.has_documents();
    if opts.min_documents > 0 && !docs {
        return Err(Error::Config(format!(
            "a minimum of {} documents: this store holds no document counts (count it with ingest --document-counts)",
            opts.min_documents
        )));
    }
    // (count, text, documents): texts are distinct, so the documents never
    // decide the order.
    let parts = scan_order(
        store,
        opts.order,
        prefix,
        || Best::<(Reverse<u64>, String, Option<u64>)>::new(opts.limit),
        |best, ids, rec| {
            let count = rec.count;
            if count < opts.min_count
                || rec.documents.unwrap_or(0) < opts.min_documents
                || !opts.markers.keeps(ids)
                || !keep(ids)
            {
                return;
            }
            if let Some((Reverse(worst), _, _)) = best.threshold() {
                if count < *worst {
                    return;
                }
            }
            best.push((Reverse(count), vocab.text(ids), rec.documents));
        },
    )?;
    let mut all = Best::new(opts.limit);
    for p in parts {
        all.merge(p);
    }
    let total = words(store.meta());
    Ok(all
        .into_sorted()
        .into_iter()
        .enumerate()
        .map(|(i, (Reverse(count), ngram, documents))| FreqItem {
            rank: i as u64 + 1,
            ngram,
            count,
            per_million: per_million(count, total),
            documents,
        })
        .collect())
}

/// The frequency list of an order: its `opts.limit` most frequent n-grams.
pub fn top(store: &Store, vocab: &Vocabulary, opts: &FreqOptions) -> Result<Vec<FreqItem>> {
    best_counts(store, vocab, &[], &|_| true, opts)
}
