"""The identity map: keep the model's own probabilities (the "do no harm" candidate)."""

from __future__ import annotations

import numpy as np
from scipy.special import expit, softmax

from ._base import CalibrationMap

__all__ = ["IdentityMap"]


class IdentityMap(CalibrationMap):
    """Keep the model's own probabilities: ``q = sigmoid(s)`` or ``q = softmax(z)``.

    Nothing is fitted. On binary log-odds ``s`` the output is the probability they came from;
    on log-probabilities ``z`` of shape (n, k) it is the model's own probability vector (on
    logits, their softmax). ``CalibrationWrapper(method="auto")`` scores it beside the fitted
    maps when the model outputs probabilities, so that a model that is already well calibrated
    keeps its probabilities unless a map beats them by more than the cross-validation noise:
    with no parameters it is the simplest candidate of the one-standard-error rule.

    Like temperature scaling with its prior, the output is kept at least
    ``floor_ = 1 / (2 (N + 1) (k - 1))`` (``N`` the total weight, ``k`` the number of classes;
    multiclass rows are renormalised after the floor): the Krichevsky-Trofimov (1981) add-one-half
    estimate of the probability of an error after ``N`` rows without one, shared by the ``k - 1``
    other classes. The model's own 1e-9 is then never handed on when ``N`` calibration rows can
    support no more than about ``1 / (2N)``; the map is the same as
    ``TemperatureMap`` with ``T = 1`` and the same floor.

    Attributes
    ----------
    floor_ : float
        Smallest output probability, ``1 / (2 (N + 1) (k - 1))``.
    classes_ : ndarray
        The labels, in column order.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import IdentityMap
    >>> m = IdentityMap().fit(np.array([-2.0, 0.0, 3.0]), [0, 1, 1])
    >>> m.predict(np.array([0.0, np.log(3.0)])).round(3)
    array([0.5 , 0.75])

    Three rows support no probability below ``1 / (2 * 4) = 0.125``:

    >>> float(m.predict(np.array([-1e3]))[0])
    0.125
    """

    supports_multiclass = True
    complexity = 0.0

    def _uses_counts(self) -> bool:
        return True

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        self._set_floor(w, 2 if scores.ndim == 1 else scores.shape[1], rule="half")

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        with np.errstate(over="ignore"):
            if scores.ndim == 1:
                return expit(scores)
            return softmax(scores - scores.max(axis=1, keepdims=True), axis=1)
