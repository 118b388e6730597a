"""Bayesian online change points on a series of batch estimates (Adams & MacKay 2007).

The CUSUM (:func:`probwrap.shift.cusum_alarms`) asks "has the level left the baseline?"; this
asks "when did the level last change, and how sure are we?", without a baseline. The series is
cut into segments at unknown batches; a new segment starts at each batch with probability
``hazard`` (a geometric prior on segment lengths). Within a segment the estimates are
``x_t ~ N(mu, s_t^2)`` with the batch's known standard error ``s_t``, and each segment's level
``mu`` is drawn afresh from ``N(prior_mean, prior_sd^2)``. Adams & MacKay's recursion ("Bayesian
online changepoint detection", arXiv:0710.3742, 2007, Algorithm 1) gives, after each batch, the
posterior of the *run length* — how many batches the current segment has lasted — exactly, in
O(n^2) for n batches (a loop over batches, vectorised over run lengths).
"""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.special import logsumexp

from .._validation import plain

__all__ = ["ChangePointResult", "change_point_posterior"]


@dataclass(frozen=True)
class ChangePointResult:
    """Result of :func:`change_point_posterior`.

    Attributes
    ----------
    run_length : ndarray of shape (n_batches, n_batches)
        ``run_length[t, r]``: posterior probability, after batch ``t``, that the current segment
        began at batch ``t - r`` (zero for ``r > t``).
    most_likely_start : ndarray of int of shape (n_batches,)
        After each batch, the batch at which the current segment most probably began.
    recent_change : ndarray of shape (n_batches,)
        After batch ``t``: posterior probability that a segment began at one of the last
        ``window`` batches (after the first batch), i.e. that the level changed recently.
    alarms : ndarray of int
        Batches at which ``recent_change`` first reached ``threshold`` (rising edges).
    change_at : ndarray of int
        For each alarm, the batch at which the new segment most probably began.
    log_evidence : float
        Log marginal likelihood of the series under the model.
    hazard, prior_mean, prior_sd, window, threshold : float, float, float, int, float
        The settings used (``prior_mean`` and ``prior_sd`` after defaults were filled in).
    """

    run_length: np.ndarray
    most_likely_start: np.ndarray
    recent_change: np.ndarray
    alarms: np.ndarray
    change_at: np.ndarray
    log_evidence: float
    hazard: float
    prior_mean: float
    prior_sd: float
    window: int
    threshold: float


def _number(value: Any, name: str, low: float, high: float, *, closed: bool = False) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    inside = ok and (low <= value <= high if closed else low < value < high)
    if not inside:
        bounds = f"[{low:g}, {high:g}]" if closed else f"({low:g}, {high:g})"
        raise ValueError(f"`{name}` must be a number in {bounds}; got {plain(value)!r}.")
    return float(value)


