//! Katz's probabilities from an [`Estimator`]: the formulas of
//! [`super::katz`] over the store's counts, with the per-context facts
//! cached.

use crate::error::Result;
use crate::key::Key;
use crate::words::WordId;

use super::katz::{KatzCtx, KatzOrder, EPS};
use super::level::Level;
use super::Estimator;

impl Estimator<'_> {
    /// Katz's P(w|h) over the levels of one prediction.
    pub(crate) fn katz(&self, o: &[KatzOrder], full: &[WordId], levels: &[Level]) -> Result<f64> {
        self.katz_at(o, full, levels, levels.len() - 1)
    }

    /// P(w) at the unigram level for a word seen `c` times.
    pub(crate) fn katz_unigram(&self, o: &KatzOrder, c: u64) -> f64 {
        let zeros = self.v - self.root.types as f64;
        let t = self.root.count_sum as f64;
        if c > 0 {
            let pstar = o.disc(c) * c as f64 / t;
            if zeros > 0.0 {
                pstar
            } else {
                pstar + o.root_free / self.v
            }
        } else {
            o.root_free / zeros.max(1.0)
        }
    }

    fn katz_at(&self, o: &[KatzOrder], full: &[WordId], levels: &[Level], j: usize) -> Result<f64> {
        let l = levels[j];
        if j == 0 {
            return Ok(self.katz_unigram(&o[0], l.c));
        }
        let s = match l.ctx {
            Some(s) if s.count_sum > 0 => s,
            _ => return self.katz_at(o, full, levels, j - 1),
        };
        if l.c > 0 {
            let pstar = o[j].disc(l.c) * l.c as f64 / s.count_sum as f64;
            if (s.types as f64) < self.v {
                return Ok(pstar);
            }
            let kc = self.katz_context(o, full, levels, j)?;
            if kc.spread {
                return Ok(pstar + kc.f * self.katz_at(o, full, levels, j - 1)?);
            }
            return Ok(pstar);
        }
        let kc = self.katz_context(o, full, levels, j)?;
        if kc.f <= EPS {
            return Ok(0.0);
        }
        let lower = match kc.lower {
            Some(i) => self.katz_at(o, full, levels, i)?,
            None => 1.0 / self.v,
        };
        Ok(kc.f * lower / kc.den)
    }

    /// F(h_j) and where its unseen words get their shares, cached.
    fn katz_context(
        &self,
        o: &[KatzOrder],
        full: &[WordId],
        levels: &[Level],
        j: usize,
    ) -> Result<KatzCtx> {
        let nl = full.len();
        let h = &full[nl - 1 - j..nl - 1];
        let key = Key::new(h);
        if let Some(kc) = self.katz_ctx.borrow().get(&key) {
            return Ok(*kc);
        }
        let s = levels[j].ctx.expect("katz_context of a seen context");
        let kids = self.child_map(h)?;
        let mut freed = 0.0;
        for &(c, _) in kids.list.iter().map(|e| &e.1) {
            freed += (1.0 - o[j].disc(c)) * c as f64;
        }
        let f = freed / s.count_sum as f64;
        let mut kc = KatzCtx {
            f,
            lower: None,
            den: 1.0,
            spread: false,
        };
        if f > EPS {
            if (s.types as f64) < self.v {
                let mut found = false;
                let mut buf = Vec::new();
                for i in (0..j).rev() {
                    let hi = &h[j - i..];
                    let cl = self.context_levels(hi)?;
                    let mut sum = 0.0;
                    for &v in kids.list.iter().map(|e| &e.0) {
                        sum += self.eval_mapped(&cl, v, &mut buf)?.0;
                    }
                    let den = 1.0 - sum;
                    if den > EPS {
                        kc.lower = Some(i);
                        kc.den = den;
                        found = true;
                        break;
                    }
                }
                if !found {
                    let den = 1.0 - s.types as f64 / self.v;
                    if den > EPS {
                        kc.den = den;
                    } else {
                        kc.spread = true;
                    }
                }
            } else {
                kc.spread = true;
            }
        }
        let mut cache = self.katz_ctx.borrow_mut();
        if cache.len() > 1 << 20 {
            cache.clear();
        }
        cache.insert(key, kc);
        Ok(kc)
    }
}
