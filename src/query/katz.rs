//! Katz back-off with Good-Turing discounts (`katz`; Katz 1987, with the
//! Good-Turing estimate of Good 1953), over raw counts at every order.
//!
//! For an n-gram seen r times, 0 < r ≤ K (default 5), with n_r the raw
//! count-of-counts of its order:
//!
//! ```text
//! r* = (r + 1) n_{r+1} / n_r
//! d_r = (r*/r − (K+1) n_{K+1}/n_1) / (1 − (K+1) n_{K+1}/n_1),   d_r = 1 for r > K
//! P*(w|h) = d_r · r / C(h)
//! ```
//!
//! A seen word gets P*(w|h). The mass freed at h, F(h) = 1 − Σ P*(v|h)
//! over the children v of h, goes to the words unseen at h in proportion to
//! the lower order: P(w|h) = F(h) · P(w|h') / (1 − Σ_{c(hv)>0} P(v|h')).
//! Where that denominator is at most 1e-12 the next shorter context is used
//! instead (h'', …, and finally the uniform 1/|V|). Where F(h) ≤ 1e-12 an
//! unseen word gets 0. An unseen context (C(h) = 0) backs off unchanged.
//! At the unigram level the freed mass is shared equally by the words of V
//! with zero count (at least `<unk>` unless the text held `<unk>`; if every
//! word of V was seen, by all of V).
//!
//! Where Good-Turing is undefined at an order (an n_r it divides by is 0,
//! or the common denominator is 0) or some d_r falls outside (0, 1], K is
//! lowered for that order to the largest value where every d_r is valid
//! (K = 0: no discount) and the K used is reported.
//!
//! One case the rule above leaves open: a context h after which every word
//! of V was seen, with F(h) > 0, has no unseen word to give its mass to;
//! there the mass is added to every word in proportion to the lower order,
//! P(w|h) = P*(w|h) + F(h) · P(w|h'), which keeps the sum at 1.

use crate::store::{OrderStats, StoreMeta};

pub use crate::predict::EPS;

/// The Good-Turing constants of one order.
#[derive(Clone, Debug, PartialEq)]
pub struct KatzOrder {
    /// The K used (may be below the requested one).
    pub k: usize,
    /// `d[r]` for r = 1..=k (`d[0]` is 1, unused).
    pub d: Vec<f64>,
    /// Unigram order only: the mass F freed at the empty context.
    pub root_free: f64,
}

impl KatzOrder {
    /// d_r (1 above K).
    #[inline]
    pub fn disc(&self, r: u64) -> f64 {
        if r >= 1 && (r as usize) <= self.k {
            self.d[r as usize]
        } else {
            1.0
        }
    }
}

/// d_1..d_K of one order from its raw count-of-counts, or why Good-Turing is
/// undefined or out of range at this K.
pub fn good_turing(o: &OrderStats, k: usize) -> std::result::Result<Vec<f64>, String> {
    let mut d = vec![1.0];
    if k == 0 {
        return Ok(d);
    }
    let n = |r: usize| o.raw(r as u64) as f64;
    for r in 1..=k {
        if n(r) == 0.0 {
            return Err(format!("n{r} = 0"));
        }
    }
    let x = (k as f64 + 1.0) * n(k + 1) / n(1);
    if 1.0 - x == 0.0 {
        return Err(format!("1 − (K+1) n{}/n1 = 0", k + 1));
    }
    for r in 1..=k {
        let rstar = (r as f64 + 1.0) * n(r + 1) / n(r);
        let dr = (rstar / r as f64 - x) / (1.0 - x);
        if !(dr > 0.0 && dr <= 1.0) {
            return Err(format!("d{r} = {dr:.6} is outside (0, 1]"));
        }
        d.push(dr);
    }
    Ok(d)
}

/// The largest K ≤ `k_req` at which every d_r of one order is valid, its
/// d_r (as [`good_turing`]), and why `k_req` itself was not usable (`None`
/// if it was).
pub fn usable_k(o: &OrderStats, k_req: usize) -> (usize, Vec<f64>, Option<String>) {
    let mut first_err = None;
    for k in (0..=k_req).rev() {
        match good_turing(o, k) {
            Ok(d) => return (k, d, first_err),
            Err(e) => {
                first_err.get_or_insert(e);
            }
        }
    }
    (0, vec![1.0], first_err)
}

/// The constants of every order with K lowered where needed (each lowering
/// is added to `notes`).
pub fn katz_orders(meta: &StoreMeta, k_req: usize, notes: &mut Vec<String>) -> Vec<KatzOrder> {
    let mut out = Vec::new();
    for o in &meta.orders {
        let (k, d, first_err) = usable_k(o, k_req);
        let chosen = (k, d);
        if chosen.0 < k_req {
            notes.push(format!(
                "katz: order {}: Good-Turing with K = {k_req} is not usable ({}); K lowered to {}{}",
                o.order,
                first_err.unwrap_or_default(),
                chosen.0,
                if chosen.0 == 0 { " (no discount)" } else { "" }
            ));
        }
        let mut ko = KatzOrder {
            k: chosen.0,
            d: chosen.1,
            root_free: 0.0,
        };
        if o.order == 1 {
            let mut freed = 0.0;
            for &(r, nr) in &o.coc_raw {
                freed += nr as f64 * (1.0 - ko.disc(r)) * r as f64;
            }
            ko.root_free = freed / meta.root.count_sum.max(1) as f64;
        }
        out.push(ko);
    }
    out
}

/// What Katz needs of one context h (C(h) > 0).
#[derive(Clone, Copy, Debug)]
pub(crate) struct KatzCtx {
    /// F(h).
    pub(super) f: f64,
    /// The context length whose distribution the unseen words follow
    /// (`None`: the uniform distribution).
    pub(super) lower: Option<usize>,
    /// 1 − Σ over the children v of h of P(v | that context).
    pub(super) den: f64,
    /// Every word of V is a child of h: the freed mass is spread.
    pub(super) spread: bool,
}
