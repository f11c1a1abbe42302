//! Reducing a frozen model: a new model file with fewer n-grams
//! ([`super::prune`]) and/or quantized values ([`super::quantize`]), its
//! back-off weights recomputed so that every context still sums to 1.
//!
//! The reduction works on a model already written (the whole method in
//! back-off form, after any count thresholds), memory-mapped: it needs the
//! suffix of every kept n-gram, which the trie gives level by level (the
//! suffix of h·w is the child w of the suffix of h), and it writes the
//! kept entries in the same order, renumbered.
//!
//! β of a context h whose distribution changed (a child dropped, or
//! values quantized) is recomputed from what the new model holds:
//!
//! ```text
//! β(h) = (1 − Σ q(h·v)) / (1 − Σ q(h_s·v))     over the kept children v
//! ```
//!
//! where h_s is the context h backs off to (h' but for `katz` contexts
//! that skip further), so that Σ_w P(w | h) = 1. A context with no kept
//! child gets β = 1; `stupid` keeps α.

use std::path::Path;

use crate::error::{Error, Result};
use crate::query::katz::EPS;

use super::format::{ModelMeta, SectionKind};
use super::reader::Model;
use super::writer::ModelWriter;

/// Suffix links: `links[k - 1][e]` is the entry of order k − 1 that is the
/// suffix (all words but the first) of entry `e` of order k, for k ≥ 2;
/// `links[0]` is empty. One search per n-gram.
pub(crate) fn suffix_links(m: &Model) -> Result<Vec<Vec<u32>>> {
    let n = m.order();
    let mut links: Vec<Vec<u32>> = vec![Vec::new()];
    for k in 2..=n {
        let len = m.orders[k - 1].len;
        let mut l = vec![0u32; len];
        if k == 2 {
            for (e, slot) in l.iter_mut().enumerate() {
                *slot = m.word_of(2, e);
            }
        } else {
            let prev = &links[k - 2];
            for (p, &s) in prev.iter().enumerate() {
                for c in m.children(k - 1, p as u32) {
                    let w = m.word_of(k, c);
                    l[c] = m.child(k - 2, s, w).ok_or_else(|| {
                        Error::corrupt(
                            m.path(),
                            format!("order {k}: the suffix of n-gram {c} is not kept"),
                        )
                    })?;
                }
            }
        }
        links.push(l);
    }
    Ok(links)
}

/// Entry `e` of order `k` with its first `s` words dropped: (order, entry).
#[inline]
pub(crate) fn drop_words(links: &[Vec<u32>], k: usize, e: u32, s: usize) -> (usize, u32) {
    let (mut k, mut e) = (k, e);
    for _ in 0..s {
        if k <= 1 {
            break;
        }
        e = links[k - 1][e as usize];
        k -= 1;
    }
    (k, e)
}

/// What to change in a model.
pub(crate) struct Reduction {
    /// `keep[k - 1][e]`: entry `e` of order k stays (order 1 is always
    /// kept whole; an empty vector keeps the whole order). Must be closed
    /// under prefixes and suffixes.
    pub keep: Vec<Vec<bool>>,
    /// New values q per order, by entry (`None`: as stored).
    pub values: Vec<Option<Vec<f32>>>,
    /// The metadata of the new model (its n-gram counts are filled in).
    pub meta: ModelMeta,
}

/// What writing a reduced model did.
pub(crate) struct Reduced {
    /// Kept n-grams per order.
    pub ngrams: Vec<u64>,
    /// The file's size.
    pub file_bytes: u64,
    /// Contexts whose kept children take all the mass of the context they
    /// back off to, while some mass is left for the others: they cannot
    /// be normalised (β = 0).
    pub unnormalised: u64,
}

impl Reduction {
    fn kept(&self, k: usize, e: usize) -> bool {
        self.keep.get(k - 1).is_none_or(|v| v.is_empty() || v[e])
    }

    fn value(&self, m: &Model, k: usize, e: u32) -> f64 {
        match self.values.get(k - 1) {
            Some(Some(v)) => v[e as usize] as f64,
            _ => m.q(k, e),
        }
    }
}

