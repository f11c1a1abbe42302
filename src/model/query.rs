//! Queries of a frozen model: probabilities (one, a batch, running text
//! with the matched context carried from one prediction to the next), the
//! exact top K next words, whole distributions.
//!
//! For a context h (cut to N − 1 words, words outside V as `<unk>`) and a
//! word w, with h_j the last j words of h and M the length of the longest
//! kept h_j:
//!
//! ```text
//! P(w | h) = q(h_j·w) · β(h_{j+1}) · … · β(h_M) · β0^(|h| − M)
//! ```
//!
//! where h_j·w is the longest kept n-gram of that form (j ≥ 0; every word
//! of V is a kept unigram) and β0 is the weight of a context that is not
//! kept (1; α for `stupid`). Finding h_j·w needs one search per order among
//! the children of h_j, whose entries are known: in running text the kept
//! suffixes of the next context are exactly the n-grams just found, so a
//! [`State`] carries them and a prediction costs about one search per
//! matched order.

use crate::error::{Error, Result};
use crate::key::MAX_ORDER;
use crate::predict::{Next, Prob};
use crate::words::WordId;

use super::bytes::prefetch;
use super::file::Model;
use super::seek::Seek;

/// The kept suffixes of a context: what a prediction needs of it, and what
/// it leaves for the next one in running text.
#[derive(Clone, Copy, Debug, Default)]
pub struct State {
    /// The context as raw ids (oldest first), at most N − 1.
    ctx: [WordId; MAX_ORDER],
    len: usize,
    /// `nodes[j − 1]`: the entry of order j of the context's last j words,
    /// for j = 1..=m.
    pub(super) nodes: [u32; MAX_ORDER],
    m: usize,
}

/// One prediction being searched by [`Model::extend`].
struct Job<'a> {
    /// The state of its context.
    st: &'a State,
    /// The word (raw id), its index (`<unk>`'s outside V), and whether it
    /// is outside V.
    word: WordId,
    x: u32,
    oov: bool,
    /// What the search finds: x and the entries of h_j·x, j = 1..=matched.
    nodes: [u32; MAX_ORDER],
    matched: usize,
    /// Where the search of each level stands.
    seeks: [Seek; MAX_ORDER],
}

impl<'a> Job<'a> {
    /// The job of predicting `word` (index `index`, if in the model) after
    /// the context of `st`.
    fn new(m: &Model, st: &'a State, word: WordId, index: Option<u32>) -> Job<'a> {
        let in_v = index.filter(|&x| x != m.bos_index());
        Job {
            st,
            word,
            x: in_v.unwrap_or(m.unk_index()),
            oov: in_v.is_none(),
            nodes: [0; MAX_ORDER],
            matched: 0,
            seeks: [Seek::Absent; MAX_ORDER],
        }
    }

    /// Prefetches what the next step of each of the first `levels`
    /// searches reads.
    #[inline(always)]
    fn prefetch_seeks(&self, m: &Model, levels: usize) {
        for j in 1..=levels {
            if let Some((a, z)) = self.seeks[j].next_read() {
                let words = &m.sections(j + 1).words;
                prefetch(m.bytes(), words.byte_of(a));
                if let Some(z) = z {
                    prefetch(m.bytes(), words.byte_of(z));
                }
            }
        }
    }
}

/// Predictions searched together by [`Model::prob_batch`]: a batch is cut
/// into this many runs of consecutive queries, which go in step, so that
/// the cache misses of one run overlap those of the others.
const RUNS: usize = 4;

impl Model {
    /// Highest order N.
    pub fn order(&self) -> usize {
        self.meta().order
    }

    /// |V|.
    pub fn vocabulary_size(&self) -> u64 {
        self.meta().vocabulary
    }

    /// The method the model was frozen from.
    pub fn method(&self) -> crate::predict::Method {
        self.meta().method
    }

    /// Notes made when it was frozen (fallback discounts, Katz's K, …).
    pub fn notes(&self) -> &[String] {
        &self.meta().notes
    }

    /// The per-order constants of the method, for reports.
    pub fn constants(&self) -> serde_json::Value {
        self.meta().constants.clone()
    }

    /// How queries are prepared (as the store's text was).
    pub fn preparation(&self) -> crate::tokenize::Preparation {
        self.meta().preparation
    }

    /// The word with id `id`, if the model has it (markers included).
    pub fn word(&self, id: WordId) -> Option<String> {
        self.index_of(id).map(|x| self.text_at(x))
    }

    /// V in id order.
    pub fn vocabulary(&self) -> Vec<WordId> {
        (0..self.words_with_bos() as u32)
            .filter(|&x| x != self.bos_index())
            .map(|x| self.id_at(x))
            .collect()
    }

