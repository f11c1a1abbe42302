//! Smoothed probabilities from a finished store, chosen at query time.
//!
//! An [`Estimator`] wraps an open [`Store`] with one [`Method`] and its
//! [`Params`]. Everything an estimator needs (counts, continuation counts,
//! context statistics, count-of-counts) was computed at ingest; building an
//! estimator only derives the per-order constants (discounts, Good-Turing
//! factors, weights) and checks them, so trying another method needs no
//! re-ingest.
//!
//! Every distribution is over the vocabulary V of the store: the distinct
//! tokens seen except `<s>`, with `</s>`, and with `<unk>` even if the text
//! never held it. A word outside V is scored as `<unk>`; a context longer
//! than N − 1 words is cut to its last N − 1. The formulas of each method
//! are in its module ([`kneser_ney`], [`witten_bell`], [`katz`],
//! [`jelinek_mercer`], [`simple`]).
//!
//! ```no_run
//! use quern::query::{Estimator, Method, Params, query_ids};
//! use quern::store::Store;
//!
//! let store = Store::open("/tmp/store".as_ref())?;
//! let est = Estimator::new(&store, Method::Mkn, Params::default())?;
//! let ids = query_ids("<s> the ferry", store.meta().settings.lowercase);
//! let p = est.prob(&ids[..ids.len() - 1], ids[ids.len() - 1])?;
//! println!("P = {} (longest match: order {})", p.p, p.order);
//! let top = est.next(&ids, 5)?;
//! for (w, p) in &top.items {
//!     println!("{} {p}", store.word(*w)?.unwrap_or_default());
//! }
//! # Ok::<(), quern::Error>(())
//! ```
//!
//! An estimator keeps small caches (context statistics, words, children
//! lists) behind `RefCell`s: use one estimator per thread.

pub mod backoff;
pub mod jelinek_mercer;
pub mod katz;
pub mod kneser_ney;
pub mod next;
pub mod ngrams;
pub mod predictor;
pub mod score;
pub mod simple;
pub mod tune;
pub mod witten_bell;

use std::cell::{OnceCell, RefCell};
use std::collections::HashMap;
use std::fmt;
use std::rc::Rc;
use std::str::FromStr;

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::key::Key;
use crate::store::{ContextStats, NgramRecord, Store};
use crate::words::{bos_id, eos_id, unk_id, word_id, IdMap, WordId, BOS, EOS, UNK};

pub use next::Next;
pub use ngrams::{prefix_page, Page};
pub use predictor::Predictor;
pub use score::{ScoreReport, Scorer, SentenceScore};

/// The estimators quern computes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Method {
    /// Interpolated modified Kneser-Ney (Chen & Goodman 1998): three
    /// discounts per order over adjusted counts.
    Mkn,
    /// Interpolated Kneser-Ney with one discount per order (Ney, Essen &
    /// Kneser 1994) over adjusted counts.
    Kn,
    /// Interpolated absolute discounting (Ney, Essen & Kneser 1994) over raw
    /// counts.
    Absolute,
    /// Interpolated Witten-Bell (Witten & Bell 1991).
    WittenBell,
    /// Katz back-off with Good-Turing discounts (Katz 1987).
    Katz,
    /// Linear interpolation of maximum-likelihood estimates (Jelinek &
    /// Mercer 1980), one weight per order or per order and count bucket.
    Interp,
    /// Additive smoothing (Lidstone); k = 1 is Laplace.
    AddK,
    /// Maximum likelihood at the longest seen context; unsmoothed.
    Mle,
    /// Stupid back-off (Brants et al. 2007): scores, not probabilities.
    Stupid,
}

impl Method {
    /// Every method, in the order of the documentation.
    pub const ALL: [Method; 9] = [
        Method::Mkn,
        Method::Kn,
        Method::Absolute,
        Method::WittenBell,
        Method::Katz,
        Method::Interp,
        Method::AddK,
        Method::Mle,
        Method::Stupid,
    ];

