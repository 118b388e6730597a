"""Rows in score order for the cutoff search: the sort, the decision ends and their middles.

Decision ``j`` (``j = 0..m`` over ``m`` distinct scores) gives the positive action to the rows
scoring above the ``j``-th distinct score; these helpers sort the rows once, put their per-row
costs in that order and place one representative cutoff inside each decision's range.
"""

from __future__ import annotations

from typing import Any

import numpy as np


def _middle(lo: Any, hi: Any) -> Any:
    """Midpoints of ``[lo, hi)`` that neither overflow (``lo + hi`` can) nor round up to ``hi``
    (which they do between adjacent doubles; ``lo`` itself is then the only value inside)."""
    lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
    with np.errstate(over="ignore", invalid="ignore"):
        d = hi - lo
        mid = np.where(np.isfinite(d), lo + 0.5 * d, 0.5 * lo + 0.5 * hi)
    return np.where((mid >= hi) & (hi > lo), lo, mid)


def _beyond(x: float, step: float, direction: float) -> float:
    """A finite value strictly beyond ``x`` (above for ``direction=1``), ``step`` away if that
    works; a huge ``x`` can absorb ``step`` (1e200 + 1 == 1e200), and ``x + step`` can overflow."""
    with np.errstate(over="ignore", invalid="ignore"):
        for cand in (x + direction * step, x + direction * max(abs(x), 1.0)):
            if np.isfinite(cand) and (cand - x) * direction > 0:
                return float(cand)
    with np.errstate(over="ignore"):  # beyond the largest double: +-inf is the only choice
        return float(np.nextafter(x, direction * np.inf))


class _SortedRows:
    """Scores sorted once, with the boundaries of groups of equal scores."""

    def __init__(self, scores: np.ndarray, score_bounds: tuple[float, float] | None) -> None:
        self.order = np.argsort(scores)
        ss = scores[self.order]
        n = ss.shape[0]
        last = np.empty(n, dtype=bool)
        np.not_equal(ss[1:], ss[:-1], out=last[:-1])
        last[-1] = True
        self.ends = np.flatnonzero(last)
        self.n = n
        u = ss[self.ends]
        m = u.shape[0]
        with np.errstate(over="ignore"):
            gap = (u[-1] - u[0]) / (m - 1) if m > 1 else 1.0
        lo_ext = _beyond(u[0], gap, -1.0)
        hi_ext = _beyond(u[-1], gap, 1.0)
        if score_bounds is not None:
            if score_bounds[0] < u[0]:
                lo_ext = score_bounds[0]
            if score_bounds[1] >= u[-1]:
                # top scores at the bound itself (probabilities of exactly 1): "act on none"
                # is the cutoff at the bound, not one beyond it
                hi_ext = score_bounds[1]
        # Decision j (j = 0..m) is "positive action for rows scoring above lower[j]"; any cutoff
        # in [lower[j], upper[j]) produces it.
        self.lower = np.empty(m + 1)
        self.lower[0] = lo_ext
        self.lower[1:] = u
        self.upper = np.empty(m + 1)
        self.upper[:-1] = u
        self.upper[-1] = hi_ext
        self.mid = _middle(self.lower, self.upper)

    def curve(
        self, d_sorted: np.ndarray, total_flag_all: float, w_sorted: np.ndarray | None
    ) -> tuple[np.ndarray, np.ndarray, float]:
        """Total cost and flagged weight of every decision.

        ``d_sorted`` holds, in score order, each row's weighted cost of the negative action minus
        that of the positive one; ``total_flag_all`` is the total cost when every row takes the
        positive action; ``w_sorted`` are the weights in score order (None: all ones).
        """
        total = np.empty(self.ends.shape[0] + 1)
        total[0] = total_flag_all
        cum = np.cumsum(d_sorted)
        np.add(total_flag_all, cum[self.ends], out=total[1:])
        flagged = np.empty_like(total)
        if w_sorted is None:
            weight = float(self.n)
            np.subtract(weight, self.ends + 1.0, out=flagged[1:])
        else:
            cw = np.cumsum(w_sorted)
            weight = float(cw[-1])
            np.subtract(weight, cw[self.ends], out=flagged[1:])
        flagged[0] = weight
        flagged[-1] = 0.0
        return total, flagged, weight


class _RowCosts:
    """Per-row costs of the two actions, in a form that is cheap to put in score order."""

    def __init__(self, matrix: np.ndarray, y: np.ndarray, w: np.ndarray | None) -> None:
        self.w = w
        self.matrix = matrix
        self.y = y
        if matrix.ndim == 2:
            self.dvals = matrix[:, 0] - matrix[:, 1]
            self.y8 = y.astype(np.int8)
            counts = np.bincount(y, weights=w, minlength=2)
            self.total_flag_all = float(np.dot(counts, matrix[:, 1]))
        else:
            self.dvals = None
            wc1 = self.c1 if w is None else self.c1 * w
            self.total_flag_all = float(wc1.sum())

    @property
    def c0(self) -> np.ndarray:
        if self.matrix.ndim == 2:
            return self.matrix[self.y, 0]
        return self.matrix[np.arange(self.y.shape[0]), self.y, 0]

    @property
    def c1(self) -> np.ndarray:
        if self.matrix.ndim == 2:
            return self.matrix[self.y, 1]
        return self.matrix[np.arange(self.y.shape[0]), self.y, 1]

    def sorted_inputs(self, rows: _SortedRows):
        o = rows.order
        if self.dvals is not None and self.w is None:
            d_sorted = self.dvals[self.y8[o]]
        else:
            d = self.c0 - self.c1
            if self.w is not None:
                d = d * self.w
            d_sorted = d[o]
        w_sorted = None if self.w is None else self.w[o]
        return d_sorted, self.total_flag_all, w_sorted


