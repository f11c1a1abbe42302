//! `quern.Estimator` (a method over a store), `quern.Model` (a frozen
//! model) and `quern.Blend` (a blend file's mixture): the same methods on
//! all three, over [`Predictor`].

use std::path::PathBuf;
use std::sync::Arc;

use pyo3::exceptions::{PyTypeError, PyValueError};
use pyo3::intern;
use pyo3::prelude::*;
use pyo3::types::{PyDict, PyList, PyString};

use super::convert::{error, json_to_py, words_text, QuernError};
use crate::blend::{Blend, Opened};
use crate::model::{Model, Residence};
use crate::query::{query_ids, Estimator, Method, Params, Predictor, Prob};
use crate::scoring::{self, BoxedModel, DocResult, MakeModel, Models, Outcome};
use crate::store::Store;
use crate::words::WordId;

/// An estimator with the store it borrows.
struct Owned {
    /// Declared before `store`, so dropped before it.
    est: Estimator<'static>,
    store: Arc<Store>,
}

/// A smoothing method over a store, made by `Store.estimator(...)`.
///
/// It keeps caches that are not thread-safe, so it belongs to the thread
/// that made it (PyO3 refuses it on another thread with a PanicException): make
/// one per thread. `score_many` makes its own per worker thread.
#[pyclass(name = "Estimator", module = "quern", unsendable)]
pub struct PyEstimator {
    inner: Owned,
    method: Method,
    params: Params,
}

impl PyEstimator {
    /// `method` with `params` over `store`.
    pub fn new(store: Arc<Store>, method: Method, params: Params) -> PyResult<PyEstimator> {
        #[allow(unsafe_code)]
        // SAFETY: the estimator borrows the store inside the `Arc`, whose
        // heap address does not change while any clone of the `Arc` lives.
        // `Owned` keeps a clone in the field after `est`, and fields drop
        // in declaration order, so the store outlives the estimator. The
        // `'static` borrow never leaves `Owned`: the estimator is lent out
        // only as `&dyn Predictor` tied to `&self`, and its `store()` is
        // never called here.
        let s: &'static Store = unsafe { &*Arc::as_ptr(&store) };
        let est = Estimator::new(s, method, params.clone()).map_err(error)?;
        Ok(PyEstimator {
            inner: Owned { est, store },
            method,
            params,
        })
    }

    fn pred(&self) -> &dyn Predictor {
        &self.inner.est
    }

    fn score_parallel(
        &self,
        py: Python<'_>,
        texts: Vec<String>,
        threads: usize,
    ) -> PyResult<Vec<DocResult>> {
        let (store, method, params) = (self.inner.store.clone(), self.method, self.params.clone());
        py.detach(move || {
            let make = || -> crate::Result<BoxedModel<'_>> {
                Ok(Box::new(Estimator::new(&store, method, params.clone())?))
            };
            score_with(texts, threads, &make)
        })
        .map_err(error)
    }
}

/// A frozen model written by `quern freeze`: `Model(path)`.
///
/// The file is memory-mapped and never copied; one model serves any
/// number of threads.
#[pyclass(name = "Model", module = "quern", frozen)]
pub struct PyModel {
    model: Arc<Model>,
}

impl PyModel {
    fn pred(&self) -> &dyn Predictor {
        &*self.model
    }

    fn score_parallel(
        &self,
        py: Python<'_>,
        texts: Vec<String>,
        threads: usize,
    ) -> PyResult<Vec<DocResult>> {
        let model = self.model.clone();
        py.detach(move || {
            let make = || -> crate::Result<BoxedModel<'_>> { Ok(Box::new(&*model)) };
            score_with(texts, threads, &make)
        })
        .map_err(error)
    }
}

/// `score_many`'s work (the GIL already released): `texts` scored on
/// `threads` workers, each with its own model made by `make`.
fn score_with<'a>(
    texts: Vec<String>,
    threads: usize,
    make: &'a MakeModel<'a>,
) -> crate::Result<Vec<DocResult>> {
    let models = Models {
        main: make,
        general: None,
    };
    scoring::score_texts(texts, threads, false, &models)
}

/// The ids of a context.
fn context_ids(p: &dyn Predictor, context: &Bound<'_, PyAny>) -> PyResult<Vec<WordId>> {
    Ok(query_ids(
        &words_text("context", context)?,
        &p.preparation(),
    ))
}

/// The id of one word.
fn word_id(p: &dyn Predictor, word: &str) -> PyResult<WordId> {
    match query_ids(word, &p.preparation())[..] {
        [w] => Ok(w),
        ref ids => Err(PyValueError::new_err(format!(
            "word={word:?}: one word is predicted, not {}",
            ids.len()
        ))),
    }
}