    /// The name used on the command line and in files.
    pub fn name(self) -> &'static str {
        match self {
            Method::Mkn => "mkn",
            Method::Kn => "kn",
            Method::Absolute => "absolute",
            Method::WittenBell => "witten-bell",
            Method::Katz => "katz",
            Method::Interp => "interp",
            Method::AddK => "add-k",
            Method::Mle => "mle",
            Method::Stupid => "stupid",
        }
    }

    /// False for `stupid`, whose scores do not sum to 1 and have no
    /// perplexity. (`mle` is a distribution, but one that gives 0 to every
    /// word unseen after the longest seen context.)
    pub fn is_probability(self) -> bool {
        self != Method::Stupid
    }
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

impl FromStr for Method {
    type Err = Error;
    fn from_str(s: &str) -> Result<Method> {
        Method::ALL
            .into_iter()
            .find(|m| m.name() == s)
            .ok_or_else(|| {
                Error::Config(format!(
                    "unknown method {s:?}; the methods are {}",
                    Method::ALL.map(|m| m.name()).join(", ")
                ))
            })
    }
}

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

/// The per-order constants of the chosen method, derived when the
/// estimator is built.
#[derive(Clone, Debug)]
pub(crate) enum Model {
    Mkn(Vec<[f64; 3]>),
    Kn(Vec<f64>),
    Absolute(Vec<f64>),
    WittenBell,
    Katz(Vec<katz::KatzOrder>),
    Interp(jelinek_mercer::Lambdas),
    AddK(f64),
    Mle,
    Stupid(f64),
}

/// One probability and how it came about.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Prob {
    /// The probability (for `stupid`, the score).
    pub p: f64,
    /// log10 of `p` (−∞ for 0).
    pub log10: f64,
    /// The order of the longest stored n-gram ending in the word (after the
    /// context was cut and OOV words mapped): 0 if the word was never seen.
    pub order: usize,
    /// The word is outside V and was scored as `<unk>`.
    pub oov: bool,
    /// The word that was scored (`<unk>` for an OOV word).
    pub word: WordId,
}

/// What one prediction needs at context length j (order j + 1): the
/// counts of h_j·w and the statistics of h_j, h_j being the last j words
/// of the context.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(crate) struct Level {
    /// Raw count c(h_j w).
    pub c: u64,
    /// Adjusted count a(h_j w).
    pub a: u64,
    /// Statistics of h_j (`None`: h_j has no children).
    pub ctx: Option<ContextStats>,
    /// c(h_j) as an n-gram (for `stupid`; T at j = 0).
    pub hc: u64,
}

/// Cached facts about one context.
#[derive(Clone, Copy, Debug)]
struct CtxInfo {
    stats: Option<ContextStats>,
    hc: u64,
}

impl CtxInfo {
    /// A non-empty context's facts from its own n-gram record.
    fn of(r: Option<NgramRecord>) -> CtxInfo {
        CtxInfo {
            stats: r.and_then(|r| r.context),
            hc: r.map_or(0, |r| r.count),
        }
    }
}

/// The unigram table: every stored unigram but `<s>`, with raw and
/// adjusted count, and V in id order.
pub(crate) struct Unigrams {
    pub map: IdMap<(u64, u64)>,
    pub vocab: Vec<WordId>,
    /// `counts[i]`: raw and adjusted count of `vocab[i]` ((0, 0) for an
    /// unseen `<unk>`).
    pub counts: Vec<(u64, u64)>,
}

impl Unigrams {
    /// The counts of `w`, searched from `vocab[*from..]` and leaving
    /// `*from` at `w`'s place: for ids asked in increasing order, a short
    /// gallop through memory in order instead of a random probe.
    fn counts_from(&self, w: WordId, from: &mut usize) -> (u64, u64) {
        let v = &self.vocab;
        if *from > v.len() || (*from > 0 && v[*from - 1] >= w) {
            *from = 0;
        }
        let mut step = 1;
        let mut hi = *from;
        while hi < v.len() && v[hi] < w {
            *from = hi;
            hi += step;
            step *= 2;
        }
        let hi = hi.min(v.len());
        let i = *from + v[*from..hi].partition_point(|&x| x < w);
        *from = i;
        match v.get(i) {
            Some(&x) if x == w => self.counts[i],
            _ => (0, 0),
        }
    }
}

