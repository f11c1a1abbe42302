//! The methods one order at a time, for writing them in back-off form
//! (see `crate::model`, which freezes a store into a model file).
//!
//! A back-off model keeps, for every kept n-gram h·w, q(h·w) = P(w | h),
//! and for every kept context h a weight β(h); an n-gram that is not kept
//! gets β(h)·P(w | h'). This module gives, for each method, the two pieces
//! from the same formulas the [`Estimator`] evaluates:
//!
//! * the interpolated methods (`mkn`, `kn`, `absolute`, `witten-bell`,
//!   `interp`): P_k(w | h) = term(h·w) + γ(h)·P_{k−1}(w | h'), so q(h·w) is
//!   one step of the recursion from the lower-order probability
//!   ([`Estimator::step`]) and β(h) = γ(h) ([`Estimator::interpolation_weight`]),
//!   which is that step for a word with count 0 and P_{k−1} = 1;
//! * `katz` is a back-off method already: q(h·w) = d_r·r/C(h)
//!   ([`Estimator::katz_seen`]), β(h) = F(h)/(1 − Σ_{v child of h} P(v | h'))
//!   with F(h) from [`Estimator::katz_freed`];
//! * `stupid`: q(h·w) = c(h·w)/c(h), β = α for every context;
//! * `add-k` and `mle` are refused ([`Estimator::backoff_kind`] says why).

use crate::error::{Error, Result};
use crate::store::ContextStats;

use super::estimator::Model;
use super::{Estimator, Level, Method};

/// How a method is written in back-off form.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BackoffKind {
    /// Interpolated: β(h) = γ(h), exact.
    Interpolated,
    /// Katz back-off.
    Katz,
    /// Stupid back-off: scores, β = α everywhere (also for contexts that
    /// are not kept).
    Stupid(f64),
}

impl Estimator<'_> {
    /// How this method is written in back-off form, or why it cannot be.
    pub fn backoff_kind(&self) -> Result<BackoffKind> {
        Ok(match &self.model {
            Model::Mkn(_)
            | Model::Kn(_)
            | Model::Absolute(_)
            | Model::WittenBell
            | Model::Interp(_) => BackoffKind::Interpolated,
            Model::Katz(_) => BackoffKind::Katz,
            Model::Stupid(a) => BackoffKind::Stupid(*a),
            Model::AddK(_) => {
                return Err(Error::Config(
                    "add-k cannot be frozen: it is not a back-off model. It spreads k over every word at the longest context only, so the probability of an unseen word depends on C(h) and |V| there and is not a weight times a shorter context's probability; use mkn, kn, absolute, witten-bell, katz or interp".into(),
                ))
            }
            Model::Mle => {
                return Err(Error::Config(
                    "mle cannot be frozen: it is not a back-off model. It gives 0 to every word unseen after the longest seen context, so no back-off weight could pass mass to a shorter context; use mkn, kn, absolute, witten-bell, katz or interp".into(),
                ))
            }
        })
    }

    /// One step of an interpolated method at context length `j` (order
    /// j + 1): P_{j+1}(w | h) from the raw and left-type counts `c`, `a` of
    /// h·w, the statistics `ctx` of h (`None`: h has no children), c(h) as
    /// an n-gram `hc` and `lower` = P_j(w | h') (1/|V| at j = 0). For the
    /// other methods it returns `lower`.
    pub fn step(
        &self,
        j: usize,
        c: u64,
        a: u64,
        ctx: Option<ContextStats>,
        hc: u64,
        lower: f64,
    ) -> f64 {
        let l = Level { c, a, ctx, hc };
        match &self.model {
            Model::Mkn(d) => super::kneser_ney::mkn_step(&d[j], &l, lower),
            Model::Kn(d) => super::kneser_ney::kn_step(d[j], &l, false, lower),
            Model::Absolute(d) => super::kneser_ney::kn_step(d[j], &l, true, lower),
            Model::WittenBell => super::witten_bell::witten_bell_step(&l, lower),
            Model::Interp(lam) => lam.step(j, &l, lower),
            _ => lower,
        }
    }

    /// γ(h) of an interpolated method for a context of length `j`: the
    /// weight of the lower order (1 where h has no children).
    pub fn interpolation_weight(&self, j: usize, ctx: Option<ContextStats>, hc: u64) -> f64 {
        self.step(j, 0, 0, ctx, hc, 1.0)
    }

    /// Katz: P*(w | h) = d_r·r/C(h) for h·w seen `r` times after a context
    /// of length `j ≥ 1` with C(h) = `count_sum`; at `j = 0`, P(w) for a
    /// word seen `r` times (0 for the unseen `<unk>`).
    pub fn katz_seen(&self, j: usize, r: u64, count_sum: u64) -> f64 {
        let Model::Katz(o) = &self.model else {
            return 0.0;
        };
        if j == 0 {
            return self.katz_unigram(&o[0], r);
        }
        o[j].disc(r) * r as f64 / count_sum as f64
    }

    /// Katz: (1 − d_r)·r for a child seen `r` times after a context of
    /// length `j ≥ 1`; F(h) is their sum over h's children divided by C(h).
    pub fn katz_freed(&self, j: usize, r: u64) -> f64 {
        let Model::Katz(o) = &self.model else {
            return 0.0;
        };
        (1.0 - o[j].disc(r)) * r as f64
    }

    /// |V| as a float.
    pub fn vocabulary_f64(&self) -> f64 {
        self.v
    }

    /// The method as the estimator was built (name for reports).
    pub fn is_katz(&self) -> bool {
        self.method == Method::Katz
    }
}
