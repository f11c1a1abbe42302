//! The weights of a blend from held-out text: EM for the weights of a
//! mixture (Dempster, Laird & Rubin 1977), as Jelinek & Mercer (1980) use
//! it for language models.
//!
//! The held-out text is scored by every part alone, as `quern score`
//! scores it (a sentence `w1 … wm` gives the m + 1 predictions of
//! `w1 … wm </s>`, contexts cut to each part's N − 1 words, a word
//! outside a part's vocabulary scored as that part's `<unk>`). With
//! pᵢₜ the probability part i gives prediction t, one iteration is
//!
//! ```text
//! mₜ = Σᵢ λᵢ pᵢₜ        λᵢ ← (1/T) Σₜ λᵢ pᵢₜ / mₜ
//! ```
//!
//! starting from λᵢ = 1/n. The held-out log-likelihood Σₜ ln mₜ never falls
//! from one iteration to the next (the EM property), so the perplexity
//! exp(−(1/T) Σₜ ln mₜ) never rises. Stop rule: after the first iteration
//! whose perplexity is lower than the one before by less than
//! [`RELATIVE_TOLERANCE`] of it, or after [`MAX_ITERATIONS`] iterations.
//! The weights sum to 1 (within rounding: each is a mean of posteriors
//! that sum to 1 per prediction).
//!
//! A prediction that every part gives probability 0 says nothing about
//! the weights and would make the perplexity infinite: it is left out
//! (and counted).

use serde::Serialize;

use crate::error::{Error, Result};
use crate::predict::Predictor;
use crate::words::WordId;

/// The most EM iterations.
pub const MAX_ITERATIONS: usize = 500;

/// EM stops once an iteration lowers the perplexity by less than this
/// fraction of it.
pub const RELATIVE_TOLERANCE: f64 = 1e-9;

/// One EM iteration's result (iteration 0: the uniform start).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Iteration {
    /// 0 for the start, then 1, 2, …
    pub iteration: usize,
    /// The weights after it.
    pub weights: Vec<f64>,
    /// The held-out perplexity with those weights.
    pub perplexity: f64,
}

/// Why EM stopped.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Stop {
    /// The perplexity fell by less than [`RELATIVE_TOLERANCE`] of itself.
    Converged,
    /// [`MAX_ITERATIONS`] were run.
    IterationLimit,
}

/// The fitted weights and how they were found.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Fit {
    /// The final weights, in the parts' order.
    pub weights: Vec<f64>,
    /// Every iteration, the start first.
    pub iterations: Vec<Iteration>,
    /// Why it stopped.
    pub stop: Stop,
    /// Each part's held-out perplexity alone, over the same predictions
    /// (`None`: infinite, the part gives some prediction 0).
    pub alone: Vec<Option<f64>>,
    /// The predictions fitted on.
    pub predictions: u64,
    /// Predictions left out: every part gives them probability 0.
    pub left_out: u64,
}

impl Fit {
    /// The blend's held-out perplexity with the final weights.
    pub fn perplexity(&self) -> f64 {
        self.iterations.last().map_or(f64::NAN, |i| i.perplexity)
    }
}

/// The probability every part gives every prediction of the padded
/// sentences (`<s> w1 … wm </s>`): `out[i][t]`, in the sentences' order.
pub fn part_probabilities(
    parts: &[&dyn Predictor],
    sentences: &[Vec<WordId>],
) -> Result<Vec<Vec<f64>>> {
    const BATCH: usize = 8192;
    let mut out: Vec<Vec<f64>> = vec![Vec::new(); parts.len()];
    let mut queries: Vec<&[WordId]> = Vec::with_capacity(BATCH);
    let mut flush = |queries: &mut Vec<&[WordId]>| -> Result<()> {
        for (p, o) in parts.iter().zip(out.iter_mut()) {
            o.extend(p.prob_batch(queries)?.into_iter().map(|x| x.p));
        }
        queries.clear();
        Ok(())
    };
    // Every query carries the whole sentence so far: each part cuts the
    // context to its own order.
    for s in sentences {
        for i in 1..s.len() {
            queries.push(&s[..=i]);
            if queries.len() == BATCH {
                flush(&mut queries)?;
            }
        }
    }
    flush(&mut queries)?;
    Ok(out)
}

/// EM for the mixture weights over `probs[i][t]` (part i, prediction t);
/// see the module doc.
pub fn fit_weights(probs: &[Vec<f64>]) -> Result<Fit> {
    let n = probs.len();
    if n == 0 {
        return Err(Error::Config("a blend needs at least one part".into()));
    }
    let t_all = probs[0].len();
    // The predictions some part gives a probability above 0.
    let kept: Vec<usize> = (0..t_all)
        .filter(|&t| probs.iter().any(|p| p[t] > 0.0))
        .collect();
    if kept.is_empty() {
        return Err(Error::Config(
            "the held-out text has no prediction that any part gives a probability above 0".into(),
        ));
    }
    let tn = kept.len() as f64;
    let perplexity = |w: &[f64]| -> f64 {
        let ll: f64 = kept
            .iter()
            .map(|&t| (0..n).map(|i| w[i] * probs[i][t]).sum::<f64>().ln())
            .sum();
        (-ll / tn).exp()
    };
    let alone: Vec<Option<f64>> = probs
        .iter()
        .map(|p| {
            if kept.iter().any(|&t| p[t] <= 0.0) {
                None
            } else {
                let ll: f64 = kept.iter().map(|&t| p[t].ln()).sum();
                Some((-ll / tn).exp())
            }
        })
        .collect();
    let mut w = vec![1.0 / n as f64; n];
    let mut iterations = vec![Iteration {
        iteration: 0,
        weights: w.clone(),
        perplexity: perplexity(&w),
    }];
    let mut stop = Stop::IterationLimit;
    for it in 1..=MAX_ITERATIONS {
        let mut post = vec![0.0; n];
        for &t in &kept {
            let m: f64 = (0..n).map(|i| w[i] * probs[i][t]).sum();
            for i in 0..n {
                post[i] += w[i] * probs[i][t] / m;
            }
        }
        w = post.iter().map(|s| s / tn).collect();
        let ppl = perplexity(&w);
        let before = iterations.last().expect("the start").perplexity;
        iterations.push(Iteration {
            iteration: it,
            weights: w.clone(),
            perplexity: ppl,
        });
        if before - ppl < RELATIVE_TOLERANCE * before {
            stop = Stop::Converged;
            break;
        }
    }
    Ok(Fit {
        weights: w,
        iterations,
        stop,
        alone,
        predictions: kept.len() as u64,
        left_out: (t_all - kept.len()) as u64,
    })
}