fn prob_of(p: &dyn Predictor, context: &Bound<'_, PyAny>, word: &str) -> PyResult<Prob> {
    let ctx = context_ids(p, context)?;
    let w = word_id(p, word)?;
    p.prob(&ctx, w).map_err(error)
}

/// A word's text (`#` and its id in hex if unknown, as the command line
/// writes it).
fn word_text(p: &dyn Predictor, id: WordId) -> PyResult<String> {
    Ok(p.word(id)
        .map_err(error)?
        .unwrap_or_else(|| format!("#{id:016x}")))
}

/// The `top` words after `context` that begin with `prefix`, as the items
/// of `quern next --json`'s `words`: dicts of `word`, `probability` (or
/// `score` for `stupid`) and `log10` (`None` for -infinity).
fn next_of<'py>(
    py: Python<'py>,
    p: &dyn Predictor,
    context: &Bound<'_, PyAny>,
    top: usize,
    prefix: &str,
    matching: &str,
    never: Option<Vec<String>>,
) -> PyResult<Bound<'py, PyList>> {
    let ctx = context_ids(p, context)?;
    let matching: crate::topk::PrefixMatch = matching
        .parse()
        .map_err(|e: String| PyValueError::new_err(format!("match: {e}")))?;
    let never: std::collections::HashSet<crate::words::WordId> = never
        .unwrap_or_default()
        .iter()
        .map(|w| crate::words::word_id(w.as_bytes()))
        .collect();
    // As `quern next`: always through completion (an empty prefix is all
    // of V), which never suggests `<s>` or `<unk>`.
    let next = p
        .suggest(&ctx, prefix, matching, &never, top)
        .map_err(error)?;
    let key = if p.method().is_probability() {
        intern!(py, "probability")
    } else {
        intern!(py, "score")
    };
    let out = PyList::empty(py);
    for &(w, pr) in &next.items {
        let d = PyDict::new(py);
        d.set_item(intern!(py, "word"), word_text(p, w)?)?;
        d.set_item(key, pr)?;
        let lg = pr.log10();
        d.set_item(intern!(py, "log10"), lg.is_finite().then_some(lg))?;
        out.append(d)?;
    }
    Ok(out)
}

/// The texts of an iterable of strings.
fn texts_of(texts: &Bound<'_, PyAny>) -> PyResult<Vec<String>> {
    if texts.is_instance_of::<PyString>() {
        return Err(PyTypeError::new_err(
            "texts: expected an iterable of strings, not one string (use score for one text)",
        ));
    }
    let mut out = Vec::new();
    for (i, t) in texts.try_iter()?.enumerate() {
        let t = t?;
        let Ok(s) = t.cast::<PyString>() else {
            return Err(PyTypeError::new_err(format!(
                "texts: item {i} is {}, not a string",
                t.get_type().name()?
            )));
        };
        out.push(s.to_str()?.to_owned());
    }
    Ok(out)
}

/// One document's result as a dict (the fields of `quern score --lines`
/// but `id` and `line`).
fn doc_dict<'py>(
    py: Python<'py>,
    r: &DocResult,
    probability: bool,
) -> PyResult<Bound<'py, PyDict>> {
    let d = match &r.outcome {
        Outcome::Scored(d) => d,
        Outcome::Bad(e) => return Err(QuernError::new_err(format!("text {}: {e}", r.line))),
    };
    let t = &d.main;
    let finite = |x: Option<f64>| x.filter(|v| v.is_finite());
    let out = PyDict::new(py);
    out.set_item(intern!(py, "sentences"), t.sentences)?;
    out.set_item(intern!(py, "predictions"), t.predictions)?;
    out.set_item(intern!(py, scoring::OUTSIDE_VOCABULARY), t.oov)?;
    out.set_item(intern!(py, scoring::PROBABILITY_ZERO), t.zero)?;
    out.set_item(intern!(py, "log10_sum"), finite(t.log10_prob()))?;
    out.set_item(
        intern!(py, "perplexity"),
        if probability {
            finite(t.perplexity())
        } else {
            None
        },
    )?;
    Ok(out)
}

fn threads_of(threads: usize) -> usize {
    if threads == 0 {
        std::thread::available_parallelism().map_or(1, |n| n.get())
    } else {
        threads
    }
}

