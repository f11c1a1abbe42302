//! The unsmoothed and simplest estimators: additive smoothing (`add-k`),
//! maximum likelihood (`mle`) and stupid back-off (`stupid`).
//!
//! * `add-k` (Lidstone; k = 1 is Laplace): at the order min(N, |h| + 1)
//!   only, P(w|h) = (c(hw) + k) / (C(h) + k |V|); an unseen context gives
//!   the uniform 1/|V|.
//! * `mle`: c(hw)/C(h) at the longest suffix h of the context with C(h) > 0;
//!   0 where c(hw) = 0 there.
//! * `stupid` (Brants, Popat, Xu, Och & Dean 2007): S(w|h) = c(hw)/c(h) if
//!   c(hw) > 0, c(h) being the count of the context as an n-gram, else
//!   α · S(w|h'); S(w) = c(w)/T. Scores, not probabilities: they do not sum
//!   to 1.

use super::level::Level;

/// Lidstone's estimate (c + k) / (C + k·|V|) for a count `c` of h·w, a
/// context sum `context_sum` = C(h) and a vocabulary of `v` words.
pub fn lidstone(c: u64, context_sum: u64, k: f64, v: f64) -> f64 {
    (c as f64 + k) / (context_sum as f64 + k * v)
}

/// `add-k` over the levels of one prediction (only the last level is used).
pub(crate) fn add_k(k: f64, levels: &[Level], v: f64) -> f64 {
    let l = levels.last().expect("at least one level");
    lidstone(l.c, l.ctx.map_or(0, |s| s.count_sum), k, v)
}

/// `mle` over the levels of one prediction.
pub(crate) fn mle(levels: &[Level]) -> f64 {
    for l in levels.iter().rev() {
        if let Some(s) = l.ctx {
            if s.count_sum > 0 {
                return l.c as f64 / s.count_sum as f64;
            }
        }
    }
    0.0
}

/// `stupid` over the levels of one prediction.
pub(crate) fn stupid(alpha: f64, levels: &[Level]) -> f64 {
    let mut factor = 1.0;
    for l in levels.iter().rev() {
        if l.c > 0 && l.hc > 0 {
            return factor * l.c as f64 / l.hc as f64;
        }
        factor *= alpha;
    }
    0.0
}
