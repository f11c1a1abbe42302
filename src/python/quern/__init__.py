"""quern from Python: a store's counts and statistics, its smoothed
probabilities, and frozen models, without a process per query.

    import quern
    store = quern.Store("novels-3")
    est = store.estimator("mkn")
    est.prob("<s> it was", "a")
    model = quern.Model("novels-3.qm")
    model.score_many(texts, threads=2)
    blend = quern.Blend("ferry-board.json")

The classes are written in Rust (the crate's feature `python`); see the
README section "From Python".
"""

from ._quern import Blend, Estimator, Model, QuernError, Store, __version__

__all__ = ["Blend", "Estimator", "Model", "QuernError", "Store", "__version__"]
