//! Least-squares fits on log-log axes: Heaps' law on the growth curve and
//! Zipf's law on the rank-frequency curve.
//!
//! Both are ordinary least squares of ln y on ln x over points that are
//! spaced evenly on the log axis (the R20 sample points, 20 per decade), so
//! that every decade weighs the same instead of the long tail of ranks or
//! tokens dominating.
//!
//! * Heaps (Herdan 1960; Heaps 1978): V(n) = K·n^β, fitted to the growth
//!   curve's points with n ≥ [`HEAPS_MIN_TOKENS`] (below, almost every token
//!   is a new type and the curve is still bending).
//! * Zipf (Zipf 1949): f(r) = C·r^(−s), fitted to the rank-frequency curve
//!   at the sample ranks from [`ZIPF_MIN_RANK`] (the first few function words
//!   deviate from the power law) to the last rank whose frequency is at
//!   least [`ZIPF_MIN_COUNT`] (below, ties make the curve a staircase of
//!   long flat steps).

use serde::Serialize;

use crate::growth::sample_points;
use crate::store::GrowthCurve;

/// Smallest n used for Heaps' fit.
pub const HEAPS_MIN_TOKENS: u64 = 1000;
/// Smallest rank used for Zipf's fit.
pub const ZIPF_MIN_RANK: u64 = 10;
/// Smallest frequency used for Zipf's fit.
pub const ZIPF_MIN_COUNT: u64 = 5;
/// Fewest points for a fit.
pub const MIN_POINTS: usize = 5;

/// y = scale · x^exponent, fitted on log-log axes.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PowerFit {
    /// The exponent: β for Heaps; for Zipf the slope is −s and this is s.
    pub exponent: f64,
    /// The scale: K for Heaps, C for Zipf.
    pub scale: f64,
    /// Coefficient of determination of the log-log fit.
    pub r_squared: f64,
    /// Points used.
    pub points: usize,
    /// Smallest x used.
    pub x_min: u64,
    /// Largest x used.
    pub x_max: u64,
}

/// Ordinary least squares of ln y on ln x: (slope, intercept, R²).
pub fn log_log_least_squares(pts: &[(u64, u64)]) -> Option<(f64, f64, f64)> {
    let xy: Vec<(f64, f64)> = pts
        .iter()
        .filter(|p| p.0 > 0 && p.1 > 0)
        .map(|&(x, y)| ((x as f64).ln(), (y as f64).ln()))
        .collect();
    let n = xy.len() as f64;
    if xy.len() < 2 {
        return None;
    }
    let mx = xy.iter().map(|p| p.0).sum::<f64>() / n;
    let my = xy.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = xy.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = xy.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let syy: f64 = xy.iter().map(|p| (p.1 - my).powi(2)).sum();
    if sxx == 0.0 {
        return None;
    }
    let slope = sxy / sxx;
    let intercept = my - slope * mx;
    let r2 = if syy == 0.0 {
        1.0
    } else {
        (sxy * sxy) / (sxx * syy)
    };
    Some((slope, intercept, r2))
}

fn fit(pts: &[(u64, u64)], negate: bool) -> Option<PowerFit> {
    if pts.len() < MIN_POINTS {
        return None;
    }
    let (slope, intercept, r2) = log_log_least_squares(pts)?;
    Some(PowerFit {
        exponent: if negate { -slope } else { slope },
        scale: intercept.exp(),
        r_squared: r2,
        points: pts.len(),
        x_min: pts.first()?.0,
        x_max: pts.last()?.0,
    })
}

/// Heaps' K and β from a growth curve (`None`: too few points).
pub fn heaps(curve: &GrowthCurve) -> Option<PowerFit> {
    let pts: Vec<(u64, u64)> = curve
        .points
        .iter()
        .copied()
        .filter(|p| p.0 >= HEAPS_MIN_TOKENS)
        .collect();
    fit(&pts, false)
}

/// The rank-frequency curve from the raw count-of-counts of unigrams
/// (`(count, number of words)`, any order): the frequency at every sample
/// rank and at the last rank. The word with the highest count has rank 1;
/// tied words take consecutive ranks.
pub fn rank_frequency(coc: &[(u64, u64)]) -> Vec<(u64, u64)> {
    let mut desc: Vec<(u64, u64)> = coc.iter().copied().filter(|e| e.1 > 0).collect();
    desc.sort_unstable_by_key(|b| std::cmp::Reverse(b.0));
    let types: u64 = desc.iter().map(|e| e.1).sum();
    let mut ranks = sample_points(types);
    if types > 0 {
        ranks.push(types);
    }
    let mut out = Vec::with_capacity(ranks.len());
    let (mut i, mut last_rank) = (0usize, 0u64);
    for r in ranks {
        while i < desc.len() && last_rank + desc[i].1 < r {
            last_rank += desc[i].1;
            i += 1;
        }
        out.push((r, desc[i].0));
    }
    out
}

/// Zipf's s and C from a rank-frequency curve (`None`: too few points).
pub fn zipf(rank_freq: &[(u64, u64)]) -> Option<PowerFit> {
    let pts: Vec<(u64, u64)> = rank_freq
        .iter()
        .copied()
        .filter(|p| p.0 >= ZIPF_MIN_RANK && p.1 >= ZIPF_MIN_COUNT)
        .collect();
    fit(&pts, true)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_power_laws_are_recovered() {
        // y = 3 x^0.5 at x = 100, 400, 900, ...: exact squares.
        let pts: Vec<(u64, u64)> = (10..20).map(|k| (k * k * 100, 3 * k * 10)).collect();
        let (slope, intercept, r2) = log_log_least_squares(&pts).unwrap();
        assert!((slope - 0.5).abs() < 1e-12, "{slope}");
        assert!((intercept.exp() - 3.0).abs() < 1e-9);
        assert!((r2 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn rank_frequency_walks_the_spectrum() {
        // Counts 9 (1 word), 4 (2 words), 1 (10 words): ranks 1, 2-3, 4-13.
        let rf = rank_frequency(&[(1, 10), (4, 2), (9, 1)]);
        let at = |r: u64| rf.iter().find(|p| p.0 == r).unwrap().1;
        assert_eq!(at(1), 9);
        assert_eq!(at(2), 4);
        assert_eq!(at(3), 4);
        assert_eq!(at(4), 1);
        assert_eq!(rf.last(), Some(&(13, 1)));
        // Zipf with s = 1 exactly: frequency 5040 / r at ranks dividing 5040.
        let curve: Vec<(u64, u64)> = [10u64, 12, 14, 16, 20, 24, 28, 30, 35, 40, 42, 45]
            .iter()
            .map(|&r| (r, 5040 / r))
            .collect();
        let z = zipf(&curve).unwrap();
        assert!((z.exponent - 1.0).abs() < 1e-12, "{}", z.exponent);
        assert!((z.scale - 5040.0).abs() < 1e-6);
    }
}
