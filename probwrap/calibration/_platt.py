"""Platt scaling: a logistic regression of the labels on the log-odds."""

from __future__ import annotations

import warnings

import numpy as np
from scipy.linalg.lapack import dgesv
from scipy.special import expit
from sklearn.exceptions import ConvergenceWarning

from .._validation import plain, power_of_two_unit
from ._base import CalibrationMap, count_weights, rule_of_succession_targets

__all__ = ["PlattMap"]


def _logistic_loss(eta: np.ndarray, t: np.ndarray, wn: np.ndarray) -> float:
    """Weighted mean log loss ``sum wn * (log(1 + e^eta) - t * eta)`` (stable for large eta)."""
    return float(wn @ (np.logaddexp(0.0, eta) - t * eta))


def _weighted_logistic(
    X: np.ndarray, t: np.ndarray, w: np.ndarray, *, max_iter: int = 200
) -> tuple[np.ndarray, float, bool]:
    """Weighted logistic regression with an intercept, fitted by damped Newton steps.

    Minimises ``sum_i w_i * (log(1 + exp(eta_i)) - t_i * eta_i)`` with ``eta = X @ coef + c``
    for targets ``t`` in [0, 1] (fractional targets allowed). Columns are standardised with the
    weighted mean and standard deviation before fitting, so scores of any scale (e.g. +-1e3)
    are handled; columns that are constant get a coefficient of 0.

    Returns ``(coef, intercept, converged)`` on the original scale of ``X``.
    """
    n, d = X.shape
    # Powers of two (exact): the weights only enter as a weighted mean, and each column is
    # standardised anyway; this keeps sums and squares finite near the largest double.
    wn = w / power_of_two_unit(w)
    wn = wn / wn.sum()
    units = np.array([power_of_two_unit(X[:, j]) for j in range(d)])
    X = X / units
    mu = wn @ X
    sd = np.sqrt(wn @ (X - mu) ** 2)
    with np.errstate(over="ignore"):  # (on the original scale; inf compares correctly)
        keep = sd * units > 1e-12 * np.maximum(1.0, np.abs(mu * units))
    Z = (X[:, keep] - mu[keep]) / sd[keep]
    # one row per parameter (intercept first): the products over the rows run along
    # contiguous memory
    At = np.vstack([np.ones(n), Z.T])
    converged = False

    def evaluate(theta):
        """Loss, gradient and sigmoid(eta) from one exponential, ``e = exp(-|eta|)``:
        ``log(1 + exp(eta)) = max(eta, 0) + log(1 + e)`` and ``sigmoid(eta)`` is ``1 / (1 + e)``
        or ``e / (1 + e)``, stable for any eta."""
        eta = theta @ At
        e = np.exp(-np.abs(eta))
        one_e = 1.0 + e
        loss = float(wn @ (np.log(one_e) + np.maximum(eta, 0.0) - t * eta))
        p = np.where(eta >= 0.0, 1.0, e) / one_e
        return loss, At @ (wn * (p - t)), p

    theta = np.zeros(At.shape[0])
    tbar = float(np.clip(wn @ t, 1e-12, 1.0 - 1e-12))
    theta[0] = np.log(tbar) - np.log1p(-tbar)
    f0, grad, p = evaluate(theta)
    eye = np.eye(At.shape[0])
    for _ in range(max_iter):
        hess = (At * (wn * p * (1.0 - p))) @ At.T
        # a tiny ridge keeps the solve defined when the data are (nearly) separated
        # LAPACK's gesv, as np.linalg.solve calls it, without its per-call set-up (which costs
        # ten times the solve of a 2 x 2 or 3 x 3 system)
        step, info = dgesv(hess + 1e-13 * eye, grad)[2:]
        if info != 0:
            raise np.linalg.LinAlgError("Singular matrix")
        decrement = float(grad @ step)
        if decrement < 1e-10:
            # quadratic-convergence region: full Newton steps, no line search needed
            theta = theta - step
            if decrement < 1e-26 or np.max(np.abs(step)) < 1e-14 * (1.0 + np.max(np.abs(theta))):
                converged = True
                break
            f0, grad, p = evaluate(theta)
            continue
        lam = 1.0
        while True:
            candidate = theta - lam * step
            f1, g1, p1 = evaluate(candidate)
            if f1 <= f0 - 1e-4 * lam * decrement or lam < 1e-12:
                break
            lam *= 0.5
        theta, f0, grad, p = candidate, f1, g1, p1
    coef = np.zeros(d)
    coef[keep] = theta[1:] / sd[keep]
    intercept = float(theta[0] - coef @ mu)
    return coef / units, intercept, converged


