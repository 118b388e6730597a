"""Proper scores (log loss, Brier score) and net benefit."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import check_same_length, check_sample_weight, plain
from ._inputs import binary_targets, prepare_any, prepare_binary, warn_floored

__all__ = ["log_loss", "brier_score", "net_benefit", "net_benefit_treat_all"]

#: Default floor for the probability given to the observed class in :func:`log_loss`: the
#: machine epsilon of float64 (about 2.2e-16), the same floor scikit-learn's ``log_loss`` uses.
LOG_LOSS_CLIP = float(np.finfo(np.float64).eps)


def log_loss(
    y_true: Any,
    y_prob: Any,
    *,
    sample_weight: Any = None,
    labels: Any = None,
    clip: float = LOG_LOSS_CLIP,
) -> float:
    """Weighted mean negative log-likelihood of the observed classes (log loss).

    ``-sum_i w_i log p_i(y_i) / sum_i w_i``, where ``p_i(y_i)`` is the probability the forecast
    gave to the class that occurred.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Observed labels. With 1-d ``y_prob``: two labels (the second in sorted order, or
        ``labels[1]``, is positive) or a single 0/1 label. With 2-d ``y_prob``: column indices
        ``0..k-1``, or any labels when ``labels`` names the class of each column.
    y_prob : array-like of shape (n,) or (n, k)
        Positive-class probabilities, or class probabilities whose rows sum to one.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights; weight 2 counts a row twice.
    labels : array-like, optional
        ``[negative, positive]`` for 1-d ``y_prob``; the class of each column for 2-d.
    clip : float, default=2.22e-16
        An exact zero given to the observed class has infinite loss. The probability of the
        observed class is floored at ``clip`` (default: float64 machine epsilon, as in
        scikit-learn), so such a row costs ``-log(clip)`` (about 36.0); a ``UserWarning`` says how
        many rows were floored. Must be in (0, 0.5).

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.metrics import log_loss
    >>> round(log_loss([0, 1, 1], [0.2, 0.7, 0.9]), 4)
    0.2284
    >>> round(log_loss([0, 2], [[0.5, 0.3, 0.2], [0.1, 0.1, 0.8]]), 4)
    0.4581
    """
    if not (isinstance(clip, (int, float)) and 0.0 < clip < 0.5):
        raise ValueError(f"`clip` must be a number in (0, 0.5); got {plain(clip)!r}.")
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    if p.ndim == 1:
        p_obs = np.where(y == 1.0, p, 1.0 - p)
    else:
        p_obs = p[np.arange(p.shape[0]), y]
    low = p_obs < clip
    warn_floored(int(np.count_nonzero(low & (w > 0))), clip,
                 "give the observed class a probability below `clip`")
    loss = -np.log(np.maximum(p_obs, clip))
    return float(np.dot(w, loss) / w.sum())


def log_loss_of_log_odds(y_true: Any, log_odds: Any, sample_weight: Any = None) -> float:
    """Log loss of 0/1 labels under forecasts given as log-odds ``x``: the weighted mean of
    ``log(1 + exp(-x))`` over positives and ``log(1 + exp(x))`` over negatives, exact at any
    size of ``x`` (no clip: a probability ``expit(x)`` is exactly 0 or 1 beyond about
    +-36.7, where the log loss of probabilities must clip).

    Examples
    --------
    >>> round(log_loss_of_log_odds([1, 0], [0.0, 0.0]), 6)  # log 2
    0.693147
    """
    y = np.asarray(y_true, dtype=float)
    x = np.asarray(log_odds, dtype=float)
    return float(np.average(np.logaddexp(0.0, np.where(y == 1.0, -x, x)),
                            weights=sample_weight))

def brier_score(
    y_true: Any, y_prob: Any, *, sample_weight: Any = None, labels: Any = None
) -> float:
    """Weighted mean squared difference between forecast and outcome (Brier 1950).

    For 1-d ``y_prob`` (positive-class probabilities) this is the usual binary form
    ``sum_i w_i (p_i - y_i)^2 / sum_i w_i``, in [0, 1], equal to scikit-learn's
    ``brier_score_loss``. For 2-d ``y_prob`` of shape (n, k) it is Brier's original multi-category
    score, ``sum_i w_i sum_k (p_ik - [y_i = k])^2 / sum_i w_i``, in [0, 2]; for two columns it is
    twice the binary form (scikit-learn halves two-column input, we do not).

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Observed labels (see :func:`log_loss` for the accepted forms).
    y_prob : array-like of shape (n,) or (n, k)
        Positive-class probabilities or class probabilities whose rows sum to one.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights; weight 2 counts a row twice.
    labels : array-like, optional
        ``[negative, positive]`` for 1-d ``y_prob``; the class of each column for 2-d.

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.metrics import brier_score
    >>> round(brier_score([0, 1, 1], [0.2, 0.7, 0.9]), 4)
    0.0467
    >>> round(brier_score([0, 2], [[0.5, 0.3, 0.2], [0.1, 0.1, 0.8]]), 4)
    0.22
    """
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    if p.ndim == 1:
        row = (p - y) ** 2
    else:
        diff = p.copy()
        diff[np.arange(p.shape[0]), y] -= 1.0
        row = np.sum(diff**2, axis=1)
    return float(np.dot(w, row) / w.sum())


def _check_threshold(threshold: Any) -> np.ndarray:
    try:
        t = np.asarray(threshold, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`threshold` must be a number or an array of numbers ({exc}).") from exc
    if t.size == 0:
        raise ValueError("`threshold` is empty; give at least one threshold.")
    if not np.all(np.isfinite(t)) or np.any(t <= 0.0) or np.any(t >= 1.0):
        bad = t[~(np.isfinite(t) & (t > 0.0) & (t < 1.0))]
        raise ValueError(
            "`threshold` must lie strictly between 0 and 1 (the odds t / (1 - t) weigh a false "
            f"positive against a true positive); got {bad[:5].tolist()}."
        )
    return t


def _as_output(values: np.ndarray, shape: tuple[int, ...]) -> float | np.ndarray:
    if shape == ():
        return float(values.reshape(()))
    return values.reshape(shape)


def net_benefit(
    y_true: Any,
    y_prob: Any,
    threshold: Any,
    *,
    sample_weight: Any = None,
    labels: Any = None,
) -> float | np.ndarray:
    """Net benefit of acting on every row whose probability reaches a threshold.

    Vickers & Elkin (2006): ``NB(t) = TP/n - FP/n * t / (1 - t)``, where a row is flagged when
    ``y_prob >= t`` (a probability exactly equal to the threshold is flagged), ``TP`` and ``FP``
    are the (weighted) flagged positives and negatives and ``n`` is the total weight. The odds
    ``t / (1 - t)`` are the exchange rate between a missed positive and an unneeded action that
    a decision maker accepting threshold ``t`` implies.

    All thresholds are evaluated together from one sort of ``y_prob`` and cumulative sums.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted label, or ``labels[1]``, is positive) or a single 0/1
        label.
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    threshold : float or array-like
        Threshold probabilities, each strictly between 0 and 1.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights; weight 2 counts a row twice.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    float or ndarray
        A float for a scalar ``threshold``, otherwise an array of the threshold's shape.

    Examples
    --------
    >>> from probwrap.metrics import net_benefit
    >>> y = [0, 0, 1, 1, 0, 1]
    >>> p = [0.1, 0.4, 0.35, 0.8, 0.6, 0.9]
    >>> round(net_benefit(y, p, 0.5), 4)  # TP=2, FP=1: 2/6 - 1/6 * 1
    0.1667
    >>> # at t=0.2, TP=3 and FP=2: 3/6 - 2/6 * 0.25
    >>> net_benefit(y, p, [0.2, 0.5]).round(4)
    array([0.4167, 0.1667])
    """
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    t = _check_threshold(threshold)
    order = np.argsort(p, kind="stable")
    p_sorted = p[order]
    wy = (w * y)[order]
    wn = (w * (1.0 - y))[order]
    cum_pos = np.concatenate(([0.0], np.cumsum(wy)))
    cum_neg = np.concatenate(([0.0], np.cumsum(wn)))
    first_flagged = np.searchsorted(p_sorted, t.ravel(), side="left")
    tp = cum_pos[-1] - cum_pos[first_flagged]
    fp = cum_neg[-1] - cum_neg[first_flagged]
    total = w.sum()
    tr = t.ravel()
    nb = tp / total - fp / total * tr / (1.0 - tr)
    return _as_output(nb, t.shape)


def net_benefit_treat_all(
    y_true: Any, threshold: Any, *, sample_weight: Any = None, labels: Any = None
) -> float | np.ndarray:
    """Net benefit of acting on every row, the reference line of a decision curve.

    ``NB_all(t) = pi - (1 - pi) * t / (1 - t)`` with ``pi`` the (weighted) share of positives
    (Vickers & Elkin 2006). Acting on no row has net benefit 0 at every threshold.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted label, or ``labels[1]``, is positive) or a single 0/1
        label.
    threshold : float or array-like
        Threshold probabilities, each strictly between 0 and 1.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    float or ndarray

    Examples
    --------
    >>> from probwrap.metrics import net_benefit_treat_all
    >>> round(net_benefit_treat_all([0, 0, 1, 1, 0, 1], 0.2), 4)  # 0.5 - 0.5 * 0.25
    0.375
    """
    y = binary_targets(y_true, labels)
    n = check_same_length(("y_true", y))
    w = check_sample_weight(sample_weight, n)
    t = _check_threshold(threshold)
    pi = float(np.dot(w, y) / w.sum())
    tr = t.ravel()
    return _as_output(pi - (1.0 - pi) * tr / (1.0 - tr), t.shape)
