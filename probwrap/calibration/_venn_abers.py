"""Inductive Venn-Abers calibration (Vovk, Petej & Fedorova 2015)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from sklearn.utils.validation import check_is_fitted

from .._validation import power_of_two_unit
from . import _venn_abers_loops
from ._base import NONPARAMETRIC, CalibrationMap
from ._isotonic import _pool_ties

__all__ = ["VennAbersMap"]


def _lower_hull_links(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Neighbour links of the lower convex hulls of every prefix and every suffix of a polyline.

    For points ``(x[k], y[k])`` with strictly increasing ``x``: ``prev[i]`` is the vertex before
    ``i`` on the lower hull of points ``0..i`` (``prev[0] = 0``), and ``succ[k]`` the vertex after
    ``k`` on the lower hull of points ``k..last`` (``succ[last] = last``). Following ``prev``
    from ``i`` walks the whole hull of the prefix, following ``succ`` from ``k`` the whole hull
    of the suffix (monotone-chain scan, amortised O(1) per point).
    """
    n = x.shape[0]
    xs, ys = x.tolist(), y.tolist()
    prev = [0] * n
    stack: list[int] = []
    for i in range(n):
        xi, yi = xs[i], ys[i]
        while len(stack) >= 2:
            o, a = stack[-2], stack[-1]
            # drop a unless o -> a -> i turns counter-clockwise (strictly convex from below)
            if (xs[a] - xs[o]) * (yi - ys[o]) - (ys[a] - ys[o]) * (xi - xs[o]) <= 0:
                stack.pop()
            else:
                break
        prev[i] = stack[-1] if stack else i
        stack.append(i)
    succ = [0] * n
    stack = []
    for k in range(n - 1, -1, -1):
        xk, yk = xs[k], ys[k]
        while len(stack) >= 2:
            b, a = stack[-2], stack[-1]
            # keep a only if k -> a -> b turns counter-clockwise
            if (xs[a] - xk) * (ys[b] - yk) - (ys[a] - yk) * (xs[b] - xk) <= 0:
                stack.pop()
            else:
                break
        succ[k] = stack[-1] if stack else k
        stack.append(k)
    return np.asarray(prev, dtype=np.intp), np.asarray(succ, dtype=np.intp)


def _jump_table(link: np.ndarray) -> list[np.ndarray]:
    """``table[l][v]`` is the vertex reached from ``v`` after ``2**l`` steps along ``link``."""
    table = [link]
    for _ in range(max(1, int(np.ceil(np.log2(link.shape[0] + 1))))):
        table.append(table[-1][table[-1]])
    return table


