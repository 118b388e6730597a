"""Temperature scaling (Guo, Pleiss, Sun & Weinberger 2017)."""

from __future__ import annotations

import warnings

import numpy as np
from scipy.special import expit, softmax

from .._validation import plain, power_of_two_unit
from ._base import CalibrationMap

__all__ = ["TemperatureMap"]

#: the search for log(T) spans this many natural-log units either side of the score scale
_LOG_SPAN = 16.0


def _target_scores(scores: np.ndarray, y: np.ndarray, counts: np.ndarray | None) -> np.ndarray:
    """Per row, the score expected under the targets: ``sum_j t_ij z_ij``.

    Raw labels: ``z_iy``. Smoothed targets (``counts`` = weighted class counts ``N_c``): the
    true class gets Platt's ``(N_y + 1) / (N_y + 2)``, the other ``k - 1`` classes share
    ``1 / (N_y + 2)`` equally. Binary log-odds: the target probability of the positive class
    times ``s``.
    """
    idx = y.astype(np.intp)
    if scores.ndim == 1:
        if counts is None:
            return scores * y
        n = counts[idx]
        t = np.where(idx == 1, (n + 1.0) / (n + 2.0), 1.0 / (n + 2.0))
        return scores * t
    own = scores[np.arange(scores.shape[0]), idx]
    if counts is None:
        return own
    k = scores.shape[1]
    n = counts[idx]
    rest = (scores.sum(axis=1) - own) / (k - 1)
    return ((n + 1.0) * own + rest) / (n + 2.0)


def _loss_slope(
    log_beta: float,
    scores: np.ndarray,
    y: np.ndarray,
    wn: np.ndarray,
    counts: np.ndarray | None = None,
) -> float:
    """Derivative of the weighted mean log loss with respect to the inverse temperature.

    With ``beta = 1 / T`` the loss is convex in ``beta`` (a log-sum-exp of linear functions),
    so this derivative is non-decreasing in ``beta`` and the best temperature is its root.
    Binary: ``sum wn * s * (sigmoid(beta * s) - t)``; multiclass: ``sum wn * (E_q[z] - E_t[z])``
    with ``q = softmax(beta * z)`` and ``t`` the targets (one-hot labels, or the smoothed
    targets when ``counts``, the weighted class counts, are given).
    """
    beta = np.exp(log_beta)
    target = _target_scores(scores, y, counts)
    if scores.ndim == 1:
        return float(wn @ (scores * expit(beta * scores) - target))
    q = softmax(beta * scores, axis=1)
    expected = np.sum(q * scores, axis=1)
    return float(wn @ (expected - target))


def _slope_and_curvature(
    log_beta: float, scores: np.ndarray, target: np.ndarray, wn: np.ndarray
) -> tuple[float, float]:
    """The loss slope of :func:`_loss_slope` and its derivative with respect to ``log(beta)``.

    ``target`` is :func:`_target_scores` (it does not depend on ``beta``). The derivative is
    ``beta * sum wn * Var_q(z)``: the variance of the scores under the model's probabilities.
    """
    beta = np.exp(log_beta)
    if scores.ndim == 1:
        q = expit(beta * scores)
        sq = scores * q
        return float(wn @ (sq - target)), float(beta * (wn @ (sq * scores * (1.0 - q))))
    q = softmax(beta * scores, axis=1)
    qz = q * scores
    mean = qz.sum(axis=1)
    var = np.maximum(np.einsum("ij,ij->i", qz, scores) - mean**2, 0.0)
    return float(wn @ (mean - target)), float(beta * (wn @ var))


def _root_log_beta(
    scores: np.ndarray, target: np.ndarray, wn: np.ndarray, lo: float, hi: float, start: float
) -> tuple[float, str | None]:
    """Root of the loss slope in ``log(beta)`` within ``[lo, hi]``.

    The slope is non-decreasing in ``beta`` (convex loss), so Newton steps on ``log(beta)``,
    safeguarded by bisection whenever a step would leave the current bracket, converge
    quadratically; they stop when a step is below 1e-14 (relative) or the slope is exactly 0.
    Bisection also takes over when a Newton step is not at most half the previous step. The ends of the range
    are evaluated only when bisection needs them; when the slope has the same sign at an end,
    the root lies beyond the range and that end is returned with ``"lo"`` or ``"hi"``.
    """
    a, b = lo, hi
    a_checked = b_checked = False
    previous = 2.0 * (hi - lo)
    u = min(max(start, lo), hi)
    for _ in range(300):
        g, d = _slope_and_curvature(u, scores, target, wn)
        if g == 0.0:
            if d == 0.0:
                # a plateau (saturated probabilities): the loss is flat up to an end of the range
                if _slope_and_curvature(hi, scores, target, wn)[0] <= 0.0:
                    return hi, "hi"
                if _slope_and_curvature(lo, scores, target, wn)[0] >= 0.0:
                    return lo, "lo"
            return u, None
        if g < 0.0:
            a, a_checked = u, True
        else:
            b, b_checked = u, True
        tol = 1e-14 * max(1.0, abs(u))
        step = g / d if d > 0.0 else (np.inf if g > 0 else -np.inf)
        if abs(step) <= tol:
            return min(max(u - step, a), b), None
        new = u - step
        # Newton steps must at least halve (as in Press et al.'s safeguarded "rtsafe")
        slow = abs(step) > 0.5 * previous
        previous = abs(step)
        if slow or not a < new < b:
            # bisect, on a verified bracket: an end of the range is evaluated only now, and
            # when the slope has the same sign there the root lies beyond the range
            if not b_checked:
                if _slope_and_curvature(hi, scores, target, wn)[0] <= 0.0:
                    return hi, "hi"
                b_checked = True
            if not a_checked:
                if _slope_and_curvature(lo, scores, target, wn)[0] >= 0.0:
                    return lo, "lo"
                a_checked = True
            new = 0.5 * (a + b)
        if b - a <= tol:
            return new, None
        u = new
    return u, None  # pragma: no cover - the bracket halves at least every other step


