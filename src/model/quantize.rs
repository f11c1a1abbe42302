//! Quantization of a model's probabilities (Whittaker & Raj 2001,
//! "Quantization-based language model compression"): per order, 2^B
//! values fitted to that order's q by Lloyd's algorithm on ln q (started
//! from equal-count bins), every q replaced by the nearest of them.
//!
//! The unigrams are left exact (they have no back-off to absorb an error,
//! so V's distribution must sum to 1 as it is); orders 2..N are
//! quantized, and the back-off weights are recomputed afterwards
//! ([`super::reduce`]). A context whose quantized children came to more
//! than 1 has its largest children moved one bin down until they do not,
//! so that its β stays ≥ 0.

use super::reader::Model;

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
    /// Fits at most 2^bits values to `values` (all ≥ 0). Holds one f64 a
    /// positive value (their logarithms, sorted), nothing more of their
    /// size: the values are read from the iterator once.
    pub(crate) fn fit(values: impl Iterator<Item = f64>, bits: u32) -> Codebook {
        let mut zero = false;
        let mut x: Vec<f64> = values
            .filter(|&v| {
                zero |= v <= 0.0;
                v > 0.0
            })
            .map(|v| v.ln())
            .collect();
        x.sort_unstable_by(f64::total_cmp);
        let slots = (1usize << bits) - usize::from(zero);
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
            for _ in 0..30 {
                let cuts: Vec<f64> = centers.windows(2).map(|w| (w[0] + w[1]) / 2.0).collect();
                let mut sum = vec![0.0; centers.len()];
                let mut cnt = vec![0usize; centers.len()];
                let mut b = 0;
                for &v in &x {
                    while b < cuts.len() && v > cuts[b] {
                        b += 1;
                    }
                    sum[b] += v;
                    cnt[b] += 1;
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
        }
        let mut logs = Vec::with_capacity(centers.len() + 1);
        if zero {
            logs.push(f64::NEG_INFINITY);
        }
        logs.extend(centers);
        let cuts = logs.windows(2).map(|w| (w[0] + w[1]) / 2.0).collect();
        Codebook { logs, cuts, zero }
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
/// more than 1 moved down: per order, values by entry (`None` for order
/// 1), and how many children were moved.
pub(crate) fn quantize(m: &Model, keep: &[Vec<bool>], bits: u32) -> (Vec<Option<Vec<f32>>>, u64) {
    let n = m.order();
    let kept = |k: usize, e: usize| keep.get(k - 1).is_none_or(|v| v.is_empty() || v[e]);
    let mut out: Vec<Option<Vec<f32>>> = vec![None];
    let mut moved = 0u64;
    for k in 2..=n {
        let len = m.orders[k - 1].len;
        let book = Codebook::fit(
            (0..len).filter(|&e| kept(k, e)).map(|e| m.q(k, e as u32)),
            bits,
        );
        let mut codes: Vec<u32> = (0..len)
            .map(|e| {
                if kept(k, e) {
                    book.code(m.q(k, e as u32)) as u32
                } else {
                    0
                }
            })
            .collect();
        for p in 0..m.orders[k - 2].len {
            let kids = m.children(k - 1, p as u32);
            let sum = |codes: &[u32]| -> f64 {
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
                    .filter(|&c| kept(k, c) && codes[c] > book.lowest_positive())
                    .max_by_key(|&c| codes[c])
                else {
                    break;
                };
                codes[c] -= 1;
                moved += 1;
                s = sum(&codes);
            }
        }
        out.push(Some(
            codes.iter().map(|&c| book.value(c as usize)).collect(),
        ));
    }
    (out, moved)
}
