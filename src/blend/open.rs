//! Opening the parts of a blend: a store (with a method and its
//! parameters) or a frozen model, each checked against what the blend file
//! recorded of it (its kind, method and settings checksum), and the
//! [`Blend`] over them.
//!
//! A store's estimator keeps caches that are neither shared nor sent
//! between threads, so [`Opened`] holds the open stores and models and
//! makes one [`Blend`] per thread ([`Opened::blend`]): over a model it
//! borrows the one shared model; over a store it makes its own estimator.

use std::path::{Path, PathBuf};

use crate::error::{Error, Result};
use crate::model::{Model, Residence};
use crate::predict::{Method, Params, Predictor};
#[cfg(feature = "store")]
use crate::query::Estimator;
#[cfg(feature = "store")]
use crate::store::Store;
use crate::words::{bos_id, unk_id, WordId};

use super::file::{settings_checksum, BlendFile, PartKind, PartRecord, BLEND_FORMAT_VERSION};
use super::mixture::Blend;

/// An open store or model.
pub enum Source {
    /// A store directory (with the `store` feature).
    #[cfg(feature = "store")]
    Store(Store),
    /// A model file.
    Model(Model),
}

/// One open part: the source and how it is read.
pub struct Part {
    /// The path (absolute).
    pub path: PathBuf,
    /// The store or model.
    pub source: Source,
    /// The method (a model's own).
    pub method: Method,
    /// A store's parameters (the defaults for a model, unused).
    pub params: Params,
}

impl Part {
    /// Opens `path`: a directory is a store, read with `method` (default
    /// `mkn`) and `params`, with a block cache of `cache_bytes`; a file is
    /// a model (whose method, if `method` names one, must be that).
    pub fn open(
        path: &Path,
        method: Option<Method>,
        params: Params,
        cache_bytes: usize,
        residence: Residence,
    ) -> Result<Part> {
        let abs = std::path::absolute(path).map_err(|e| Error::io(path, "resolve", e))?;
        let meta = std::fs::metadata(&abs).map_err(|e| Error::io(&abs, "open", e))?;
        if meta.is_dir() {
            #[cfg(feature = "store")]
            {
                let store = Store::open_with_cache(&abs, cache_bytes)?;
                let method = method.unwrap_or(Method::Mkn);
                // Fails early on a bad method or parameter.
                Estimator::new(&store, method, params.clone())?;
                return Ok(Part {
                    path: abs,
                    source: Source::Store(store),
                    method,
                    params,
                });
            }
            #[cfg(not(feature = "store"))]
            {
                let _ = (cache_bytes, params);
                return Err(Error::Input {
                    path: abs,
                    detail: "a store is a part only where quern is built with its store \
                             (this build reads models)"
                        .into(),
                });
            }
        }
        let model = Model::open_as(&abs, residence)?;
        let own = model.meta().method;
        if let Some(m) = method {
            if m != own {
                return Err(Error::Input {
                    path: abs,
                    detail: format!("the model was frozen with {own}, not {m}"),
                });
            }
        }
        Ok(Part {
            path: abs,
            source: Source::Model(model),
            method: own,
            params: Params::default(),
        })
    }

    /// A store or a model.
    pub fn kind(&self) -> PartKind {
        match self.source {
            #[cfg(feature = "store")]
            Source::Store(_) => PartKind::Store,
            Source::Model(_) => PartKind::Model,
        }
    }

    /// `store` or `model`.
    pub fn kind_name(&self) -> &'static str {
        match self.kind() {
            PartKind::Store => "store",
            PartKind::Model => "model",
        }
    }

    /// The settings checksum (see [`super::file`]).
    pub fn checksum(&self) -> String {
        match &self.source {
            #[cfg(feature = "store")]
            Source::Store(s) => {
                let meta = serde_json::to_vec(s.meta()).expect("metadata serialises");
                let params = serde_json::to_vec(&self.params).expect("parameters serialise");
                settings_checksum(&[&meta, self.method.name().as_bytes(), &params])
            }
            Source::Model(m) => {
                let meta = serde_json::to_vec(m.meta()).expect("metadata serialises");
                settings_checksum(&[&meta, &m.file_bytes().to_le_bytes()])
            }
        }
    }

    /// The part's record in a blend file, with weight `weight`.
    pub fn record(&self, weight: f64) -> PartRecord {
        PartRecord {
            path: self.path.clone(),
            kind: self.kind(),
            method: self.method,
            params: (self.kind() == PartKind::Store).then(|| self.params.clone()),
            settings_checksum: self.checksum(),
            weight,
        }
    }

    /// A predictor over the part for the calling thread.
    pub fn predictor(&self) -> Result<Box<dyn Predictor + '_>> {
        Ok(match &self.source {
            #[cfg(feature = "store")]
            Source::Store(s) => Box::new(Estimator::new(s, self.method, self.params.clone())?),
            Source::Model(m) => Box::new(m),
        })
    }

    /// The highest order.
    pub fn order(&self) -> usize {
        match &self.source {
            #[cfg(feature = "store")]
            Source::Store(s) => s.order(),
            Source::Model(m) => m.order(),
        }
    }

    /// The part's n-grams of order `k` (a store's every n-gram, a model's
    /// kept ones), `k` ids each one after the other.
    pub fn ngram_ids(&self, k: usize) -> Result<Vec<WordId>> {
        if k > self.order() {
            return Ok(Vec::new());
        }
        match &self.source {
            #[cfg(feature = "store")]
            Source::Store(s) => {
                let mut out = Vec::new();
                for r in s.ngrams(k)? {
                    out.extend_from_slice(r?.0.ids());
                }
                Ok(out)
            }
            Source::Model(m) => Ok(crate::model::arpa::ngram_ids(m, k)),
        }
    }

    /// The part's text preparation.
    pub fn preparation(&self) -> crate::tokenize::Preparation {
        match &self.source {
            #[cfg(feature = "store")]
            Source::Store(s) => s.meta().settings.preparation,
            Source::Model(m) => m.meta().preparation,
        }
    }
}

