"""The map :class:`probwrap.PriorShiftWrapper` returns its probabilities through on small sets
where the labelled rows contradict the model's confidence (the twenty-fourth session's rule).

``BiasCorrectedScaling`` serves two purposes: the prior estimate (its class-wise biases make the
mean calibrated posterior the class frequency, which EM needs) and the probabilities handed to
the user (``predict_output``: the map, or the model's own where a likelihood-ratio test keeps
them). On a few dozen labelled rows of a model whose probabilities reach nearer 0 and 1 than
the rows can resolve (naive Bayes), a labelled row given less than the row bound for its own
class shows that confidence is misplaced, while the map's prior on the scale (worth 5 rows,
mode 1) holds the slope near the model's own and the floor flattens the most confident rows.
There the probabilities returned are those of ``CalibrationWrapper(method="auto")`` fitted on
the same held-out probabilities (the map it chooses by folds; the model's own among its
candidates). The prior estimate keeps ``BiasCorrectedScaling``. Measured in
docs/prior_shift.md, "Before adapt on small labelled sets".
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
from sklearn.base import BaseEstimator, ClassifierMixin

from .shift._calibration import _floor

__all__ = ["OUTPUT_MAP_MAX_ROWS", "contradicted_confidence", "fit_output_map"]

#: The rule applies up to this many held-out rows (counted as for the map's prior on the scale,
#: worth 5 rows: at least 5 % of the rows here). Measured on 20-600 rows (docs/prior_shift.md,
#: "Before adapt on small labelled sets"): at 150 rows of the twenty-third session's hunt it
#: raised the geometric mean (0.8386 -> 0.8411 over the sigmoid), at 20-100 it lowered it.
OUTPUT_MAP_MAX_ROWS = 100


class _GivenProbabilities(ClassifierMixin, BaseEstimator):
    """A fitted "model" whose ``predict_proba`` returns its input: held-out probabilities
    handed to :class:`probwrap.CalibrationWrapper` as a frozen model's outputs."""

    def __init__(self, n_classes: int = 2) -> None:
        self.n_classes = n_classes

    def fit(self, X: Any = None, y: Any = None) -> _GivenProbabilities:
        self.classes_ = np.arange(self.n_classes)
        return self

    def predict_proba(self, X: Any) -> np.ndarray:
        return np.asarray(X, dtype=float)


def contradicted_confidence(proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray) -> str | None:
    """Why the output map should be chosen by folds, or None.

    Two classes, at most :data:`OUTPUT_MAP_MAX_ROWS` (100) held-out
    rows (weights read as row frequencies, or Kish's effective size, as for the map's prior),
    and probabilities near 0 or 1: some held-out probability above 0 lies below the row bound
    ``1 / (4 (N + 1))`` (half the map's output floor, :func:`heldout_clip`'s bound; a forest's
    grid of multiples of ``1 / n_trees`` does not reach it, and its exact 0 is its resolution).
    Then ``"confident miss"`` where a labelled row of weight > 0 got less than that bound for
    its own class (but none exactly 0: underflowed probabilities).
    """
    from .calibration._base import count_weights

    p = np.asarray(proba, dtype=float)
    if p.ndim != 2 or p.shape[1] != 2:
        return None
    w = np.asarray(w, dtype=float)
    with np.errstate(over="ignore"):
        n_rows = float(count_weights(w)[0].sum())
    if not 0.0 < n_rows <= OUTPUT_MAP_MAX_ROWS:
        return None
    keep = w > 0
    bound = 0.5 * _floor(n_rows, 2)
    positive = p[keep][p[keep] > 0]
    if not (positive.size and float(positive.min()) < bound):
        return None
    own = p[np.flatnonzero(keep), np.asarray(y_idx)[keep]]
    if own.size and 0.0 < float(own.min()) < bound:
        # (a row at exactly 0 for its own class: the probabilities have underflowed, and the
        # maps chosen by folds see no order among them; measured worse, docs/prior_shift.md)
        return "confident miss"
    # (the model's own probabilities kept by the likelihood-ratio test while the map's scale is
    # below 1 was measured too and is left alone: it breaks the guarantee for calibrated
    # models on 20 rows, tests/test_prior_shift_safety.py; docs/prior_shift.md)
    return None


def fit_output_map(proba: np.ndarray, y_idx: np.ndarray, w: np.ndarray | None,
                   random_state: Any, owner: str) -> Any:
    """``CalibrationWrapper(method="auto")`` fitted on held-out probabilities (a frozen "model"
    returning them), with ``w`` as its ``sample_weight`` (None: unweighted). Its warnings are
    passed on, named as the output calibration of ``owner``; a ``WeightScaleWarning`` is left
    to ``owner``, which says the same about the same weights."""
    from sklearn.frozen import FrozenEstimator

    from ._calibration_wrapper import CalibrationWrapper
    from .calibration import WeightScaleWarning

    p = np.asarray(proba, dtype=float)
    model = FrozenEstimator(_GivenProbabilities(p.shape[1]).fit())
    cw = CalibrationWrapper(model, method="auto", random_state=random_state)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if w is None:
            cw.fit(p, np.asarray(y_idx))
        else:
            cw.fit(p, np.asarray(y_idx), sample_weight=w)
    for item in caught:
        if issubclass(item.category, (WeightScaleWarning, DeprecationWarning)):
            continue
        warnings.warn(f"{owner} (its output calibration, chosen by folds): {item.message}",
                      item.category, stacklevel=4)
    return cw
