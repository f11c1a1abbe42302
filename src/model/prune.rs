//! Relative-entropy pruning (Stolcke 1998, "Entropy-based pruning of
//! backoff language models"): which n-grams a model can drop, and the
//! threshold that meets a size target.
//!
//! Dropping the n-gram h·w changes only the distribution after h: w then
//! backs off, P'(w | h) = β'(h)·P(w | h_s), and so do the words that backed
//! off already, with β'(h) in place of β(h). With
//! num = 1 − Σ_v q(h·v) and den = 1 − Σ_v P(v | h_s) over the children v
//! of h, β'(h) = (num + q(h·w)) / (den + P(w | h_s)). The relative entropy
//! of the model with h·w dropped from the model as it is (the paper's
//! criterion, in nats) is
//!
//! ```text
//! D(h·w) = −p(h) · { q(h·w) · [ln P(w | h_s) + ln β'(h) − ln q(h·w)]
//!                    + num · [ln β'(h) − ln β(h)] }
//! ```
//!
//! p(h) is the model's own probability of the context, by the chain rule:
//! p(h_1 … h_j) = p(h_1 … h_{j−1}) · q(h_1 … h_j), since every kept
//! context's words are kept n-grams. The first word `<s>` is never
//! predicted, so its marginal is taken as q(`</s>`), the rate at which
//! sentences end (each has one start and one end).
//!
//! As in the paper, every n-gram's D is computed against the unpruned
//! model, and those with D < θ are dropped together; then the back-off
//! weights are recomputed ([`super::reduce`]). To stay closed under
//! prefixes and suffixes, an n-gram that is the context or the suffix of a
//! kept longer n-gram is kept whatever its D (decided from the top order
//! down). The unigrams are all kept.

use std::path::Path;

use crate::error::{Error, Result};
use crate::words::eos_id;

use super::file::Model;
use super::reduce::drop_words;
use super::spill::Spill;

/// D of every n-gram of order ≥ 2: `d[k - 1][e]` (`d[0]` is empty).
/// Infinite where dropping is impossible (the back-off gives the word
/// nothing).
/// The arrays are [`Spill`]s in `dir`.
pub(crate) fn criterion(m: &Model, links: &[Spill<u32>], dir: &Path) -> Result<Vec<Spill<f64>>> {
    let n = m.order();
    let eos = m
        .index_of(eos_id())
        .ok_or_else(|| Error::corrupt(m.path(), "the vocabulary has no </s>"))?;
    let mut marg: Spill<f64> = Spill::zeroed(dir, m.kept(1))?;
    for (x, slot) in marg.iter_mut().enumerate() {
        let x = x as u32;
        *slot = m.q(1, if x == m.bos_index() { eos } else { x });
    }
    let mut d: Vec<Spill<f64>> = vec![Spill::zeroed(dir, 0)?];
    for k in 2..=n {
        let j = k - 1;
        let len = m.kept(k);
        let mut dk: Spill<f64> = Spill::filled(dir, len, f64::INFINITY)?;
        let mut next_marg: Spill<f64> = Spill::zeroed(dir, if k < n { len } else { 0 })?;
        for (p, &mp) in marg.iter().enumerate() {
            let kids = m.children(j, p as u32);
            if kids.is_empty() {
                continue;
            }
            let s = m.skip(j, p as u32);
            let lower = |c: usize| {
                let (lk, le) = drop_words(links, k, c as u32, s);
                m.q(lk, le)
            };
            let (mut sum_q, mut sum_lower) = (0.0, 0.0);
            for c in kids.clone() {
                sum_q += m.q(k, c as u32);
                sum_lower += lower(c);
            }
            let num = 1.0 - sum_q;
            let den = 1.0 - sum_lower;
            let beta = m.beta(j, p as u32);
            for c in kids {
                let qh = m.q(k, c as u32);
                if k < n {
                    next_marg[c] = mp * qh;
                }
                dk[c] = stolcke(mp, qh, lower(c), num, den, beta);
            }
        }
        d.push(dk);
        marg = next_marg;
    }
    Ok(d)
}

/// Stolcke's D for one n-gram: context marginal `ph`, q(h·w) `qh`,
/// P(w | h_s) `ql`, the context's `num`, `den` and `beta`.
fn stolcke(ph: f64, qh: f64, ql: f64, num: f64, den: f64, beta: f64) -> f64 {
    if qh > 0.0 && ql <= 0.0 {
        return f64::INFINITY;
    }
    let bp = (num + qh) / (den + ql);
    let t1 = if qh > 0.0 {
        qh * (ql.ln() + bp.ln() - qh.ln())
    } else {
        0.0
    };
    let t2 = if num > 0.0 && beta > 0.0 {
        num * (bp.ln() - beta.ln())
    } else {
        0.0
    };
    let x = -ph * (t1 + t2);
    if x.is_nan() {
        f64::INFINITY
    } else {
        x
    }
}

