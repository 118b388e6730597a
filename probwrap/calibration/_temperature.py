"""Temperature scaling (Guo, Pleiss, Sun & Weinberger 2017)."""

from __future__ import annotations

import numbers
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


def _prior_slope(beta: float, lam: float, beta0: float) -> tuple[float, float]:
    """Slope in ``beta`` of the penalty ``lam * (beta / beta0 - log(beta / beta0) - 1)``, and
    its derivative with respect to ``log(beta)``.

    The penalty is the negative log-density of a gamma prior on the inverse temperature with
    its mode at ``beta0`` (shape ``lam + 1`` and rate ``lam / beta0`` when ``lam`` counts
    rows); it is convex, zero at ``beta0``, and grows without bound toward ``beta -> 0`` and
    ``beta -> inf``, so that the penalised loss keeps one finite minimum even when the scores
    separate the classes.
    """
    if lam <= 0.0:
        return 0.0, 0.0
    return lam * (1.0 / beta0 - 1.0 / beta), lam / beta


def _slope_and_curvature(
    log_beta: float, scores: np.ndarray, target: np.ndarray, wn: np.ndarray,
    prior: tuple[float, float] = (0.0, 1.0),
) -> tuple[float, float]:
    """The loss slope of :func:`_loss_slope` and its derivative with respect to ``log(beta)``.

    ``target`` is :func:`_target_scores` (it does not depend on ``beta``). The derivative is
    ``beta * sum wn * Var_q(z)``: the variance of the scores under the model's probabilities.
    ``prior = (lam, beta0)`` adds the slope of the penalty of :func:`_prior_slope`.
    Multiclass ``scores`` come with one row per class, shape (k, n): the sums over the classes
    of a row then run along contiguous memory (several times faster than along rows of k).
    """
    beta = np.exp(log_beta)
    extra_g, extra_d = _prior_slope(beta, *prior)
    if scores.ndim == 1:
        q = expit(beta * scores)
        sq = scores * q
        return (float(wn @ (sq - target)) + extra_g,
                float(beta * (wn @ (sq * scores * (1.0 - q)))) + extra_d)
    q = beta * scores
    q -= q.max(axis=0)
    np.exp(q, out=q)
    q /= q.sum(axis=0)  # the softmax over the classes of each row
    q *= scores
    mean = q.sum(axis=0)
    q *= scores
    var = np.maximum(q.sum(axis=0) - mean**2, 0.0)
    return float(wn @ (mean - target)) + extra_g, float(beta * (wn @ var)) + extra_d