def _separated(s: np.ndarray, y: np.ndarray, w: np.ndarray) -> bool:
    """Whether the positive-weight rows are (quasi-)completely separated by the score.

    Separation: a cut-off puts every negative on one side and every positive on the other
    (ties at the cut-off allowed), with at least one row strictly on each side of it.
    """
    pos = s[(y == 1) & (w > 0)]
    neg = s[(y == 0) & (w > 0)]
    if pos.size == 0 or neg.size == 0:
        return False
    up = neg.max() <= pos.min() and pos.max() > neg.min()
    down = pos.max() <= neg.min() and neg.max() > pos.min()
    return bool(up or down)


def _score_limits(s: np.ndarray, y: np.ndarray, w: np.ndarray, floor: float) -> tuple[float, float]:
    """``(low, high)`` of ``PlattMap(limit_scores=True)``: ``L = logit(1 - floor / 2)`` beyond
    the last row of the class that does not reach as far (see :class:`PlattMap`), at least
    ``±L``; ``±L`` when a class has no rows of positive weight."""
    half = float(np.log(2.0 / floor - 1.0))
    pos = s[(y == 1) & (w > 0)]
    neg = s[(y == 0) & (w > 0)]
    if pos.size == 0 or neg.size == 0:
        return -half, half
    top = float(min(pos.max(), neg.max()))
    bottom = float(max(pos.min(), neg.min()))
    return min(-half, bottom - half), max(half, top + half)


def smoothed_binary_targets(y: np.ndarray, w: np.ndarray, rest_classes: int = 1) -> np.ndarray:
    """Platt's (1999) targets: ``(N+ + 1) / (N+ + 2)`` for positives, ``1 / (N- + 2)`` else.

    For a one-vs-rest map whose negatives stand for ``rest_classes = k - 1`` classes, the
    negatives' target is shared by them: ``1 / ((N- + 2) (k - 1))`` (see
    :func:`~probwrap.calibration._base.one_vs_rest_copy`); ``rest_classes = 1`` is Platt's.
    """
    true, other = rule_of_succession_targets(y, w, 2)
    return np.where(y == 1, true, other / rest_classes)


