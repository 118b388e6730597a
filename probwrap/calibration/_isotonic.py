"""Isotonic calibration by weighted pool-adjacent-violators."""

from __future__ import annotations

import numpy as np
from scipy.optimize import isotonic_regression

from .._packed_sort import packed_order
from .._validation import plain, power_of_two_unit
from ._base import NONPARAMETRIC, CalibrationMap
from ._platt import _separated

__all__ = ["IsotonicMap"]

#: class counts are capped here for smoothed targets: (N + 1) / (N + 2) is exactly 1 in
#: doubles for any N above 2**53, so the cap changes no target and keeps sums finite
_COUNT_CAP = 2.0**1000


#: Sorted scores closer than this many units of rounding count as tied (see ``_tie_starts``).
TIE_ULPS = 8


def _tie_starts(s: np.ndarray, first: np.ndarray) -> None:
    """Set ``first[1:]`` to whether each sorted score starts a new group of tied scores.

    Two neighbouring scores ``a <= b`` are tied when ``b - a <= TIE_ULPS * 2**-52 * max(min(|a|,
    |b|), q)``, with ``q`` the larger magnitude of the (finite) lower and upper quartile scores:
    a few units of rounding of the scores' own size. Scores that one model gives equal values
    but that were computed along different paths (one-vs-rest log-odds ``log p_k - log(sum of
    the others)``, whose sum rounds differently in SciPy 1.12 and later, or in one call per
    class and one over all classes) then stay one group, so the order-based maps and their
    cross-validated losses do not move with the environment. Groups chain: a run of scores each
    within the tolerance of the next is one group.
    """
    n = s.shape[0]
    if n < 2:
        return
    q = max((abs(float(v)) for v in (s[n // 4], s[(3 * n) // 4]) if np.isfinite(v)), default=0.0)
    with np.errstate(invalid="ignore", over="ignore"):  # inf - inf: equal, tied
        gap = s[1:] - s[:-1]
        # Every pair's tolerance is at most the one at the larger end magnitude (the scores are
        # sorted), so one comparison against that bound clears all but the few close pairs;
        # only those get their own tolerance. (NaN gaps, from inf - inf, are kept as candidates.)
        bound = TIE_ULPS * np.finfo(float).eps * max(abs(float(s[0])), abs(float(s[-1])), q)
        np.greater(gap, bound, out=first[1:])
    close = np.flatnonzero(~first[1:])
    if close.size == 0:
        return
    tol = np.minimum(np.abs(s[close + 1]), np.abs(s[close]))
    np.maximum(tol, q, out=tol)
    tol *= TIE_ULPS * np.finfo(float).eps
    with np.errstate(invalid="ignore"):
        first[close + 1] = gap[close] > tol


def _pool_ties(
    scores: np.ndarray, y: np.ndarray, w: np.ndarray, *, separation: list[bool] | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sort once and pool tied scores (equal to a few units of rounding, see ``_tie_starts``;
    each group is represented by its smallest score).

    Rows of zero weight carry no information and are left out. Returns the distinct scores
    (increasing), the total weight of each and the weighted sum of the labels of each (used by
    the binning and Venn-Abers maps, and by ``IsotonicMap`` for weighted rows). A list passed as
    ``separation`` gets whether the scores separate the classes appended (``_separated``'s
    answer, read off the ends of the two sorted classes where the sort is by class).
    """
    if np.all(w == 1.0) and np.all((y == 0.0) | (y == 1.0)):
        # Unit weights and 0/1 labels (the common case): sort the scores of each class
        # separately (plain sorts, no index), then merge the two sorted runs with a stable
        # argsort, which is linear for two runs. Cheaper than one argsort of all scores followed
        # by random-access gathers, and exactly the same order (ties: negatives first).
        positive = y == 1.0
        # np.compress is several times faster than boolean-mask indexing on random masks
        neg = np.sort(np.compress(~positive, scores))
        pos = np.sort(np.compress(positive, scores))
        if separation is not None:
            # _separated's test on the ends of the two sorted classes
            separation.append(bool(neg.size and pos.size and (
                (neg[-1] <= pos[0] and pos[-1] > neg[0])
                or (pos[-1] <= neg[0] and neg[-1] > pos[0])
            )))
        both = np.concatenate([neg, pos])
        order = np.argsort(both, kind="stable")
        s = both[order]
        is_pos = (order >= neg.shape[0]).astype(float)
        first = np.ones(s.shape[0], dtype=bool)
        _tie_starts(s, first)
        if first.all():
            return s, np.ones(s.shape[0]), is_pos
        starts = np.flatnonzero(first)
        weight = np.diff(np.append(starts, s.shape[0])).astype(float)
        return s[starts], weight, np.add.reduceat(is_pos, starts)
    if separation is not None:
        separation.append(_separated(scores, y, w))
    keep = w > 0
    sc, yy, ww = (scores, y, w) if keep.all() else (scores[keep], y[keep], w[keep])
    order = np.argsort(sc)
    s, ys, ww = sc[order], yy[order], ww[order]
    first = np.ones(s.shape[0], dtype=bool)
    _tie_starts(s, first)
    if first.all():  # no ties: nothing to pool
        return s, ww, ww * ys
    starts = np.flatnonzero(first)
    distinct = s[starts]
    weight = np.add.reduceat(ww, starts)
    label_sum = np.add.reduceat(ww * ys, starts)
    return distinct, weight, label_sum


def _ordered_rows(scores: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The scores in ascending order and the 0/1 class of each (int64), tied scores negatives
    first: one plain sort of packed keys (:func:`~probwrap._packed_sort.packed_order`), or,
    for scores spanning more binary orders of magnitude than the keys can hold, the two classes
    sorted apart and merged by a stable argsort of the two runs (the same order)."""
    packed = packed_order(scores, y.astype(np.int8))
    if packed is not None:
        return packed
    positive = y == 1.0
    neg = np.sort(np.compress(~positive, scores))
    pos = np.sort(np.compress(positive, scores))
    both = np.concatenate([neg, pos])
    order = np.argsort(both, kind="stable")
    return both[order], (order >= neg.shape[0]).astype(np.int64)


def _first_index(label: np.ndarray, value: int, backwards: bool = False) -> int:
    """Index of the first (or last) entry of ``label`` equal to ``value``; -1 if none.

    Searched in chunks growing fourfold from the start (or the end): a class end is usually
    within a few rows of the end of the order, so this reads a few rows instead of all.
    """
    n = label.shape[0]
    size = 64
    while True:
        lo, hi = (max(n - size, 0), n) if backwards else (0, min(size, n))
        hits = np.flatnonzero(label[lo:hi] == value)
        if hits.size:
            return lo + int(hits[-1] if backwards else hits[0])
        if hi - lo == n:
            return -1
        size *= 4


def _separated_in_order(s: np.ndarray, label: np.ndarray) -> bool:
    """``_separated``'s answer for unit-weight rows, read off the rows in score order: the
    smallest and largest score of each class are the scores at its first and last row."""
    first0, first1 = _first_index(label, 0), _first_index(label, 1)
    if first0 < 0 or first1 < 0:  # one class only
        return False
    neg_min, pos_min = s[first0], s[first1]
    neg_max, pos_max = s[_first_index(label, 0, True)], s[_first_index(label, 1, True)]
    return bool(
        (neg_max <= pos_min and pos_max > neg_min) or (pos_max <= neg_min and neg_max > pos_min)
    )


def _unit_row_levels(
    s: np.ndarray, label: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Isotonic regression of the 0/1 labels (int64; overwritten) of unit-weight rows in score
    order, by counts.

    Tied scores (``_tie_starts``) are pooled into groups. A fitted level can only start at a
    group whose share of positives is above the share of the group before it: inside a
    pool-adjacent-violators block every prefix averages at least the block's mean and every
    suffix at most, so at a boundary between blocks of means ``m1 < m2`` the last group of the
    first averages at most ``m1`` and the first group of the second at least ``m2``. The groups
    between two such rises are therefore pooled before the pass (in rows without ties: each run
    of ones with the zeros after it; 166,501 segments for 10**6 rows whose probabilities are
    spread evenly), SciPy's PAV runs on those segments, and each level's value is its count of
    positives over its count of rows (one rounding).

    Returns the distinct scores, then per level the index of its first and last distinct score,
    its number of positives and its number of rows (both float).
    """
    n = s.shape[0]
    first = np.ones(n, dtype=bool)
    _tie_starts(s, first)
    if first.all():
        distinct, group_rows = s, None
        rise = label[1:] > label[:-1]
        cum = np.cumsum(label, out=label)  # positives among the first 1, 2, ... rows (exact)
    else:
        group_rows = np.flatnonzero(first)  # the row where each group starts
        distinct = s[group_rows]
        cum = np.cumsum(label, out=label)
        ends = np.append(group_rows[1:], n)
        k = np.diff(cum[ends - 1], prepend=0)  # positives per group
        g = ends - group_rows  # rows per group
        rise = k[1:] * g[:-1] > k[:-1] * g[1:]  # exact in int64 (products below n**2)
    del first
    seg = np.flatnonzero(rise)
    del rise
    seg_first = np.empty(seg.shape[0] + 1, dtype=np.intp)  # first group of each segment
    seg_first[0] = 0
    np.add(seg, 1, out=seg_first[1:])
    bounds = np.empty(seg_first.shape[0] + 1, dtype=np.intp)  # the segments' rows: [b_j, b_j+1)
    bounds[:-1] = seg_first if group_rows is None else group_rows[seg_first]
    bounds[-1] = n
    before = np.zeros(bounds.shape[0], dtype=np.int64)  # positives before each bound
    before[1:] = cum[bounds[1:] - 1]
    del cum
    rows = np.diff(bounds).astype(float)
    fit = isotonic_regression(np.diff(before) / rows, weights=rows, increasing=True)
    r = fit.blocks
    level_pos = np.diff(before[r]).astype(float)
    level_rows = np.diff(bounds[r]).astype(float)
    group_first = np.append(seg_first, distinct.shape[0])
    return distinct, group_first[r[:-1]], group_first[r[1:]] - 1, level_pos, level_rows


class IsotonicMap(CalibrationMap):
    """Isotonic calibration: the best non-decreasing step map from log-odds to probability.

    Fitted by weighted pool-adjacent-violators (PAV): one sort, tied scores pooled into their
    weighted mean label (zero-weight rows left out), then one pooling pass over the distinct
    scores (SciPy's compiled PAV). Only the order of the scores matters. Without weights (or
    with one weight for every row) the fit is made of counts: the rows are put in score order
    with their classes by one plain sort, the pass runs on the stretches between rises of the
    share of positives (no level can start elsewhere), and each level's value is its number of
    positives over its number of rows, one exact division.

    Prediction interpolates linearly (in the score) between the fitted values at consecutive
    distinct training scores, like scikit-learn's ``IsotonicRegression``. Scores below the
    smallest or above the largest training score get the first or last fitted value (clamped;
    no extrapolation).

    With ``smooth_targets=True`` (the default) the pooling runs on Platt's (1999) smoothed
    targets instead of the 0/1 labels: ``(N+ + 1) / (N+ + 2)`` for positives and
    ``1 / (N- + 2)`` for negatives (``N+``, ``N-`` the weighted class counts). Every fitted
    level is a weighted mean of these targets, so it lies in
    ``[1 / (N- + 2), (N+ + 1) / (N+ + 2)]``: never exactly 0 or 1, and within about ``1/N`` of
    the plain fit on large sets. This equals scikit-learn's ``IsotonicRegression`` fitted to the
    smoothed targets. When the scores separate the classes the plain fit is a 0/1 step; the map
    then records ``boundary_`` (``CalibrationWrapper(method="auto")`` does not choose it).

    Parameters
    ----------
    smooth_targets : bool, default=True
        Pool the smoothed targets; ``False`` gives the plain isotonic regression of the labels.

    Attributes
    ----------
    thresholds_ : ndarray of shape (m,)
        Breakpoints of the fitted step map, increasing: the smallest and largest training score
        (of positive weight) of every fitted level. Training scores inside a level are not kept
        (they change no prediction), so ``m`` is at most twice the number of levels and does not
        grow with the number of training rows once the levels settle.
    values_ : ndarray of shape (m,)
        Fitted probability at each threshold, non-decreasing.
    floor_ : float
        ``1 / (N + 2)`` with smoothing, else 0: outputs stay within ``[floor_, 1 - floor_]``.
    boundary_ : str or None
        Set when the scores separate the classes.
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
    >>> m = IsotonicMap(smooth_targets=False).fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1])
    >>> m.values_
    array([0. , 0.5, 0.5, 1. ])
    >>> m.predict([-5.0, 1.5, 9.0])
    array([0.  , 0.75, 1.  ])

    Smoothed (the default), with two rows per class: targets 1/4 and 3/4 instead of 0 and 1.

    >>> IsotonicMap().fit([-1.0, 0.0, 1.0, 2.0], [0, 1, 0, 1]).values_
    array([0.25, 0.5 , 0.5 , 0.75])
    """

    complexity = NONPARAMETRIC

    def __init__(self, *, smooth_targets: bool = True) -> None:
        self.smooth_targets = smooth_targets

    def _uses_counts(self) -> bool:
        return bool(self.smooth_targets)

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        if not isinstance(self.smooth_targets, (bool, np.bool_)):
            raise ValueError(
                f"`smooth_targets` must be True or False; got {plain(self.smooth_targets)!r}."
            )
        top = float(w.max())
        # the fit is a weighted mean per block, unchanged by scaling every weight; a power of two
        # (exact) keeps the block sums finite for weights near the largest double
        unit = power_of_two_unit(np.array([top]))
        # every weight the same power of two (no weights given): one weight per row, so the fit
        # is counts (see _unit_row_levels)
        unit_rows = top == unit and float(w.min()) == top
        if self.smooth_targets:
            # Platt's targets from the class counts (in rows, before any rescaling below)
            with np.errstate(over="ignore", invalid="ignore"):
                if unit_rows:  # the same sums, exact: counts times a power of two
                    n_pos = top * float(np.count_nonzero(y))
                    n_neg = top * float(y.shape[0]) - n_pos
                else:
                    n_pos = float(w @ y)
                    n_neg = float(w.sum()) - n_pos
            if not (np.isfinite(n_pos) and np.isfinite(n_neg)):
                # counts beyond the largest double: (N + 1) / (N + 2) is 1 and 1 / (N + 2) is 0
                # to double precision long before that, so capped counts give the same targets
                n_pos = min(float((w / unit) @ y) * unit, _COUNT_CAP)
                n_neg = min(float((w / unit) @ (1.0 - y)) * unit, _COUNT_CAP)
            # one-vs-rest for one of k classes: the negatives' target is shared by the k - 1
            # classes they stand for (see one_vs_rest_copy)
            t_neg = 1.0 / ((n_neg + 2.0) * self._rest_classes)
            t_pos = (n_pos + 1.0) / (n_pos + 2.0)
            self._set_floor(w, 2)
        if unit_rows:
            s, label = _ordered_rows(scores, y)
            separated = _separated_in_order(s, label)
            distinct, first, last, level_pos, level_rows = _unit_row_levels(s, label)
            del s, label
            share = level_pos / level_rows  # one rounding; non-decreasing as the exact shares
            if self.smooth_targets:
                # each row's target is t- plus (t+ - t-) for a positive: a level's mean target is
                # t- + (t+ - t-) * share (non-decreasing in the share, as the rounded values are)
                values = t_neg + (t_pos - t_neg) * share
            else:
                values = share
        else:
            w = w / unit
            found: list[bool] = []
            distinct, weight, label_sum = _pool_ties(scores, y, w, separation=found)
            separated = found[0]
            if self.smooth_targets:
                # pooled target sums: each row's target is t- plus (t+ - t-) for a positive
                label_sum = t_neg * weight + (t_pos - t_neg) * label_sum
            # The pooling pass itself is SciPy's compiled weighted PAV (scipy.optimize, since
            # 1.12): one O(m) pass over the m distinct scores.
            fit = isotonic_regression(label_sum / weight, weights=weight, increasing=True)
            r = fit.blocks
            first, last, values = r[:-1], r[1:] - 1, fit.x[r[:-1]]
        if separated:
            self.boundary_ = "scores separate the classes: the plain fit is a 0/1 step"
        self.thresholds_, self.values_ = _level_ends(
            distinct, first, last, np.clip(values, 0.0, 1.0)
        )

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        return _interpolate(scores, self.thresholds_, self.values_)


def _level_ends(
    x: np.ndarray, first: np.ndarray, last: np.ndarray, values: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """The first and last point of every run of equal fitted values.

    ``first[j]`` and ``last[j]`` index into ``x`` the first and last distinct score of fitted
    block ``j``, whose value is ``values[j]`` (non-decreasing). Neighbouring blocks of equal value
    (after clipping) form one run. Inside a run the interpolated map is flat, so the interior
    points change no prediction: linear interpolation between the kept points gives
    bit-identical outputs (the slope across a run is exactly 0). A run of one distinct score
    keeps one point. The fitted map then has one or two points per isotonic level, a number
    bounded by the number of distinct levels rather than by the number of training rows.
    """
    new = np.ones(values.shape[0], dtype=bool)
    np.not_equal(values[1:], values[:-1], out=new[1:])
    if new.all():
        start, end = first, last
        v = values
    else:
        runs = np.flatnonzero(new)
        start = first[runs]
        end = last[np.append(runs[1:], values.shape[0]) - 1]
        v = values[runs]
    two = end > start
    points = np.empty(2 * start.shape[0], dtype=np.intp)
    points[0::2] = start
    points[1::2] = end
    keep = np.ones(points.shape[0], dtype=bool)
    keep[1::2] = two
    return x[points[keep]], np.repeat(v, np.where(two, 2, 1))


def _interpolate(x: np.ndarray, xp: np.ndarray, fp: np.ndarray) -> np.ndarray:
    """``np.interp``, made exact where its slope ``(f1 - f0) / (x1 - x0)`` is not finite.

    Across a gap of denormal width the slope overflows (``np.interp`` then returns 1.0 where
    ~5e-14 is right), and across a gap wider than the largest double the difference does. There
    the value is computed as ``f0 + t (f1 - f0)`` with the fraction ``t = (x - x0) / (x1 - x0)``
    (of halves when the gap overflows).
    """
    out = np.interp(x, xp, fp)
    if xp.shape[0] < 2:
        return out
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        dx = np.diff(xp)
        bad_segment = ~np.isfinite(np.diff(fp) / dx) | ~np.isfinite(dx)
    if not bad_segment.any():
        return out
    seg = np.searchsorted(xp, x, side="right") - 1  # xp[seg] <= x < xp[seg + 1]
    inside = (seg >= 0) & (seg < xp.shape[0] - 1)
    redo = np.flatnonzero(inside)[bad_segment[seg[inside]]]
    if redo.size:
        j = seg[redo]
        x0, x1, xv = xp[j], xp[j + 1], x[redo]
        with np.errstate(over="ignore", invalid="ignore"):
            gap = x1 - x0
            t = np.where(
                np.isfinite(gap),
                (xv - x0) / gap,
                (0.5 * xv - 0.5 * x0) / (0.5 * x1 - 0.5 * x0),
            )
        t = np.clip(t, 0.0, 1.0)
        out[redo] = fp[j] + t * (fp[j + 1] - fp[j])
    return out