    /// The word index of a context word: its own, `<unk>` outside V.
    #[inline]
    fn ctx_index(&self, id: WordId) -> u32 {
        self.index_of(id).unwrap_or(self.unk_index())
    }

    /// The state of a context (raw ids; cut to its last N − 1), found from
    /// scratch.
    pub fn state(&self, context: &[WordId]) -> State {
        let start = context.len().saturating_sub(self.order() - 1);
        let ctx = &context[start..];
        let mut st = State {
            len: ctx.len(),
            ..State::default()
        };
        st.ctx[..ctx.len()].copy_from_slice(ctx);
        let xs: Vec<u32> = ctx.iter().map(|&id| self.ctx_index(id)).collect();
        let l = xs.len();
        for j in 1..=l {
            // The suffix of length j, walked from its first word.
            let mut e = xs[l - j];
            let mut ok = true;
            for (t, &x) in xs[l - j + 1..].iter().enumerate() {
                match self.child(t + 1, e, x) {
                    Some(c) => e = c,
                    None => {
                        ok = false;
                        break;
                    }
                }
            }
            if !ok {
                break;
            }
            st.nodes[j - 1] = e;
            st.m = j;
        }
        st
    }

    /// The state for `context` given the state of the previous prediction:
    /// reused when `context` is a suffix of its context, else found anew.
    pub fn state_after(&self, prev: &State, context: &[WordId]) -> State {
        let start = context.len().saturating_sub(self.order() - 1);
        let ctx = &context[start..];
        if ctx.len() <= prev.len && prev.ctx[prev.len - ctx.len()..prev.len] == *ctx {
            let mut st = *prev;
            // Keep the last |ctx| words: their suffix entries stay valid.
            st.ctx.copy_within(prev.len - ctx.len()..prev.len, 0);
            st.len = ctx.len();
            st.m = st.m.min(ctx.len());
            return st;
        }
        self.state(context)
    }

    /// Finds, for each job, the kept n-grams h_j·x for the kept suffixes
    /// h_j of its context (j = 1..=M): sets `nodes[0..=matched]` to x and
    /// their entries, and `matched` to the longest j with h_j·x kept (every
    /// shorter one is then kept too: the model is closed under suffixes).
    ///
    /// The searches of the levels, and of the jobs, do not depend on one
    /// another, and in a model larger than the CPU cache each is a chain of
    /// cache misses (the children index's sample, its upper bits, its low
    /// bits, then the probes among the children). So they go in stages:
    /// each stage computes, for every job and level, the address that the
    /// next read needs and prefetches it, and the next stage reads them;
    /// the misses overlap instead of following one another. Every level is
    /// prepared, also past the first that will miss: the wasted reads cost
    /// little next to a wait.
    #[inline]
    fn extend(&self, jobs: &mut [Job<'_>]) {
        let b = self.bytes();
        let u = self.words_with_bos() as u64;
        let levels = |job: &Job<'_>| job.st.m.min(self.order() - 1);
        // 1. What each context's entry leads to: its children start (from
        // a plain array at the lowest orders, else the children index's
        // sample and low bits) and its back-off weight; and q of the word.
        for job in jobs.iter_mut() {
            job.nodes[0] = job.x;
            prefetch(b, self.sections(1).probs.byte_of(job.x as usize));
            for j in 1..=levels(job) {
                let e = job.st.nodes[j - 1] as usize;
                self.prefetch_children(j, e);
                prefetch(b, self.sections(j).weights.byte_of(e));
            }
        }
        // 2. The upper bits, found from the sample (where there is one).
        for job in jobs.iter() {
            for j in 1..=levels(job) {
                self.prefetch_children_scan(j, job.st.nodes[j - 1] as usize);
            }
        }
        // 3. The children ranges, and the first read of each search.
        for job in jobs.iter_mut() {
            for j in 1..=levels(job) {
                let r = self.children(j, job.st.nodes[j - 1]);
                job.seeks[j] = Seek::start(r.start, r.end, job.x, u);
            }
            job.prefetch_seeks(self, levels(job));
        }
        // 4. The first probe gives the bracket of the word (a long range).
        for job in jobs.iter_mut() {
            for j in 1..=levels(job) {
                if let Seek::Probe { .. } = job.seeks[j] {
                    let words = &self.sections(j + 1).words;
                    job.seeks[j] = job.seeks[j].step(|i| words.get(b, i) as u32, job.x, u);
                }
            }
            job.prefetch_seeks(self, levels(job));
        }
        // 5. The searches finished, on lines now in the cache, up to the
        // first level that misses; q of what is found is prefetched.
        for job in jobs.iter_mut() {
            job.matched = 0;
            for j in 1..=levels(job) {
                let words = &self.sections(j + 1).words;
                match job.seeks[j].finish(|i| words.get(b, i) as u32, job.x, u) {
                    Some(e) => {
                        prefetch(b, self.sections(j + 1).probs.byte_of(e));
                        job.nodes[j] = e as u32;
                        job.matched = j;
                    }
                    None => break,
                }
            }
        }
    }

    /// P(word | the context of `st`), and the state of the context that
    /// follows (the context and the word, cut to N − 1).
    pub fn predict(&self, st: &State, word: WordId) -> (Prob, State) {
        let mut job = [Job::new(self, st, word, self.index_of(word))];
        self.extend(&mut job);
        self.finish(&job[0])
    }

    /// The probability of a job that [`Model::extend`] has searched, and
    /// the state that follows it.
    fn finish(&self, job: &Job<'_>) -> (Prob, State) {
        let (st, x, matched) = (job.st, job.x, job.matched);
        let mut next = State {
            nodes: job.nodes,
            ..State::default()
        };
        // The first walked level at or under the longest match: without
        // skips that is level `matched` itself.
        let (j, f) = self
            .walk(st)
            .find(|&(j, _)| j <= matched)
            .expect("a walk ends at level 0");
        let p = f * self.q(j + 1, next.nodes[j]);
        next.m = (matched + 1).min(self.order() - 1);
        // The next context: the last N − 1 of the context and the word.
        let keep = st.len.min(self.order().saturating_sub(2));
        next.ctx[..keep].copy_from_slice(&st.ctx[st.len - keep..st.len]);
        if self.order() > 1 {
            next.ctx[keep] = job.word;
            next.len = keep + 1;
        }
        let order = if matched == 0 && x == self.unk_index() && !self.meta().unk_seen {
            0
        } else {
            matched + 1
        };
        (
            Prob {
                p,
                log10: p.log10(),
                order,
                oov: job.oov,
                // The word itself when in V (its index was found from it).
                word: if job.oov { self.id_at(x) } else { job.word },
            },
            next,
        )
    }

    /// P(word | context): `context` is cut to its last N − 1 words; words
    /// outside V count as `<unk>`.
    pub fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        Ok(self.predict(&self.state(context), word).0)
    }

