//! The free parameters of the methods.

use serde::{Deserialize, Serialize};

/// The free parameters of the methods. Each method reads only its own;
/// `Params::default()` gives the documented defaults.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Params {
    /// `add-k`: the added count k (> 0). Default 1 (Laplace).
    pub k: f64,
    /// `stupid`: the back-off factor α. Default 0.4 (Brants et al. 2007).
    pub alpha: f64,
    /// `interp`: the weight λ of orders 1..N, each in [0, 1]. Default 0.5
    /// for every order (the starting point of `tune`).
    pub lambdas: Option<Vec<f64>>,
    /// `interp`, conditional: weights per order (outer, 1..N) and per bucket
    /// of the context's count C(h) (inner): bucket b holds C(h) in
    /// [2^b, 2^(b+1)), the last bucket everything above. Overrides `lambdas`.
    pub bucket_lambdas: Option<Vec<Vec<f64>>>,
    /// `katz`: the largest count that is discounted, K. Default 5; lowered
    /// per order where Good-Turing is undefined or out of range.
    pub katz_k: usize,
    /// `mkn` (D1, D2, D3+), `kn` and `absolute` (the first value): discounts
    /// used only where the data leave one undefined or out of range.
    pub fallback_discounts: Option<Vec<f64>>,
}

impl Default for Params {
    fn default() -> Self {
        Params {
            k: 1.0,
            alpha: 0.4,
            lambdas: None,
            bucket_lambdas: None,
            katz_k: 5,
            fallback_discounts: None,
        }
    }
}