/// The methods that `Estimator` and `Model` share, with their docstrings.
macro_rules! predictor_methods {
    ($ty:ty { $($extra:tt)* }) => {
        #[pymethods]
        impl $ty {
            $($extra)*

            /// The method's name (`mkn`, `kn`, …).
            #[getter]
            fn method(&self) -> &'static str {
                self.pred().method().name()
            }

            /// The highest order N.
            #[getter]
            fn order(&self) -> usize {
                self.pred().order()
            }

            /// |V|: the words a distribution is over.
            #[getter]
            fn vocabulary_size(&self) -> u64 {
                self.pred().vocabulary_size()
            }

            /// Whether words are lowercased before lookup (the store was
            /// built with `--lowercase`).
            #[getter]
            fn lowercase(&self) -> bool {
                self.pred().preparation().lowercase
            }

            /// How text is prepared before lookup, as the store's was at
            /// ingest: a dict with `normalize`, `sentences`, `tokens`,
            /// `lowercase` and `digits`.
            #[getter]
            fn preparation(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
                json_to_py(py, &self.pred().preparation().to_json())
            }

            /// Whether the scores are probabilities (false for `stupid`).
            #[getter]
            fn is_probability(&self) -> bool {
                self.pred().method().is_probability()
            }

            /// The notes the command line prints on standard error
            /// (discounts replaced, Katz's K lowered, …).
            #[getter]
            fn notes(&self) -> Vec<String> {
                self.pred().notes().to_vec()
            }

            /// The per-order constants in use (discounts, weights, …), as
            /// a dict: `constants` of `quern score --json`.
            #[getter]
            fn constants(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
                json_to_py(py, &self.pred().constants())
            }

            /// P(word | context): `context` is a string of words or an
            /// iterable of words (`<s>` is the start of a sentence), `word`
            /// one word. For `stupid`, the score. As `quern prob`.
            fn prob(&self, context: &Bound<'_, PyAny>, word: &str) -> PyResult<f64> {
                Ok(prob_of(self.pred(), context, word)?.p)
            }

            /// log10 P(word | context) (`-inf` for probability 0).
            fn log10(&self, context: &Bound<'_, PyAny>, word: &str) -> PyResult<f64> {
                Ok(prob_of(self.pred(), context, word)?.log10)
            }

            /// The `top` most probable next words after `context`, most
            /// probable first (ties by id), exact: the items of `words` of
            /// `quern next --json --top`, each a dict of `word`,
            /// `probability` (`score` for `stupid`) and `log10` (`None`
            /// for -infinity). With a `prefix`, only words that begin with
            /// it (lowercased first when the store is), never `<s>`,
            /// `<unk>` or `</s>`; `match="folded"` matches it regardless
            /// of case and accents. `never_suggest`: words never shown
            /// (the others' probabilities unchanged).
            #[pyo3(signature = (context, top = 10, prefix = "", r#match = "exact", never_suggest = None))]
            fn next<'py>(
                &self,
                py: Python<'py>,
                context: &Bound<'_, PyAny>,
                top: usize,
                prefix: &str,
                r#match: &str,
                never_suggest: Option<Vec<String>>,
            ) -> PyResult<Bound<'py, PyList>> {
                next_of(py, self.pred(), context, top, prefix, r#match, never_suggest)
            }

            /// The score of one text (a document; each of its lines is a
            /// sentence), as a dict: `sentences`, `predictions`,
            /// `outside_vocabulary`, `probability_zero`, `log10_sum`
            /// (`None` for -infinity) and `perplexity` (`None` when
            /// infinite, undefined or not a probability): the fields of
            /// `quern score --lines` for that line.
            fn score<'py>(&self, py: Python<'py>, text: &str) -> PyResult<Bound<'py, PyDict>> {
                let p = self.pred();
                let r = scoring::score_text(p, text.to_owned(), false).map_err(error)?;
                doc_dict(py, &r, p.method().is_probability())
            }

            /// The scores of many texts, in their order (a list of the
            /// dicts of `score`), on `threads` worker threads (0: one per
            /// core) with the GIL released. The results do not depend on
            /// the number of threads.
            #[pyo3(signature = (texts, threads = 0))]
            fn score_many<'py>(
                &self,
                py: Python<'py>,
                texts: &Bound<'py, PyAny>,
                threads: usize,
            ) -> PyResult<Bound<'py, PyList>> {
                let texts = texts_of(texts)?;
                let probability = self.pred().method().is_probability();
                let results = self.score_parallel(py, texts, threads_of(threads))?;
                let out = PyList::empty(py);
                for r in &results {
                    out.append(doc_dict(py, r, probability)?)?;
                }
                Ok(out)
            }
        }
    };
}

predictor_methods!(PyEstimator {
    fn __repr__(&self) -> String {
        format!(
            "quern.Estimator({:?}, method={:?}, order={})",
            self.inner.store.dir().display().to_string(),
            self.method.name(),
            self.pred().order()
        )
    }
});

