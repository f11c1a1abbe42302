//! [`Level`]: what one level of a prediction gives the estimators' formulas
//! (kept apart so that the formulas need nothing of the estimator).

use crate::store::ContextStats;

/// What one prediction needs at context length j (order j + 1): the
/// counts of h_j·w and the statistics of h_j, h_j being the last j words
/// of the context.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Level {
    /// Raw count c(h_j w).
    pub c: u64,
    /// Left-type count a(h_j w).
    pub a: u64,
    /// Statistics of h_j (`None`: h_j has no children).
    pub ctx: Option<ContextStats>,
    /// c(h_j) as an n-gram (for `stupid`; T at j = 0).
    pub hc: u64,
}
