//! Quantization of a model's probabilities (Whittaker & Raj 2001,
//! "Quantization-based language model compression"): per order, 2^B
//! values fitted to that order's q by Lloyd's algorithm on ln q (started
//! from equal-count bins; above 16.8 million values an order is fitted
//! to a fine histogram of ln q instead, so that fitting holds 64 MiB
//! rather than 8 bytes a value), every q replaced by the nearest of them.
//! The codes are kept in scratch files ([`super::spill`]).
//!
//! The unigrams are left exact (they have no back-off to absorb an error,
//! so V's distribution must sum to 1 as it is); orders 2..N are
//! quantized, and the back-off weights are recomputed afterwards
//! ([`super::reduce`]). A context whose quantized children came to more
//! than 1 has its largest children moved one bin down until they do not,
//! so that its β stays ≥ 0.

use std::path::Path;

use crate::error::Result;

use super::file::Model;
use super::spill::Spill;

/// Up to this many positive values an order's bins are fitted to the
/// values themselves (8 bytes each while fitting); above, to a histogram.
pub(crate) const EXACT_FIT: usize = 1 << 24;

/// Buckets of the histogram that larger orders are fitted to: 64 MiB of
/// counts and sums. The buckets are even steps of ln v between the least
/// and the greatest value; with q spanning e^-30 to 1, a step is under
/// 1e-5 in ln, far below the width of 2^16 bins.
pub(crate) const HISTOGRAM_BUCKETS: usize = 1 << 22;

/// Lloyd's rounds over a histogram, at most. More than the exact fit's
/// 30: a round costs a pass over the buckets rather than over the values,
/// and on a large order the exact fit would not have converged in 30
/// either (the unit test below finds the histogram fit at least as good).
const HISTOGRAM_ROUNDS: usize = 100;

/// Lloyd's algorithm on a histogram of ln v over `range`: the buckets'
/// means, weighted by their counts, stand for the values. Started from
/// equal-count bins, as the exact fit.
fn fit_histogram(values: impl Iterator<Item = f64>, range: (f64, f64), slots: usize) -> Vec<f64> {
    let (lo, hi) = range;
    let h = HISTOGRAM_BUCKETS;
    let scale = (h - 1) as f64 / (hi - lo);
    let mut cnt = vec![0u64; h];
    let mut sum = vec![0f64; h];
    for v in values.filter(|&v| v > 0.0) {
        let l = v.ln();
        let b = (((l - lo) * scale) as usize).min(h - 1);
        cnt[b] += 1;
        sum[b] += l;
    }
    // The non-empty buckets as weighted points, ascending.
    let points: Vec<(f64, u64)> = cnt
        .iter()
        .zip(&sum)
        .filter(|(&c, _)| c > 0)
        .map(|(&c, &s)| (s / c as f64, c))
        .collect();
    drop((cnt, sum));
    if points.len() <= slots {
        return points.iter().map(|p| p.0).collect();
    }
    let total: u64 = points.iter().map(|p| p.1).sum();
    // Equal-count bins: a point belongs to the bin of its middle rank.
    let mut s = vec![0.0; slots];
    let mut c = vec![0u64; slots];
    let mut before = 0u64;
    for &(m, w) in &points {
        let mid = before as u128 * 2 + w as u128;
        let i = ((mid * slots as u128) / (2 * total as u128)) as usize;
        s[i.min(slots - 1)] += m * w as f64;
        c[i.min(slots - 1)] += w;
        before += w;
    }
    let mut centers: Vec<f64> = s
        .iter()
        .zip(&c)
        .filter(|(_, &c)| c > 0)
        .map(|(&s, &c)| s / c as f64)
        .collect();
    centers.dedup();
    lloyd(|| points.iter().copied(), centers, HISTOGRAM_ROUNDS)
}

/// Lloyd's algorithm in one dimension: each centre moved to the mean of
/// the points nearest to it (`points` gives them ascending, each with its
/// weight), for at most `rounds` rounds or until no centre moves by 1e-9;
/// a centre that no point is nearest to is dropped.
fn lloyd<I: Iterator<Item = (f64, u64)>>(
    points: impl Fn() -> I,
    mut centers: Vec<f64>,
    rounds: usize,
) -> Vec<f64> {
    for _ in 0..rounds {
        let cuts: Vec<f64> = centers.windows(2).map(|w| (w[0] + w[1]) / 2.0).collect();
        let mut sum = vec![0.0; centers.len()];
        let mut cnt = vec![0u64; centers.len()];
        let mut b = 0;
        for (m, w) in points() {
            while b < cuts.len() && m > cuts[b] {
                b += 1;
            }
            sum[b] += m * w as f64;
            cnt[b] += w;
        }
        let mut moved: f64 = 0.0;
        let mut next = Vec::with_capacity(centers.len());
        for i in 0..centers.len() {
            if cnt[i] > 0 {
                let c = sum[i] / cnt[i] as f64;
                moved = moved.max((c - centers[i]).abs());
                next.push(c);
            }
        }
        centers = next;
        if moved < 1e-9 {
            break;
        }
    }
    centers
}

