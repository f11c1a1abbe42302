//! Corpus statistics over a finished store, for corpus linguists:
//! frequency lists ([`freq`]), n-grams that fit a pattern ([`pattern`]),
//! collocations ([`collocations`], with the association measures of
//! [`measures`]), keyness of one store against another ([`keyness`], its
//! figure in [`figure`]) and concordance lines streamed from the corpus
//! files ([`concordance`]).
//!
//! # What is counted
//!
//! Everything but the concordance reads the store only. The n-grams are
//! the store's: the tokens of one line (one sentence), padded with `<s>`
//! and `</s>`, so no n-gram crosses a line. Lists leave out n-grams that
//! hold `<s>` or `</s>` unless asked for them ([`Markers`]). Two corpus
//! sizes appear:
//!
//! 1. *Words* ([`words`]): the tokens of the text without the markers,
//!    `T − sentences` (T from `stats`, which counts `</s>`). Counts per
//!    million and the keyness tables are relative to it.
//! 2. *Tokens* (T, words and `</s>`, as `stats` counts them): the N of the
//!    collocation tables, whose positions include the sentence ends.
//!
//! # Memory
//!
//! No list sorts an order in memory: [`best::Best`] keeps the best
//! `limit` items of a stream in a heap, so a list of the top `limit`
//! costs `limit` entries (and the vocabulary, for the text of ties) however
//! large the order. Document counts are an optional column
//! ([`freq::FreqItem::documents`]): a store that records them fills it.

pub mod best;
pub mod collocations;
pub mod concordance;
#[cfg(feature = "plot")]
pub mod figure;
pub mod freq;
pub mod keyness;
pub mod measures;
pub mod pattern;
pub mod scan;

use std::collections::HashMap;

use crate::store::{Store, StoreMeta};
use crate::words::{bos_id, eos_id, WordId};

/// Whether lists include n-grams that hold a sentence marker (`<s>` or
/// `</s>`).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub enum Markers {
    /// Leave them out (the default): the n-grams of the text itself.
    #[default]
    Without,
    /// Keep them: n-grams at a sentence's start or end.
    With,
}

impl Markers {
    /// Whether an n-gram with these words is listed.
    pub fn keeps(self, ids: &[WordId]) -> bool {
        self == Markers::With || !ids.iter().any(|&w| w == bos_id() || w == eos_id())
    }
}

/// The number of word tokens of a store's text: T without one `</s>` per
/// sentence.
pub fn words(meta: &StoreMeta) -> u64 {
    meta.totals.tokens.saturating_sub(meta.totals.sentences)
}

/// `count` per million of `total`.
pub fn per_million(count: u64, total: u64) -> f64 {
    if total == 0 {
        0.0
    } else {
        count as f64 * 1e6 / total as f64
    }
}

/// The store's vocabulary, id → word, for writing n-grams out.
pub struct Vocabulary(HashMap<WordId, String>);

impl Vocabulary {
    /// The whole vocabulary of `store` (memory in proportion to it).
    pub fn of(store: &Store) -> crate::Result<Vocabulary> {
        Ok(Vocabulary(store.vocabulary()?))
    }

    /// The words of `ids`, space-separated (`?` for an id not in it,
    /// which a store never returns).
    pub fn text(&self, ids: &[WordId]) -> String {
        let mut s = String::new();
        for (i, id) in ids.iter().enumerate() {
            if i > 0 {
                s.push(' ');
            }
            s.push_str(self.0.get(id).map_or("?", String::as_str));
        }
        s
    }
}
