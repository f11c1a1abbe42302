//! Fitting the free parameters on held-out text.
//!
//! * `add-k`: k minimises the held-out perplexity. The log probability of
//!   held-out text under add-k is Σ log((c_i + k)/(C_i + k|V|)) with the
//!   counts (c_i, C_i) of each prediction at its order, so the counts are
//!   read once and the search runs in memory: a grid of 61 values of k
//!   spaced evenly in log k over [1e-6, 1e2], then golden-section search in
//!   log k between the grid neighbours of the best grid value.
//! * `interp`: the weights by expectation-maximisation. The recursive
//!   interpolation is a chain of binary choices: at order k (if C(h) > 0)
//!   take the maximum-likelihood estimate with probability λ, or go down.
//!   The E step gives each prediction the posterior probability of having
//!   reached order k and of having taken its estimate there; the M step
//!   sets λ to the sum of the second over the sum of the first, per order
//!   (and per bucket of C(h) with `buckets`). Each step cannot lower the
//!   held-out likelihood. Weights are kept within [1e-6, 1 − 1e-6] so no
//!   held-out word gets probability 0; iteration stops when the relative
//!   gain in log-likelihood falls below 1e-9, or after 500 rounds.

use serde::Serialize;

use crate::error::{Error, Result};
use crate::store::Store;
use crate::words::WordId;

use super::jelinek_mercer::{bucket, Lambdas, DEFAULT_LAMBDA};
use super::score::score_padded;
use super::{prediction, Estimator, Method, Params};

/// What `tune` found.
#[derive(Clone, Debug, Serialize)]
pub struct Tuned {
    /// The method tuned.
    pub method: Method,
    /// The parameters found (with the other parameters as given).
    pub params: Params,
    /// Held-out perplexity at the starting parameters.
    pub before: Option<f64>,
    /// Held-out perplexity at the parameters found.
    pub after: Option<f64>,
    /// Rounds of the search or of EM.
    pub iterations: usize,
}

/// Fits the free parameters of `method` (`add-k` or `interp`) on the padded
/// held-out `sentences`, starting from `start`. `buckets` (interp only)
/// fits one weight per order and bucket of C(h).
pub fn tune(
    store: &Store,
    method: Method,
    start: &Params,
    sentences: &[Vec<WordId>],
    buckets: Option<usize>,
) -> Result<Tuned> {
    if sentences.is_empty() {
        return Err(Error::Config(
            "tune: the held-out text has no sentence".into(),
        ));
    }
    if buckets.is_some() && method != Method::Interp {
        return Err(Error::Config("tune: --buckets is for interp only".into()));
    }
    let n = store.order();
    let start_est = Estimator::new(store, method, start.clone())?;
    let before = score_padded(&start_est, sentences)?.perplexity();
    let mut queries: Vec<&[WordId]> = Vec::new();
    for s in sentences {
        for i in 1..s.len() {
            queries.push(prediction(s, i, n));
        }
    }
    let (params, iterations) = match method {
        Method::AddK => tune_add_k(&start_est, &queries, start)?,
        Method::Interp => tune_interp(&start_est, &queries, start, buckets)?,
        m => {
            return Err(Error::Config(format!(
                "tune: {m} has no parameters to fit on held-out text (add-k and interp do)"
            )))
        }
    };
    let est = Estimator::new(store, method, params.clone())?;
    let after = score_padded(&est, sentences)?.perplexity();
    Ok(Tuned {
        method,
        params,
        before,
        after,
        iterations,
    })
}

fn tune_add_k(
    est: &Estimator<'_>,
    queries: &[&[WordId]],
    start: &Params,
) -> Result<(Params, usize)> {
    let mut data: Vec<(f64, f64)> = Vec::with_capacity(queries.len());
    for chunk in queries.chunks(8192) {
        est.for_levels(chunk, |_, levels, _| {
            let l = levels.last().expect("a level");
            data.push((l.c as f64, l.ctx.map_or(0, |s| s.count_sum) as f64));
            Ok(())
        })?;
    }
    let v = est.vocabulary_size() as f64;
    // The negative log-likelihood as a function of ln k.
    let nll = |lk: f64| -> f64 {
        let k = lk.exp();
        data.iter()
            .map(|&(c, cs)| -((c + k) / (cs + k * v)).ln())
            .sum::<f64>()
    };
    let (lo, hi) = (1e-6f64.ln(), 1e2f64.ln());
    let steps = 60;
    let grid: Vec<f64> = (0..=steps)
        .map(|i| lo + (hi - lo) * i as f64 / steps as f64)
        .collect();
    let vals: Vec<f64> = grid.iter().map(|&x| nll(x)).collect();
    let best = (0..vals.len())
        .min_by(|&a, &b| vals[a].total_cmp(&vals[b]))
        .expect("grid");
    let (mut a, mut b) = (grid[best.saturating_sub(1)], grid[(best + 1).min(steps)]);
    let phi = (5f64.sqrt() - 1.0) / 2.0;
    let mut x1 = b - phi * (b - a);
    let mut x2 = a + phi * (b - a);
    let (mut f1, mut f2) = (nll(x1), nll(x2));
    let mut it = 0;
    while b - a > 1e-7 && it < 200 {
        it += 1;
        if f1 <= f2 {
            b = x2;
            x2 = x1;
            f2 = f1;
            x1 = b - phi * (b - a);
            f1 = nll(x1);
        } else {
            a = x1;
            x1 = x2;
            f1 = f2;
            x2 = a + phi * (b - a);
            f2 = nll(x2);
        }
    }
    let mut lk = (a + b) / 2.0;
    if vals[best] < nll(lk) {
        lk = grid[best];
    }
    let mut p = start.clone();
    p.k = lk.exp();
    Ok((p, steps + 1 + it))
}

