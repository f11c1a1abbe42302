//! `GET /info`: what is served, with its keys in the order declared here
//! (as every other answer keeps the order of its struct's fields).

use serde::Serialize;

use crate::blend::Opened;
use crate::model::Model;
use crate::query::Method;
use crate::store::Store;

/// What is served: a store, a frozen model or a blend.
#[derive(Clone, Copy)]
pub enum Source<'s> {
    /// A store: every method, each with its default parameters.
    Store(&'s Store),
    /// A frozen model: its one method.
    Model(&'s Model),
    /// A blend file's parts: the method `blend`, each thread with its own
    /// mixture over them.
    Blend(&'s Opened),
}

impl Source<'_> {
    /// The method of a request that names none: the model's, or `mkn`.
    pub fn default_method(&self) -> Method {
        match self {
            Source::Store(_) => Method::Mkn,
            Source::Model(m) => m.meta().method,
            Source::Blend(_) => Method::Blend,
        }
    }
}

/// The answer to `/info`.
#[derive(Clone, Debug, Serialize)]
#[serde(untagged)]
pub enum Info {
    /// A store with its counts.
    Store(StoreInfo),
    /// A frozen model.
    Model(ModelInfo),
    /// A blend of stores and models.
    Blend(BlendInfo),
}

/// `/info` over a blend.
#[derive(Clone, Debug, Serialize)]
pub struct BlendInfo {
    /// `"blend"`.
    pub source: &'static str,
    /// The blend file, as the service was given it.
    pub path: String,
    /// The highest order of the parts.
    pub order: usize,
    /// `"blend"`.
    pub method: &'static str,
    /// The one method a request may name: `blend`.
    pub methods: Vec<&'static str>,
    /// Words in the union of the parts' vocabularies.
    pub vocabulary_size: u64,
    /// The parts: `path`, `kind`, `method`, `weight`.
    pub parts: Vec<serde_json::Value>,
    /// Tokens were lowercased when counted (queries are too).
    pub lowercase: bool,
    /// The text preparation the parts share, which queries get too.
    pub preparation: serde_json::Value,
    /// `true`: the mixture of probabilities.
    pub probabilities: bool,
    /// `false`: a blend serves no counts.
    pub counts: bool,
}

/// `/info` over a store.
#[derive(Clone, Debug, Serialize)]
pub struct StoreInfo {
    /// `"store"`.
    pub source: &'static str,
    /// The store directory, as the service was given it.
    pub path: String,
    /// The highest order N.
    pub order: usize,
    /// The method used when a request names none.
    pub method: &'static str,
    /// Every method a request may name.
    pub methods: Vec<&'static str>,
    /// Words in the vocabulary.
    pub vocabulary_size: u64,
    /// Distinct n-grams of each order 1..=N.
    pub ngrams: Vec<u64>,
    /// Tokens were lowercased when counted (queries are too).
    pub lowercase: bool,
    /// The text preparation of the ingest, which queries get too.
    pub preparation: serde_json::Value,
    /// Tokens counted.
    pub tokens: u64,
    /// Sentences counted.
    pub sentences: u64,
    /// `true`: `/ngrams` and `/stats.svg` answer.
    pub counts: bool,
}

/// `/info` over a frozen model.
#[derive(Clone, Debug, Serialize)]
pub struct ModelInfo {
    /// `"model"`.
    pub source: &'static str,
    /// The model file, as the service was given it.
    pub path: String,
    /// The highest order N.
    pub order: usize,
    /// The method the model was frozen from.
    pub method: &'static str,
    /// The one method a request may name: the model's.
    pub methods: Vec<&'static str>,
    /// Words in the vocabulary.
    pub vocabulary_size: u64,
    /// N-grams the model keeps, of each order 1..=N.
    pub ngrams: Vec<u64>,
    /// N-grams the store it was frozen from held, of each order.
    pub store_ngrams: Vec<u64>,
    /// Tokens were lowercased when counted (queries are too).
    pub lowercase: bool,
    /// The text preparation of the ingest, which queries get too.
    pub preparation: serde_json::Value,
    /// False for `stupid`: the values are scores, not probabilities.
    pub probabilities: bool,
    /// `false`: a model keeps no counts.
    pub counts: bool,
}

impl Info {
    /// What `src` serves; `path` is what the answer names as the source.
    pub fn of(src: Source<'_>, path: &str) -> Info {
        match src {
            Source::Store(s) => {
                let meta = s.meta();
                Info::Store(StoreInfo {
                    source: "store",
                    path: path.to_string(),
                    order: meta.settings.order,
                    method: src.default_method().name(),
                    methods: Method::ALL.map(|m| m.name()).to_vec(),
                    vocabulary_size: meta.totals.vocabulary,
                    ngrams: meta.orders.iter().map(|o| o.ngrams).collect(),
                    lowercase: meta.settings.preparation.lowercase,
                    preparation: meta.settings.preparation.to_json(),
                    tokens: meta.totals.tokens,
                    sentences: meta.totals.sentences,
                    counts: true,
                })
            }
            Source::Model(m) => {
                let meta = m.meta();
                Info::Model(ModelInfo {
                    source: "model",
                    path: path.to_string(),
                    order: meta.order,
                    method: meta.method.name(),
                    methods: vec![meta.method.name()],
                    vocabulary_size: meta.vocabulary,
                    ngrams: meta.ngrams.clone(),
                    store_ngrams: meta.store_ngrams.clone(),
                    lowercase: meta.preparation.lowercase,
                    preparation: meta.preparation.to_json(),
                    probabilities: meta.probabilities,
                    counts: false,
                })
            }
            Source::Blend(o) => {
                use crate::query::Predictor;
                let r = &o.record;
                let (order, vocabulary_size) = match o.blend() {
                    Ok(b) => (b.order(), b.vocabulary_size()),
                    Err(_) => (0, 0),
                };
                Info::Blend(BlendInfo {
                    source: "blend",
                    path: path.to_string(),
                    order,
                    method: Method::Blend.name(),
                    methods: vec![Method::Blend.name()],
                    vocabulary_size,
                    parts: r
                        .parts
                        .iter()
                        .map(|p| {
                            serde_json::json!({
                                "path": p.path,
                                "kind": p.kind,
                                "method": p.method.name(),
                                "weight": p.weight,
                            })
                        })
                        .collect(),
                    lowercase: r.preparation.lowercase,
                    preparation: r.preparation.to_json(),
                    probabilities: true,
                    counts: false,
                })
            }
        }
    }
}
