"""Binned calibration measures: reliability table, calibration error, Murphy's Brier
decomposition. Cox's calibration slope and intercept (no bins) are in :mod:`._slope`."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ._inputs import (
    check_n_bins,
    check_strategy,
    prepare_any,
)

__all__ = [
    "ReliabilityTable",
    "reliability_table",
    "expected_calibration_error",
    "classwise_calibration_error",
    "BrierDecomposition",
    "brier_decomposition",
]


# ----------------------------------------------------------------------------------------------
# binning
# ----------------------------------------------------------------------------------------------


def _bin_edges(values: np.ndarray, w: np.ndarray, n_bins: int, strategy: str) -> np.ndarray:
    """Return ``n_bins + 1`` edges; bins are ``[e_j, e_{j+1})`` with the last one closed.

    ``"uniform"``: ``j / n_bins`` (computed as a ratio so that 0.3 is exactly the float 0.3).
    ``"quantile"``: inner edge ``j`` is the smallest forecast value at which the cumulative weight
    share *exceeds* ``j / n_bins``; the outer edges are the smallest and largest forecast with
    positive weight. With bins closed on the left this puts a share of at most ``j / n_bins`` of
    the weight below edge ``j``, so bins hold equal weight up to ties. Tied forecasts are never
    split: when a tied block spans several quantiles the edges coincide and the bins between them
    are empty (they contribute nothing), so fewer than ``n_bins`` bins may be used.
    """
    if strategy == "uniform":
        return np.arange(n_bins + 1, dtype=float) / n_bins
    keep = w > 0
    v = values[keep]
    order = np.argsort(v, kind="stable")
    v = v[order]
    cum = np.cumsum(w[keep][order])
    total = cum[-1]
    # compare cum * n_bins with j * total so integer weights give exact comparisons; a relative
    # slack of 1e-12 counts a cumulative share equal to j / n_bins up to rounding as equal, so
    # that scaling all weights (normalised to sum 1, or times 1e-3) cannot move a row across an
    # edge (integer weights differ by at least one part in total * n_bins, far above it)
    first_above = np.searchsorted(
        cum * n_bins, np.arange(1, n_bins) * total * (1.0 + 1e-12), side="right"
    )
    inner = v[np.minimum(first_above, v.shape[0] - 1)]
    return np.concatenate(([v[0]], inner, [v[-1]]))


def _bin_index(values: np.ndarray, edges: np.ndarray) -> np.ndarray:
    return np.searchsorted(edges[1:-1], values, side="right")


def _binned_sums(
    values: np.ndarray, outcome: np.ndarray, w: np.ndarray, n_bins: int, strategy: str
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    edges = _bin_edges(values, w, n_bins, strategy)
    idx = _bin_index(values, edges)
    weight = np.bincount(idx, weights=w, minlength=n_bins)
    sum_pred = np.bincount(idx, weights=w * values, minlength=n_bins)
    sum_obs = np.bincount(idx, weights=w * outcome, minlength=n_bins)
    return edges, weight, sum_pred, sum_obs


def _binned_gap(values, outcome, w, n_bins, strategy) -> float:
    # sum_b (W_b / W) |S_obs_b / W_b - S_pred_b / W_b| = sum_b |S_obs_b - S_pred_b| / W
    _, weight, sum_pred, sum_obs = _binned_sums(values, outcome, w, n_bins, strategy)
    return float(np.sum(np.abs(sum_obs - sum_pred)) / weight.sum())


def _top_label(y: np.ndarray, p: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    # ties for the largest probability go to the first column (numpy's argmax)
    predicted = np.argmax(p, axis=1)
    confidence = p[np.arange(p.shape[0]), predicted]
    return confidence, (predicted == y).astype(float)


@dataclass(frozen=True, eq=False)
class ReliabilityTable:
    """Per-bin summary behind a reliability diagram and the expected calibration error.

    Only bins holding positive weight are listed.

    Attributes
    ----------
    lower, upper : ndarray
        Bin edges; a bin holds forecasts in ``[lower, upper)`` (the last bin is closed).
    weight : ndarray
        Total sample weight in each bin (counts when unweighted).
    mean_predicted : ndarray
        Weighted mean forecast (the confidence, for the top-label form).
    observed_frequency : ndarray
        Weighted share of positives (the accuracy of the top label, for the top-label form).
    top_label : bool
        Whether the table is the top-label (confidence) form of 2-d probabilities.
    """

    lower: np.ndarray
    upper: np.ndarray
    weight: np.ndarray
    mean_predicted: np.ndarray
    observed_frequency: np.ndarray
    top_label: bool

    @property
    def calibration_error(self) -> float:
        """Weighted mean absolute gap ``sum_b share_b |observed_b - predicted_b|``."""
        share = self.weight / self.weight.sum()
        return float(np.sum(share * np.abs(self.observed_frequency - self.mean_predicted)))


def reliability_table(
    y_true: Any,
    y_prob: Any,
    *,
    n_bins: int = 10,
    strategy: str = "uniform",
    sample_weight: Any = None,
    labels: Any = None,
) -> ReliabilityTable:
    """Bin forecasts and compare the mean forecast with the observed frequency in each bin.

    Parameters are as for :func:`expected_calibration_error`, which equals the
    ``calibration_error`` of this table.

    Returns
    -------
    ReliabilityTable

    Examples
    --------
    >>> from probwrap.metrics import reliability_table
    >>> table = reliability_table([0, 1, 1, 1], [0.1, 0.3, 0.7, 0.9], n_bins=2)
    >>> table.lower, table.weight, table.observed_frequency
    (array([0. , 0.5]), array([2., 2.]), array([0.5, 1. ]))
    """
    n_bins = check_n_bins(n_bins)
    strategy = check_strategy(strategy)
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    top = p.ndim == 2
    if top:
        values, outcome = _top_label(y, p)
    else:
        values, outcome = p, y
    edges, weight, sum_pred, sum_obs = _binned_sums(values, outcome, w, n_bins, strategy)
    used = weight > 0
    return ReliabilityTable(
        lower=edges[:-1][used],
        upper=edges[1:][used],
        weight=weight[used],
        mean_predicted=sum_pred[used] / weight[used],
        observed_frequency=sum_obs[used] / weight[used],
        top_label=top,
    )


def expected_calibration_error(
    y_true: Any,
    y_prob: Any,
    *,
    n_bins: int = 10,
    strategy: str = "uniform",
    sample_weight: Any = None,
    labels: Any = None,
) -> float:
    """Expected calibration error: weighted mean gap between forecast and outcome per bin.

    ``ECE = sum_b (W_b / W) |obs_b - pred_b|``, with ``W_b`` the weight in bin ``b``, ``obs_b``
    the weighted observed frequency and ``pred_b`` the weighted mean forecast there.

    - 1-d ``y_prob`` (positive-class probabilities): ``obs_b`` is the share of positives.
    - 2-d ``y_prob`` (n, k): the top-label (confidence) form of Guo et al. (2017, eq. 3): each row
      is binned by its largest probability and ``obs_b`` is the accuracy of the arg-max class
      (ties for the largest probability go to the first column).

    Bins are ``[lo, hi)``, the last one closed at its upper end. ``strategy="uniform"`` uses edges
    ``0, 1/n_bins, ..., 1``; ``"quantile"`` uses weighted quantiles of the forecasts so that bins
    hold (nearly) equal weight. Tied forecasts are never split between bins: a large tied block
    makes some quantile edges coincide, leaving empty bins that contribute nothing. Empty bins
    never contribute. The result lies in [0, 1].

    Parameters
    ----------
    y_true : array-like of shape (n,)
        With 1-d ``y_prob``: two labels (the second sorted, or ``labels[1]``, is positive) or a
        single 0/1 label. With 2-d ``y_prob``: column indices ``0..k-1``, or any labels named by
        ``labels``.
    y_prob : array-like of shape (n,) or (n, k)
        Probabilities in [0, 1]; 2-d rows must sum to one.
    n_bins : int, default=10
        Number of bins, at least 1.
    strategy : {"uniform", "quantile"}, default="uniform"
        Equal-width or equal-weight bins.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights; weight 2 counts a row twice (also in the quantile edges).
    labels : array-like, optional
        ``[negative, positive]`` for 1-d ``y_prob``; the class of each column for 2-d.

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.metrics import expected_calibration_error
    >>> # bins [0, .5): forecasts .1,.3 with one positive -> |0.5 - 0.2| * 2/4
    >>> # bin [.5, 1]: forecasts .7,.9 both positive     -> |1.0 - 0.8| * 2/4
    >>> round(expected_calibration_error([0, 1, 1, 1], [0.1, 0.3, 0.7, 0.9], n_bins=2), 4)
    0.25
    """
    return reliability_table(
        y_true,
        y_prob,
        n_bins=n_bins,
        strategy=strategy,
        sample_weight=sample_weight,
        labels=labels,
    ).calibration_error


def classwise_calibration_error(
    y_true: Any,
    y_prob: Any,
    *,
    n_bins: int = 10,
    strategy: str = "uniform",
    sample_weight: Any = None,
    labels: Any = None,
) -> float:
    """Classwise calibration error: mean over classes of the one-vs-rest binned error.

    For each class ``j``, the column ``y_prob[:, j]`` is binned and compared with the indicator
    ``y_true == j`` exactly as in the 1-d :func:`expected_calibration_error`; the result is the
    mean over the ``k`` classes (the classwise-ECE of Kull et al. 2019). 1-d ``y_prob`` is read as
    the two columns ``[1 - p, p]``. Quantile edges are computed per class.

    Parameters are as for :func:`expected_calibration_error`.

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.metrics import classwise_calibration_error
    >>> y = [0, 1, 2, 2]
    >>> p = [[0.8, 0.1, 0.1], [0.2, 0.6, 0.2], [0.1, 0.2, 0.7], [0.3, 0.3, 0.4]]
    >>> # class 0: (|0 - .6| + |1 - .8|) / 4 = .2;  class 1: (.6 + .4) / 4 = .25
    >>> # class 2: (|1 - .7| + |1 - .7|) / 4 = .15;  mean = .2
    >>> round(classwise_calibration_error(y, p, n_bins=2), 4)
    0.2
    """
    n_bins = check_n_bins(n_bins)
    strategy = check_strategy(strategy)
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    if p.ndim == 1:
        p = np.column_stack((1.0 - p, p))
        y = y.astype(np.intp)
    k = p.shape[1]
    gaps = [_binned_gap(p[:, j], (y == j).astype(float), w, n_bins, strategy) for j in range(k)]
    return float(np.mean(gaps))


# ----------------------------------------------------------------------------------------------
# Brier decomposition
# ----------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class BrierDecomposition:
    """Murphy's (1973) partition of the Brier score.

    ``brier = reliability - resolution + uncertainty + within_bin_variance - within_bin_covariance``

    Attributes
    ----------
    brier : float
        The Brier score itself (as :func:`brier_score`).
    reliability : float
        Weighted mean squared gap between each group's mean forecast and its observed frequency
        (smaller is better calibrated).
    resolution : float
        Weighted mean squared gap between each group's observed frequency and the overall one
        (larger is better).
    uncertainty : float
        ``obar (1 - obar)`` of the overall observed frequency ``obar`` (summed over classes for
        multiclass input); a property of the outcomes alone.
    within_bin_variance : float
        Weighted variance of the forecasts inside their bin. Zero when grouping by distinct
        forecast values.
    within_bin_covariance : float
        Twice the weighted covariance of forecast and outcome inside their bin. Zero when
        grouping by distinct forecast values.
    n_groups : int
        Number of groups (distinct forecasts or non-empty bins; summed over classes for 2-d).
    """

    brier: float
    reliability: float
    resolution: float
    uncertainty: float
    within_bin_variance: float
    within_bin_covariance: float
    n_groups: int


def _brier_parts(p, y, w, n_bins, strategy) -> np.ndarray:
    """Return [brier, rel, res, unc, wbv, wbc, n_groups] for one forecast column."""
    if n_bins is None:
        _, group = np.unique(p, return_inverse=True)
        group = group.reshape(-1)
    else:
        group = _bin_index(p, _bin_edges(p, w, n_bins, strategy))
    total = w.sum()
    g_weight = np.bincount(group, weights=w)
    g_pred = np.bincount(group, weights=w * p)
    g_obs = np.bincount(group, weights=w * y)
    used = g_weight > 0
    safe = np.where(used, g_weight, 1.0)
    f_bar = g_pred / safe
    o_bar = g_obs / safe
    y_bar = g_obs.sum() / total
    rel = np.sum(g_weight[used] * (f_bar[used] - o_bar[used]) ** 2) / total
    res = np.sum(g_weight[used] * (o_bar[used] - y_bar) ** 2) / total
    unc = y_bar * (1.0 - y_bar)
    brier = np.dot(w, (p - y) ** 2) / total
    if n_bins is None:
        wbv = wbc = 0.0
    else:
        dev_p = p - f_bar[group]
        dev_y = y - o_bar[group]
        wbv = np.dot(w, dev_p**2) / total
        wbc = 2.0 * np.dot(w, dev_p * dev_y) / total
    return np.array([brier, rel, res, unc, wbv, wbc, np.count_nonzero(used)], dtype=float)


def brier_decomposition(
    y_true: Any,
    y_prob: Any,
    *,
    sample_weight: Any = None,
    n_bins: int | None = None,
    strategy: str = "uniform",
    labels: Any = None,
) -> BrierDecomposition:
    """Split the Brier score into reliability, resolution and uncertainty (Murphy 1973).

    By default rows are grouped by their distinct forecast value. The forecast is then constant
    within each group and Murphy's identity ``brier = reliability - resolution + uncertainty``
    holds exactly (up to rounding).

    With ``n_bins``, rows are grouped into bins (``strategy`` as in
    :func:`expected_calibration_error`) and each bin's mean forecast stands in for its forecasts.
    The three terms then no longer add up to the score; the two within-bin terms of Stephenson,
    Coelho & Jolliffe (2008, Weather and Forecasting 23:752-757) close the gap exactly:
    ``brier = reliability - resolution + uncertainty + within_bin_variance - within_bin_covariance``
    where ``within_bin_variance = sum_i w_i (p_i - pbar_b(i))^2 / W`` and
    ``within_bin_covariance = 2 sum_i w_i (p_i - pbar_b(i)) (y_i - ybar_b(i)) / W``.

    For 2-d ``y_prob`` (n, k), every term is the sum over classes of the one-vs-rest terms of the
    columns, matching the multiclass :func:`brier_score` (for two columns this is twice the
    binary value).

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Labels (see :func:`expected_calibration_error`).
    y_prob : array-like of shape (n,) or (n, k)
        Probabilities.
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights; weight 2 counts a row twice.
    n_bins : int, optional
        Bin the forecasts instead of grouping by distinct value.
    strategy : {"uniform", "quantile"}, default="uniform"
        Bin layout when ``n_bins`` is given.
    labels : array-like, optional
        ``[negative, positive]`` for 1-d ``y_prob``; the class of each column for 2-d.

    Returns
    -------
    BrierDecomposition

    Examples
    --------
    >>> from probwrap.metrics import brier_decomposition
    >>> d = brier_decomposition([0, 1, 0, 1, 1], [0.2, 0.2, 0.6, 0.6, 0.6])
    >>> round(d.reliability, 4), round(d.resolution, 4), round(d.uncertainty, 4)
    (0.0387, 0.0067, 0.24)
    >>> round(d.brier, 4), round(d.reliability - d.resolution + d.uncertainty, 4)
    (0.272, 0.272)
    """
    if n_bins is not None:
        n_bins = check_n_bins(n_bins)
    strategy = check_strategy(strategy)
    y, p, w = prepare_any(y_true, y_prob, sample_weight, labels)
    if p.ndim == 1:
        parts = _brier_parts(p, y, w, n_bins, strategy)
    else:
        parts = sum(
            _brier_parts(p[:, j], (y == j).astype(float), w, n_bins, strategy)
            for j in range(p.shape[1])
        )
    return BrierDecomposition(*(float(v) for v in parts[:6]), n_groups=int(parts[6]))