/// The children w of one context h in key order (which is id order), each
/// with its counts and its unigram counts side by side, so that scoring
/// every child reads memory in order, not at random.
pub(crate) struct Children {
    /// The children, ids increasing.
    pub list: Vec<ChildEntry>,
    /// For a one-word context: the children ordered by their probability
    /// after that word alone, most probable first (ties by id), made on
    /// first use by [`Estimator::ranked_children`].
    pub ranked: OnceCell<Vec<ChildEntry>>,
}

impl Children {
    /// (c(h·w), a(h·w)), if w is a child.
    pub fn get(&self, w: WordId) -> Option<(u64, u64)> {
        self.list
            .binary_search_by_key(&w, |e| e.0)
            .ok()
            .map(|i| self.list[i].1)
    }

    /// w is a child.
    pub fn contains(&self, w: WordId) -> bool {
        self.get(w).is_some()
    }
}

/// One child w of a context h: (w, (c(h·w), a(h·w)), (c(w), a(w))).
pub(crate) type ChildEntry = (WordId, (u64, u64), (u64, u64));

type ChildMap = Rc<Children>;

/// A fast hasher for [`Key`]s (multiply-rotate over the ids; the ids are
/// already hashes).
#[derive(Default, Clone, Copy)]
pub(crate) struct KeyHasher(u64);

impl std::hash::Hasher for KeyHasher {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.write_u64(b as u64);
        }
    }
    fn write_u8(&mut self, v: u8) {
        self.write_u64(v as u64);
    }
    fn write_usize(&mut self, v: usize) {
        self.write_u64(v as u64);
    }
    fn write_u64(&mut self, v: u64) {
        self.0 = (self.0.rotate_left(5) ^ v).wrapping_mul(0x517c_c1b7_2722_0a95);
    }
}

/// A `HashMap` keyed by n-gram keys.
pub(crate) type KeyMap<V> = HashMap<Key, V, std::hash::BuildHasherDefault<KeyHasher>>;

/// Records of n-grams up to this order are kept in the record cache.
const REC_CACHE_MAX_ORDER: usize = 3;
const REC_CACHE_ENTRIES: usize = 1 << 20;
const WORD_CACHE_ENTRIES: usize = 1 << 20;
/// Children kept in the children cache (40 bytes each).
const CHILD_CACHE_ENTRIES: usize = 8 << 20;

/// A smoothing method over an open store.
pub struct Estimator<'s> {
    store: &'s Store,
    method: Method,
    params: Params,
    model: Model,
    n: usize,
    v: f64,
    root: ContextStats,
    notes: Vec<String>,
    bos: WordId,
    unk: WordId,
    rec_cache: RefCell<KeyMap<Option<NgramRecord>>>,
    word_cache: RefCell<IdMap<bool>>,
    unigrams: OnceCell<Unigrams>,
    ranking: OnceCell<Vec<WordId>>,
    children: RefCell<(KeyMap<ChildMap>, usize)>,
    katz_ctx: RefCell<KeyMap<katz::KatzCtx>>,
}

impl<'s> Estimator<'s> {
    /// Builds `method` with `params` over `store`: derives and checks the
    /// per-order constants. Fails with a message naming the order where the
    /// data leave a discount undefined (`mkn`, `kn`, `absolute`) and no
    /// fallback was given, or where a parameter is out of range.
    pub fn new(store: &'s Store, method: Method, params: Params) -> Result<Estimator<'s>> {
        let meta = store.meta();
        let n = meta.settings.order;
        if meta.totals.vocabulary == 0 || meta.root.count_sum == 0 {
            return Err(Error::state(store.dir(), "the store holds no tokens"));
        }
        let mut notes = Vec::new();
        let model = match method {
            Method::Mkn => Model::Mkn(kneser_ney::mkn_discounts_checked(
                meta,
                params.fallback_discounts.as_deref(),
                &mut notes,
            )?),
            Method::Kn => Model::Kn(kneser_ney::single_discounts_checked(
                meta,
                false,
                params.fallback_discounts.as_deref(),
                &mut notes,
            )?),
            Method::Absolute => Model::Absolute(kneser_ney::single_discounts_checked(
                meta,
                true,
                params.fallback_discounts.as_deref(),
                &mut notes,
            )?),
            Method::WittenBell => Model::WittenBell,
            Method::Katz => Model::Katz(katz::katz_orders(meta, params.katz_k, &mut notes)),
            Method::Interp => Model::Interp(jelinek_mercer::Lambdas::from_params(&params, n)?),
            Method::AddK => {
                if !(params.k > 0.0 && params.k.is_finite()) {
                    return Err(Error::Config(format!(
                        "add-k: k must be a positive number, not {}",
                        params.k
                    )));
                }
                Model::AddK(params.k)
            }
            Method::Mle => Model::Mle,
            Method::Stupid => {
                if !(params.alpha > 0.0 && params.alpha.is_finite()) {
                    return Err(Error::Config(format!(
                        "stupid: alpha must be a positive number, not {}",
                        params.alpha
                    )));
                }
                Model::Stupid(params.alpha)
            }
        };
        Ok(Estimator {
            store,
            method,
            params,
            model,
            n,
            v: meta.totals.vocabulary as f64,
            root: meta.root,
            notes,
            bos: bos_id(),
            unk: unk_id(),
            rec_cache: RefCell::new(KeyMap::default()),
            word_cache: RefCell::new(IdMap::default()),
            unigrams: OnceCell::new(),
            ranking: OnceCell::new(),
            children: RefCell::new((KeyMap::default(), 0)),
            katz_ctx: RefCell::new(KeyMap::default()),
        })
    }

    /// The store.
    pub fn store(&self) -> &'s Store {
        self.store
    }