    /// Many probabilities: each query is the context followed by the word.
    /// Consecutive queries of running text (each context the previous
    /// query's n-gram, or a suffix of it) reuse the matched context.
    pub fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        let mut words = Vec::with_capacity(queries.len());
        for q in queries {
            let Some(&w) = q.last() else {
                return Err(Error::Config(
                    "a query needs at least the predicted word".into(),
                ));
            };
            words.push(w);
        }
        // The predicted words are looked up first, all together: these
        // lookups do not depend on one another, so the bucket of the word
        // 16 ahead and the ids of the word 8 ahead are prefetched while
        // the current one is found, and their cache misses overlap.
        let mut found = Vec::with_capacity(words.len());
        for i in 0..words.len() {
            if let Some(&w) = words.get(i + 16) {
                self.prefetch_bucket(w);
            }
            if let Some(&w) = words.get(i + 8) {
                self.prefetch_ids(w);
            }
            found.push(self.index_of(words[i]));
        }
        // The batch is cut into RUNS runs of consecutive queries that go in
        // step. Each run starts from a state found from scratch, and
        // within a run each query reuses the state the previous one left
        // (when its context is a suffix of it), so the answers are those
        // of one query after another.
        let n = queries.len();
        let len = n.div_ceil(RUNS).max(1);
        let mut out: Vec<Option<Prob>> = vec![None; n];
        let mut states = [State::default(); RUNS];
        for t in 0..len {
            // The runs still going at step t: a prefix of them, the last
            // run being the shortest.
            let g = (0..RUNS).take_while(|r| r * len + t < n).count();
            for (r, st) in states[..g].iter_mut().enumerate() {
                let q = queries[r * len + t];
                let ctx = &q[..q.len() - 1];
                *st = if t == 0 {
                    self.state(ctx)
                } else {
                    self.state_after(st, ctx)
                };
            }
            let mut group: [Job<'_>; RUNS] = std::array::from_fn(|r| {
                let i = r * len + t;
                if r < g {
                    Job::new(self, &states[r], words[i], found[i])
                } else {
                    Job::new(self, &states[r], 0, None)
                }
            });
            self.extend(&mut group[..g]);
            let mut next = [State::default(); RUNS];
            for (r, job) in group[..g].iter().enumerate() {
                let (p, st) = self.finish(job);
                out[r * len + t] = Some(p);
                next[r] = st;
            }
            states[..g].copy_from_slice(&next[..g]);
        }
        Ok(out
            .into_iter()
            .map(|p| p.expect("every query answered"))
            .collect())
    }

    /// The levels a word backs off through after the context of `st`,
    /// longest first, each with the product of the back-off weights passed
    /// before reaching it: a word whose longest kept n-gram ends at level j
    /// gets q at the first of these levels that is at most j, times its
    /// factor. Without skips these are all levels M, …, 0.
    pub(super) fn walk<'a>(&'a self, st: &'a State) -> Walk<'a> {
        let f = if st.len > st.m {
            self.meta().default_backoff.powi((st.len - st.m) as i32)
        } else {
            1.0
        };
        Walk {
            model: self,
            st,
            next: Some(st.m),
            f,
        }
    }

    /// The whole distribution P(· | context) over V, in id order.
    pub fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        let st = self.state(context);
        let walk: Vec<(usize, f64)> = self.walk(&st).collect();
        let mut p: Vec<f64> = vec![0.0; self.words_with_bos()];
        // Shortest level first: a word takes its value from the longest
        // walked level it is kept at.
        for &(j, f) in walk.iter().rev() {
            if j == 0 {
                for (x, slot) in p.iter_mut().enumerate() {
                    *slot = self.q(1, x as u32) * f;
                }
            } else {
                for e in self.children(j, st.nodes[j - 1]) {
                    let x = self.word_of(j + 1, e) as usize;
                    if let Some(slot) = p.get_mut(x) {
                        *slot = self.q(j + 1, e as u32) * f;
                    }
                }
            }
        }
        Ok((0..self.words_with_bos() as u32)
            .filter(|&x| x != self.bos_index())
            .map(|x| (self.id_at(x), p[x as usize]))
            .collect())
    }

    /// The `k` most probable words after `context` (cut to N − 1, words
    /// outside V as `<unk>`), exact. Along the levels a word backs off
    /// through ([`Model::walk`]), every word whose value comes from level j
    /// is multiplied by the same factor, so within a level the order of q
    /// is the order of P. The candidates: at each walked level, the best
    /// `k` of the words whose value comes from it (see
    /// [`super::complete`], which does the search).
    pub fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        Ok(self.top_next(context, k))
    }
}