class TemperatureMap(CalibrationMap):
    """Temperature scaling: divide the log-odds (or logits) by one fitted temperature ``T > 0``.

    Binary: ``q = sigmoid(s / T)`` for log-odds ``s`` of shape (n,). Multiclass:
    ``q = softmax(z / T)`` row by row for logits or log-probabilities ``z`` of shape (n, k).
    ``T > 1`` softens over-confident scores, ``T < 1`` sharpens them; the order of the scores
    (and so the arg-max class) never changes.

    ``T`` minimises the weighted log loss, by default against smoothed targets: the true class
    gets Platt's (1999) ``(N_y + 1) / (N_y + 2)`` and the other ``k - 1`` classes share the
    remaining ``1 / (N_y + 2)`` equally, where ``N_y`` is the weighted count of the row's class
    (the true-class target is the one one-vs-rest Platt scaling uses). Smoothing keeps ``T``
    finite when the scores separate the classes, and outputs are kept at least
    ``floor_ = 1 / (N + k)`` (``N`` the total weight). The loss is convex in ``1 / T``, so the minimum is
    unique and is the root of the loss's derivative with respect to ``1 / T``; the root is found
    on ``log T`` by Newton's method safeguarded by bisection (tolerance 1e-14), which stays
    precise even where the loss itself is flat. The search covers ``exp(+-16)`` times the
    root-mean-square score; when the best ``T`` lies beyond an end (scores unrelated to or
    against the labels, or raw labels separated perfectly) the map warns, uses that end and
    records ``boundary_``.

    Parameters
    ----------
    smooth_targets : bool, default=True
        Fit the smoothed targets (and floor the output); ``False`` fits the raw labels, as in
        Guo et al. (2017).

    Attributes
    ----------
    temperature_ : float
        Fitted temperature ``T``.
    floor_ : float
        Smallest output probability (0 without smoothing).
    boundary_ : str or None
        Set when the best temperature lies at an end of the search range.
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
    >>> m = TemperatureMap(smooth_targets=False).fit(z, [0, 1, 2, 1])
    >>> round(m.temperature_, 4)
    2.2324

    Three rows are right and one is wrong, so the best confidence is 3/4: ``4 / T = ln 6``.

    >>> m.predict(z[:1]).round(3)
    array([[0.75 , 0.125, 0.125]])

    Smoothed (the default), the targets on the top-scored class are 2/3, 3/4, 2/3 and 1/8 (the
    last row is wrong); the best confidence is their mean, 53/96: four rows support no more.

    >>> TemperatureMap().fit(z, [0, 1, 2, 1]).predict(z[:1]).round(3)
    array([[0.552, 0.224, 0.224]])
    """

    supports_multiclass = True
    complexity = 1.0

    def __init__(self, *, smooth_targets: bool = True) -> None:
        self.smooth_targets = smooth_targets

    def _uses_counts(self) -> bool:
        return bool(self.smooth_targets)

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        if not isinstance(self.smooth_targets, (bool, np.bool_)):
            raise ValueError(f"`smooth_targets` must be True or False; got {plain(self.smooth_targets)!r}.")
        k = 2 if scores.ndim == 1 else scores.shape[1]
        counts = None
        if self.smooth_targets:
            with np.errstate(over="ignore"):
                counts = np.bincount(y.astype(np.intp), weights=w, minlength=k).astype(float)
            # (N + 1) / (N + 2) is exactly 1 in doubles for any N above 2**53: capping counts
            # near the largest double changes no target and keeps the sums finite
            counts = np.minimum(counts, 2.0**1000)
            self._set_floor(w, k)
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
        target = _target_scores(scores, y, counts)
        log_beta, end = _root_log_beta(scores, target, wn, lo, hi, -np.log(scale))
        at_end = end is not None
        if end == "lo":  # scores unrelated to (or against) the labels
            self.boundary_ = "temperature at the high end of its search range (flat output)"
        elif end == "hi":  # classes separated perfectly
            self.boundary_ = "temperature at the low end of its search range (sharpest output)"
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