predictor_methods!(PyModel {
    /// Opens the model file at `path` (checks its header, directory and
    /// the checksums of its small sections; `quern freeze --verify` checks
    /// every byte). Mapped, or with `load=True` read whole into memory on
    /// huge pages (as `--load-model`: slower to open, faster lookups in a
    /// model far larger than the CPU cache).
    #[new]
    #[pyo3(signature = (path, load = false))]
    fn new(py: Python<'_>, path: PathBuf, load: bool) -> PyResult<Self> {
        let residence = if load {
            Residence::Loaded
        } else {
            Residence::Mapped
        };
        let model = py
            .detach(|| Model::open_as(&path, residence))
            .map_err(error)?;
        Ok(PyModel {
            model: Arc::new(model),
        })
    }

    /// The model file.
    #[getter]
    fn path(&self) -> PathBuf {
        self.model.path().to_path_buf()
    }

    fn __repr__(&self) -> String {
        format!(
            "quern.Model({:?}, method={:?}, order={})",
            self.model.path().display().to_string(),
            self.pred().method().name(),
            self.pred().order()
        )
    }
});

/// A blend file's parts, open, with the calling thread's mixture over them.
struct OwnedBlend {
    /// Declared before `opened`, so dropped before it.
    blend: Blend<'static>,
    opened: Arc<Opened>,
}

/// A blend written by `quern blend`: `Blend(path, memory="256MiB")`.
///
/// P(w | h) = Σ λᵢ Pᵢ(w | h) over its parts (stores with their methods,
/// frozen models) with the file's weights; a word outside a part's
/// vocabulary gets that part's `<unk>` probability. Its store parts'
/// estimators keep caches that are not thread-safe, so it belongs to the
/// thread that made it; `score_many` makes one mixture per worker thread.
#[pyclass(name = "Blend", module = "quern", unsendable)]
pub struct PyBlend {
    inner: OwnedBlend,
}

impl PyBlend {
    fn pred(&self) -> &dyn Predictor {
        &self.inner.blend
    }

    fn score_parallel(
        &self,
        py: Python<'_>,
        texts: Vec<String>,
        threads: usize,
    ) -> PyResult<Vec<DocResult>> {
        let opened = self.inner.opened.clone();
        py.detach(move || {
            let make = || -> crate::Result<BoxedModel<'_>> { Ok(Box::new(opened.blend()?)) };
            score_with(texts, threads, &make)
        })
        .map_err(error)
    }
}

predictor_methods!(PyBlend {
    /// Opens the blend file at `path` and its parts, each checked against
    /// what the file recorded (a part that moved or changed is refused by
    /// name). `memory` sizes the stores' caches as `--memory` does; with
    /// `load=True` the model parts are read whole into memory.
    #[new]
    #[pyo3(signature = (path, memory = "256MiB", load = false))]
    fn new(py: Python<'_>, path: PathBuf, memory: &str, load: bool) -> PyResult<Self> {
        let mem = crate::memory::parse_size(memory).map_err(error)?;
        let residence = if load {
            Residence::Loaded
        } else {
            Residence::Mapped
        };
        let opened = py
            .detach(|| Opened::open(&path, (mem / 4 * 3) as usize, residence))
            .map_err(error)?;
        let opened = Arc::new(opened);
        #[allow(unsafe_code)]
        // SAFETY: the mixture borrows the parts inside the `Arc`, whose
        // heap address does not change while any clone of the `Arc` lives.
        // `OwnedBlend` keeps a clone in the field after `blend`, and fields
        // drop in declaration order, so the parts outlive the mixture. The
        // `'static` borrow never leaves `OwnedBlend`: the mixture is lent
        // out only as `&dyn Predictor` tied to `&self`.
        let o: &'static Opened = unsafe { &*Arc::as_ptr(&opened) };
        let blend = o.blend().map_err(error)?;
        Ok(PyBlend {
            inner: OwnedBlend { blend, opened },
        })
    }

    /// The blend file.
    #[getter]
    fn path(&self) -> PathBuf {
        self.inner.opened.file.clone()
    }

    /// The weights λᵢ, in the parts' order.
    #[getter]
    fn weights(&self) -> Vec<f64> {
        self.inner.opened.record.weights()
    }

    /// The parts as the file records them: a list of dicts of `path`,
    /// `kind` (`store` or `model`), `method`, `params` (stores),
    /// `settings_checksum` and `weight`.
    #[getter]
    fn parts(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        super::convert::to_py(py, &self.inner.opened.record.parts)
    }

    fn __repr__(&self) -> String {
        format!(
            "quern.Blend({:?}, parts={}, order={})",
            self.inner.opened.file.display().to_string(),
            self.inner.opened.parts.len(),
            self.pred().order()
        )
    }
});
