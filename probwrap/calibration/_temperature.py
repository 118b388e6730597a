"""Temperature scaling (Guo, Pleiss, Sun & Weinberger 2017)."""

from __future__ import annotations

import warnings

import numpy as np
from scipy.optimize import brentq
from scipy.special import expit, softmax

from .._validation import power_of_two_unit
from ._base import CalibrationMap

__all__ = ["TemperatureMap"]

#: the search for log(T) spans this many natural-log units either side of the score scale
_LOG_SPAN = 16.0


def _loss_slope(log_beta: float, scores: np.ndarray, y: np.ndarray, wn: np.ndarray) -> float:
    """Derivative of the weighted mean log loss with respect to the inverse temperature.

    With ``beta = 1 / T`` the loss is convex in ``beta`` (a log-sum-exp of linear functions),
    so this derivative is non-decreasing in ``beta`` and the best temperature is its root.
    Binary: ``sum wn * s * (sigmoid(beta * s) - y)``; multiclass: ``sum wn * (E_q[z] - z_y)``
    with ``q = softmax(beta * z)``.
    """
    beta = np.exp(log_beta)
    if scores.ndim == 1:
        return float(wn @ (scores * (expit(beta * scores) - y)))
    q = softmax(beta * scores, axis=1)
    expected = np.sum(q * scores, axis=1)
    return float(wn @ (expected - scores[np.arange(scores.shape[0]), y.astype(np.intp)]))


class TemperatureMap(CalibrationMap):
    """Temperature scaling: divide the log-odds (or logits) by one fitted temperature ``T > 0``.

    Binary: ``q = sigmoid(s / T)`` for log-odds ``s`` of shape (n,). Multiclass:
    ``q = softmax(z / T)`` row by row for logits or log-probabilities ``z`` of shape (n, k).
    ``T > 1`` softens over-confident scores, ``T < 1`` sharpens them; the order of the scores
    (and so the arg-max class) never changes.

    ``T`` minimises the weighted log loss. The loss is convex in ``1 / T``, so the minimum is
    unique and is the root of the loss's derivative with respect to ``1 / T``; the root is found
    on ``log T`` by Brent's method (SciPy ``brentq``, tolerance 1e-14), which stays precise
    even where the loss itself is flat. The search covers ``exp(+-16)`` times the
    root-mean-square score; when the best ``T`` lies beyond an end (scores unrelated to or
    against the labels, or classes separated perfectly) the map warns and uses that end.

    Attributes
    ----------
    temperature_ : float
        Fitted temperature ``T``.
    classes_ : ndarray
        The labels, in column order.

    References
    ----------
    C. Guo, G. Pleiss, Y. Sun and K. Q. Weinberger (2017), "On calibration of modern neural
    networks", ICML, section 4.2.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import TemperatureMap
    >>> z = np.array([[4.0, 0.0, 0.0], [0.0, 4.0, 0.0], [0.0, 0.0, 4.0], [4.0, 0.0, 0.0]])
    >>> m = TemperatureMap().fit(z, [0, 1, 2, 1])
    >>> round(m.temperature_, 4)
    2.2324

    Three rows are right and one is wrong, so the best confidence is 3/4: ``4 / T = ln 6``.

    >>> m.predict(z[:1]).round(3)
    array([[0.75 , 0.125, 0.125]])
    """

    supports_multiclass = True
    complexity = 1.0

    def __init__(self) -> None:
        pass

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        # The loss depends on scores / T only, so T(c s) = c T(s): fit on scores divided by a
        # power of two (exact) near their largest magnitude, where squares cannot overflow, and
        # scale the temperature back. Weights enter as a weighted mean: scaled the same way.
        unit = power_of_two_unit(scores)
        scores = scores / unit
        w = w / power_of_two_unit(w)
        wn = w / w.sum()
        if scores.ndim == 1:
            square = scores**2
        else:
            square = np.mean((scores - scores.mean(axis=1, keepdims=True)) ** 2, axis=1)
        scale = float(np.sqrt(wn @ square))
        if scale == 0.0:
            # every score is the same (per row): the temperature has no effect on the output
            self.temperature_ = 1.0
            return
        # search log(beta) = -log(T) within exp(+-_LOG_SPAN) of 1 / scale
        lo, hi = -np.log(scale) - _LOG_SPAN, -np.log(scale) + _LOG_SPAN
        args = (scores, y, wn)
        at_end = False
        if _loss_slope(lo, *args) >= 0:
            log_beta, at_end = lo, True  # scores unrelated to (or against) the labels
        elif _loss_slope(hi, *args) <= 0:
            log_beta, at_end = hi, True  # classes separated perfectly
        else:
            log_beta = brentq(_loss_slope, lo, hi, args=args, xtol=1e-14, rtol=1e-15)
        log_t = -float(log_beta)
        with np.errstate(over="ignore"):
            temperature = np.exp(log_t) * unit
        # beyond the double range only for scores near the largest or smallest double whose best
        # T is larger or smaller still; the nearest double gives the same saturated probabilities
        temperature = float(np.clip(temperature, np.nextafter(0.0, 1.0), np.finfo(float).max))
        if at_end:
            warnings.warn(
                "TemperatureMap: the best temperature lies at the end of the search range "
                f"(T = {temperature:.3g}); the scores are either unrelated to the labels or "
                "separate the classes perfectly.",
                UserWarning,
                stacklevel=3,
            )
        self.temperature_ = temperature

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        # s / T may overflow for scores near the largest double and a small T: that saturates
        # to probability 0 or 1. Rows are shifted to their maximum first (softmax does not
        # change), so an overflow can only give -inf, never inf - inf.
        with np.errstate(over="ignore", divide="ignore"):
            if scores.ndim == 1:
                return expit(scores / self.temperature_)
            shifted = scores - scores.max(axis=1, keepdims=True)
            return softmax(shifted / self.temperature_, axis=1)