/// One held-out prediction for EM: per order with a seen context, the
/// maximum-likelihood estimate and the bucket.
struct EmRow {
    start: u32,
    len: u8,
}

fn tune_interp(
    est: &Estimator<'_>,
    queries: &[&[WordId]],
    start: &Params,
    buckets: Option<usize>,
) -> Result<(Params, usize)> {
    let n = est.order();
    let nb = buckets.unwrap_or(1);
    if nb == 0 || nb > 64 {
        return Err(Error::Config(format!(
            "tune: --buckets {nb}: give 1 to 64 buckets"
        )));
    }
    let mut w: Vec<Vec<f64>> = if buckets.is_some() {
        let l = Lambdas::from_params(start, n)?;
        (1..=n)
            .map(|k| {
                let ws = &l.weights[k - 1];
                if ws.len() == nb {
                    ws.clone()
                } else {
                    vec![ws[0]; nb]
                }
            })
            .collect()
    } else {
        match &start.lambdas {
            Some(l) if l.len() == n => l.iter().map(|&x| vec![x]).collect(),
            _ => vec![vec![DEFAULT_LAMBDA]; n],
        }
    };
    // Flattened (order index, bucket, ml) per seen level, ascending order.
    let mut cells: Vec<(u8, u8, f64)> = Vec::new();
    let mut rows: Vec<EmRow> = Vec::with_capacity(queries.len());
    for chunk in queries.chunks(8192) {
        est.for_levels(chunk, |_, levels, _| {
            let s = cells.len() as u32;
            for (j, l) in levels.iter().enumerate() {
                if let Some(st) = l.ctx {
                    if st.count_sum > 0 {
                        let b = if nb == 1 { 0 } else { bucket(st.count_sum, nb) };
                        cells.push((j as u8, b as u8, l.c as f64 / st.count_sum as f64));
                    }
                }
            }
            rows.push(EmRow {
                start: s,
                len: (cells.len() as u32 - s) as u8,
            });
            Ok(())
        })?;
    }
    let u = 1.0 / est.vocabulary_size() as f64;
    let mut prev_ll = f64::NEG_INFINITY;
    let mut iterations = 0;
    let mut p = vec![0.0f64; n + 1];
    for it in 0..500 {
        iterations = it + 1;
        let mut num = vec![vec![0.0f64; nb]; n];
        let mut den = vec![vec![0.0f64; nb]; n];
        let mut ll = 0.0;
        for r in &rows {
            let cs = &cells[r.start as usize..r.start as usize + r.len as usize];
            // Forward: p[i] is the probability after the first i cells.
            p[0] = u;
            for (i, &(j, b, ml)) in cs.iter().enumerate() {
                let lam = w[j as usize][b as usize];
                p[i + 1] = lam * ml + (1.0 - lam) * p[i];
            }
            let top = p[cs.len()];
            ll += top.ln();
            // Backward: posterior of reaching each cell and taking its estimate.
            let mut reach = 1.0;
            for i in (0..cs.len()).rev() {
                let (j, b, ml) = cs[i];
                let lam = w[j as usize][b as usize];
                let take = reach * lam * ml / p[i + 1];
                num[j as usize][b as usize] += take;
                den[j as usize][b as usize] += reach;
                reach *= (1.0 - lam) * p[i] / p[i + 1];
            }
        }
        for j in 0..n {
            for b in 0..nb {
                if den[j][b] > 0.0 {
                    w[j][b] = (num[j][b] / den[j][b]).clamp(1e-6, 1.0 - 1e-6);
                }
            }
        }
        if prev_ll.is_finite() && (ll - prev_ll).abs() <= 1e-9 * ll.abs() {
            break;
        }
        prev_ll = ll;
    }
    let mut out = start.clone();
    if buckets.is_some() {
        out.bucket_lambdas = Some(w);
        out.lambdas = None;
    } else {
        out.lambdas = Some(w.into_iter().map(|x| x[0]).collect());
        out.bucket_lambdas = None;
    }
    Ok((out, iterations))
}
