"""Type stubs of quern's native module (src/python/*.rs, feature `python`)."""

import os
import pathlib
from typing import Any, Iterable, Optional, Union

__version__: str

Words = Union[str, Iterable[str]]
"""Words as one string (split at whitespace) or an iterable of words;
`<s>` and `</s>` are the sentence markers."""

class QuernError(Exception):
    """An error of quern's library that is neither a missing file
    (FileNotFoundError), another I/O error (OSError) nor an invalid setting
    (ValueError). The message is the command line's."""

class Store:
    """A finished store, opened read-only."""

    def __init__(self, path: Union[str, os.PathLike[str]], memory: str = "256MiB") -> None:
        """Opens the store in the folder `path`; `memory` sizes the caches
        as the command line's `--memory` (three quarters: block cache)."""
    @property
    def path(self) -> pathlib.Path: ...
    @property
    def order(self) -> int:
        """The highest order N."""
    @property
    def settings(self) -> dict[str, Any]:
        """The settings it was counted with (order, lowercase, …)."""
    @property
    def totals(self) -> dict[str, Any]:
        """Sentences, tokens, types, vocabulary, …"""
    def stats(
        self, *, katz_k: int = 5, max_count: Optional[int] = None, order: Optional[int] = None
    ) -> dict[str, Any]:
        """The statistics report: the content of `quern stats --json`."""
    def count(self, ngram: Words) -> int:
        """The count of an n-gram of 1 to N words; 0 if not stored."""
    def ngrams(
        self,
        prefix: Optional[Words] = None,
        order: Optional[int] = None,
        limit: int = 20,
        after: Optional[str] = None,
    ) -> dict[str, Any]:
        """One page of the stored n-grams of `order` (default: one word more
        than the prefix) that begin with `prefix`, in key order:
        `{"order": k, "ngrams": [{"words", "count", "continuation"}, …],
        "next": cursor or None}`; pass `next` as `after` for the next page.
        The JSON of `quern ngrams --json`."""
    def estimator(
        self,
        method: str = "mkn",
        *,
        tuned: Optional[Union[str, os.PathLike[str]]] = None,
        k: Optional[float] = None,
        alpha: Optional[float] = None,
        lambdas: Optional[list[float]] = None,
        katz_k: Optional[int] = None,
        discounts: Optional[str] = None,
    ) -> Estimator:
        """A smoothing method over this store: mkn, kn, absolute,
        witten-bell, katz, interp, add-k, mle or stupid, with the command
        line's parameters."""

class _Predictor:
    """What Estimator and Model share (not a class of the module)."""

    @property
    def method(self) -> str: ...
    @property
    def order(self) -> int: ...
    @property
    def vocabulary_size(self) -> int: ...
    @property
    def lowercase(self) -> bool: ...
    @property
    def preparation(self) -> dict[str, Any]:
        """How text is prepared before lookup (normalize, sentences, tokens, lowercase, digits)."""
    @property
    def is_probability(self) -> bool:
        """False for `stupid`, whose scores are not probabilities."""
    @property
    def notes(self) -> list[str]:
        """What the command line notes on standard error (discounts
        replaced, Katz's K lowered, …)."""
    @property
    def constants(self) -> dict[str, Any]:
        """The per-order constants in use."""
    def prob(self, context: Words, word: str) -> float:
        """P(word | context) (for `stupid`, the score): `quern prob`."""
    def log10(self, context: Words, word: str) -> float:
        """log10 P(word | context); -inf for probability 0."""
    def next(
        self,
        context: Words,
        top: int = 10,
        prefix: str = "",
        match: str = "exact",
        never_suggest: list[str] | None = None,
    ) -> list[dict[str, Any]]:
        """The `top` most probable next words, most probable first: the
        items of `words` of `quern next --json`, each `{"word",
        "probability" (or "score" for `stupid`), "log10"}` (log10 None for
        -infinity); with `prefix`, only words beginning with it
        (`match="folded"`: regardless of case and accents); never the
        words of `never_suggest`."""
    def score(self, text: str) -> dict[str, Any]:
        """One document (each line a sentence): `sentences`,
        `predictions`, `outside_vocabulary`, `probability_zero`,
        `log10_sum` (None for -infinity) and `perplexity` (None when
        infinite, undefined or not a probability), as `quern score
        --lines` gives them."""
    def score_many(self, texts: Iterable[str], threads: int = 0) -> list[dict[str, Any]]:
        """`score` of every text, in order, on `threads` threads (0: one
        per core) with the GIL released; the same results for any number
        of threads."""

class Estimator(_Predictor):
    """A method over a store, from `Store.estimator`. Bound to the thread
    that made it: make one per thread."""

class Model(_Predictor):
    """A frozen model written by `quern freeze`, memory-mapped; shared by
    any number of threads."""

    def __init__(self, path: Union[str, os.PathLike[str]], load: bool = False) -> None:
        """Opens a model file: memory-mapped, or with `load=True` read whole
        into memory on huge pages (as `--load-model`)."""
        ...
    @property
    def path(self) -> pathlib.Path: ...

class Blend(_Predictor):
    """The mixture of a blend file's parts (`quern blend`): P(w | h) =
    sum of weight_i * P_i(w | h); a word outside a part's vocabulary gets
    that part's <unk> probability. Bound to the thread that made it (its
    store parts' estimators are): make one per thread."""

    def __init__(
        self, path: Union[str, os.PathLike[str]], memory: str = "256MiB", load: bool = False
    ) -> None:
        """Opens a blend file and its parts; a part that moved or changed
        since the file was written is refused by name."""
        ...
    @property
    def path(self) -> pathlib.Path: ...
    @property
    def weights(self) -> list[float]: ...
    @property
    def parts(self) -> list[dict[str, Any]]: ...
