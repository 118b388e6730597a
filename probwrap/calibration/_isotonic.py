"""Isotonic calibration by weighted pool-adjacent-violators."""

from __future__ import annotations

import numpy as np

from ._base import NONPARAMETRIC, CalibrationMap

__all__ = ["IsotonicMap"]


def _pool_ties(
    scores: np.ndarray, y: np.ndarray, w: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sort once and pool tied scores.

    Rows of zero weight carry no information and are left out. Returns the distinct scores
    (increasing), the total weight of each and the weighted sum of the labels of each.
    """
    keep = w > 0
    if keep.all():
        s, ww, wy = scores, w, w * y
    else:
        s, ww = scores[keep], w[keep]
        wy = ww * y[keep]
    order = np.argsort(s)
    s, ww, wy = s[order], ww[order], wy[order]
    first = np.ones(s.shape[0], dtype=bool)
    np.not_equal(s[1:], s[:-1], out=first[1:])
    if first.all():  # no ties: nothing to pool
        return s, ww, wy
    starts = np.flatnonzero(first)
    distinct = s[starts]
    weight = np.add.reduceat(ww, starts)
    label_sum = np.add.reduceat(wy, starts)
    return distinct, weight, label_sum


def _pav(weight: np.ndarray, label_sum: np.ndarray) -> np.ndarray:
    """Weighted pool-adjacent-violators for an increasing fit; returns one value per input.

    ``weight`` (all positive) and ``label_sum`` describe consecutive groups in score order; the
    result minimises ``sum weight * (value - label_sum / weight)**2`` subject to non-decreasing
    values.

    Two stages, both exact. First, vectorised rounds that pool every run of adjacent violators
    at once (two adjacent groups in decreasing order always share a value in the solution, so
    pooling them is safe; see Best & Chakravarti 1990, Math. Programming 47, 425-439); they
    run while they shrink the problem quickly. Then a single stack-based left-to-right pass,
    O(number of remaining blocks), finishes the job.
    """
    sw = weight.astype(float)
    sy = label_sum.astype(float)
    count = np.ones(sw.shape[0], dtype=np.int64)
    while sw.shape[0] > 1:
        mean = sy / sw
        violation = mean[:-1] > mean[1:]
        if not violation.any():
            break
        starts = np.ones(sw.shape[0], dtype=bool)
        starts[1:] = ~violation
        ids = np.cumsum(starts) - 1
        n_new = int(ids[-1]) + 1
        sw = np.bincount(ids, weights=sw, minlength=n_new)
        sy = np.bincount(ids, weights=sy, minlength=n_new)
        count = np.bincount(ids, weights=count, minlength=n_new).astype(np.int64)
        if n_new > 0.9 * starts.shape[0]:
            break
    # stack pass over the remaining blocks
    st_w: list[float] = []
    st_y: list[float] = []
    st_c: list[int] = []
    for bw, by, bc in zip(sw.tolist(), sy.tolist(), count.tolist(), strict=True):
        while st_w and st_y[-1] * bw > by * st_w[-1]:  # previous mean > current mean
            bw += st_w.pop()
            by += st_y.pop()
            bc += st_c.pop()
        st_w.append(bw)
        st_y.append(by)
        st_c.append(bc)
    values = np.asarray(st_y) / np.asarray(st_w)
    return np.repeat(values, np.asarray(st_c, dtype=np.int64))


class IsotonicMap(CalibrationMap):
    """Isotonic calibration: the best non-decreasing step map from log-odds to probability.

    Fitted by our own weighted pool-adjacent-violators (PAV): one sort, tied scores pooled into
    their weighted mean label, then the pooling pass. Only the order of the scores matters.

    Prediction interpolates linearly (in the score) between the fitted values at consecutive
    distinct training scores, like scikit-learn's ``IsotonicRegression``. Scores below the
    smallest or above the largest training score get the first or last fitted value (clamped;
    no extrapolation).

    Attributes
    ----------
    thresholds_ : ndarray of shape (m,)
        Distinct training scores (of positive weight), increasing.
    values_ : ndarray of shape (m,)
        Fitted probability at each threshold, non-decreasing.
    classes_ : ndarray of shape (2,)
        The labels; the second one is the positive class.

    References
    ----------
    M. Ayer, H. D. Brunk, G. M. Ewing, W. T. Reid and E. Silverman (1955), "An empirical
    distribution function for sampling with incomplete information", Ann. Math. Statist. 26.
    B. Zadrozny and C. Elkan (2002), "Transforming classifier scores into accurate multiclass
    probability estimates", KDD.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import IsotonicMap
    >>> m = IsotonicMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1])
    >>> m.values_
    array([0. , 0.5, 0.5, 1. ])
    >>> m.predict([-5.0, 1.5, 9.0])
    array([0.  , 0.75, 1.  ])
    """

    complexity = NONPARAMETRIC

    def __init__(self) -> None:
        pass

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        distinct, weight, label_sum = _pool_ties(scores, y, w)
        self.thresholds_ = distinct
        self.values_ = np.clip(_pav(weight, label_sum), 0.0, 1.0)

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        return np.interp(scores, self.thresholds_, self.values_)