    /// The method.
    pub fn method(&self) -> Method {
        self.method
    }

    /// The parameters it was built with.
    pub fn params(&self) -> &Params {
        &self.params
    }

    /// What was decided when the estimator was built and should be shown to
    /// the user: fallback discounts used, Katz's K lowered at an order.
    pub fn notes(&self) -> &[String] {
        &self.notes
    }

    /// The per-order constants in use, for reports: discounts, Katz's K and
    /// factors, weights, k or α.
    pub fn constants(&self) -> serde_json::Value {
        use serde_json::json;
        match &self.model {
            Model::Mkn(d) => json!({"discounts": d}),
            Model::Kn(d) | Model::Absolute(d) => json!({"discounts": d}),
            Model::WittenBell | Model::Mle => json!({}),
            Model::Katz(o) => json!({
                "k": o.iter().map(|o| o.k).collect::<Vec<_>>(),
                "d": o.iter().map(|o| o.d[1..].to_vec()).collect::<Vec<_>>(),
            }),
            Model::Interp(l) => json!({"lambdas": l.weights}),
            Model::AddK(k) => json!({"k": k}),
            Model::Stupid(a) => json!({"alpha": a}),
        }
    }

    /// Highest order N of the store.
    pub fn order(&self) -> usize {
        self.n
    }

    /// |V|.
    pub fn vocabulary_size(&self) -> u64 {
        self.v as u64
    }

    // ---- words and contexts ------------------------------------------------

    /// Learns for each id whether it is a stored unigram (or `<unk>`).
    fn learn_words(&self, ids: &mut Vec<WordId>) -> Result<()> {
        {
            let wc = self.word_cache.borrow();
            ids.retain(|id| !wc.contains_key(id));
        }
        if ids.is_empty() {
            return Ok(());
        }
        ids.sort_unstable();
        ids.dedup();
        if let Some(u) = self.unigrams.get() {
            let mut wc = self.word_cache.borrow_mut();
            for &id in ids.iter() {
                wc.insert(
                    id,
                    id == self.bos || id == self.unk || u.map.contains_key(&id),
                );
            }
            return Ok(());
        }
        let grams: Vec<[WordId; 1]> = ids.iter().map(|&i| [i]).collect();
        let refs: Vec<&[WordId]> = grams.iter().map(|g| &g[..]).collect();
        let got = self.store.get_many(&refs)?;
        let mut wc = self.word_cache.borrow_mut();
        if wc.len() + ids.len() > WORD_CACHE_ENTRIES {
            wc.clear();
        }
        for (&id, g) in ids.iter().zip(got) {
            wc.insert(id, id == self.unk || g.is_some());
        }
        Ok(())
    }

    fn known(&self, id: WordId) -> bool {
        self.word_cache.borrow().get(&id).copied().unwrap_or(false)
    }

