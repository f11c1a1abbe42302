//! `quern.Store`: a finished store opened read-only.

use std::path::PathBuf;
use std::sync::Arc;

use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use pyo3::types::PyDict;

use super::convert::{error, to_py, words_text};
use super::predictor::PyEstimator;
use crate::query::{cursor, parse_cursor, prefix_page, query_ids, Method, Params, ParamsFile};
use crate::stats::{report, ReportOptions};
use crate::store::Store;

/// A finished store, opened read-only: `Store(path, memory="256MiB")`.
///
/// `memory` sizes the caches as `--memory` does on the command line (three
/// quarters go to the block cache). The store stays open while this object
/// or an estimator made from it lives.
#[pyclass(name = "Store", module = "quern", frozen)]
pub struct PyStore {
    pub(super) store: Arc<Store>,
}

#[pymethods]
impl PyStore {
    /// Opens the finished store in the folder `path`.
    #[new]
    #[pyo3(signature = (path, memory = "256MiB"))]
    fn new(py: Python<'_>, path: PathBuf, memory: &str) -> PyResult<Self> {
        let mem = crate::memory::parse_size(memory).map_err(error)?;
        let store = py
            .detach(|| Store::open_with_cache(&path, (mem / 4 * 3) as usize))
            .map_err(error)?;
        Ok(PyStore {
            store: Arc::new(store),
        })
    }

    /// The store's folder.
    #[getter]
    fn path(&self) -> PathBuf {
        self.store.dir().to_path_buf()
    }

    /// The highest order N.
    #[getter]
    fn order(&self) -> usize {
        self.store.order()
    }

