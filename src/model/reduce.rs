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
use crate::predict::EPS;

use super::file::Model;
use super::format::{ModelMeta, SectionKind};
use super::packed::{ef_encode, width_for};
use super::quantize::{Codebook, Quantized};
use super::spill::Spill;
use super::writer::ModelWriter;

/// Suffix links: `links[k - 1][e]` is the entry of order k − 1 that is the
/// suffix (all words but the first) of entry `e` of order k, for k ≥ 2;
/// `links[0]` is empty. One search per n-gram.
/// The arrays are [`Spill`]s in `dir`.
pub(crate) fn suffix_links(m: &Model, dir: &Path) -> Result<Vec<Spill<u32>>> {
    let n = m.order();
    let mut links: Vec<Spill<u32>> = vec![Spill::zeroed(dir, 0)?];
    for k in 2..=n {
        let len = m.kept(k);
        let mut l: Spill<u32> = Spill::zeroed(dir, len)?;
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
pub(crate) fn drop_words(links: &[Spill<u32>], k: usize, e: u32, s: usize) -> (usize, u32) {
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
    pub values: Vec<Option<Quantized>>,
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
    /// With quantized back-off weights: the largest |Σ_w P(w | h) − 1| over
    /// the kept contexts, from rounding β to its bin (each β is computed
    /// against what the distribution it backs off to really sums to, so
    /// this is one rounding, not a sum over the orders).
    pub weight_error: f64,
}

/// Writes values as f32 (32 bits) or as codes into their distinct values
/// (at most 2^bits of them: they were fitted to that many bins). `vals`
/// gives the values afresh each time it is called (twice for codes).
fn write_values<I: Iterator<Item = f32>>(
    w: &mut ModelWriter,
    kind: SectionKind,
    k: usize,
    vals: impl Fn() -> I,
    bits: u32,
) -> Result<()> {
    if bits >= 32 {
        return w.floats(kind, k, vals());
    }
    // The distinct values, sorted (a few thousand at most: no copy of
    // the values).
    let mut bins: Vec<f32> = Vec::new();
    for v in vals() {
        if let Err(i) = bins.binary_search_by(|b| b.total_cmp(&v)) {
            if bins.len() == 1 << bits {
                return Err(Error::Config(format!(
                    "order {k}: more than {} distinct values do not fit {bits}-bit codes",
                    1u64 << bits
                )));
            }
            bins.insert(i, v);
        }
    }
    if bins.is_empty() {
        bins.push(0.0);
    }
    let (codes, bins_kind) = match kind {
        SectionKind::Probs => (SectionKind::ProbCodes, SectionKind::ProbBins),
        _ => (SectionKind::WeightCodes, SectionKind::WeightBins),
    };
    w.packed(
        codes,
        k,
        bits,
        vals().map(|v| {
            bins.binary_search_by(|b| b.total_cmp(&v))
                .expect("a value among the bins") as u64
        }),
    )?;
    let bytes: Vec<u8> = bins.iter().flat_map(|x| x.to_le_bytes()).collect();
    w.section(bins_kind, k, &bytes)
}

impl Reduction {
    fn kept(&self, k: usize, e: usize) -> bool {
        self.keep.get(k - 1).is_none_or(|v| v.is_empty() || v[e])
    }

    fn value(&self, m: &Model, k: usize, e: u32) -> f64 {
        match self.values.get(k - 1) {
            Some(Some(v)) => v.value(e as usize) as f64,
            _ => m.q(k, e),
        }
    }
}

/// Writes `m` reduced by `r` to `out` (under a temporary name, renamed
/// into place). The arrays it builds per context are [`Spill`]s in `dir`.
pub(crate) fn write_reduced(
    m: &Model,
    links: &[Spill<u32>],
    r: &mut Reduction,
    out: &Path,
    dir: &Path,
) -> Result<Reduced> {
    let n = m.order();
    let probabilities = m.meta().probabilities;
    let any_values = r.values.iter().any(|v| v.is_some());
    let weight_bits = r.meta.weight_bits;
    let mut unnormalised = 0u64;
    let mut worst = 0.0f64;
    // With quantized weights: by order and entry, how far the kept
    // context's distribution is from summing to 1.
    let mut eps: Vec<Spill<f32>> = Vec::new();
    let mut ngrams = Vec::with_capacity(n);
    // Each order's sections are written as soon as they are made (the
    // directory at the end says where they are), and the metadata, which
    // needs the kept counts, last: nothing of an order outlives it.
    let mut w = ModelWriter::create(out)?;
    let width = width_for(m.words_with_bos() as u64 - 1);
    for k in 1..=n {
        let len = m.kept(k);
        let r_ = &*r;
        let kept = move || (0..len).filter(move |&e| r_.kept(k, e));
        ngrams.push(kept().count() as u64);
        if k > 1 {
            w.packed(
                SectionKind::Words,
                k,
                width,
                kept().map(|e| m.word_of(k, e) as u64),
            )?;
        }
        let pbits = if k == 1 { 32 } else { r.meta.value_bits };
        write_values(
            &mut w,
            SectionKind::Probs,
            k,
            || kept().map(|e| r_.value(m, k, e as u32) as f32),
            pbits,
        )?;
        if k == n {
            continue;
        }
        // Per kept context, in order: β; with quantized weights also its
        // entry, Σ q(h·v) and the back-off mass β multiplies, as the model
        // will hold them.
        let coded = probabilities && weight_bits < 32;
        let cap = if coded { len } else { 0 };
        let mut weights: Spill<f64> = Spill::zeroed(dir, len)?;
        let mut entry: Spill<u32> = Spill::zeroed(dir, cap)?;
        let mut sum_qs: Spill<f64> = Spill::zeroed(dir, cap)?;
        let mut dens: Spill<f64> = Spill::zeroed(dir, cap)?;
        let mut children: Spill<u32> = Spill::zeroed(dir, len + 1)?;
        let mut skips = Vec::new();
        let has_skips = m.has_skips_at(k);
        let mut nk = 0usize;
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
            children[nk] = below;
            let s = m.skip(k, p as u32);
            let dropped = kids.clone().any(|c| !r.kept(k + 1, c));
            let recompute = probabilities && (dropped || any_values || coded);
            let (mut sum_q, mut sum_lower, mut any) = (0.0, 0.0, false);
            if recompute {
                for c in kids.clone() {
                    if !r.kept(k + 1, c) {
                        continue;
                    }
                    any = true;
                    sum_q += r.value(m, k + 1, c as u32);
                    let (lk, le) = drop_words(links, k + 1, c as u32, s);
                    sum_lower += r.value(m, lk, le);
                }
            }
            // With quantized weights, the distribution h backs off to sums
            // to 1 + ε (its own weight was rounded): β is computed against
            // what it really holds, so errors do not add up order by order.
            let lower_eps = if coded && s < k {
                let (lk, le) = drop_words(links, k, p as u32, s);
                eps[lk - 1][le as usize] as f64
            } else {
                0.0
            };
            let (num, den) = (1.0 - sum_q, 1.0 + lower_eps - sum_lower);
            let beta = if !recompute {
                m.beta(k, p as u32)
            } else if !any && !coded {
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
            };
            weights[nk] = beta;
            if coded {
                entry[nk] = p as u32;
                sum_qs[nk] = sum_q;
                dens[nk] = den.max(0.0);
            }
            if has_skips {
                skips.push(s as u8);
            }
            nk += 1;
        }
        while pos < m.kept(k + 1) {
            below += u32::from(r.kept(k + 1, pos));
            pos += 1;
        }
        children[nk] = below;
        if weight_bits < 32 {
            let book = Codebook::spread(&weights[..nk], weight_bits);
            let mut now: Spill<f32> = Spill::zeroed(dir, if coded { len } else { 0 })?;
            for x in weights[..nk].iter_mut() {
                *x = book.value(book.code(*x)) as f64;
            }
            if coded {
                for i in 0..nk {
                    // What the context really sums to, less 1.
                    let e = sum_qs[i] + weights[i] * dens[i] - 1.0;
                    worst = worst.max(e.abs());
                    now[entry[i] as usize] = e as f32;
                }
            }
            eps.push(now);
        } else {
            eps.push(Spill::zeroed(dir, 0)?);
        }
        drop((entry, sum_qs, dens));
        write_values(
            &mut w,
            SectionKind::Weights,
            k,
            || weights[..nk].iter().map(|&x| x as f32),
            weight_bits,
        )?;
        w.section(
            SectionKind::Children,
            k,
            &ef_encode(children[..=nk].iter().map(|&x| x as u64)),
        )?;
        if has_skips {
            w.section(SectionKind::Skips, k, &skips)?;
        }
    }
    r.meta.ngrams = ngrams.clone();
    w.section(
        SectionKind::Meta,
        0,
        &serde_json::to_vec_pretty(&r.meta).expect("metadata serialises"),
    )?;
    let [ids, offsets, text, ranking] = m.vocabulary_sections();
    w.section(SectionKind::Ids, 0, ids)?;
    w.section(SectionKind::WordOffsets, 0, offsets)?;
    w.section(SectionKind::WordText, 0, text)?;
    w.section(SectionKind::Ranking, 0, ranking)?;
    let file_bytes = w.finish()?;
    Ok(Reduced {
        ngrams,
        file_bytes,
        unnormalised,
        weight_error: worst,
    })
}
