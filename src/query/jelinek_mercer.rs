//! Linear interpolation (`interp`; Jelinek & Mercer 1980), recursive:
//!
//! ```text
//! C(h) = 0:  P_k(w|h) = P_{k-1}(w|h')
//! else:      P_k(w|h) = λ · c(hw)/C(h) + (1 − λ) · P_{k-1}(w|h')
//! ```
//!
//! from P_0(w) = 1/|V|. λ is one weight per order k, or, for conditional
//! interpolation, one per order and bucket of C(h): bucket b holds
//! 2^b ≤ C(h) < 2^(b+1), the last bucket everything above. The weights are
//! fitted on held-out text by expectation-maximisation ([`super::tune`]).

use crate::error::{Error, Result};

use super::level::Level;
use super::Params;

/// The weights of every order (outer, index k − 1) and bucket (inner).
#[derive(Clone, Debug, PartialEq)]
pub struct Lambdas {
    /// `weights[k − 1][b]`: λ of order k, bucket b.
    pub weights: Vec<Vec<f64>>,
}

/// The default weight of every order: the starting point of `tune`.
pub const DEFAULT_LAMBDA: f64 = 0.5;

/// The bucket of a context count C(h) ≥ 1 among `buckets`.
#[inline]
pub fn bucket(count_sum: u64, buckets: usize) -> usize {
    let b = (63 - count_sum.max(1).leading_zeros()) as usize;
    b.min(buckets - 1)
}

impl Lambdas {
    /// From `bucket_lambdas`, else `lambdas`, else the default for every
    /// order; checks the shape and that each weight is in [0, 1].
    pub fn from_params(p: &Params, n: usize) -> Result<Lambdas> {
        let weights: Vec<Vec<f64>> = if let Some(b) = &p.bucket_lambdas {
            b.clone()
        } else if let Some(l) = &p.lambdas {
            l.iter().map(|&x| vec![x]).collect()
        } else {
            vec![vec![DEFAULT_LAMBDA]; n]
        };
        if weights.len() != n {
            return Err(Error::Config(format!(
                "interp: {} weights given for a store of order {n} (one per order 1..{n})",
                weights.len()
            )));
        }
        for (k, w) in weights.iter().enumerate() {
            if w.is_empty() {
                return Err(Error::Config(format!(
                    "interp: order {} has no weight",
                    k + 1
                )));
            }
            if let Some(x) = w.iter().find(|x| !(**x >= 0.0 && **x <= 1.0)) {
                return Err(Error::Config(format!(
                    "interp: the weight {x} of order {} is outside [0, 1]",
                    k + 1
                )));
            }
        }
        Ok(Lambdas { weights })
    }

    /// The weight of order `k` (1-based) at context count `count_sum`.
    #[inline]
    pub fn get(&self, k: usize, count_sum: u64) -> f64 {
        let w = &self.weights[k - 1];
        if w.len() == 1 {
            w[0]
        } else {
            w[bucket(count_sum, w.len())]
        }
    }

    /// `interp` over the levels of one prediction.
    pub(crate) fn eval(&self, levels: &[Level], v: f64) -> f64 {
        let mut p = 1.0 / v;
        for (j, l) in levels.iter().enumerate() {
            p = self.step(j, l, p);
        }
        p
    }

    /// One order of `interp` (context length `j`): P_{j+1}(w|h) from the
    /// level of h·w and P_j(w|h').
    #[inline]
    pub(crate) fn step(&self, j: usize, l: &Level, lower: f64) -> f64 {
        let Some(s) = l.ctx else { return lower };
        if s.count_sum == 0 {
            return lower;
        }
        let lam = self.get(j + 1, s.count_sum);
        lam * l.c as f64 / s.count_sum as f64 + (1.0 - lam) * lower
    }
}