/// The n-grams kept at threshold `theta` (D ≥ θ, plus the contexts and
/// suffixes of kept longer ones), per order as in [`super::reduce::Reduction`],
/// and how many n-grams that is in all (unigrams included).
pub(crate) fn select(
    m: &Model,
    links: &[Spill<u32>],
    d: &[Spill<f64>],
    theta: f64,
) -> (Vec<Vec<bool>>, u64) {
    let n = m.order();
    let mut keep: Vec<Vec<bool>> = vec![Vec::new()];
    for dk in &d[1..] {
        keep.push(dk.iter().map(|&x| x >= theta).collect());
    }
    for k in (3..=n).rev() {
        let (lo, hi) = keep.split_at_mut(k - 1);
        let (below, here) = (&mut lo[k - 2], &hi[0]);
        for p in 0..m.kept(k - 1) {
            for c in m.children(k - 1, p as u32) {
                if here[c] {
                    below[p] = true;
                    below[links[k - 1][c] as usize] = true;
                }
            }
        }
    }
    let total = m.kept(1) as u64
        + keep[1..]
            .iter()
            .map(|v| v.iter().filter(|&&x| x).count() as u64)
            .sum::<u64>();
    (keep, total)
}

/// The smallest θ among the n-grams' D values that keeps at most `max`
/// n-grams (unigrams included); `None` if the model is that small already.
pub(crate) fn threshold_for(
    m: &Model,
    links: &[Spill<u32>],
    d: &[Spill<f64>],
    max: u64,
) -> Result<Option<f64>> {
    let all: u64 = (1..=m.order()).map(|k| m.kept(k) as u64).sum();
    if max >= all {
        return Ok(None);
    }
    let least = select(m, links, d, f64::INFINITY).1;
    if least > max {
        return Err(Error::Config(format!(
            "--max-ngrams {max} is below the {least} n-grams no pruning can drop (the unigrams, every word of V, and n-grams whose word the back-off gives nothing)"
        )));
    }
    // The answer is the least D value whose threshold keeps at most `max`
    // (what is kept only changes at D values). The values are not copied:
    // first the bucket of their top 16 bits (in an order-preserving key)
    // where the answer lies is found by bisection on the buckets' lower
    // ends, then the values of that bucket, with the least value above
    // it, are searched as before.
    let finite = || {
        d[1..]
            .iter()
            .flat_map(|dk| dk.iter())
            .copied()
            .filter(|x| x.is_finite())
    };
    let (mut bmin, mut bmax) = (u64::MAX, 0u64);
    for x in finite() {
        let b = order_key(x) >> 48;
        bmin = bmin.min(b);
        bmax = bmax.max(b);
    }
    if bmin > bmax {
        return Ok(Some(f64::INFINITY));
    }
    let fits = |theta: f64| select(m, links, d, theta).1 <= max;
    // The least bucket b whose lower end keeps at most `max` (bmax + 1:
    // none; f(∞) holds, as checked above).
    let (mut lo, mut hi) = (bmin + 1, bmax + 1);
    while lo < hi {
        let mid = lo + (hi - lo) / 2;
        if fits(from_order_key(mid << 48)) {
            hi = mid;
        } else {
            lo = mid + 1;
        }
    }
    // The answer is in bucket lo − 1 (whose lower end keeps too many, or
    // which is the first), or it is the least value of a bucket ≥ lo.
    let b = lo - 1;
    let mut above = f64::INFINITY;
    let mut vals: Vec<f64> = Vec::new();
    for x in finite() {
        let xb = order_key(x) >> 48;
        if xb == b {
            vals.push(x);
        } else if xb > b && x < above {
            above = x;
        }
    }
    vals.sort_unstable_by(f64::total_cmp);
    vals.dedup();
    if above.is_finite() {
        vals.push(above);
    }
    // The smallest index whose θ keeps at most `max`; θ = ∞ past the end.
    let (mut lo, mut hi) = (0usize, vals.len());
    while lo < hi {
        let mid = lo + (hi - lo) / 2;
        if fits(vals[mid]) {
            hi = mid;
        } else {
            lo = mid + 1;
        }
    }
    Ok(Some(vals.get(lo).copied().unwrap_or(f64::INFINITY)))
}

/// A u64 that orders finite f64 values as they compare.
fn order_key(x: f64) -> u64 {
    let b = x.to_bits();
    if b >> 63 == 1 {
        !b
    } else {
        b | 1 << 63
    }
}

/// The f64 of an [`order_key`].
fn from_order_key(k: u64) -> f64 {
    f64::from_bits(if k >> 63 == 1 { k & !(1 << 63) } else { !k })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The key orders values as they compare, and turns back into them.
    #[test]
    fn order_key_keeps_the_order() {
        let mut xs = vec![-3.5, -1e-300, -0.0, 0.0, 1e-300, 2.0, 7.25e10, -7.0, 1.0];
        xs.sort_by(f64::total_cmp);
        for w in xs.windows(2) {
            assert!(order_key(w[0]) < order_key(w[1]), "{w:?}");
        }
        for &x in &xs {
            assert_eq!(from_order_key(order_key(x)).to_bits(), x.to_bits());
        }
    }
}
