//! Collocations: the words that keep company with a node word (or
//! n-gram), by association measure, from the store alone.
//!
//! # Counts
//!
//! The co-occurrence count of a collocate c at distance d to the right of
//! a node of m words is the sum of the counts of the stored (m + d)-grams
//! that begin with the node and end with c, whatever the d − 1 words
//! between; to the left, of those that begin with c and end with the node.
//! Over a window of L words to the left and R to the right the counts of
//! every distance add up. So m + max(L, R) is at most the store's order.
//!
//! Since n-grams stop at the line's end, a window does too: a node at the
//! end of a line has `</s>` at distance 1 on the right and nothing beyond;
//! `<s>` and `</s>` are positions (collocates when markers are asked for),
//! and N, the number of positions, is T (words and `</s>`, as `stats`
//! counts them). The table and the measures are in [`super::measures`];
//! the window's S is L + R.
//!
//! # Cost
//!
//! Each right distance is a prefix scan (the node's n-grams of one order);
//! each left distance a scan of a whole order ([`super::scan`]). Memory:
//! one count per distinct collocate.

use std::cmp::Reverse;
use std::collections::HashMap;

use super::measures::{dice, g2, log_dice, pmi, t_score, Table};
use super::scan::scan_order;
use super::{Markers, Vocabulary};
use crate::error::{Error, Result};
use crate::store::Store;
use crate::words::WordId;

/// The association measures, to sort by.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Measure {
    /// The co-occurrence count.
    Observed,
    /// Pointwise mutual information.
    Pmi,
    /// t-score.
    TScore,
    /// Log-likelihood G².
    G2,
    /// logDice.
    LogDice,
    /// The Dice coefficient.
    Dice,
}

impl Measure {
    /// Every measure with its name (as in the JSON output).
    pub const ALL: [(Measure, &'static str); 6] = [
        (Measure::Observed, "observed"),
        (Measure::Pmi, "pmi"),
        (Measure::TScore, "t_score"),
        (Measure::G2, "g2"),
        (Measure::LogDice, "log_dice"),
        (Measure::Dice, "dice"),
    ];

    /// The measure called `name`.
    pub fn from_name(name: &str) -> Option<Measure> {
        Self::ALL.iter().find(|(_, n)| *n == name).map(|(m, _)| *m)
    }
}

/// What to list.
#[derive(Clone, Debug)]
pub struct CollocationOptions {
    /// Words to the left of the node.
    pub left: usize,
    /// Words to the right of the node.
    pub right: usize,
    /// Leave out collocates seen fewer times in the window.
    pub min_count: u64,
    /// List at most this many (at least 1).
    pub limit: usize,
    /// Sort by this measure, descending (ties by text).
    pub sort: Measure,
    /// `<s>` and `</s>` as collocates or not.
    pub markers: Markers,
}

/// One collocate with its counts and measures.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Collocate {
    /// The word.
    pub collocate: String,
    /// Co-occurrences in the window.
    pub observed: u64,
    /// E₁₁ = S·f(node)·f(collocate)/N.
    pub expected: f64,
    /// Pointwise mutual information (log₂).
    pub pmi: f64,
    /// t-score.
    pub t_score: f64,
    /// Log-likelihood G² over the 2×2 table.
    pub g2: f64,
    /// logDice.
    pub log_dice: f64,
    /// Dice coefficient.
    pub dice: f64,
}

impl Collocate {
    /// The value of `m`.
    pub fn measure(&self, m: Measure) -> f64 {
        match m {
            Measure::Observed => self.observed as f64,
            Measure::Pmi => self.pmi,
            Measure::TScore => self.t_score,
            Measure::G2 => self.g2,
            Measure::LogDice => self.log_dice,
            Measure::Dice => self.dice,
        }
    }
}

/// A float ordered by `total_cmp`, for sorting by a measure.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Score(pub f64);

impl Eq for Score {}

impl PartialOrd for Score {
    fn partial_cmp(&self, other: &Self) -> Option<std::cmp::Ordering> {
        Some(self.cmp(other))
    }
}

impl Ord for Score {
    fn cmp(&self, other: &Self) -> std::cmp::Ordering {
        self.0.total_cmp(&other.0)
    }
}

/// Co-occurrence counts of every collocate of `node` in the window.
pub fn cooccurrences(
    store: &Store,
    node: &[WordId],
    left: usize,
    right: usize,
) -> Result<HashMap<WordId, u64>> {
    let m = node.len();
    let add = |a: &mut HashMap<WordId, u64>, b: HashMap<WordId, u64>| {
        for (w, c) in b {
            *a.entry(w).or_default() += c;
        }
    };
    let mut all = HashMap::new();
    for d in 1..=right {
        let parts = scan_order(store, m + d, node, HashMap::new, |h, ids, r| {
            *h.entry(ids[m + d - 1]).or_default() += r.count;
        })?;
        parts.into_iter().for_each(|p| add(&mut all, p));
    }
    for d in 1..=left {
        let parts = scan_order(store, m + d, &[], HashMap::new, |h, ids, r| {
            if ids[d..] == *node {
                *h.entry(ids[0]).or_default() += r.count;
            }
        })?;
        parts.into_iter().for_each(|p| add(&mut all, p));
    }
    Ok(all)
}

/// The collocates of `node`, sorted by `opts.sort` descending, then text.
pub fn collocations(
    store: &Store,
    vocab: &Vocabulary,
    node: &[WordId],
    opts: &CollocationOptions,
) -> Result<Vec<Collocate>> {
    let m = node.len();
    let n_max = store.order();
    if m == 0 || m + opts.left.max(opts.right) > n_max || opts.left + opts.right == 0 {
        return Err(Error::Config(format!(
            "a node of {m} word(s) with a window of {},{}: the window needs at least one \
             word, and the node and each side at most {n_max} words (the store's order)",
            opts.left, opts.right
        )));
    }
    if opts.limit == 0 {
        return Err(Error::Config("the limit must be at least 1".into()));
    }
    let f_node = match store.get(node)? {
        Some((c, _)) => c,
        None => return Ok(Vec::new()),
    };
    let co = cooccurrences(store, node, opts.left, opts.right)?;
    let words: Vec<WordId> = co
        .iter()
        .filter(|(w, c)| **c >= opts.min_count && opts.markers.keeps(&[**w]))
        .map(|(w, _)| *w)
        .collect();
    let grams: Vec<&[WordId]> = words.iter().map(std::slice::from_ref).collect();
    let freqs = store.get_many(&grams)?;
    let n = store.meta().totals.tokens;
    let span = (opts.left + opts.right) as u64;
    let mut all = Vec::with_capacity(words.len());
    for (w, f) in words.iter().zip(freqs) {
        let fc = f.map_or(0, |x| x.0);
        let o = co[w];
        let t = Table::collocation(o, f_node, fc, span, n);
        let c = Collocate {
            collocate: vocab.text(&[*w]),
            observed: o,
            expected: t.e11(),
            pmi: pmi(t.o11(), t.e11()),
            t_score: t_score(t.o11(), t.e11()),
            g2: g2(&t.observed, &t.expected),
            log_dice: log_dice(o as f64, f_node as f64, fc as f64),
            dice: dice(o as f64, f_node as f64, fc as f64),
        };
        all.push(c);
    }
    // One entry per collocate is held already (the counts); sorting them
    // costs no more.
    all.sort_by(|a, b| {
        (Reverse(Score(a.measure(opts.sort))), &a.collocate)
            .cmp(&(Reverse(Score(b.measure(opts.sort))), &b.collocate))
    });
    all.truncate(opts.limit);
    Ok(all)
}
