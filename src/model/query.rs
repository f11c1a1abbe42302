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
use crate::query::{Next, Prob};
use crate::words::WordId;

use super::reader::Model;

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

impl Model {
    /// Highest order N.
    pub fn order(&self) -> usize {
        self.n
    }

    /// |V|.
    pub fn vocabulary_size(&self) -> u64 {
        self.meta.vocabulary
    }

    /// The method the model was frozen from.
    pub fn method(&self) -> crate::query::Method {
        self.meta.method
    }

    /// Notes made when it was frozen (fallback discounts, Katz's K, …).
    pub fn notes(&self) -> &[String] {
        &self.meta.notes
    }

    /// The per-order constants of the method, for reports.
    pub fn constants(&self) -> serde_json::Value {
        self.meta.constants.clone()
    }

    /// Whether queries are lowercased (the store was built with `--lowercase`).
    pub fn lowercase(&self) -> bool {
        self.meta.lowercase
    }

    /// The word with id `id`, if the model has it (markers included).
    pub fn word(&self, id: WordId) -> Option<String> {
        self.index_of(id).map(|x| self.text_at(x))
    }

    /// V in id order.
    pub fn vocabulary(&self) -> Vec<WordId> {
        (0..self.nw as u32)
            .filter(|&x| x != self.bos)
            .map(|x| self.id_at(x))
            .collect()
    }

    /// The word index of a context word: its own, `<unk>` outside V.
    #[inline]
    fn ctx_index(&self, id: WordId) -> u32 {
        self.index_of(id).unwrap_or(self.unk)
    }

    /// The state of a context (raw ids; cut to its last N − 1), found from
    /// scratch.
    pub fn state(&self, context: &[WordId]) -> State {
        let start = context.len().saturating_sub(self.n - 1);
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
        let start = context.len().saturating_sub(self.n - 1);
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

    /// P(word | the context of `st`), and the state of the context that
    /// follows (the context and the word, cut to N − 1).
    pub fn predict(&self, st: &State, word: WordId) -> (Prob, State) {
        let in_v = self.index_of(word).filter(|&x| x != self.bos);
        let oov = in_v.is_none();
        let x = in_v.unwrap_or(self.unk);
        let mut next = State::default();
        next.nodes[0] = x;
        let mut q = self.q(1, x);
        let mut matched = 0;
        for j in 1..=st.m {
            match self.child(j, st.nodes[j - 1], x) {
                Some(e) => {
                    next.nodes[j] = e;
                    q = self.q(j + 1, e);
                    matched = j;
                }
                None => break,
            }
        }
        let mut p = if st.len > st.m && self.meta.default_backoff != 1.0 {
            self.meta.default_backoff.powi((st.len - st.m) as i32)
        } else {
            1.0
        };
        if self.has_skips() {
            // Back off level by level from the longest kept context,
            // dropping as many words as each context says, until a level
            // where the word is kept.
            let mut j = st.m;
            while j > matched {
                p *= self.beta(j, st.nodes[j - 1]);
                j = j.saturating_sub(self.skip(j, st.nodes[j - 1]));
            }
            p *= if j == 0 {
                self.q(1, x)
            } else {
                self.q(j + 1, next.nodes[j])
            };
        } else {
            p *= q;
            for j in matched + 1..=st.m {
                p *= self.beta(j, st.nodes[j - 1]);
            }
        }
        next.m = (matched + 1).min(self.n - 1);
        // The next context: the last N − 1 of the context and the word.
        let keep = st.len.min(self.n.saturating_sub(2));
        next.ctx[..keep].copy_from_slice(&st.ctx[st.len - keep..st.len]);
        if self.n > 1 {
            next.ctx[keep] = word;
            next.len = keep + 1;
        }
        let order = if matched == 0 && x == self.unk && !self.meta.unk_seen {
            0
        } else {
            matched + 1
        };
        (
            Prob {
                p,
                log10: p.log10(),
                order,
                oov,
                word: self.id_at(x),
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
        let mut out = Vec::with_capacity(queries.len());
        let mut st = State::default();
        let mut first = true;
        for q in queries {
            let Some((&w, ctx)) = q.split_last() else {
                return Err(Error::Config(
                    "a query needs at least the predicted word".into(),
                ));
            };
            st = if first {
                self.state(ctx)
            } else {
                self.state_after(&st, ctx)
            };
            first = false;
            let (p, next) = self.predict(&st, w);
            out.push(p);
            st = next;
        }
        Ok(out)
    }

    /// The levels a word backs off through after the context of `st`,
    /// longest first, each with the product of the back-off weights passed
    /// before reaching it: a word whose longest kept n-gram ends at level j
    /// gets q at the first of these levels that is at most j, times its
    /// factor. Without skips these are all levels M, …, 0.
    pub(super) fn walk(&self, st: &State) -> Vec<(usize, f64)> {
        let mut f = if st.len > st.m {
            self.meta.default_backoff.powi((st.len - st.m) as i32)
        } else {
            1.0
        };
        let mut out = Vec::with_capacity(st.m + 1);
        let mut j = st.m;
        loop {
            out.push((j, f));
            if j == 0 {
                break;
            }
            f *= self.beta(j, st.nodes[j - 1]);
            j = j.saturating_sub(self.skip(j, st.nodes[j - 1]));
        }
        out
    }

    /// The whole distribution P(· | context) over V, in id order.
    pub fn distribution(&self, context: &[WordId]) -> Result<Vec<(WordId, f64)>> {
        let st = self.state(context);
        let walk = self.walk(&st);
        let mut p: Vec<f64> = vec![0.0; self.nw];
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
        Ok((0..self.nw as u32)
            .filter(|&x| x != self.bos)
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

impl crate::query::Predictor for Model {
    fn method(&self) -> crate::query::Method {
        Model::method(self)
    }
    fn order(&self) -> usize {
        Model::order(self)
    }
    fn vocabulary_size(&self) -> u64 {
        Model::vocabulary_size(self)
    }
    fn lowercase(&self) -> bool {
        Model::lowercase(self)
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
}

/// A model is shared by threads: every query takes `&self` and the map is
/// read-only.
#[allow(dead_code)]
fn assert_send_sync() {
    fn is<T: Send + Sync>() {}
    is::<Model>();
}