    /// The stored records of many n-grams (`None` for lengths outside
    /// 1..=N and for n-grams not stored): short ones from the cache, the
    /// rest in one batched read, sorted and without repeats (in running
    /// text the context of one prediction is the n-gram of the one before,
    /// so a batch asks for most keys twice).
    fn records(&self, keys: &[&[WordId]]) -> Result<Vec<Option<NgramRecord>>> {
        let mut out: Vec<Option<NgramRecord>> = vec![None; keys.len()];
        let mut todo: Vec<usize> = Vec::new();
        {
            let cache = self.rec_cache.borrow();
            for (i, k) in keys.iter().enumerate() {
                if k.is_empty() || k.len() > self.n {
                    continue;
                }
                if k.len() <= REC_CACHE_MAX_ORDER {
                    if let Some(r) = cache.get(&Key::new(k)) {
                        out[i] = *r;
                        continue;
                    }
                }
                todo.push(i);
            }
        }
        if todo.is_empty() {
            return Ok(out);
        }
        todo.sort_unstable_by(|&a, &b| keys[a].cmp(keys[b]));
        let mut uniq: Vec<&[WordId]> = Vec::with_capacity(todo.len());
        let mut slot: Vec<usize> = Vec::with_capacity(todo.len());
        for &i in &todo {
            if uniq.last() != Some(&keys[i]) {
                uniq.push(keys[i]);
            }
            slot.push(uniq.len() - 1);
        }
        let got = self.store.records_many(&uniq)?;
        for (&i, &u) in todo.iter().zip(&slot) {
            out[i] = got[u];
        }
        let mut cache = self.rec_cache.borrow_mut();
        if cache.len() + uniq.len() > REC_CACHE_ENTRIES {
            cache.clear();
        }
        for (k, r) in uniq.iter().zip(&got) {
            if k.len() <= REC_CACHE_MAX_ORDER {
                cache.insert(Key::new(k), *r);
            }
        }
        Ok(out)
    }

    /// Statistics and n-gram counts (for `stupid`) of many contexts.
    fn ctx_infos(&self, hs: &[&[WordId]]) -> Result<Vec<CtxInfo>> {
        let recs = self.records(hs)?;
        Ok(hs
            .iter()
            .zip(recs)
            .map(|(h, r)| {
                if h.is_empty() {
                    self.root_info()
                } else {
                    CtxInfo::of(r)
                }
            })
            .collect())
    }

    /// The empty context's facts.
    fn root_info(&self) -> CtxInfo {
        CtxInfo {
            stats: Some(self.root),
            hc: self.root.count_sum,
        }
    }

    /// The adjusted count of an n-gram from its raw count and stored
    /// continuation (`None` at the top order): the raw count at the top
    /// order and for n-grams that start with `<s>`, else the continuation.
    #[inline]
    fn adjusted(&self, c: u64, cont: Option<u64>, first: WordId) -> u64 {
        match cont {
            Some(x) if first != self.bos => x,
            _ => c,
        }
    }

    /// The unigram table, loaded on first use (one scan of the unigrams).
    pub(crate) fn unigrams(&self) -> Result<&Unigrams> {
        if let Some(u) = self.unigrams.get() {
            return Ok(u);
        }
        let mut map = IdMap::default();
        let mut vocab = Vec::new();
        for item in self.store.ngrams(1)? {
            let (k, c, cont) = item?;
            let id = k.ids()[0];
            if id == self.bos {
                continue;
            }
            map.insert(id, (c, self.adjusted(c, cont, id)));
            vocab.push(id);
        }
        if !map.contains_key(&self.unk) {
            vocab.push(self.unk);
        }
        vocab.sort_unstable();
        if vocab.len() as u64 != self.store.meta().totals.vocabulary {
            return Err(Error::corrupt(
                crate::store::db_dir(self.store.dir()),
                format!(
                    "the unigrams give a vocabulary of {} words, the metadata {}",
                    vocab.len(),
                    self.store.meta().totals.vocabulary
                ),
            ));
        }
        let counts = vocab
            .iter()
            .map(|w| map.get(w).copied().unwrap_or((0, 0)))
            .collect();
        let _ = self.unigrams.set(Unigrams { map, vocab, counts });
        Ok(self.unigrams.get().expect("just set"))
    }

    /// V, in id order.
    pub fn vocabulary(&self) -> Result<&[WordId]> {
        Ok(&self.unigrams()?.vocab)
    }

