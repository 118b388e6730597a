"""Performance over a range of costs: cost curves, Brier curves, and lift/gain at a review depth.

When the cost of a missed positive relative to a false alarm is uncertain, a single cost matrix
hides how the choice depends on it. These curves show the cost over every cost ratio:

- :func:`cost_curve` — Drummond & Holte (2006): normalised expected cost against probability
  cost, for the best cutoff at each cost (the lower envelope) and for the cutoff the
  probabilities themselves imply.
- :func:`brier_curve` — Hernández-Orallo, Flach & Ferri (2011): the loss when the cutoff is set
  to the cost proportion (probabilities taken at face value); its area is the Brier score.
- :func:`lift_gain` — share of positives found (gain) and the lift over random review when the
  ``depth`` highest-scored share of rows is reviewed.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import plain
from ._inputs import prepare_binary

__all__ = [
    "CostCurve",
    "BrierCurve",
    "LiftGain",
    "cost_curve",
    "brier_curve",
    "lift_gain",
]


def _check_grid(n_points: Any) -> int:
    if isinstance(n_points, bool) or not isinstance(n_points, (int, np.integer)) or n_points < 2:
        raise ValueError(f"`n_points` must be a whole number >= 2; got {plain(n_points)!r}.")
    return int(n_points)


def _both_classes(y: np.ndarray, w: np.ndarray, what: str) -> tuple[float, float]:
    pos = float(np.dot(w, y))
    neg = float(w.sum() - pos)
    if pos <= 0 or neg <= 0:
        raise ValueError(f"`y_true` must contain both classes (with positive weight) for {what}.")
    return pos, neg


def _cutoff_rates(y: np.ndarray, p: np.ndarray, w: np.ndarray):
    """False-negative and false-positive rates of "act when p > t" at every distinct cutoff.

    Cutoffs: below every forecast (act on all) and at each distinct forecast value (act on the
    rows above it); returned in increasing order of cutoff.
    """
    pos, neg = _both_classes(y, w, "a cost curve")
    values, inverse = np.unique(p, return_inverse=True)
    inverse = inverse.reshape(-1)
    pos_at = np.bincount(inverse, weights=w * y, minlength=values.size)
    neg_at = np.bincount(inverse, weights=w * (1.0 - y), minlength=values.size)
    # acting on p > values[j] misses the positives at or below values[j]
    fn = np.concatenate(([0.0], np.cumsum(pos_at)))
    fp = neg - np.concatenate(([0.0], np.cumsum(neg_at)))
    cut = np.concatenate(([-np.inf], values))
    return cut, fn / pos, np.maximum(fp, 0.0) / neg, pos / (pos + neg)


@dataclass(frozen=True, eq=False)
class CostCurve:
    """Normalised expected cost over probability cost (Drummond & Holte 2006).

    Attributes
    ----------
    probability_cost : ndarray
        ``PC = pi C_FN / (pi C_FN + (1 - pi) C_FP)`` with ``pi`` the share of positives: the
        x-axis, from 0 (false alarms are all that cost) to 1 (misses are all that cost).
    lowest_cost : ndarray
        Normalised expected cost ``NEC = FNR * PC + FPR * (1 - PC)`` of the best cutoff at each
        ``PC`` (the lower envelope of the cutoffs' cost lines; the dual of the ROC convex hull).
        Optimistic: the cutoff is chosen on the same rows.
    forecast_cutoff_cost : ndarray
        NEC when the cutoff is the one the probabilities imply at that cost (act when
        ``p > C_FP / (C_FP + C_FN)``); equals ``lowest_cost`` for a calibrated model on large
        samples, above it otherwise.
    trivial_cost : ndarray
        ``min(PC, 1 - PC)``: the better of acting on every row or on none.
    prevalence : float
        ``pi``, the weighted share of positives.
    """

    probability_cost: np.ndarray
    lowest_cost: np.ndarray
    forecast_cutoff_cost: np.ndarray
    trivial_cost: np.ndarray
    prevalence: float


def cost_curve(
    y_true: Any,
    y_prob: Any,
    *,
    n_points: int = 201,
    sample_weight: Any = None,
    labels: Any = None,
) -> CostCurve:
    """Cost curve: normalised expected cost over every cost ratio (Drummond & Holte 2006).

    A cost pair ``(C_FN, C_FP)`` and the share of positives ``pi`` enter only through the
    probability cost ``PC = pi C_FN / (pi C_FN + (1 - pi) C_FP)``. At a cutoff with miss rate
    ``FNR`` and false-alarm rate ``FPR`` the expected cost divided by its largest possible value
    is ``NEC = FNR * PC + FPR * (1 - PC)`` — a straight line over ``PC``. The curve reports, on
    a grid of ``n_points`` probability costs from 0 to 1:

    - the lowest NEC over every cutoff (the lower envelope), and
    - the NEC of the cutoff the probabilities imply at that cost,
      ``t = C_FP / (C_FP + C_FN) = pi (1 - PC) / (pi (1 - PC) + (1 - pi) PC)`` (act when
      ``p > t``), which shows what miscalibration costs.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive); both classes needed.
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    n_points : int, default=201
        Grid size on [0, 1].
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    CostCurve

    Examples
    --------
    >>> from probwrap.metrics import cost_curve
    >>> cc = cost_curve([0, 0, 1, 1], [0.1, 0.4, 0.35, 0.8], n_points=3)
    >>> cc.probability_cost.tolist(), cc.lowest_cost.tolist()
    ([0.0, 0.5, 1.0], [0.0, 0.25, 0.0])
    """
    n_points = _check_grid(n_points)
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    cut, fnr, fpr, pi = _cutoff_rates(y, p, w)
    pc = np.linspace(0.0, 1.0, n_points)
    lowest = np.empty(n_points)
    for start in range(0, n_points, 64):  # chunks keep the cutoff x grid matrix small
        x = pc[start:start + 64]
        lowest[start:start + 64] = np.min(fnr[:, None] * x + fpr[:, None] * (1.0 - x), axis=0)
    with np.errstate(divide="ignore", invalid="ignore"):
        t = pi * (1.0 - pc) / (pi * (1.0 - pc) + (1.0 - pi) * pc)
    # act when p > t: the rates of the largest listed cutoff not above t
    j = np.searchsorted(cut, t, side="right") - 1
    at_t = fnr[j] * pc + fpr[j] * (1.0 - pc)
    return CostCurve(
        probability_cost=pc,
        lowest_cost=lowest,
        forecast_cutoff_cost=at_t,
        trivial_cost=np.minimum(pc, 1.0 - pc),
        prevalence=pi,
    )


@dataclass(frozen=True, eq=False)
class BrierCurve:
    """Loss over cost proportion with the cutoff set to it (Hernández-Orallo et al. 2011).

    Attributes
    ----------
    cost_proportion : ndarray
        ``c = C_FP / (C_FP + C_FN)``, with the two costs summing to 2 (the paper's scaling).
    loss : ndarray
        ``L(c) = 2 [c * P(negative and p > c) + (1 - c) * P(positive and p <= c)]``, shares of
        all rows (weighted).
    area : float
        Exact area under ``L`` over [0, 1] (the curve is piecewise linear between forecast
        values); equals the Brier score.
    """

    cost_proportion: np.ndarray
    loss: np.ndarray
    area: float


def _brier_loss_at(c: np.ndarray, y, p, w) -> np.ndarray:
    order = np.argsort(p, kind="stable")
    ps, ys, ws = p[order], y[order], w[order] / w.sum()
    neg_cum = np.concatenate(([0.0], np.cumsum(ws * (1.0 - ys))))
    pos_cum = np.concatenate(([0.0], np.cumsum(ws * ys)))
    k = np.searchsorted(ps, c, side="right")  # rows with p <= c
    false_alarm = neg_cum[-1] - neg_cum[k]
    missed = pos_cum[k]
    return 2.0 * (c * false_alarm + (1.0 - c) * missed)


def brier_curve(
    y_true: Any,
    y_prob: Any,
    *,
    n_points: int = 201,
    sample_weight: Any = None,
    labels: Any = None,
) -> BrierCurve:
    """Brier curve: the loss of taking the probabilities at face value, over every cost.

    For a cost proportion ``c = C_FP / (C_FP + C_FN)`` with ``C_FP + C_FN = 2`` (the scaling of
    Hernández-Orallo, Flach & Ferri 2011), a forecaster who trusts its probabilities acts when
    ``p > c`` and loses

    ``L(c) = 2 [c * P(y = 0, p > c) + (1 - c) * P(y = 1, p <= c)]``.

    The area under ``L`` over ``c`` in [0, 1] is the Brier score: a negative row with forecast
    ``p`` adds ``2 * integral_0^p c dc = p^2`` and a positive row ``2 * integral_p^1 (1 - c) dc
    = (1 - p)^2``. The curve shows *at which costs* a model's Brier score is earned or lost; it
    lies on or above the lower envelope of :func:`cost_curve` plotted against ``c``.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    n_points : int, default=201
        Grid size on [0, 1] for ``cost_proportion`` and ``loss`` (the area is exact, not taken
        from the grid).
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    BrierCurve

    Examples
    --------
    >>> from probwrap.metrics import brier_curve, brier_score
    >>> y, p = [0, 1, 1, 0], [0.2, 0.7, 0.9, 0.4]
    >>> round(brier_curve(y, p).area, 12) == round(brier_score(y, p), 12)
    True
    """
    n_points = _check_grid(n_points)
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    c = np.linspace(0.0, 1.0, n_points)
    loss = _brier_loss_at(c, y, p, w)
    # exact area: L is linear between consecutive distinct forecasts (the step functions only
    # change there), so the trapezoid rule on right-limits over the breakpoints is exact
    knots = np.unique(np.concatenate(([0.0, 1.0], p)))
    lo, hi = knots[:-1], knots[1:]
    mid = (lo + hi) / 2.0
    # the counts are constant on the open interval (lo, hi); evaluate them at the midpoint and
    # integrate the two linear pieces exactly
    order = np.argsort(p, kind="stable")
    ps, ys, ws = p[order], y[order], w[order] / w.sum()
    k = np.searchsorted(ps, mid, side="right")
    false_alarm = np.concatenate(([0.0], np.cumsum(ws * (1.0 - ys))))
    missed = np.concatenate(([0.0], np.cumsum(ws * ys)))
    fa = false_alarm[-1] - false_alarm[k]
    mi = missed[k]
    area = float(np.sum(fa * (hi**2 - lo**2) + mi * (2.0 * (hi - lo) - (hi**2 - lo**2))))
    return BrierCurve(cost_proportion=c, loss=loss, area=area)


@dataclass(frozen=True, eq=False)
class LiftGain:
    """Gain and lift of reviewing the top-scored share of rows.

    Attributes
    ----------
    depth : ndarray
        Share of all rows (by weight) reviewed, highest forecasts first.
    gain : ndarray
        Share of all positives among the reviewed rows (the recall of the top-``depth`` rule).
    lift : ndarray
        ``gain / depth``: how many times more positives the review finds than a random review
        of the same size (the precision among reviewed rows over the overall rate).
    """

    depth: np.ndarray
    gain: np.ndarray
    lift: np.ndarray


def lift_gain(
    y_true: Any,
    y_prob: Any,
    *,
    depth: Any = None,
    sample_weight: Any = None,
    labels: Any = None,
) -> LiftGain:
    """Gain (recall) and lift when the rows with the highest forecasts are reviewed.

    Reviewing the top share ``depth`` of rows (by weight, highest forecast first) finds the share
    ``gain`` of all positives; ``lift = gain / depth``. Rows tied at the cut are taken in part:
    a review that reaches into a block of tied forecasts takes the same fraction of each tied
    row (the mean over random tie-breaking), so the result never depends on row order.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive); positives needed.
    y_prob : array-like of shape (n,)
        Positive-class probabilities or any scores where larger means more likely positive.
    depth : float or array-like of floats in (0, 1], optional
        Review depth(s) as a share of rows, e.g. ``0.05`` for "the top 5 %". Default: 100
        depths 0.01, 0.02, ..., 1.
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice (depth is a share of the total weight).
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    LiftGain

    Examples
    --------
    >>> from probwrap.metrics import lift_gain
    >>> lg = lift_gain([1, 0, 1, 0, 0], [0.9, 0.8, 0.7, 0.2, 0.1], depth=[0.2, 0.6])
    >>> lg.gain.round(4).tolist(), lg.lift.round(4).tolist()
    ([0.5, 1.0], [2.5, 1.6667])
    """
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    pos_total = float(np.dot(w, y))
    if pos_total <= 0:
        raise ValueError("`y_true` must contain positives (with positive weight) for a gain.")
    if depth is None:
        d = np.arange(1, 101) / 100.0
    else:
        d = np.atleast_1d(np.asarray(depth, dtype=float))
        if d.ndim != 1 or not np.all(np.isfinite(d)) or np.any((d <= 0) | (d > 1)):
            raise ValueError(f"`depth` must hold shares in (0, 1]; got {plain(depth)!r}.")
    # blocks of tied forecasts, highest first
    values, inverse = np.unique(-p, return_inverse=True)
    inverse = inverse.reshape(-1)
    block_w = np.bincount(inverse, weights=w, minlength=values.size)
    block_pos = np.bincount(inverse, weights=w * y, minlength=values.size)
    cum_w = np.concatenate(([0.0], np.cumsum(block_w))) / w.sum()
    cum_pos = np.concatenate(([0.0], np.cumsum(block_pos)))
    b = np.clip(np.searchsorted(cum_w, d, side="left") - 1, 0, values.size - 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(block_w[b] > 0, (d - cum_w[b]) * w.sum() / block_w[b], 0.0)
    frac = np.clip(frac, 0.0, 1.0)
    found = cum_pos[b] + frac * block_pos[b]
    gain = found / pos_total
    return LiftGain(depth=d, gain=gain, lift=gain / d)
