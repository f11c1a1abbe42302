//! The [`Estimator`]: a method and its per-order constants over an open
//! store, and its reads of the store (words, records, the unigram table,
//! children lists) through the caches of [`super::cache`].

use std::cell::{OnceCell, RefCell};
use std::rc::Rc;

use super::cache::{
    ChildMap, Children, CtxInfo, KeyMap, Unigrams, CHILD_CACHE_ENTRIES, REC_CACHE_ENTRIES,
    REC_CACHE_MAX_ORDER, WORD_CACHE_ENTRIES,
};
use super::{jelinek_mercer, katz, kneser_ney, Method, Params};
use crate::error::{Error, Result};
use crate::key::Key;
use crate::store::{ContextStats, NgramRecord, Store};
use crate::words::{bos_id, unk_id, IdMap, WordId};

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

/// A smoothing method over an open store.
pub struct Estimator<'s> {
    pub(super) store: &'s Store,
    pub(super) method: Method,
    pub(super) params: Params,
    pub(super) model: Model,
    pub(super) n: usize,
    pub(super) v: f64,
    pub(super) root: ContextStats,
    pub(super) notes: Vec<String>,
    pub(super) bos: WordId,
    pub(super) unk: WordId,
    pub(super) rec_cache: RefCell<KeyMap<Option<NgramRecord>>>,
    pub(super) word_cache: RefCell<IdMap<bool>>,
    pub(super) unigrams: OnceCell<Unigrams>,
    pub(super) ranking: OnceCell<Vec<WordId>>,
    pub(super) text_index: OnceCell<super::text_index::TextIndex>,
    pub(super) children: RefCell<(KeyMap<ChildMap>, usize)>,
    pub(super) katz_ctx: RefCell<KeyMap<katz::KatzCtx>>,
}

impl<'s> Estimator<'s> {
    /// Builds `method` with `params` over `store`: derives and checks the
    /// per-order constants. Fails with a message naming the order where the
    /// data leave a discount undefined (`mkn`, `kn`, `absolute`) and no
    /// discount policy replaces them, or where a parameter is out of range.
    pub fn new(store: &'s Store, method: Method, params: Params) -> Result<Estimator<'s>> {
        let meta = store.meta();
        let n = meta.settings.order;
        if meta.totals.vocabulary == 0 || meta.root.count_sum == 0 {
            return Err(Error::state(store.dir(), "the store holds no tokens"));
        }
        let mut notes = Vec::new();
        let model =
            match method {
                Method::Mkn => Model::Mkn(kneser_ney::mkn_discounts(
                    meta,
                    &params.discounts,
                    &mut notes,
                )?),
                Method::Kn => Model::Kn(kneser_ney::single_discounts(
                    meta,
                    false,
                    &params.discounts,
                    &mut notes,
                )?),
                Method::Absolute => Model::Absolute(kneser_ney::single_discounts(
                    meta,
                    true,
                    &params.discounts,
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
                Method::Arpa => {
                    return Err(Error::Config(
                        "arpa names a model read from ARPA text; a store has no such method".into(),
                    ))
                }
                Method::Blend => return Err(Error::Config(
                    "blend names a mixture of sources (quern blend); a store has no such method"
                        .into(),
                )),
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
            text_index: OnceCell::new(),
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
    /// the user: discounts that took the place of unusable ones, Katz's K lowered at an order.
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
    pub(super) fn learn_words(&self, ids: &mut Vec<WordId>) -> Result<()> {
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

    pub(super) fn known(&self, id: WordId) -> bool {
        self.word_cache.borrow().get(&id).copied().unwrap_or(false)
    }

    /// The stored records of many n-grams (`None` for lengths outside
    /// 1..=N and for n-grams not stored): short ones from the cache, the
    /// rest in one batched read, sorted and without repeats (in running
    /// text the context of one prediction is the n-gram of the one before,
    /// so a batch asks for most keys twice).
    pub(super) fn records(&self, keys: &[&[WordId]]) -> Result<Vec<Option<NgramRecord>>> {
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
    pub(super) fn ctx_infos(&self, hs: &[&[WordId]]) -> Result<Vec<CtxInfo>> {
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
    pub(super) fn root_info(&self) -> CtxInfo {
        CtxInfo {
            stats: Some(self.root),
            hc: self.root.count_sum,
        }
    }

    /// The left-type count of an n-gram from its raw count and stored
    /// continuation (`None` at the top order): the raw count at the top
    /// order and for n-grams that start with `<s>`, else the continuation.
    #[inline]
    pub(super) fn left_type(&self, c: u64, cont: Option<u64>, first: WordId) -> u64 {
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
            map.insert(id, (c, self.left_type(c, cont, id)));
            vocab.push(id);
        }
        if !map.contains_key(&self.unk) {
            vocab.push(self.unk);
        }
        vocab.sort_unstable();
        if vocab.len() as u64 != self.store.meta().totals.vocabulary {
            return Err(Error::corrupt(
                crate::layout::db(self.store.dir()),
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

    /// The stored children w of context `h` (|h| ≥ 1) with raw and left-type
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
            let ca = (c, self.left_type(c, cont, h[0]));
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
    pub(super) fn map_context(&self, ctx: &[WordId], out: &mut Vec<WordId>) {
        let start = ctx.len().saturating_sub(self.n - 1);
        for &id in &ctx[start..] {
            out.push(if self.known(id) { id } else { self.unk });
        }
    }
}