def _root_log_beta(
    scores: np.ndarray, target: np.ndarray, wn: np.ndarray, lo: float, hi: float, start: float,
    prior: tuple[float, float] = (0.0, 1.0),
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
        g, d = _slope_and_curvature(u, scores, target, wn, prior)
        if g == 0.0:
            if d == 0.0:
                # a plateau (saturated probabilities): the loss is flat up to an end of the range
                if _slope_and_curvature(hi, scores, target, wn, prior)[0] <= 0.0:
                    return hi, "hi"
                if _slope_and_curvature(lo, scores, target, wn, prior)[0] >= 0.0:
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
                if _slope_and_curvature(hi, scores, target, wn, prior)[0] <= 0.0:
                    return hi, "hi"
                b_checked = True
            if not a_checked:
                if _slope_and_curvature(lo, scores, target, wn, prior)[0] >= 0.0:
                    return lo, "lo"
                a_checked = True
            new = 0.5 * (a + b)
        if b - a <= tol:
            return new, None
        u = new
    return u, None  # pragma: no cover - the bracket halves at least every other step


def _valid_shrinkage(value: object) -> float:
    if (
        isinstance(value, bool)
        or not isinstance(value, numbers.Real)
        or not (np.isfinite(value) and value >= 0)
    ):
        raise ValueError(f"`shrinkage` must be a finite number >= 0; got {plain(value)!r}.")
    return float(value)


def _rms_scale(scores: np.ndarray, wn: np.ndarray) -> float:
    """Weighted root-mean-square of the row-centred logits, given one row per class (k, n);
    binary log-odds ``s`` (n,) count as the two logits ``[-s/2, s/2]`` (the same map as a
    two-column input)."""
    if scores.ndim == 1:
        square = 0.25 * scores**2
    else:
        square = np.mean((scores - scores.mean(axis=0)) ** 2, axis=0)
    return float(np.sqrt(wn @ square))


class TemperatureMap(CalibrationMap):
    """Temperature scaling: divide the log-odds (or logits) by one fitted temperature ``T > 0``.

    Binary: ``q = sigmoid(s / T)`` for log-odds ``s`` of shape (n,). Multiclass:
    ``q = softmax(z / T)`` row by row for logits or log-probabilities ``z`` of shape (n, k).
    ``T > 1`` softens over-confident scores, ``T < 1`` sharpens them; the order of the scores
    (and so the arg-max class) never changes.

    ``T`` minimises the weighted log loss against the labels (Guo et al. 2017) plus a weak
    penalty, a gamma prior on the inverse temperature ``beta = 1 / T`` worth ``shrinkage``
    rows::

        sum_i w_i * CE(y_i, q_i) + shrinkage * (beta / beta0 - log(beta / beta0) - 1)

    with its mode ``beta0`` at the temperature that gives the scores a root-mean-square of one
    (so the fit does not depend on the units of the scores: ``T(c s) = c T(s)``). On any data
    with a few misranked rows the loss term dominates and the prior changes ``T`` very little;
    when the scores separate the classes, where the unpenalised loss falls toward 0 as
    ``T -> 0`` and has no minimum, the prior stops the sharpening where the least separated
    calibration rows keep an error probability of the order of ``1 / n``. Outputs are kept at
    least ``floor_ = 1 / (2 (N + 1) (k - 1))`` (``N`` the total weight): the
    Krichevsky-Trofimov (1981) add-one-half estimate of the probability of an error after
    ``N`` rows without one, shared by the ``k - 1`` other classes.

    With ``smooth_targets=True`` the labels are replaced by smoothed targets instead: the true
    class gets Platt's (1999) ``(N_y + 1) / (N_y + 2)`` and the other ``k - 1`` classes share
    the remaining ``1 / (N_y + 2)`` equally (``N_y`` the weighted count of the row's class),
    with the floor ``1 / (N + k)`` of Laplace's rule of succession. That bounds the fit as
    well, but pulls every row, however clearly scored, toward the cap, and so costs far more
    log loss on accurate models (see ``docs/calibration.md``); it is no longer the default.

    The penalised loss is convex in ``1 / T``, so the minimum is unique and is the root of the
    derivative with respect to ``1 / T``; the root is found on ``log T`` by Newton's method
    safeguarded by bisection (tolerance 1e-14), which stays precise even where the loss itself
    is flat. The search covers ``exp(+-16)`` times the root-mean-square score; when the best
    ``T`` lies beyond an end (scores unrelated to or against the labels, or, without any
    regularisation, raw labels separated perfectly) the map warns, uses that end and records
    ``boundary_``.

    Parameters
    ----------
    smooth_targets : bool, default=False
        Fit Platt-style smoothed targets (and floor the output at ``1 / (N + k)``) instead of
        the labels.
    shrinkage : float, default=0.5
        Weight of the gamma prior, in rows. ``0`` with ``smooth_targets=False`` gives the
        unregularised fit of Guo et al. (2017), which runs off to ``T -> 0`` on separated
        scores (``boundary_`` is then set) and has no output floor.

    Attributes
    ----------
    temperature_ : float
        Fitted temperature ``T``.
    floor_ : float
        Smallest output probability (0 without regularisation).
    boundary_ : str or None
        Set when the best temperature lies at an end of the search range.
    classes_ : ndarray
        The labels, in column order.

    References
    ----------
    C. Guo, G. Pleiss, Y. Sun and K. Q. Weinberger (2017), "On calibration of modern neural
    networks", ICML, section 4.2.
    R. Krichevsky and V. Trofimov (1981), "The performance of universal encoding", IEEE
    Transactions on Information Theory 27(2) (the add-one-half estimate).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import TemperatureMap
    >>> z = np.array([[4.0, 0.0, 0.0], [0.0, 4.0, 0.0], [0.0, 0.0, 4.0], [4.0, 0.0, 0.0]])
    >>> m = TemperatureMap(shrinkage=0).fit(z, [0, 1, 2, 1])
    >>> round(m.temperature_, 4)
    2.2324

    Three rows are right and one is wrong, so the best confidence is 3/4: ``4 / T = ln 6``.

    >>> m.predict(z[:1]).round(3)
    array([[0.75 , 0.125, 0.125]])

    Smoothed, the targets on the top-scored class are 2/3, 3/4, 2/3 and 1/8 (the last row is
    wrong); the best confidence is their mean, 53/96: four rows support no more.

    >>> TemperatureMap(smooth_targets=True, shrinkage=0).fit(z, [0, 1, 2, 1]).predict(z[:1]).round(3)
    array([[0.552, 0.224, 0.224]])
    """

    supports_multiclass = True
    complexity = 1.0

    def __init__(self, *, smooth_targets: bool = False, shrinkage: float = 0.5) -> None:
        self.smooth_targets = smooth_targets
        self.shrinkage = shrinkage

    def _uses_counts(self) -> bool:
        return bool(self.smooth_targets) or _valid_shrinkage(self.shrinkage) > 0

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        if not isinstance(self.smooth_targets, (bool, np.bool_)):
            raise ValueError(f"`smooth_targets` must be True or False; got {plain(self.smooth_targets)!r}.")
        shrinkage = _valid_shrinkage(self.shrinkage)
        k = 2 if scores.ndim == 1 else scores.shape[1]
        counts = None
        if self.smooth_targets:
            with np.errstate(over="ignore"):
                counts = np.bincount(y.astype(np.intp), weights=w, minlength=k).astype(float)
            # (N + 1) / (N + 2) is exactly 1 in doubles for any N above 2**53: capping counts
            # near the largest double changes no target and keeps the sums finite
            counts = np.minimum(counts, 2.0**1000)
            self._set_floor(w, k)
        elif shrinkage > 0:
            self._set_floor(w, k, rule="half")
        with np.errstate(over="ignore"):
            # the prior's weight per unit of weight (the loss is a weighted mean); 0 beyond the
            # double range, where a prior worth a few rows does not matter
            lam = shrinkage / float(w.sum())
        # The loss depends on scores / T only, so T(c s) = c T(s): fit on scores divided by a
        # power of two (exact) near their largest magnitude, where squares cannot overflow, and
        # scale the temperature back. Weights enter as a weighted mean: scaled the same way.
        unit = power_of_two_unit(scores)
        scores = scores / unit
        w = w / power_of_two_unit(w)
        wn = w / w.sum()
        target = _target_scores(scores, y, counts)
        if scores.ndim == 2:
            scores = np.ascontiguousarray(scores.T)  # one row per class (see the slope)
        scale = _rms_scale(scores, wn)
        if scale == 0.0:
            # every score is the same (per row): the temperature has no effect on the output
            self.temperature_ = 1.0
            return
        # search log(beta) = -log(T) within exp(+-_LOG_SPAN) of 1 / scale, the prior's mode
        lo, hi = -np.log(scale) - _LOG_SPAN, -np.log(scale) + _LOG_SPAN
        log_beta, end = _root_log_beta(
            scores, target, wn, lo, hi, -np.log(scale), (lam, 1.0 / scale)
        )
        self._set_temperature(-float(log_beta), unit, end)

    def _set_temperature(self, log_t: float, unit: float, end: str | None) -> None:
        """Store ``T = exp(log_t) * unit``; warn and record ``boundary_`` at a range end."""
        if end == "lo":  # scores unrelated to (or against) the labels
            self.boundary_ = "temperature at the high end of its search range (flat output)"
        elif end == "hi":  # classes separated perfectly
            self.boundary_ = "temperature at the low end of its search range (sharpest output)"
        with np.errstate(over="ignore"):
            temperature = np.exp(log_t) * unit
        # beyond the double range only for scores near the largest or smallest double whose best
        # T is larger or smaller still; the nearest double gives the same saturated probabilities
        temperature = float(np.clip(temperature, np.nextafter(0.0, 1.0), np.finfo(float).max))
        if end is not None:
            warnings.warn(
                "TemperatureMap: the best temperature lies at the end of the search range "
                f"(T = {temperature:.3g}); the scores are either unrelated to the labels or "
                "separate the classes perfectly.",
                UserWarning,
                stacklevel=4,
            )
        self.temperature_ = temperature

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        # s / T may overflow for scores near the largest double and a small T: that saturates
        # to probability 0 or 1. Rows are shifted to their maximum first (softmax does not
        # change), so an overflow can only give -inf, never inf - inf.
        with np.errstate(over="ignore", divide="ignore"):
            if scores.ndim == 1:
                return expit(scores / self.temperature_)
            # one row per class: the sums over a row's classes run along contiguous memory
            shifted = scores.T.copy()  # (a copy: the operations below are in place)
            shifted -= shifted.max(axis=0)
            shifted /= self.temperature_
            np.exp(shifted, out=shifted)
            shifted /= shifted.sum(axis=0)
            return shifted.T
