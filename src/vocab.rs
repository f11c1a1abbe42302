//! Choosing a vocabulary: a store's words ranked by count, and for each
//! candidate size the share of the training tokens the most frequent
//! words cover and the rate of held-out tokens outside them.
//!
//! The ranking: every word of V but the markers (`<s>`, `</s>`, `<unk>`),
//! by unigram count, most frequent first, ties broken by the words' bytes.
//! Training tokens are the counts of every unigram but `<s>` and `</s>`
//! (so a token counted as `<unk>` is in the total and never covered).
//! Held-out tokens are the tokens of its sentences (markers excluded); a
//! literal `<unk>` is always outside. The list of the top N is what
//! `ingest --word-list` reads, one word a line.
//!
//! Memory: the words of V with their counts.

use std::collections::HashMap;

use crate::error::{Error, Result};
use crate::store::Store;
use crate::words::{bos_id, eos_id, unk_id, WordId};

/// A store's words ranked for a vocabulary.
#[derive(Clone, Debug, PartialEq)]
pub struct Ranking {
    /// Words but the markers with their counts: count descending, then
    /// by bytes.
    pub words: Vec<(String, u64)>,
    /// Their ids, in the same order.
    pub ids: Vec<WordId>,
    /// Training tokens: every unigram's count but `<s>` and `</s>`.
    pub tokens: u64,
}

/// One candidate size.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SizeRow {
    /// The size asked for.
    pub size: u64,
    /// The words it takes (fewer when V is smaller).
    pub words: u64,
    /// Training tokens of those words.
    pub covered_tokens: u64,
    /// `covered_tokens` over all training tokens.
    pub coverage: f64,
    /// Held-out tokens outside those words (with held-out text).
    pub heldout_outside: Option<u64>,
    /// `heldout_outside` over the held-out tokens.
    pub heldout_oov_rate: Option<f64>,
}

/// Ranks the words of `store`.
pub fn rank(store: &Store) -> Result<Ranking> {
    let text: HashMap<WordId, String> = store.vocabulary()?;
    let (bos, eos, unk) = (bos_id(), eos_id(), unk_id());
    let mut words: Vec<(String, u64, WordId)> = Vec::new();
    let mut tokens = 0u64;
    for item in store.ngrams(1)? {
        let (key, count, _) = item?;
        let id = key.ids()[0];
        if id == bos || id == eos {
            continue;
        }
        tokens += count;
        if id == unk {
            continue;
        }
        let w = text.get(&id).ok_or_else(|| {
            Error::corrupt(
                store.dir(),
                format!("the word with id {id:#018x} has no text"),
            )
        })?;
        words.push((w.clone(), count, id));
    }
    words.sort_unstable_by(|a, b| {
        b.1.cmp(&a.1)
            .then_with(|| a.0.as_bytes().cmp(b.0.as_bytes()))
    });
    let ids = words.iter().map(|w| w.2).collect();
    Ok(Ranking {
        words: words.into_iter().map(|(w, c, _)| (w, c)).collect(),
        ids,
        tokens,
    })
}

/// The held-out tokens of padded `sentences` (markers excluded).
pub fn heldout_tokens(sentences: &[Vec<WordId>]) -> u64 {
    let (bos, eos) = (bos_id(), eos_id());
    sentences
        .iter()
        .flatten()
        .filter(|&&w| w != bos && w != eos)
        .count() as u64
}

/// A row per size of `sizes` (in the order given).
pub fn sizes(r: &Ranking, sizes: &[u64], heldout: Option<&[Vec<WordId>]>) -> Vec<SizeRow> {
    // The rank of every ranked word (0 = most frequent).
    let rank_of: HashMap<WordId, u64> = r
        .ids
        .iter()
        .enumerate()
        .map(|(i, &id)| (id, i as u64))
        .collect();
    // Held-out tokens by the rank of their word (u64::MAX: never inside).
    let (bos, eos) = (bos_id(), eos_id());
    let mut held: Vec<u64> = Vec::new();
    if let Some(s) = heldout {
        for &w in s.iter().flatten() {
            if w != bos && w != eos {
                held.push(rank_of.get(&w).copied().unwrap_or(u64::MAX));
            }
        }
        held.sort_unstable();
    }
    let mut prefix = vec![0u64; r.words.len() + 1];
    for (i, (_, c)) in r.words.iter().enumerate() {
        prefix[i + 1] = prefix[i] + c;
    }
    sizes
        .iter()
        .map(|&size| {
            let words = size.min(r.words.len() as u64);
            let covered = prefix[words as usize];
            let outside =
                heldout.map(|_| held.len() as u64 - held.partition_point(|&x| x < words) as u64);
            SizeRow {
                size,
                words,
                covered_tokens: covered,
                coverage: covered as f64 / r.tokens.max(1) as f64,
                heldout_outside: outside,
                heldout_oov_rate: outside.map(|o| o as f64 / (held.len() as f64).max(1.0)),
            }
        })
        .collect()
}