/// Writes `m` reduced by `r` to `out` (under a temporary name, renamed
/// into place).
pub(crate) fn write_reduced(
    m: &Model,
    links: &[Vec<u32>],
    r: &mut Reduction,
    out: &Path,
) -> Result<Reduced> {
    let n = m.order();
    let b = &m.map[..];
    let probabilities = m.meta.probabilities;
    let any_values = r.values.iter().any(|v| v.is_some());
    let mut unnormalised = 0u64;
    let mut ngrams = Vec::with_capacity(n);
    // Per order: words, values, then (k < N) weights, children, skips.
    let mut sections: Vec<(SectionKind, usize, Vec<u8>)> = Vec::new();
    for k in 1..=n {
        let len = m.orders[k - 1].len;
        let mut words = Vec::new();
        let mut probs = Vec::new();
        let mut kept = 0u64;
        for e in 0..len {
            if !r.kept(k, e) {
                continue;
            }
            kept += 1;
            if k > 1 {
                words.extend_from_slice(&m.word_of(k, e).to_le_bytes());
            }
            probs.extend_from_slice(&(r.value(m, k, e as u32) as f32).to_le_bytes());
        }
        ngrams.push(kept);
        if k > 1 {
            sections.push((SectionKind::Words, k, words));
        }
        sections.push((SectionKind::Probs, k, probs));
        if k == n {
            continue;
        }
        let mut weights = Vec::new();
        let mut children = Vec::new();
        let mut skips = Vec::new();
        let has_skips = !m.orders[k - 1].skips.is_empty();
        // Kept entries of order k + 1 before the current position.
        let mut below = 0u32;
        let mut pos = 0usize;
        for p in 0..len {
            let kids = m.children(k, p as u32);
            // Count the kept children before this context's first.
            while pos < kids.start {
                below += u32::from(r.kept(k + 1, pos));
                pos += 1;
            }
            if !r.kept(k, p) {
                continue;
            }
            children.extend_from_slice(&below.to_le_bytes());
            let s = m.skip(k, p as u32);
            let dropped = kids.clone().any(|c| !r.kept(k + 1, c));
            let beta = if !probabilities || !(dropped || any_values) {
                m.beta(k, p as u32)
            } else {
                let (mut sum_q, mut sum_lower, mut any) = (0.0, 0.0, false);
                for c in kids.clone() {
                    if !r.kept(k + 1, c) {
                        continue;
                    }
                    any = true;
                    sum_q += r.value(m, k + 1, c as u32);
                    let (lk, le) = drop_words(links, k + 1, c as u32, s);
                    sum_lower += r.value(m, lk, le);
                }
                let (num, den) = (1.0 - sum_q, 1.0 - sum_lower);
                if !any {
                    1.0
                } else if num <= 0.0 {
                    0.0
                } else if den <= EPS {
                    if num > 1e-9 {
                        unnormalised += 1;
                    }
                    0.0
                } else {
                    num / den
                }
            };
            weights.extend_from_slice(&(beta as f32).to_le_bytes());
            if has_skips {
                skips.push(s as u8);
            }
        }
        while pos < m.orders[k].len {
            below += u32::from(r.kept(k + 1, pos));
            pos += 1;
        }
        children.extend_from_slice(&below.to_le_bytes());
        sections.push((SectionKind::Weights, k, weights));
        sections.push((SectionKind::Children, k, children));
        if has_skips {
            sections.push((SectionKind::Skips, k, skips));
        }
    }
    r.meta.ngrams = ngrams.clone();
    let mut w = ModelWriter::create(out)?;
    w.section(
        SectionKind::Meta,
        0,
        &serde_json::to_vec_pretty(&r.meta).expect("metadata serialises"),
    )?;
    w.section(SectionKind::Ids, 0, &b[m.ids.clone()])?;
    w.section(SectionKind::WordOffsets, 0, &b[m.offsets.clone()])?;
    w.section(SectionKind::WordText, 0, &b[m.text.clone()])?;
    w.section(SectionKind::Ranking, 0, &b[m.ranking.clone()])?;
    for (kind, k, bytes) in &sections {
        w.section(*kind, *k, bytes)?;
    }
    let file_bytes = w.finish()?;
    Ok(Reduced {
        ngrams,
        file_bytes,
        unnormalised,
    })
}