/// One order's quantized values: the bins' values and every entry's code
/// (0 for an entry not kept).
pub(crate) struct Quantized {
    pub bins: Vec<f32>,
    pub codes: Spill<u16>,
}

impl Quantized {
    /// The quantized q of entry `e`.
    #[inline]
    pub(crate) fn value(&self, e: usize) -> f32 {
        self.bins[self.codes[e] as usize]
    }
}

/// The quantized values of one order, ascending; code 0 is exactly 0 when
/// the order holds zeros.
pub(crate) struct Codebook {
    /// ln of the bins' values (−∞ for the zero bin).
    logs: Vec<f64>,
    /// Boundaries between neighbouring bins in ln (midpoints).
    cuts: Vec<f64>,
    /// Whether code 0 is the zero bin.
    zero: bool,
}

impl Codebook {
    /// Fits at most 2^bits values to `values` (all ≥ 0), which it reads
    /// two or three times. Up to [`EXACT_FIT`] positive values, it holds
    /// their logarithms, sorted, and fits them exactly; above, it fits a
    /// histogram of [`HISTOGRAM_BUCKETS`] even steps of ln v over their
    /// range (each bucket its count and mean), in memory that does not
    /// grow with the model.
    pub(crate) fn fit<I: Iterator<Item = f64>>(values: impl Fn() -> I, bits: u32) -> Codebook {
        Codebook::fit_above(values, bits, EXACT_FIT)
    }

    /// [`Codebook::fit`] with a histogram above `exact` positive values.
    fn fit_above<I: Iterator<Item = f64>>(
        values: impl Fn() -> I,
        bits: u32,
        exact: usize,
    ) -> Codebook {
        let (mut zero, mut positive) = (false, 0usize);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for v in values() {
            if v > 0.0 {
                positive += 1;
                let l = v.ln();
                lo = lo.min(l);
                hi = hi.max(l);
            } else {
                zero = true;
            }
        }
        let slots = (1usize << bits) - usize::from(zero);
        if positive > exact && hi > lo {
            return Codebook::from_centers(fit_histogram(values(), (lo, hi), slots), zero);
        }
        let mut x: Vec<f64> = values().filter(|&v| v > 0.0).map(|v| v.ln()).collect();
        x.sort_unstable_by(f64::total_cmp);
        // Few distinct values: each its own bin (counted without a copy).
        let distinct = 1 + x.windows(2).filter(|w| w[0] != w[1]).take(slots).count();
        let mut centers: Vec<f64>;
        if x.is_empty() || distinct <= slots {
            centers = Vec::with_capacity(distinct);
            for &v in &x {
                if centers.last() != Some(&v) {
                    centers.push(v);
                }
            }
        } else {
            // Equal-count bins to start, then Lloyd's iterations: each
            // centre the mean of the values nearest to it.
            centers = (0..slots)
                .map(|i| {
                    let (a, z) = (i * x.len() / slots, (i + 1) * x.len() / slots);
                    x[a..z.max(a + 1)].iter().sum::<f64>() / (z.max(a + 1) - a) as f64
                })
                .collect();
            centers.dedup();
            centers = lloyd(|| x.iter().map(|&v| (v, 1)), centers, 30);
        }
        Codebook::from_centers(centers, zero)
    }

    /// The codebook of ascending centres in ln (and the zero bin first if
    /// `zero`).
    fn from_centers(centers: Vec<f64>, zero: bool) -> Codebook {
        let mut logs = Vec::with_capacity(centers.len() + 1);
        if zero {
            logs.push(f64::NEG_INFINITY);
        }
        logs.extend(centers);
        let cuts = logs.windows(2).map(|w| (w[0] + w[1]) / 2.0).collect();
        Codebook { logs, cuts, zero }
    }

    /// The number of codes.
    pub(crate) fn len(&self) -> usize {
        self.logs.len()
    }

    /// Bins spread over the whole range of `values` (all ≥ 0) rather than
    /// fitted to where they are dense: half at even steps of ln v between
    /// the least and the greatest positive value, half at even steps of v
    /// up to the greatest, so that no value is rounded by more than half a
    /// ln step relative, nor by more than half a step absolute. For the
    /// back-off weights, whose every rounding moves a context's sum.
    pub(crate) fn spread(values: &[f64], bits: u32) -> Codebook {
        let zero = values.iter().any(|&x| x <= 0.0);
        let (mut lo, mut hi) = (f64::INFINITY, 0.0f64);
        for &v in values.iter().filter(|&&v| v > 0.0) {
            lo = lo.min(v);
            hi = hi.max(v);
        }
        let mut logs: Vec<f64> = Vec::new();
        if hi > 0.0 {
            let slots = (1usize << bits) - usize::from(zero);
            let half = slots / 2;
            let (a, z) = (lo.ln(), hi.ln());
            for i in 0..half.max(1) {
                logs.push(a + (z - a) * i as f64 / (half.max(2) - 1) as f64);
            }
            for i in 1..=slots - half.max(1) {
                logs.push((hi * i as f64 / (slots - half.max(1)) as f64).ln());
            }
            logs.retain(|l| l.is_finite());
            logs.sort_by(f64::total_cmp);
            logs.dedup();
        }
        if zero {
            logs.insert(0, f64::NEG_INFINITY);
        }
        let cuts = logs.windows(2).map(|w| (w[0] + w[1]) / 2.0).collect();
        Codebook { logs, cuts, zero }
    }