def change_point_posterior(
    estimates: Any,
    standard_error: Any,
    *,
    hazard: float = 0.02,
    prior_mean: float | None = None,
    prior_sd: float | None = None,
    window: int = 3,
    threshold: float = 0.5,
) -> ChangePointResult:
    """Posterior of the batch at which the level of a series last changed, after each batch.

    Parameters
    ----------
    estimates : array-like of shape (n_batches,)
        One estimate per batch, in time order (for example the prevalence column of
        :func:`prior_by_batch`).
    standard_error : float or array-like of shape (n_batches,)
        Standard error of each estimate (for a prevalence interval at 95 %, about its width
        divided by 3.92). Must be positive and finite.
    hazard : float in (0, 1), default=0.02
        Prior probability that a new segment starts at any given batch (a mean segment length
        of ``1 / hazard`` batches).
    prior_mean, prior_sd : float, default=None
        Normal prior of a segment's level. Defaults (empirical Bayes, common practice): the mean
        of the estimates and their standard deviation, the latter at least the median standard
        error.
    window : int, default=3
        ``recent_change`` looks for a segment start among the last ``window`` batches.
    threshold : float in (0, 1), default=0.5
        ``recent_change`` at or above it raises an alarm.

    Returns
    -------
    ChangePointResult

    Notes
    -----
    After batch ``t`` the run length ``r`` has the joint density, with ``h`` the hazard and
    ``pi_r`` the predictive density of ``x_t`` given the ``r`` previous batches of its segment,
    ``P(r_t = r + 1, x_{1:t}) = P(r_{t-1} = r, x_{1:t-1}) (1 - h) pi_r(x_t)`` and
    ``P(r_t = 0, x_{1:t}) = sum_r P(r_{t-1} = r, x_{1:t-1}) h pi_0(x_t)`` (Adams & MacKay 2007,
    eqs. 3-4, cited from memory). The normal-normal model makes ``pi_r`` normal. The result is
    checked against a brute-force sum over every segmentation of short series
    (``tests/test_shift_change_points.py``), with the segment likelihoods from
    ``scipy.stats.multivariate_normal``.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import change_point_posterior
    >>> x = np.r_[np.full(15, 0.04), np.full(10, 0.07)] + np.tile([0.003, -0.003], 25 // 2 + 1)[:25]
    >>> res = change_point_posterior(x, 0.005)
    >>> res.alarms.tolist(), res.change_at.tolist()
    ([15], [15])
    """
    x = np.asarray(estimates, dtype=float)
    if x.ndim != 1 or x.shape[0] == 0:
        raise ValueError(f"`estimates` must be a non-empty 1-d series; got shape {x.shape}.")
    if not np.all(np.isfinite(x)):
        raise ValueError("`estimates` contains NaN or infinite values.")
    n = x.shape[0]
    s = np.broadcast_to(np.asarray(standard_error, dtype=float), (n,)).copy() if np.ndim(
        standard_error) == 0 else np.asarray(standard_error, dtype=float)
    if s.shape != (n,):
        raise ValueError(
            f"`standard_error` must be one number or one per estimate ({n}); got shape {s.shape}."
        )
    if not np.all(np.isfinite(s) & (s > 0)):
        raise ValueError("`standard_error` must be positive and finite for every estimate.")
    h = _number(hazard, "hazard", 0.0, 1.0)
    thr = _number(threshold, "threshold", 0.0, 1.0)
    if not (isinstance(window, numbers.Integral) and not isinstance(window, bool) and window >= 1):
        raise ValueError(f"`window` must be a positive integer; got {plain(window)!r}.")
    m0 = float(np.mean(x)) if prior_mean is None else _number(
        prior_mean, "prior_mean", -np.inf, np.inf)
    if prior_sd is None:
        sd0 = max(float(np.std(x, ddof=1)) if n > 1 else 0.0, float(np.median(s)))
    else:
        sd0 = _number(prior_sd, "prior_sd", 0.0, np.inf)
    v0 = sd0 * sd0

    log_h, log_1mh = np.log(h), np.log1p(-h)
    post = np.zeros((n, n))
    # after batch t - 1, per run length r: log P(r, x_{<t}) (normalised) and the posterior mean
    # and variance of the current segment's level
    log_joint = np.zeros(0)
    level_mean = np.zeros(0)
    level_var = np.zeros(0)
    log_evidence = 0.0
    for t in range(n):
        # new run length 0 starts from the prior; run length r + 1 continues run length r
        m = np.concatenate([[m0], level_mean])
        v = np.concatenate([[v0], level_var])
        pred_var = v + s[t] ** 2
        log_pred = -0.5 * (np.log(2.0 * np.pi * pred_var) + (x[t] - m) ** 2 / pred_var)
        if t == 0:
            new = log_pred  # the first batch starts the first segment
        else:
            new = np.concatenate([
                [logsumexp(log_joint) + log_h + log_pred[0]],
                log_joint + log_1mh + log_pred[1:],
            ])
        norm_t = float(logsumexp(new))
        log_evidence += norm_t
        log_joint = new - norm_t
        post[t, : t + 1] = np.exp(log_joint)
        prec = 1.0 / v + 1.0 / s[t] ** 2
        level_mean = (m / v + x[t] / s[t] ** 2) / prec
        level_var = 1.0 / prec
    return _summarise(post, x, h, m0, sd0, int(window), thr, log_evidence)


def _summarise(post, x, h, m0, sd0, window, thr, log_evidence) -> ChangePointResult:
    n = x.shape[0]
    t_idx = np.arange(n)
    r_map = np.argmax(post, axis=1)
    start = t_idx - r_map
    # recent change after batch t: r_t <= min(t - 1, window - 1)
    cum = np.cumsum(post, axis=1)
    lim = np.minimum(t_idx - 1, window - 1)
    recent = np.where(lim >= 0, cum[t_idx, np.maximum(lim, 0)], 0.0)
    above = recent >= thr
    rising = above & ~np.concatenate([[False], above[:-1]])
    alarms = np.flatnonzero(rising)
    return ChangePointResult(
        run_length=post,
        most_likely_start=start,
        recent_change=recent,
        alarms=alarms,
        change_at=start[alarms],
        log_evidence=float(log_evidence),
        hazard=h,
        prior_mean=m0,
        prior_sd=sd0,
        window=window,
        threshold=thr,
    )