class PlattMap(CalibrationMap):
    """Platt scaling: ``q = sigmoid(slope * s + intercept)`` fitted on held-out log-odds.

    The slope and intercept maximise the weighted Bernoulli log-likelihood (Platt 1999). With
    ``smooth_targets=True`` (Platt's recommendation against over-fitting) the 0/1 labels are
    replaced by the targets ``t+ = (N+ + 1) / (N+ + 2)`` for positives and ``t- = 1 / (N- + 2)``
    for negatives, where ``N+`` and ``N-`` are the weighted class counts, and the output is kept
    within ``[floor_, 1 - floor_]`` with ``floor_ = 1 / (N + 2)`` (``N`` the total weight).

    Parameters
    ----------
    smooth_targets : bool, default=True
        Use Platt's smoothed targets instead of the raw 0/1 labels (and floor the output);
        ``False`` gives the plain maximum-likelihood fit.
    limit_scores : bool, default=False
        Clip the scores to ``score_limits_ = (low, high)`` in ``fit`` and ``predict``. Meant
        for log-odds converted from a model's probabilities (``CalibrationWrapper`` sets it for
        them): inputs far beyond what the map can output (naive Bayes probabilities within
        1e-12 of 0 or 1, log-odds near ±27) would otherwise dominate the fit and, against the
        smoothed targets, flatten the slope for every other row. The limit on each side is
        ``L = logit(1 - floor_ / 2)`` (half the output floor, as a log-odds) beyond the last
        calibration row of the class that does not reach that far: ``high = max(L, u + L)``
        with ``u`` the smaller of the two classes' largest scores, and ``low = min(-L, d - L)``
        with ``d`` the larger of their smallest scores. Beyond ``u`` the rows are all of one
        class and say nothing more about the slope, so only scores more than ``L`` beyond
        every row of the other class are clipped; the limit is never inside ``±L``. Has no
        effect without ``smooth_targets`` (no floor).

    Attributes
    ----------
    slope_ : float
        Coefficient of the log-odds.
    intercept_ : float
        Constant term.
    floor_ : float
        Smallest output (0 without smoothing).
    score_limits_ : tuple of float or None
        ``(low, high)``, the clip of the scores (``limit_scores=True`` with smoothed targets),
        else None.
    boundary_ : str or None
        Set when raw 0/1 targets meet scores that separate the classes (no finite fit).
    classes_ : ndarray of shape (2,)
        The labels; the second one is the positive class.

    Notes
    -----
    Fitted by Newton's method with a backtracking line search on internally standardised scores,
    to machine precision. Without smoothing, data that the score separates perfectly have no
    finite maximum-likelihood slope; the map then warns and keeps the (large, finite) slope
    reached after the iteration limit. The slope is not constrained to be positive: scores that
    run against the labels give a decreasing map.

    References
    ----------
    J. Platt (1999), "Probabilistic outputs for support vector machines and comparisons to
    regularized likelihood methods", Advances in Large Margin Classifiers.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import PlattMap
    >>> s = np.array([-2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 2.0, 3.0])
    >>> y = np.array([0, 0, 1, 0, 1, 0, 1, 1])
    >>> m = PlattMap().fit(s, y)
    >>> round(m.slope_, 3), round(m.intercept_, 3)
    (0.573, -0.205)
    >>> m.predict([0.0, 1.0]).round(3)
    array([0.449, 0.591])
    """

    complexity = 2.0

    def __init__(self, *, smooth_targets: bool = True, limit_scores: bool = False) -> None:
        self.smooth_targets = smooth_targets
        self.limit_scores = limit_scores

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        x, t = self._prepare(scores, y, w)
        self._set_solution(*_weighted_logistic(x[:, None], t, w))

    def _prepare(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Checks, targets, floor and score limit of a fit: returns the scores the logistic
        regression sees and its targets (shared with the batched one-vs-rest fit, see
        :mod:`probwrap.calibration._one_vs_rest`)."""
        if not isinstance(self.smooth_targets, (bool, np.bool_)):
            raise ValueError(f"`smooth_targets` must be True or False; got {plain(self.smooth_targets)!r}.")
        if scores.shape[0] > 2 and scores.min() >= 0.0 and scores.max() <= 1.0:
            warnings.warn(
                "PlattMap: every one of `scores` lies in [0, 1], so they look like probabilities; "
                "PlattMap takes log-odds (e.g. a decision_function value). Convert probabilities "
                "first with probwrap.calibration.proba_to_log_odds.",
                UserWarning,
                stacklevel=4,
            )
        if not isinstance(self.limit_scores, (bool, np.bool_)):
            raise ValueError(f"`limit_scores` must be True or False; got {plain(self.limit_scores)!r}.")
        self.score_limits_ = None
        if self.smooth_targets:
            t = smoothed_binary_targets(y, w, self._rest_classes)
            self._set_floor(w, 2)
            if self.limit_scores:
                self.score_limits_ = _score_limits(scores, y, w, self.floor_)
            scores = self._limited(scores)
        else:
            t = y
            if _separated(scores, y, w):
                self.boundary_ = "scores separate the classes and the targets are raw 0/1"
                warnings.warn(
                    "`scores` separate the two classes perfectly, so the maximum-likelihood slope "
                    "is infinite; PlattMap keeps a large finite slope. Use smooth_targets=True "
                    "for a finite fit.",
                    UserWarning,
                    stacklevel=4,
                )
        return scores, t

    def _set_solution(self, coef: np.ndarray, intercept: float, converged: bool) -> None:
        """Store the solver's result (warns when it did not converge)."""
        if not converged and self.smooth_targets:
            warnings.warn(
                "PlattMap: Newton iterations did not reach full precision.",
                ConvergenceWarning,
                stacklevel=4,
            )
        self.slope_ = float(coef[0])
        self.intercept_ = float(intercept)

    def _uses_counts(self) -> bool:
        return bool(self.smooth_targets)

    def _hold_level(self, y01: np.ndarray, w: np.ndarray) -> float:
        """Replace a fitted negative slope by the best fit with a slope of 0 (the optimum of
        the fit constrained to a non-decreasing map, the log-likelihood being concave in the
        slope): every score then gets the weighted mean target, the intercept-only logistic
        fit ``logit(sum(w t) / sum(w))``. ``y01`` and ``w`` are the labels (1 for this map's
        class) and weights the map was fitted on. Returns the slope that was replaced.

        Used by :class:`~probwrap.CalibrationWrapper` for a model it cross-fits, whose map is
        applied to a model refitted on all rows: a decreasing map would reverse the order of
        that model, which was fitted to rank the classes the other way.
        """
        slope = float(self.slope_)
        w = np.asarray(w, dtype=float)
        y01 = np.asarray(y01, dtype=float)
        if self.smooth_targets:
            w = count_weights(w)[0]
            t = smoothed_binary_targets(y01, w, self._rest_classes)
        else:
            t = y01
        mean = float(np.clip((w @ t) / w.sum(), 1e-300, 1.0 - 1e-16))
        self.slope_ = 0.0
        self.intercept_ = float(np.log(mean) - np.log1p(-mean))
        return slope

    def _limited(self, scores: np.ndarray) -> np.ndarray:
        """The scores clipped to ``score_limits_`` (when set)."""
        limits = getattr(self, "score_limits_", None)
        if limits is None and self.limit_scores and getattr(self, "floor_", 0.0) > 0.0:
            # a map saved before the limits were stored: the symmetric limit of its floor
            half = float(np.log(2.0 / self.floor_ - 1.0))
            limits = self.score_limits_ = (-half, half)
        if limits is None:
            return scores
        return np.clip(scores, limits[0], limits[1])

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        scores = self._limited(scores)
        with np.errstate(over="ignore"):  # slope * score beyond the largest double saturates
            return expit(self.slope_ * scores + self.intercept_)