impl crate::predict::Predictor for Model {
    fn method(&self) -> crate::predict::Method {
        Model::method(self)
    }
    fn order(&self) -> usize {
        Model::order(self)
    }
    fn vocabulary_size(&self) -> u64 {
        Model::vocabulary_size(self)
    }
    fn preparation(&self) -> crate::tokenize::Preparation {
        Model::preparation(self)
    }
    fn notes(&self) -> &[String] {
        Model::notes(self)
    }
    fn constants(&self) -> serde_json::Value {
        Model::constants(self)
    }
    fn word(&self, id: WordId) -> Result<Option<String>> {
        Ok(Model::word(self, id))
    }
    fn prob(&self, context: &[WordId], word: WordId) -> Result<Prob> {
        Model::prob(self, context, word)
    }
    fn prob_batch(&self, queries: &[&[WordId]]) -> Result<Vec<Prob>> {
        Model::prob_batch(self, queries)
    }
    fn next(&self, context: &[WordId], k: usize) -> Result<Next> {
        Model::next(self, context, k)
    }
    fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        Model::distribution(self, context)
    }
    fn complete(&self, context: &[WordId], prefix: &str, k: usize) -> Result<Next> {
        Model::complete(self, context, prefix, k)
    }
    fn complete_matching(
        &self,
        context: &[WordId],
        prefix: &str,
        matching: crate::topk::PrefixMatch,
        k: usize,
    ) -> Result<Next> {
        Model::complete_matching(self, context, prefix, matching, k)
    }
}

/// The levels a prediction backs off through ([`Model::walk`]).
pub(super) struct Walk<'a> {
    model: &'a Model,
    st: &'a State,
    /// The level to yield next (`None`: done).
    next: Option<usize>,
    /// The product of the weights passed before it.
    f: f64,
}

impl Iterator for Walk<'_> {
    type Item = (usize, f64);

    #[inline]
    fn next(&mut self) -> Option<(usize, f64)> {
        let j = self.next?;
        let here = (j, self.f);
        self.next = if j == 0 {
            None
        } else {
            let e = self.st.nodes[j - 1];
            self.f *= self.model.beta(j, e);
            Some(j.saturating_sub(self.model.skip(j, e)))
        };
        Some(here)
    }
}

/// A model is shared by threads: every query takes `&self` and the map is
/// read-only.
#[allow(dead_code)]
fn assert_send_sync() {
    fn is<T: Send + Sync>() {}
    is::<Model>();
}