class _DecisionEnds:
    """Lower (or upper) ends of the decision intervals, read from the distinct scores ``u``.

    Decision ``j`` (``j = 0..m``) covers cutoffs in ``[lower[j], upper[j])`` with
    ``lower = [lo_ext, u...]`` and ``upper = [u..., hi_ext]``; this indexes those arrays without
    building them (two arrays as long as the scores).
    """

    def __init__(self, u: np.ndarray, lo_ext: float, hi_ext: float, *, upper: bool) -> None:
        self.u, self.lo_ext, self.hi_ext, self.upper = u, lo_ext, hi_ext, upper

    def __getitem__(self, idx: Any) -> np.ndarray:
        k = np.asarray(idx) - (0 if self.upper else 1)
        m = self.u.shape[0]
        out = self.u[np.minimum(np.maximum(k, 0), m - 1)]  # (np.clip of integers, fewer checks)
        return np.where(k < 0, self.lo_ext, np.where(k >= m, self.hi_ext, out))

    def count_at_most(self, value: float) -> int:
        """``np.searchsorted(upper, value, side="right")`` (upper ends only)."""
        return int(np.searchsorted(self.u, value, side="right")) + int(self.hi_ext <= value)


def _neighbour_middles(u: np.ndarray, lo_ext: float, hi_ext: float) -> np.ndarray:
    """``_middle([lo_ext, u...], [u..., hi_ext])`` with one output array and no full temporaries.

    The same floating-point operations as :func:`_middle` (``lo + 0.5 * (hi - lo)``), so the
    values are identical; the rare gaps that overflow or round up are redone separately.
    """
    m = u.shape[0]
    mid = np.empty(m + 1)
    mid[0] = _middle(lo_ext, u[0])
    mid[m] = _middle(u[-1], hi_ext)
    if m > 1:
        inner = mid[1:m]
        with np.errstate(over="ignore", invalid="ignore"):
            np.subtract(u[1:], u[:-1], out=inner)
        # a gap overflows only if the whole range does (one subtraction decides)
        with np.errstate(over="ignore"):
            wide = not np.isfinite(u[-1] - u[0])
        overflow = np.flatnonzero(~np.isfinite(inner)) if wide else np.empty(0, dtype=np.intp)
        inner *= 0.5
        inner += u[:-1]
        if overflow.size:
            inner[overflow] = _middle(u[overflow], u[overflow + 1])
        # between adjacent doubles the middle rounds up to the upper end: the lower one is inside
        up = np.flatnonzero(inner >= u[1:])
        if up.size:
            inner[up] = u[up]
    return mid


#: Entries per block of :func:`_neighbour_middles_in_place` (temporaries that stay in cache).
_MIDDLE_BLOCK = 1 << 15


def _neighbour_middles_in_place(buf: np.ndarray, m: int, lo_ext: float, hi_ext: float) -> None:
    """:func:`_neighbour_middles` of ``u = buf[:m]``, written over it into ``buf[:m + 1]``.

    The same floating-point operations, hence the same values; no array as long as ``u`` is
    allocated (a fresh array costs its page faults, about a third of a sort at 1e6 rows). The
    blocks run from the top down: block ``[a, b)`` reads ``u[a - 1:b]`` and writes entries
    ``a..b-1``, so every lower block still finds ``u`` below ``a`` as it was.
    """
    u = buf[:m]
    top = _middle(u[m - 1], hi_ext)
    bottom = _middle(lo_ext, u[0])
    if m > 1:
        with np.errstate(over="ignore"):
            wide = not np.isfinite(u[m - 1] - u[0])  # a gap overflows only if the range does
        size = max(1, min(_MIDDLE_BLOCK, max(1 << 14, m // 32), m - 1))  # see _cutoff._block_rows
        tmp = np.empty(size)
        b = m
        while b > 1:
            a = max(1, b - size)
            lo, hi, t = u[a - 1:b - 1], u[a:b], tmp[:b - a]
            with np.errstate(over="ignore", invalid="ignore"):
                np.subtract(hi, lo, out=t)
            overflow = np.flatnonzero(~np.isfinite(t)) if wide else None
            t *= 0.5
            t += lo
            if overflow is not None and overflow.size:
                t[overflow] = _middle(lo[overflow], hi[overflow])
            # between adjacent doubles the middle rounds up to the upper end: the lower one
            up = np.flatnonzero(t >= hi)
            if up.size:
                t[up] = lo[up]
            buf[a:b] = t
            b = a
    buf[m] = top
    buf[0] = bottom