    /// The settings it was counted with (order, lowercase, …), as a dict.
    #[getter]
    fn settings(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.store.meta().settings)
    }

    /// The totals (sentences, tokens, types, vocabulary, …), as a dict.
    #[getter]
    fn totals(&self, py: Python<'_>) -> PyResult<Py<PyAny>> {
        to_py(py, &self.store.meta().totals)
    }

    /// The statistics report as a dict: the content of `quern stats
    /// --json` with the same options (`katz_k` rows of the Good-Turing
    /// table, count-of-counts up to `max_count`, only `order`).
    #[pyo3(signature = (*, katz_k = 5, max_count = None, order = None))]
    fn stats(
        &self,
        py: Python<'_>,
        katz_k: usize,
        max_count: Option<u64>,
        order: Option<usize>,
    ) -> PyResult<Py<PyAny>> {
        let n = self.store.meta().settings.order;
        if let Some(k) = order {
            if k == 0 || k > n {
                return Err(PyValueError::new_err(format!(
                    "order={k}: the store {} has orders 1..={n}",
                    self.store.dir().display()
                )));
            }
        }
        let opts = ReportOptions {
            katz_k,
            max_count,
            order,
        };
        to_py(py, &report(self.store.meta(), &opts))
    }

    /// The count of an n-gram (a string of words, or an iterable of words;
    /// `<s>` and `</s>` are the markers): 0 if it is not stored.
    fn count(&self, py: Python<'_>, ngram: &Bound<'_, PyAny>) -> PyResult<u64> {
        let ids = query_ids(
            &words_text("ngram", ngram)?,
            &self.store.meta().settings.preparation,
        );
        if ids.is_empty() || ids.len() > self.store.order() {
            return Err(PyValueError::new_err(format!(
                "an n-gram has 1 to {} words, not {}",
                self.store.order(),
                ids.len()
            )));
        }
        let got = py.detach(|| self.store.get(&ids)).map_err(error)?;
        Ok(got.map_or(0, |(c, _)| c))
    }

    /// One page of the stored n-grams of order `order` (default: one more
    /// word than the prefix) that begin with `prefix`, in key order: a dict
    /// with `order`, `ngrams` (dicts with `words`, `count`, `continuation`,
    /// which is `None` at the top order) and `next`, the cursor to pass as
    /// `after` for the next page (`None` after the last page): the JSON of
    /// `quern ngrams --json`.
    #[pyo3(signature = (prefix = None, order = None, limit = 20, after = None))]
    fn ngrams(
        &self,
        py: Python<'_>,
        prefix: Option<&Bound<'_, PyAny>>,
        order: Option<usize>,
        limit: usize,
        after: Option<&str>,
    ) -> PyResult<Py<PyAny>> {
        let text = match prefix {
            Some(p) => words_text("prefix", p)?,
            None => String::new(),
        };
        let prefix = query_ids(&text, &self.store.meta().settings.preparation);
        let order = order.unwrap_or(prefix.len() + 1);
        let after = match after {
            None => None,
            Some(s) => Some(parse_cursor(s).ok_or_else(|| {
                PyValueError::new_err(format!("after={s:?}: not a cursor returned by ngrams"))
            })?),
        };
        if limit == 0 {
            return Err(PyValueError::new_err("limit must be at least 1"));
        }
        let store = &self.store;
        let (page, words) = py
            .detach(|| -> crate::Result<_> {
                let page = prefix_page(store, &prefix, order, limit, after.as_deref())?;
                let mut words = Vec::with_capacity(page.items.len());
                for (k, _, _) in &page.items {
                    let mut s = String::new();
                    for (i, &id) in k.ids().iter().enumerate() {
                        if i > 0 {
                            s.push(' ');
                        }
                        match store.word(id)? {
                            Some(w) => s.push_str(&w),
                            None => s.push_str(&format!("#{id:016x}")),
                        }
                    }
                    words.push(s);
                }
                Ok((page, words))
            })
            .map_err(error)?;
        let d = PyDict::new(py);
        d.set_item("order", order)?;
        let items = pyo3::types::PyList::empty(py);
        for ((_, c, cont), w) in page.items.iter().zip(words) {
            let x = PyDict::new(py);
            x.set_item("words", w)?;
            x.set_item("count", c)?;
            x.set_item("continuation", cont)?;
            items.append(x)?;
        }
        d.set_item("ngrams", items)?;
        d.set_item("next", page.next.map(|k| cursor(k.ids())))?;
        Ok(d.into_any().unbind())
    }

    /// A smoothing method over this store: `mkn` (the default), `kn`,
    /// `absolute`, `witten-bell`, `katz`, `interp`, `add-k`, `mle` or
    /// `stupid`, with its parameters as on the command line: `tuned` (a
    /// file written by `quern tune --out`; the others override it), `k`,
    /// `alpha`, `lambdas`, `katz_k`, `discounts` (a policy string).
    #[pyo3(signature = (method = "mkn", *, tuned = None, k = None, alpha = None, lambdas = None, katz_k = None, discounts = None))]
    #[allow(clippy::too_many_arguments)]
    fn estimator(
        &self,
        method: &str,
        tuned: Option<PathBuf>,
        k: Option<f64>,
        alpha: Option<f64>,
        lambdas: Option<Vec<f64>>,
        katz_k: Option<usize>,
        discounts: Option<&str>,
    ) -> PyResult<PyEstimator> {
        let m: Method = method.parse().map_err(error)?;
        // The file `tuned` (if given), then the values given on top, as the
        // command line's parameter flags do.
        let mut p = Params::default();
        if let Some(f) = &tuned {
            let pf = ParamsFile::load(f).map_err(error)?;
            if pf.method != m {
                return Err(PyValueError::new_err(format!(
                    "{}: the parameters were fitted for {}, not {m}",
                    f.display(),
                    pf.method
                )));
            }
            p = pf.params;
        }
        if let Some(k) = k {
            p.k = k;
        }
        if let Some(a) = alpha {
            p.alpha = a;
        }
        if let Some(l) = lambdas {
            p.lambdas = Some(l);
            p.bucket_lambdas = None;
        }
        if let Some(k) = katz_k {
            p.katz_k = k;
        }
        if let Some(d) = discounts {
            p.discounts = d.parse().map_err(error)?;
        }
        PyEstimator::new(self.store.clone(), m, p)
    }

    fn __repr__(&self) -> String {
        format!(
            "quern.Store({:?}, order={})",
            self.store.dir().display().to_string(),
            self.store.order()
        )
    }
}
