"""Beta calibration (Kull, Silva Filho & Flach 2017)."""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import expit, log_expit

from .._validation import plain, power_of_two_unit
from ._base import CalibrationMap
from ._platt import _logistic_loss, _separated, _weighted_logistic, smoothed_binary_targets

__all__ = ["BetaMap"]


def _beta_features(scores: np.ndarray) -> np.ndarray:
    """Columns ``[ln p, -ln(1 - p)]`` for ``p = sigmoid(scores)``, computed stably."""
    return np.column_stack([log_expit(scores), -log_expit(-scores)])


class BetaMap(CalibrationMap):
    """Three-parameter beta calibration.

    ``logit(q) = a * ln(p) - b * ln(1 - p) + c`` with ``a, b >= 0``, where ``p`` is the
    sigmoid of the input log-odds (``ln p`` and ``ln(1 - p)`` are computed from the log-odds
    directly, so no precision is lost near 0 and 1). This family contains the identity
    (``a = b = 1, c = 0``) and, unlike Platt scaling, maps that bend differently near 0 and
    near 1.

    The parameters maximise the weighted Bernoulli log-likelihood subject to ``a, b >= 0``,
    which keeps the map non-decreasing. The constrained optimum is found exactly: the
    unconstrained logistic fit is used when both coefficients are non-negative; otherwise every
    face of the constraint set is fitted (``a = 0``, ``b = 0``, both ``0``) and the feasible fit
    with the highest likelihood is kept. This agrees with the paper's rule (refit without the
    feature whose coefficient came out negative) whenever that rule yields a feasible point
    that is optimal, and is never worse.

    With ``smooth_targets=True`` (the default) the labels are replaced by Platt's (1999)
    smoothed targets, as for :class:`PlattMap`, and the output is kept within
    ``[floor_, 1 - floor_]``, ``floor_ = 1 / (N + 2)``. When the scores separate the classes the
    likelihood is maximised by a (near-)step; the map warns and records ``boundary_``.

    Parameters
    ----------
    smooth_targets : bool, default=True
        Fit Platt's smoothed targets instead of the raw 0/1 labels (and floor the output);
        ``False`` gives the plain constrained maximum-likelihood fit of the paper.

    Attributes
    ----------
    a_, b_, c_ : float
        Fitted parameters.
    floor_ : float
        Smallest output (0 without smoothing).
    boundary_ : str or None
        Set when the scores separate the classes.
    classes_ : ndarray of shape (2,)
        The labels; the second one is the positive class.

    References
    ----------
    M. Kull, T. Silva Filho and P. Flach (2017), "Beta calibration: a well-founded and easily
    implemented improvement on logistic calibration for binary classifiers", AISTATS, eq. (4).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import BetaMap
    >>> s = np.array([-3.0, -2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 3.0, 4.0])
    >>> y = np.array([0, 0, 1, 0, 0, 1, 0, 1, 1, 1])
    >>> m = BetaMap().fit(s, y)
    >>> m.a_ >= 0 and m.b_ >= 0
    True
    >>> bool(np.all(np.diff(m.predict(np.linspace(-5, 5, 11))) >= 0))
    True
    """

    complexity = 3.0

    def __init__(self, *, smooth_targets: bool = True) -> None:
        self.smooth_targets = smooth_targets

    def _uses_counts(self) -> bool:
        return bool(self.smooth_targets)

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        X, t, w = self._prepare(scores, y, w)
        coef, c, _ = _weighted_logistic(X, t, w)
        self._set_solution(X, t, w, coef, c)

    def _prepare(
        self, scores: np.ndarray, y: np.ndarray, w: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Checks, features, targets and floor of a fit: returns the features ``[ln p,
        -ln(1 - p)]``, the targets and the weights the logistic regression sees (shared with the
        batched one-vs-rest fit, see :mod:`probwrap.calibration._one_vs_rest`)."""
        if not isinstance(self.smooth_targets, (bool, np.bool_)):
            raise ValueError(f"`smooth_targets` must be True or False; got {plain(self.smooth_targets)!r}.")
        X = _beta_features(scores)
        if _separated(scores, y, w):
            self.boundary_ = "scores separate the classes: the beta fit is a near-step"
            warnings.warn(
                "`scores` separate the two classes perfectly, so the maximum-likelihood beta map "
                "is a step; BetaMap keeps large finite coefficients (smoothed targets bound the "
                "fitted values, not the map beyond the data). Prefer PlattMap here.",
                UserWarning,
                stacklevel=4,
            )
        if self.smooth_targets:
            y = smoothed_binary_targets(y, w, self._rest_classes)
            self._set_floor(w, 2)
        w = w / power_of_two_unit(w)  # weights enter as a weighted mean; keeps the sum finite
        return X, y, w

    def _set_solution(
        self, X: np.ndarray, y: np.ndarray, w: np.ndarray, both: np.ndarray, c_both: float
    ) -> None:
        """Keep the constrained optimum, given the unconstrained fit ``(both, c_both)``."""
        wn = w / w.sum()
        best: tuple[float, float, float] | None = None
        best_loss = np.inf
        # faces of {a >= 0, b >= 0}: both free, a fixed at 0, b fixed at 0, both fixed at 0
        for free in ((0, 1), (1,), (0,), ()):
            coef = np.zeros(2)
            if free == (0, 1):
                coef[:] = both
                c = c_both
            elif free:
                sub, c, _ = _weighted_logistic(X[:, list(free)], y, w)
                coef[list(free)] = sub
            else:
                ybar = float(np.clip(wn @ y, 1e-12, 1.0 - 1e-12))
                c = float(np.log(ybar) - np.log1p(-ybar))
            if np.any(coef < 0):
                continue
            if free == (0, 1):
                best = (coef[0], coef[1], c)
                break
            loss = _logistic_loss(X @ coef + c, y, wn)
            if loss < best_loss:
                best, best_loss = (coef[0], coef[1], c), loss
        assert best is not None  # the intercept-only face is always feasible
        self.a_ = float(best[0])
        self.b_ = float(best[1])
        self.c_ = float(best[2])

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        X = _beta_features(scores)
        # ln p and -ln(1 - p) are never both large, so an overflow is a saturation to -inf or
        # +inf (probability 0 or 1), never inf - inf
        with np.errstate(over="ignore"):
            return expit(self.a_ * X[:, 0] + self.b_ * X[:, 1] + self.c_)