    /// The stored children w of context `h` (|h| ≥ 1) with raw and adjusted
    /// count of h·w, through a bounded cache.
    pub(crate) fn child_map(&self, h: &[WordId]) -> Result<ChildMap> {
        let key = Key::new(h);
        if let Some(m) = self.children.borrow().0.get(&key) {
            return Ok(m.clone());
        }
        let uni = self.unigrams()?;
        let mut list = Vec::new();
        let mut at = 0;
        for item in self.store.children(h)? {
            let (k, c, cont) = item?;
            let w = k.ids()[h.len()];
            let ca = (c, self.adjusted(c, cont, h[0]));
            list.push((w, ca, uni.counts_from(w, &mut at)));
        }
        if !list.windows(2).all(|p| p[0].0 < p[1].0) {
            list.sort_unstable_by_key(|e| e.0);
        }
        let m = Rc::new(Children {
            list,
            ranked: OnceCell::new(),
        });
        let mut cache = self.children.borrow_mut();
        if cache.1 + m.list.len() > CHILD_CACHE_ENTRIES {
            cache.0.clear();
            cache.1 = 0;
        }
        cache.1 += m.list.len();
        cache.0.insert(key, m.clone());
        Ok(m)
    }

    /// The children of the one-word context `[h]` ordered by P(w | h),
    /// most probable first (ties by id): computed once per word and kept
    /// with its children list. `None` if `h` has no children.
    pub(crate) fn ranked_children(&self, h: WordId) -> Result<Option<ChildMap>> {
        let cl = self.context_levels(&[h])?;
        let Some(m) = cl.maps[1].clone() else {
            return Ok(None);
        };
        if m.ranked.get().is_none() {
            let mut buf = Vec::new();
            let mut scored = Vec::with_capacity(m.list.len());
            for (i, &(w, at, uni)) in m.list.iter().enumerate() {
                scored.push((self.eval_child(&cl, w, 1, Some(at), uni, &mut buf)?.0, i));
            }
            scored.sort_unstable_by(|a, b| b.0.total_cmp(&a.0).then(a.1.cmp(&b.1)));
            let _ = m
                .ranked
                .set(scored.into_iter().map(|(_, i)| m.list[i]).collect());
            let mut cache = self.children.borrow_mut();
            cache.1 += m.list.len();
        }
        Ok(Some(m))
    }

    /// Maps raw context ids for prediction: cut to the last N − 1, every id
    /// that is not a stored unigram becomes `<unk>`. The words must have
    /// been learned.
    fn map_context(&self, ctx: &[WordId], out: &mut Vec<WordId>) {
        let start = ctx.len().saturating_sub(self.n - 1);
        for &id in &ctx[start..] {
            out.push(if self.known(id) { id } else { self.unk });
        }
    }

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
                            self.adjusted(r.count, r.continuation, full[nl - 1 - j]),
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

    fn finish(&self, p: f64, levels: &[Level], oov: bool, word: WordId) -> Prob {
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
        let ctx = self.map_context_ids(context)?;
        let cl = self.context_levels(&ctx)?;
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
    ctx: Vec<WordId>,
    infos: Vec<CtxInfo>,
    maps: Vec<Option<ChildMap>>,
}

/// The ids of a query line: tokens split as in ingest (Unicode
/// White_Space), lowercased if the store was built with `--lowercase`;
/// `<s>`, `</s>` and `<unk>` written as words mean the markers.
pub fn query_ids(line: &str, lowercase: bool) -> Vec<WordId> {
    line.split_whitespace()
        .map(|t| {
            let t: std::borrow::Cow<str> = if lowercase {
                t.to_lowercase().into()
            } else {
                t.into()
            };
            match &*t {
                BOS => bos_id(),
                EOS => eos_id(),
                UNK => unk_id(),
                w => word_id(w.as_bytes()),
            }
        })
        .collect()
}

/// The n-gram of the words before position `i` of a padded sentence and
/// the word at `i`, cut to the last `n` words: what predicting token `i`
/// asks for.
pub fn prediction(padded: &[WordId], i: usize, n: usize) -> &[WordId] {
    &padded[(i + 1).saturating_sub(n)..=i]
}