def _insertion_values(
    cx: np.ndarray,
    cy: np.ndarray,
    left_end: np.ndarray,
    right_start: np.ndarray,
    label: float,
    test_weight: float,
    prev: np.ndarray,
    succ: np.ndarray,
    up_prev: list[np.ndarray],
    up_succ: list[np.ndarray],
) -> np.ndarray:
    """Isotonic value at an inserted test point with the given label, for many insertions.

    ``cx, cy`` is the cumulative sum diagram (CSD) of the calibration groups. The test point
    (weight 1) sits between CSD vertices ``left_end`` and ``right_start`` (equal for a new
    distinct score; ``right_start = left_end + 1`` when it ties with a calibration score and
    joins that group). Its isotonic value is the slope of the greatest convex minorant over its
    segment, i.e. of the lower bridge between the hull of vertices ``0..left_end`` and the hull
    of vertices ``right_start..`` shifted by ``(1, label)``. Both hulls are walked with binary
    lifting, so each insertion costs O(log^2 m), vectorised over all insertions.
    """

    def slope_to_right(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        # differences first: cx[b] + w - cx[a] loses the test weight w when cx is huge (1e17 + 1
        # == 1e17), which turned a == b into 0 / 0
        return ((cy[b] - cy[a]) + label * test_weight) / ((cx[b] - cx[a]) + test_weight)

    def tangent_slope(a: np.ndarray, start: np.ndarray) -> np.ndarray:
        # smallest slope from vertex a to the shifted right hull starting at `start`
        def before_tangent(b: np.ndarray) -> np.ndarray:
            return slope_to_right(a, succ[b]) < slope_to_right(a, b)

        b = start.copy()
        for level in range(len(up_succ) - 1, -1, -1):
            cand = up_succ[level][b]
            move = before_tangent(cand)
            b = np.where(move, cand, b)
        touch = np.where(before_tangent(start), succ[b], start)
        return slope_to_right(a, touch)

    def before_bridge(a: np.ndarray) -> np.ndarray:
        # the bridge touches the left hull further left iff the edge into a is steeper than
        # the tangent from a
        p = prev[a]
        dx = np.where(a > 0, cx[a] - cx[p], 1.0)
        with np.errstate(divide="ignore", invalid="ignore"):
            # two vertices can share one rounded cx next to a huge weight: a vertical edge
            edge = np.where(dx > 0, (cy[a] - cy[p]) / np.where(dx > 0, dx, 1.0), np.inf)
        return (a > 0) & (edge > tangent_slope(a, right_start))

    a = left_end.copy()
    for level in range(len(up_prev) - 1, -1, -1):
        cand = up_prev[level][a]
        a = np.where(before_bridge(cand), cand, a)
    vertex = np.where(before_bridge(left_end), prev[a], left_end)
    return np.clip(tangent_slope(vertex, right_start), 0.0, 1.0)


def _insertion_table(
    cx: np.ndarray, cy: np.ndarray, test_weight: float, compiled: bool | None = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """``p0`` and ``p1`` in every gap and at every distinct score, from the CSD ``cx, cy``.

    With Numba installed (the ``compiled`` extra) the hulls are scanned and walked by compiled
    loops (about ten steps per insertion on ordinary data, O(m) memory); without it, or when the
    walks run long (a budget of steps is exceeded: hulls where the bridge lies far from the
    insertion for many insertions), by the vectorised NumPy construction below (binary lifting,
    O(m log^2 m) time, ``log2(m)`` jump tables). Both give bit-identical values. ``compiled``
    forces one path (True: compiled walk without budget; False: NumPy) for tests and benchmarks.
    """
    m = cx.shape[0] - 1
    kernels = _venn_abers_loops.compiled() if compiled is not False else None
    if compiled and kernels is None:
        raise ImportError("the compiled Venn-Abers construction needs Numba: "
                          'pip install "probwrap[compiled]"')
    if kernels is not None:
        hull_links, walk = kernels
        # 32-bit links while they fit (half the memory); Numba compiles each width once
        links = np.int32 if m < np.iinfo(np.int32).max else np.int64
        succ = np.empty(m + 1, dtype=links)
        hull_links(cx, cy, np.empty(0, dtype=links), succ)
        out = np.empty((4, m + 1))
        budget = np.iinfo(np.int64).max if compiled else _WALK_BUDGET * 4 * (m + 1) + 4096
        if walk(cx, cy, succ, test_weight, budget, out) >= 0:
            return out[0], out[1], out[2, :m], out[3, :m]
        del out
        prev = np.empty(m + 1, dtype=links)
        hull_links(cx, cy, prev, succ)
        prev, succ = prev.astype(np.intp), succ.astype(np.intp)
    else:
        prev, succ = _lower_hull_links(cx, cy)
    up_prev, up_succ = _jump_table(prev), _jump_table(succ)
    gaps = np.arange(m + 1)
    ties = np.arange(m)
    args = (test_weight, prev, succ, up_prev, up_succ)
    return (
        _insertion_values(cx, cy, gaps, gaps, 0.0, *args),
        _insertion_values(cx, cy, gaps, gaps, 1.0, *args),
        _insertion_values(cx, cy, ties, ties + 1, 0.0, *args),
        _insertion_values(cx, cy, ties, ties + 1, 1.0, *args),
    )


# Walk steps allowed per insertion on average before the compiled path hands over to the NumPy
# construction: ordinary data take about 5-10 (measured 4.8 / 6.4 / 8.1 at 1e4 / 1e5 / 1e6
# logistic rows), so the budget is only met where the walks grow with m.
_WALK_BUDGET = 64


class VennAbersMap(CalibrationMap):
    """Inductive Venn-Abers calibration: a pair of isotonic probabilities for every score.

    For a test score ``s``, ``p0`` is the isotonic fit of the calibration set plus the test
    point labelled 0, evaluated at ``s``; ``p1`` is the same with the test point labelled 1
    (Vovk, Petej & Fedorova 2015). The test point carries a weight of 1 (in the units of
    ``sample_weight``); a test score equal to a calibration score joins that tie group.
    ``p0 <= p1``, and the width ``p1 - p0`` shows how much the calibration data pin the
    probability down. ``predict`` merges the pair into one probability,
    ``p1 / (1 - p0 + p1)``, the paper's merge for log loss. The merged value is never exactly 0
    or 1: below all calibration scores ``p0 = 0`` and ``p1 >= 1 / (N + 1)``, so the merge is at
    least ``1 / (N + 2)`` (``N`` the total weight), the floor the other maps apply explicitly.
    Fitted one-vs-rest for one of ``k`` classes (through ``CalibrationWrapper``), the merge uses
    ``p0 + (p1 - p0) / (k - 1)`` in place of ``p1``: the ``k - 1`` wrong classes of a row share
    one width instead of keeping ``k - 1`` widths together (docs/calibration.md, "One-vs-rest
    with k classes"); the interval is the paper's either way.

    Efficiency: nothing is refitted per test point. After one sort, the values for every
    possible insertion (at each distinct calibration score and in each gap between two) are
    precomputed from the cumulative sum diagram and its prefix and suffix lower convex hulls;
    ``predict`` is a ``np.searchsorted`` and a look-up. With the ``compiled`` extra (Numba:
    ``pip install "probwrap[compiled]"``) the hulls are walked by compiled loops, about four
    isotonic fits' time at 1e6 rows; without it a vectorised NumPy construction (O(m log^2 m)
    binary lifting) gives the same values, hundreds of isotonic fits' time. The first fit in a
    process with Numba loads (or, once, compiles) the loops: about a second.

    Attributes
    ----------
    thresholds_ : ndarray of shape (m,)
        Distinct calibration scores (of positive weight), increasing, where the pair changes:
        a score whose pair equals the pairs just below and just above it is not kept (it
        changes no prediction), so ``m`` follows the number of distinct pairs.
    p0_at_, p1_at_ : ndarray of shape (m,)
        ``p0`` and ``p1`` for a test score equal to each threshold.
    p0_between_, p1_between_ : ndarray of shape (m + 1,)
        ``p0`` and ``p1`` for a test score below all thresholds (entry 0), strictly between
        thresholds ``j - 1`` and ``j`` (entry ``j``) or above all of them (entry ``m``).
    classes_ : ndarray of shape (2,)
        The labels; the second one is the positive class.

    References
    ----------
    V. Vovk, I. Petej and V. Fedorova (2015), "Large-scale probabilistic predictors with and
    without guarantees of validity", NeurIPS.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.calibration import VennAbersMap
    >>> m = VennAbersMap().fit([-2.0, -1.0, 0.0, 1.0, 2.0], [0, 0, 1, 0, 1])
    >>> m.predict_interval([0.5])
    array([[0.33333333, 0.66666667]])
    >>> m.predict([0.5]).round(4)
    array([0.5])
    """

    complexity = NONPARAMETRIC

    def __init__(self) -> None:
        pass

    def _uses_counts(self) -> bool:
        return True  # the test point weighs one row

    def _fit(self, scores: np.ndarray, y: np.ndarray, w: np.ndarray) -> None:
        # The convex-hull tests multiply differences of cumulative weights, which overflow once
        # the total weight passes ~1e154. Above 2**500 (a total bound by n times the largest
        # weight), weights and the test point's unit weight are divided by one power of two
        # that brings the total down to about 2**500: no slope changes, squares stay finite,
        # and weights up to ~2**-500 of the total stay clear of underflow. Ordinary weights are
        # not touched.
        top = math.frexp(power_of_two_unit(w))[1] + math.ceil(math.log2(w.shape[0])) + 1
        unit = math.ldexp(1.0, max(0, top - 500))  # (exponents: 2**top bounds the total)
        distinct, weight, label_sum = _pool_ties(scores, y, w if unit == 1.0 else w / unit)
        m = distinct.shape[0]
        # the cumulative sum diagram, written in place (the group sums are not needed after)
        cx, cy = np.zeros(m + 1), np.zeros(m + 1)
        np.cumsum(weight, out=cx[1:])
        np.cumsum(label_sum, out=cy[1:])
        del weight, label_sum
        p0_between, p1_between, p0_at, p1_at = _insertion_table(cx, cy, 1.0 / unit)
        # A threshold whose pair equals the pairs just below and just above it changes no
        # prediction: drop it (the two gaps merge), so the fitted size follows the number of
        # distinct pairs, not of calibration rows. Predictions are identical.
        flat = (
            (p0_between[:-1] == p0_at) & (p0_at == p0_between[1:])
            & (p1_between[:-1] == p1_at) & (p1_at == p1_between[1:])
        )
        if flat.all():
            flat[0] = False  # keep one threshold: the map needs at least one
        keep = np.flatnonzero(~flat)
        self.thresholds_ = distinct[keep]
        self.p0_at_, self.p1_at_ = p0_at[keep], p1_at[keep]
        self.p0_between_ = np.concatenate([p0_between[:1], p0_between[keep + 1]])
        self.p1_between_ = np.concatenate([p1_between[:1], p1_between[keep + 1]])

    def predict_interval(self, scores: Any) -> np.ndarray:
        """The Venn-Abers pair ``[p0, p1]`` for each score.

        Parameters
        ----------
        scores : array-like of shape (n,)
            Log-odds (only their order relative to the calibration scores matters).

        Returns
        -------
        ndarray of shape (n, 2)
            Column 0 is ``p0``, column 1 is ``p1``; ``p0 <= p1``.
        """
        check_is_fitted(self, "classes_")
        s = self._check_scores(scores, fitting=False)
        return self._interval(s)

    def _interval(self, s: np.ndarray) -> np.ndarray:
        m = self.thresholds_.shape[0]
        pos = np.searchsorted(self.thresholds_, s, side="left")
        at = np.minimum(pos, m - 1)
        tie = (pos < m) & (self.thresholds_[at] == s)
        p0 = np.where(tie, self.p0_at_[at], self.p0_between_[pos])
        p1 = np.where(tie, self.p1_at_[at], self.p1_between_[pos])
        return np.column_stack([p0, p1])

    def _predict(self, scores: np.ndarray) -> np.ndarray:
        pair = self._interval(scores)
        p0, p1 = pair[:, 0], pair[:, 1]
        # The merge weighs "the test row is positive" (upper probability p1) against "it is
        # negative" (upper probability 1 - p0). Fitted one-vs-rest for one of k classes
        # (``_rest_classes = k - 1``, see one_vs_rest_copy), each of the k maps adds its own
        # width p1 - p0 for the hypothesis that the row is its class; the k hypotheses exclude
        # each other, yet after renormalisation the k - 1 wrong classes of a row would keep
        # k - 1 widths together. So each map uses 1 / (k - 1) of its width above p0, and the
        # wrong classes together keep about what the one wrong class of a binary map keeps
        # (the floor below all scores becomes 1 / ((N + 1)(k - 1) + 1), of the order of the
        # other maps' shared floor 1 / ((N + 2)(k - 1))). Two classes: the paper's merge.
        # The interval itself (predict_interval) is not changed.
        p1 = p0 + (p1 - p0) / self._rest_classes
        return p1 / (1.0 - p0 + p1)