/// Refuses parts that prepare text differently, naming both.
pub fn check_preparations(parts: &[Part]) -> Result<()> {
    let first = &parts[0];
    for (i, p) in parts.iter().enumerate().skip(1) {
        if p.preparation() != first.preparation() {
            return Err(Error::Config(format!(
                "the parts prepare text differently: part {} {} ({}), part 1 {} ({}); \
                 blend sources built with the same preparation",
                i + 1,
                p.path.display(),
                p.preparation().describe(),
                first.path.display(),
                first.preparation().describe()
            )));
        }
    }
    Ok(())
}

/// A blend file with its parts open.
pub struct Opened {
    /// The blend file.
    pub file: PathBuf,
    /// Its content.
    pub record: BlendFile,
    /// The open parts, in order.
    pub parts: Vec<Part>,
}

impl Opened {
    /// Opens the blend file `file` and its parts (the stores share
    /// `cache_bytes` of block cache; the models are reached as
    /// `residence` says). A part that is missing, is no longer of its
    /// kind or method, or whose settings checksum changed is refused by
    /// its number and path.
    pub fn open(file: &Path, cache_bytes: usize, residence: Residence) -> Result<Opened> {
        let record = BlendFile::load(file)?;
        let stores = record
            .parts
            .iter()
            .filter(|p| p.kind == PartKind::Store)
            .count()
            .max(1);
        let mut parts = Vec::with_capacity(record.parts.len());
        for (i, r) in record.parts.iter().enumerate() {
            let refuse = |detail: String| Error::BlendPart {
                blend: file.to_path_buf(),
                part: i + 1,
                path: r.path.clone(),
                detail,
            };
            if !r.path.exists() {
                return Err(refuse(
                    "not found: it moved or was removed since the blend file was written; \
                     write the blend again with quern blend"
                        .into(),
                ));
            }
            let is_dir = r.path.is_dir();
            if is_dir != (r.kind == PartKind::Store) {
                return Err(refuse(format!(
                    "the blend file names a {}, but this is a {}",
                    if r.kind == PartKind::Store {
                        "store"
                    } else {
                        "model"
                    },
                    if is_dir { "directory" } else { "file" }
                )));
            }
            let params = r.params.clone().unwrap_or_default();
            // A model is opened as it is now: its checksum tells whether
            // it changed (its method included).
            let method = (r.kind == PartKind::Store).then_some(r.method);
            let part = Part::open(&r.path, method, params, cache_bytes / stores, residence)
                .map_err(|e| refuse(e.to_string()))?;
            let now = part.checksum();
            if now != r.settings_checksum {
                return Err(refuse(format!(
                    "it changed since the blend file was written (settings checksum {}, now {now}); \
                     write the blend again with quern blend",
                    r.settings_checksum
                )));
            }
            if part.preparation() != record.preparation {
                return Err(refuse(format!(
                    "it prepares text as {}, the blend file as {}",
                    part.preparation().describe(),
                    record.preparation.describe()
                )));
            }
            parts.push(part);
        }
        check_preparations(&parts)?;
        Ok(Opened {
            file: file.to_path_buf(),
            record,
            parts,
        })
    }

    /// The union of the parts' n-grams: `out[k − 1]` holds those of order
    /// k (k = 1..N, N the largest order of the parts), sorted, without
    /// repeats; `<s>` and `<unk>` are among the unigrams. Closed under
    /// prefixes and suffixes, as every part's n-grams are.
    pub fn ngram_union(&self) -> Result<Vec<Vec<Box<[WordId]>>>> {
        let n = self.parts.iter().map(|p| p.order()).max().unwrap_or(1);
        let mut out = Vec::with_capacity(n);
        for k in 1..=n {
            let mut grams: Vec<Box<[WordId]>> = Vec::new();
            for p in &self.parts {
                grams.extend(p.ngram_ids(k)?.chunks(k).map(Box::from));
            }
            if k == 1 {
                grams.push(Box::new([bos_id()]));
                grams.push(Box::new([unk_id()]));
            }
            grams.sort_unstable();
            grams.dedup();
            out.push(grams);
        }
        Ok(out)
    }

    /// The blend for the calling thread.
    pub fn blend(&self) -> Result<Blend<'_>> {
        let preds = self
            .parts
            .iter()
            .map(|p| p.predictor())
            .collect::<Result<Vec<_>>>()?;
        Blend::new(preds, self.record.weights())
    }
}

/// The record of a blend of `parts` (open) with `weights`.
pub fn record(parts: &[Part], weights: &[f64], fitted: Option<super::file::Fitted>) -> BlendFile {
    BlendFile {
        format_version: BLEND_FORMAT_VERSION,
        preparation: parts[0].preparation(),
        parts: parts
            .iter()
            .zip(weights)
            .map(|(p, &w)| p.record(w))
            .collect(),
        fitted,
    }
}
