//! The Python module `quern` (feature `python`): the store, its
//! estimators and frozen models from Python, through PyO3, built and
//! installed by maturin (`pyproject.toml`; README, "From Python").
//!
//! The package is `src/python/quern/`: `__init__.py` re-exports this
//! native module (`quern._quern`) and `_quern.pyi` describes it for
//! editors. Classes:
//!
//! * `Store(path, memory="256MiB")` (`store::PyStore`): totals,
//!   settings, the statistics report as a dict (the content of
//!   `quern stats --json`), `count`, paged `ngrams`, and `estimator(method,
//!   **params)`.
//! * `Estimator` (`predictor::PyEstimator`): a method over a store. It
//!   keeps caches that are not thread-safe, so it is bound to the thread
//!   that made it (PyO3's `unsendable`).
//! * `Model(path)` (`predictor::PyModel`): a frozen model, memory-mapped,
//!   shared by any number of threads.
//!
//! * `Blend(path, memory="256MiB")` (`predictor::PyBlend`): the mixture
//!   of a blend file's parts (`quern blend`), bound to its thread like an
//!   estimator.
//!
//! Every predictor has `prob`, `log10`, `next`, `score` and `score_many`;
//! `score_many` releases the GIL and scores on worker threads
//! ([`crate::scoring::score_texts`]). Nothing copies a store or a model: the
//! Python objects hold them behind an `Arc`. Library errors become Python
//! exceptions whose message is the command line's (after its
//! `quern: error: `): see `convert::error`.

mod convert;
mod predictor;
mod store;

use pyo3::prelude::*;

/// The native part of the Python package `quern`.
#[pymodule]
#[pyo3(name = "_quern")]
fn quern_module(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    m.add("QuernError", m.py().get_type::<convert::QuernError>())?;
    m.add_class::<store::PyStore>()?;
    m.add_class::<predictor::PyEstimator>()?;
    m.add_class::<predictor::PyModel>()?;
    m.add_class::<predictor::PyBlend>()?;
    Ok(())
}
