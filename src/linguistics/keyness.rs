//! Keyness: the n-grams of one order that are markedly more (positive) or
//! less (negative) frequent in a study corpus than in a reference corpus,
//! each corpus a store.
//!
//! For an n-gram with count a among the n₁ words of the study store and b
//! among the n₂ of the reference ([`super::words`]), G² (significance),
//! log ratio (effect size) and %DIFF are those of [`super::measures`]. An
//! n-gram is key when G² reaches the threshold and its larger count the
//! minimum; positive when log ratio > 0. Both lists are sorted by G² (or
//! the size of log ratio), descending; ties by the words' ids.
//!
//! # Cost
//!
//! Both orders are read once, side by side: the stores keep n-grams in the
//! same order (by word id, which is the same function of the word in every
//! store), so the two scans join like a merge. Memory: the `limit` best of
//! each list.

use std::cmp::Reverse;

use super::best::Best;
use super::collocations::Score;
use super::measures::{keyness_g2, log_ratio, percent_diff};
use super::{per_million, words, Markers};
use crate::error::{Error, Result};
use crate::key::Key;
use crate::store::Store;

/// How the lists are sorted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum KeySort {
    /// By G², descending.
    G2,
    /// By the size of log ratio, descending.
    LogRatio,
}

/// What to list.
#[derive(Clone, Debug)]
pub struct KeynessOptions {
    /// The order of the n-grams.
    pub order: usize,
    /// The larger of the two counts must reach this.
    pub min_count: u64,
    /// G² must reach this (3.84: p < 0.05 with one degree of freedom;
    /// 15.13: p < 0.0001).
    pub min_g2: f64,
    /// At most this many in each list (at least 1).
    pub limit: usize,
    /// The sort order of both lists.
    pub sort: KeySort,
    /// N-grams with sentence markers or not.
    pub markers: Markers,
}

/// One key n-gram.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct KeyItem {
    /// The words.
    pub ngram: String,
    /// Count in the study store.
    pub study_count: u64,
    /// Count in the reference store.
    pub reference_count: u64,
    /// Per million words of the study store.
    pub study_per_million: f64,
    /// Per million words of the reference store.
    pub reference_per_million: f64,
    /// Log-likelihood G².
    pub g2: f64,
    /// Log ratio (log₂).
    pub log_ratio: f64,
    /// %DIFF; `None` when the reference count is 0.
    pub percent_diff: Option<f64>,
}

/// Both lists, with the corpus sizes.
#[derive(Clone, Debug, PartialEq)]
pub struct KeyLists {
    /// More frequent in the study store.
    pub positive: Vec<KeyItem>,
    /// Less frequent in the study store.
    pub negative: Vec<KeyItem>,
    /// Words of the study store.
    pub study_words: u64,
    /// Words of the reference store.
    pub reference_words: u64,
}

type Kept = Best<(Reverse<Score>, Key, u64, u64)>;

/// The key n-grams of `study` against `reference`.
pub fn keyness(study: &Store, reference: &Store, opts: &KeynessOptions) -> Result<KeyLists> {
    let k = opts.order;
    if k == 0 || k > study.order() || k > reference.order() {
        return Err(Error::Config(format!(
            "order {k}: the study store holds orders 1 to {}, the reference 1 to {}",
            study.order(),
            reference.order()
        )));
    }
    let (ls, lr) = (
        study.meta().settings.preparation,
        reference.meta().settings.preparation,
    );
    if ls != lr {
        return Err(Error::Config(format!(
            "{} was counted with the text preparation {} and {} with {}: their words do not compare",
            study.dir().display(),
            ls.describe(),
            reference.dir().display(),
            lr.describe(),
        )));
    }
    if opts.limit == 0 {
        return Err(Error::Config("the limit must be at least 1".into()));
    }
    let (n1, n2) = (words(study.meta()), words(reference.meta()));
    let mut pos: Kept = Best::new(opts.limit);
    let mut neg: Kept = Best::new(opts.limit);
    let mut offer = |key: Key, a: u64, b: u64| {
        if a.max(b) < opts.min_count || !opts.markers.keeps(key.ids()) {
            return;
        }
        let g = keyness_g2(a, n1, b, n2);
        if g < opts.min_g2 || g.is_nan() {
            return;
        }
        let lr = log_ratio(a, n1, b, n2);
        let by = match opts.sort {
            KeySort::G2 => g,
            KeySort::LogRatio => lr.abs(),
        };
        let to = if lr > 0.0 { &mut pos } else { &mut neg };
        to.push((Reverse(Score(by)), key, a, b));
    };
    let mut a_it = study.ngrams(k)?;
    let mut b_it = reference.ngrams(k)?;
    let mut a = a_it.next().transpose()?;
    let mut b = b_it.next().transpose()?;
    loop {
        match (&a, &b) {
            (None, None) => break,
            (Some((ka, ca, _)), Some((kb, cb, _))) if ka == kb => {
                offer(*ka, *ca, *cb);
                a = a_it.next().transpose()?;
                b = b_it.next().transpose()?;
            }
            (Some((ka, ca, _)), Some((kb, _, _))) if ka < kb => {
                offer(*ka, *ca, 0);
                a = a_it.next().transpose()?;
            }
            (Some((ka, ca, _)), None) => {
                offer(*ka, *ca, 0);
                a = a_it.next().transpose()?;
            }
            (_, Some((kb, cb, _))) => {
                offer(*kb, 0, *cb);
                b = b_it.next().transpose()?;
            }
        }
    }
    let item = |(_, key, a, b): (Reverse<Score>, Key, u64, u64)| -> Result<KeyItem> {
        let mut ngram = String::new();
        for (i, &id) in key.ids().iter().enumerate() {
            if i > 0 {
                ngram.push(' ');
            }
            let w = match study.word(id)? {
                Some(w) => w,
                None => reference.word(id)?.unwrap_or_else(|| "?".into()),
            };
            ngram.push_str(&w);
        }
        Ok(KeyItem {
            ngram,
            study_count: a,
            reference_count: b,
            study_per_million: per_million(a, n1),
            reference_per_million: per_million(b, n2),
            g2: keyness_g2(a, n1, b, n2),
            log_ratio: log_ratio(a, n1, b, n2),
            percent_diff: percent_diff(a, n1, b, n2),
        })
    };
    Ok(KeyLists {
        positive: pos
            .into_sorted()
            .into_iter()
            .map(item)
            .collect::<Result<_>>()?,
        negative: neg
            .into_sorted()
            .into_iter()
            .map(item)
            .collect::<Result<_>>()?,
        study_words: n1,
        reference_words: n2,
    })
}
