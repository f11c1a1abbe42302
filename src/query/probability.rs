//! Probabilities from an [`Estimator`]: the levels of a prediction (its
//! counts and context statistics at every context length) read in batches,
//! and the method's formula over them.

use super::cache::{ChildMap, CtxInfo};
use super::estimator::Model;
use super::level::Level;
use super::{kneser_ney, simple, witten_bell, Estimator, Prob};
use crate::error::{Error, Result};
use crate::words::WordId;

impl Estimator<'_> {
    // ---- probabilities -------------------------------------------------------

    /// P(word | context): `context` is cut to its last N − 1 words; words
    /// outside V (in the context or predicted) count as `<unk>`.
    pub fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        let mut q = Vec::with_capacity(context.len() + 1);
        q.extend_from_slice(context);
        q.push(word);
        Ok(self.prob_batch(&[&q])?[0])
    }

    /// Many probabilities at once: each query is the context followed by the
    /// predicted word (an empty query is an error). Reads the store with
    /// batched multi-gets and caches context statistics; the fast path for
    /// scoring many n-grams.
    pub fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        let mut out = Vec::with_capacity(queries.len());
        self.for_levels(queries, |full, levels, oov| {
            let p = self.eval(full, levels)?;
            out.push(self.finish(p, levels, oov, full[full.len() - 1]));
            Ok(())
        })?;
        Ok(out)
    }

    /// Looks up the levels of many queries (context followed by the word)
    /// with batched reads and calls `f(full, levels, oov)` for each, in
    /// order: `full` is the mapped, cut query, `levels[j]` belongs to its
    /// last j context words.
    pub(crate) fn for_levels(
        &self,
        queries: &[&[WordId]],
        mut f: impl FnMut(&[WordId], &[Level], bool) -> Result<()>,
    ) -> Result<()> {
        if queries.iter().any(|q| q.is_empty()) {
            return Err(Error::Config(
                "a query needs at least the predicted word".into(),
            ));
        }
        let mut ids: Vec<WordId> = Vec::new();
        for q in queries {
            let start = q.len().saturating_sub(self.n);
            ids.extend_from_slice(&q[start..]);
        }
        self.learn_words(&mut ids)?;
        // Mapped queries: context (cut) followed by the word, one buffer.
        let mut buf: Vec<WordId> = Vec::with_capacity(queries.len() * self.n);
        let mut spans: Vec<(usize, usize, bool)> = Vec::with_capacity(queries.len());
        for q in queries {
            let (ctx, w) = q.split_at(q.len() - 1);
            let w = w[0];
            let s = buf.len();
            self.map_context(ctx, &mut buf);
            let in_v = w != self.bos && self.known(w);
            buf.push(if in_v { w } else { self.unk });
            spans.push((s, buf.len(), !in_v));
        }
        let uni = self.unigrams()?;
        // Per prediction and context length j ≥ 1: the n-gram h_j·w, then
        // the context h_j (a stored n-gram too); level 0 comes from the
        // unigram table and the empty context.
        let mut keys: Vec<&[WordId]> = Vec::with_capacity(buf.len() * 2);
        for &(s, e, _) in &spans {
            let full = &buf[s..e];
            let l = full.len() - 1;
            for j in 1..=l {
                keys.push(&full[l - j..]);
                keys.push(&full[l - j..l]);
            }
        }
        let recs = self.records(&keys)?;
        let mut at = 0;
        let mut levels = [Level::default(); crate::key::MAX_ORDER];
        let root = self.root_info();
        for &(s, e, oov) in &spans {
            let full = &buf[s..e];
            let nl = full.len();
            for j in 0..nl {
                let ((c, a), info) = if j == 0 {
                    (uni.map.get(&full[nl - 1]).copied().unwrap_or((0, 0)), root)
                } else {
                    let g = recs[at + 2 * (j - 1)];
                    let h = recs[at + 2 * (j - 1) + 1];
                    let ca = g.map_or((0, 0), |r| {
                        (
                            r.count,
                            self.left_type(r.count, r.continuation, full[nl - 1 - j]),
                        )
                    });
                    (ca, CtxInfo::of(h))
                };
                levels[j] = Level {
                    c,
                    a,
                    ctx: info.stats,
                    hc: info.hc,
                };
            }
            at += 2 * (nl - 1);
            f(full, &levels[..nl], oov)?;
        }
        Ok(())
    }

    pub(super) fn finish(&self, p: f64, levels: &[Level], oov: bool, word: WordId) -> Prob {
        let order = levels.iter().rposition(|l| l.c > 0).map_or(0, |j| j + 1);
        Prob {
            p,
            log10: p.log10(),
            order,
            oov,
            word,
        }
    }

    /// The method's formula over the levels of one prediction. `full` is
    /// the mapped context followed by the word; `levels[j]` belongs to the
    /// last j context words.
    pub(crate) fn eval(&self, full: &[WordId], levels: &[Level]) -> Result<f64> {
        Ok(match &self.model {
            Model::Mkn(d) => kneser_ney::mkn(d, levels, self.v),
            Model::Kn(d) => kneser_ney::kn(d, levels, self.v, false),
            Model::Absolute(d) => kneser_ney::kn(d, levels, self.v, true),
            Model::WittenBell => witten_bell::witten_bell(levels, self.v),
            Model::Katz(o) => self.katz(o, full, levels)?,
            Model::Interp(l) => l.eval(levels, self.v),
            Model::AddK(k) => simple::add_k(*k, levels, self.v),
            Model::Mle => simple::mle(levels),
            Model::Stupid(a) => simple::stupid(*a, levels),
        })
    }

    /// The context side of the levels of a mapped, cut context: statistics
    /// and children lists of every suffix (level 0: the empty context).
    pub(crate) fn context_levels(&self, ctx: &[WordId]) -> Result<ContextLevels> {
        let l = ctx.len();
        let hs: Vec<&[WordId]> = (0..=l).map(|j| &ctx[l - j..]).collect();
        let infos = self.ctx_infos(&hs)?;
        let mut maps = vec![None];
        for (j, h) in hs.iter().enumerate().skip(1) {
            maps.push(match infos[j].stats {
                Some(_) => Some(self.child_map(h)?),
                None => None,
            });
        }
        Ok(ContextLevels {
            ctx: ctx.to_vec(),
            infos,
            maps,
        })
    }

    /// [`Self::context_levels`] of a raw context (cut to N − 1, unknown
    /// words as `<unk>` by [`Self::map_context_ids`]).
    pub(crate) fn raw_context_levels(&self, context: &[WordId]) -> Result<ContextLevels> {
        self.context_levels(&self.map_context_ids(context)?)
    }

    /// The probability of `w` (in V) after the context of `cl`, from the
    /// children lists (no point reads).
    pub(crate) fn eval_mapped(
        &self,
        cl: &ContextLevels,
        w: WordId,
        full: &mut Vec<WordId>,
    ) -> Result<(f64, usize)> {
        let uni = self.unigrams()?.map.get(&w).copied().unwrap_or((0, 0));
        self.eval_child(cl, w, cl.ctx.len(), None, uni, full)
    }

    /// As [`Estimator::eval_mapped`], for a word that is no child of the
    /// suffixes longer than `from`, with its counts after the suffix of
    /// length `from` (`at`, looked up if `None`) and its unigram counts
    /// (`uni`) known: lookups only for the suffixes in between.
    pub(crate) fn eval_child(
        &self,
        cl: &ContextLevels,
        w: WordId,
        from: usize,
        at: Option<(u64, u64)>,
        uni: (u64, u64),
        full: &mut Vec<WordId>,
    ) -> Result<(f64, usize)> {
        let l = cl.ctx.len();
        let mut levels = [Level::default(); crate::key::MAX_ORDER];
        for (j, level) in levels.iter_mut().enumerate().take(l + 1) {
            let (c, a) = match (j, at) {
                (0, _) => uni,
                (j, _) if j > from => (0, 0),
                (j, Some(x)) if j == from => x,
                _ => cl.maps[j].as_ref().and_then(|m| m.get(w)).unwrap_or((0, 0)),
            };
            *level = Level {
                c,
                a,
                ctx: cl.infos[j].stats,
                hc: cl.infos[j].hc,
            };
        }
        full.clear();
        full.extend_from_slice(&cl.ctx);
        full.push(w);
        let p = self.eval(full, &levels[..=l])?;
        let order = levels[..=l]
            .iter()
            .rposition(|x| x.c > 0)
            .map_or(0, |j| j + 1);
        Ok((p, order))
    }

    /// Maps raw context ids (cut to N − 1, unknown words to `<unk>`).
    pub fn map_context_ids(&self, ctx: &[WordId]) -> Result<Vec<WordId>> {
        let start = ctx.len().saturating_sub(self.n - 1);
        let mut ids = ctx[start..].to_vec();
        self.learn_words(&mut ids)?;
        let mut out = Vec::new();
        self.map_context(ctx, &mut out);
        Ok(out)
    }

    /// The whole distribution P(· | context) over V, in id order (|V|
    /// evaluations from the children lists of the context's suffixes).
    pub fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        let cl = self.raw_context_levels(context)?;
        let vocab = &self.unigrams()?.vocab;
        let mut full = Vec::new();
        let mut out = Vec::with_capacity(vocab.len());
        for &w in vocab {
            out.push((w, self.eval_mapped(&cl, w, &mut full)?.0));
        }
        Ok(out)
    }
}

/// The context side of the levels of one (mapped, cut) context.
pub(crate) struct ContextLevels {
    pub(crate) ctx: Vec<WordId>,
    pub(crate) infos: Vec<CtxInfo>,
    pub(crate) maps: Vec<Option<ChildMap>>,
}

impl ContextLevels {
    /// Whether `w` is a child of the suffix of `from` words or of a longer
    /// one (the levels `from..`).
    pub(crate) fn child_from(&self, from: usize, w: WordId) -> bool {
        self.maps[from..].iter().flatten().any(|m| m.contains(w))
    }
}