    /// The code of `v`: the bin nearest in ln.
    pub(crate) fn code(&self, v: f64) -> usize {
        if v <= 0.0 {
            return 0;
        }
        let l = v.ln();
        self.cuts.partition_point(|&c| c < l)
    }

    /// The value of a code, as stored (32 bits).
    pub(crate) fn value(&self, code: usize) -> f32 {
        self.logs[code].exp() as f32
    }

    /// The lowest code of a value above 0.
    pub(crate) fn lowest_positive(&self) -> u32 {
        u32::from(self.zero)
    }
}

/// The quantized q of every kept entry of orders 2..N (`keep` as in
/// [`super::reduce::Reduction`]), with the contexts whose children came to
/// more than 1 moved down: per order, the bins and codes (`None` for
/// order 1; the codes are [`Spill`]s in `dir`), and how many children were
/// moved.
pub(crate) fn quantize(
    m: &Model,
    keep: &[Vec<bool>],
    bits: u32,
    dir: &Path,
) -> Result<(Vec<Option<Quantized>>, u64)> {
    let n = m.order();
    let kept = |k: usize, e: usize| keep.get(k - 1).is_none_or(|v| v.is_empty() || v[e]);
    let mut out: Vec<Option<Quantized>> = vec![None];
    let mut moved = 0u64;
    for k in 2..=n {
        let len = m.kept(k);
        let book = Codebook::fit(
            || {
                (0..len)
                    .filter(move |&e| kept(k, e))
                    .map(|e| m.q(k, e as u32))
            },
            bits,
        );
        let mut codes: Spill<u16> = Spill::zeroed(dir, len)?;
        for (e, code) in codes.iter_mut().enumerate() {
            if kept(k, e) {
                *code = book.code(m.q(k, e as u32)) as u16;
            }
        }
        let lowest = book.lowest_positive() as u16;
        for p in 0..m.kept(k - 1) {
            let kids = m.children(k - 1, p as u32);
            let sum = |codes: &[u16]| -> f64 {
                kids.clone()
                    .filter(|&c| kept(k, c))
                    .map(|c| book.value(codes[c] as usize) as f64)
                    .sum()
            };
            let mut s = sum(&codes);
            while s > 1.0 {
                // Move the largest child that can go down one bin.
                let Some(c) = kids
                    .clone()
                    .filter(|&c| kept(k, c) && codes[c] > lowest)
                    .max_by_key(|&c| codes[c])
                else {
                    break;
                };
                codes[c] -= 1;
                moved += 1;
                s = sum(&codes);
            }
        }
        let bins = (0..book.len()).map(|c| book.value(c)).collect();
        out.push(Some(Quantized { bins, codes }));
    }
    Ok((out, moved))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The mean squared error in ln of quantizing `x` with `book`.
    fn mse(book: &Codebook, x: &[f64]) -> f64 {
        x.iter()
            .map(|&v| (book.logs[book.code(v)] - v.ln()).powi(2))
            .sum::<f64>()
            / x.len() as f64
    }

    /// Above the exact limit the bins are fitted to a histogram: on
    /// 200,000 values spread like n-gram probabilities (ln q from a sum of
    /// uniforms, some repeated, some 0) its bins quantize within 1 % of the
    /// exact fit's squared error (in fact below it: the exact fit stops
    /// after 30 rounds, the histogram after 100), with the zero bin kept.
    #[test]
    fn histogram_fit_is_close_to_the_exact_fit() {
        let mut state = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        let x: Vec<f64> = (0..200_000)
            .map(|i| {
                if i % 97 == 0 {
                    0.0
                } else if i % 5 == 0 {
                    0.25
                } else {
                    (-(next() + next() + next()) * 6.0).exp()
                }
            })
            .collect();
        for bits in [4, 8] {
            let exact = Codebook::fit_above(|| x.iter().copied(), bits, usize::MAX);
            let hist = Codebook::fit_above(|| x.iter().copied(), bits, 0);
            assert!(exact.zero && hist.zero);
            assert!(hist.len() <= 1 << bits && hist.len() > (1 << bits) / 2);
            let pos: Vec<f64> = x.iter().copied().filter(|&v| v > 0.0).collect();
            let (e, h) = (mse(&exact, &pos), mse(&hist, &pos));
            assert!(
                h <= e * 1.01 + 1e-12,
                "{bits} bits: histogram {h:e}, exact {e:e}"
            );
            assert_eq!(hist.code(0.0), 0);
        }
    }
}
