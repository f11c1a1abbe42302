//! Interpolated Witten-Bell smoothing (`witten-bell`; Witten & Bell 1991,
//! their method C, used as an interpolated n-gram estimator).
//!
//! With raw counts at every order, from P_0(w) = 1/|V| upwards:
//!
//! ```text
//! C(h) = 0:  P_k(w|h) = P_{k-1}(w|h')
//! else:      P_k(w|h) = (c(hw) + T(h) · P_{k-1}(w|h')) / (C(h) + T(h))
//! ```
//!
//! T(h), the number of distinct words seen after h, stands in for the count
//! of "a new word follows h": the lower order gets T/(C + T) of the mass.

use super::level::Level;

/// `witten-bell` over the levels of one prediction.
pub(crate) fn witten_bell(levels: &[Level], v: f64) -> f64 {
    let mut p = 1.0 / v;
    for l in levels {
        p = witten_bell_step(l, p);
    }
    p
}

/// One order of `witten-bell`: P_k(w|h) from the level of h·w and
/// P_{k−1}(w|h').
#[inline]
pub(crate) fn witten_bell_step(l: &Level, lower: f64) -> f64 {
    let Some(s) = l.ctx else { return lower };
    if s.count_sum == 0 {
        return lower;
    }
    let (c, t) = (s.count_sum as f64, s.types as f64);
    (l.c as f64 + t * lower) / (c + t)
}
