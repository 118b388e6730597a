"""Exact empirical cutoff search for binary decisions: one sort plus cumulative sums.

The positive (costly) action is taken for a row when its score is strictly greater than the
cutoff. Every distinct score is a candidate boundary; rows with equal scores always receive the
same action. With the scores sorted once, the total cost of "act on every row whose score is above
the i-th distinct score" is a cumulative sum, so the whole cost-versus-cutoff curve costs
O(n log n) and no grid is involved.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .._validation import (
    check_same_length,
    check_sample_weight,
    check_scores,
    plain,
    power_of_two_unit,
)
from ._costs import _resolve_costs

__all__ = [
    "CutoffSearchResult",
    "CutoffInterval",
    "search_cutoff",
    "capacity_cutoff",
    "cutoff_interval",
    "check_capacity",
]


@dataclass(frozen=True)
class CutoffSearchResult:
    """Outcome of :func:`search_cutoff`: the whole cost curve and its minimiser.

    Attributes
    ----------
    cutoff : float
        Chosen cutoff: the middle of the optimal interval ``interval``.
    cost : float
        Mean (weighted) cost per row at ``cutoff``.
    interval : tuple of float
        ``(low, high)``: every cutoff in ``[low, high)`` gives the minimal cost on these rows.
    flat : bool
        True when the optimum spans more than one distinct decision (the curve is flat there, so
        the data do not pin the cutoff down more finely than ``interval``).
    cutoffs : ndarray of shape (m + 1,)
        One representative cutoff per distinct decision, ascending (``m`` distinct scores).
    costs : ndarray of shape (m + 1,)
        Mean cost per row at each of ``cutoffs``.
    flagged_share : ndarray of shape (m + 1,)
        Weighted share of rows given the positive action at each of ``cutoffs``.
    admissible : ndarray of shape (m + 1,)
        Whether each decision respects ``capacity`` (all True without a capacity).
    capacity : float or None
        The capacity that was imposed.
    """

    cutoff: float
    cost: float
    interval: tuple[float, float]
    flat: bool
    cutoffs: np.ndarray
    costs: np.ndarray
    flagged_share: np.ndarray
    admissible: np.ndarray
    capacity: float | None


@dataclass(frozen=True)
class CutoffInterval:
    """Uncertainty of a tuned cutoff.

    Attributes
    ----------
    low, high : float
        Percentile bootstrap interval of the cutoff (rows resampled with replacement and the
        search repeated on each resample).
    confidence_level : float
        Coverage aimed at by ``(low, high)``.
    bootstrap_cutoffs : ndarray of shape (n_resamples,)
        The cutoff found on each resample.
    fold_cutoffs : ndarray of shape (n_folds,)
        The cutoff found on the held-out rows of each fold separately (empty for a frozen
        estimator); their spread shows how much the cutoff moves between folds.
    fold_low, fold_high : float
        Smallest and largest of ``fold_cutoffs`` (NaN-free: equal to ``low`` / ``high`` when there
        are no folds).
    """

    low: float
    high: float
    confidence_level: float
    bootstrap_cutoffs: np.ndarray
    fold_cutoffs: np.ndarray
    fold_low: float
    fold_high: float


def check_capacity(capacity: Any, *, name: str = "capacity") -> float | None:
    """Validate a capacity (share of rows) in (0, 1]; ``None`` passes through."""
    if capacity is None:
        return None
    try:
        value = float(capacity)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be a share of rows in (0, 1]; got {plain(capacity)!r}.") from exc
    if isinstance(capacity, bool) or not (0.0 < value <= 1.0):
        raise ValueError(f"`{name}` must be a share of rows in (0, 1]; got {plain(capacity)!r}.")
    return value


def _check_bounds(score_bounds: Any) -> tuple[float, float] | None:
    if score_bounds is None:
        return None
    try:
        lo, hi = (float(v) for v in score_bounds)
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"`score_bounds` must be a pair (low, high) of numbers; got {plain(score_bounds)!r}."
        ) from exc
    if not lo < hi:
        raise ValueError(f"`score_bounds` must satisfy low < high; got {plain(score_bounds)!r}.")
    return lo, hi


def _binary_targets(y: Any, n: int) -> np.ndarray:
    arr = np.asarray(y)
    if arr.ndim != 1:
        raise ValueError(f"`y` must be 1-d of shape (n,); got shape {arr.shape}.")
    if arr.dtype.kind == "b":
        arr = arr.astype(np.int8)
    if arr.dtype.kind not in "iuf" or not np.all((arr == 0) | (arr == 1)):
        # (a set, not np.unique: labels of mixed types cannot be sorted)
        seen = sorted({repr(plain(v)) for v in arr.tolist()})[:5]
        raise ValueError(
            "`y` must hold binary targets coded 0 (negative) and 1 (positive); got values "
            f"{', '.join(seen)}."
        )
    return arr.astype(np.intp, copy=False)


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
            if score_bounds[1] > u[-1]:
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
        out = self.u[np.clip(k, 0, m - 1)]
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


def _search_plain_rows(
    s: np.ndarray, y: np.ndarray, matrix: np.ndarray, cap: float | None, bounds
) -> CutoffSearchResult:
    """:func:`_search_rows` for unweighted rows and one cost matrix, near the cost of one sort.

    The scores of each class are sorted separately with plain sorts (no index), then the two
    sorted runs are merged: a stable ``argsort`` of the two runs (one linear merge) tells which
    merged entries are positives and, gathered through, gives the merged scores. No per-row
    index into the original rows is needed. The flagged shares are built only once the sorted
    scores are freed (the capacity check reads the few shares it needs), so that the peak
    memory stays near the three arrays of the returned curve.
    """
    n = s.shape[0]
    positive = y == 1
    n_pos = int(np.count_nonzero(positive))
    n_neg = n - n_pos
    runs = np.empty(n)
    part = s[np.flatnonzero(~positive)]
    part.sort()
    runs[:n_neg] = part
    part = s[np.flatnonzero(positive)]
    part.sort()
    runs[n_neg:] = part
    del positive, part
    order = np.argsort(runs, kind="stable")  # two sorted runs: one linear merge
    ss = runs[order]  # the merged scores (a gather along two monotone runs)
    is_pos = order >= n_neg
    del order, runs
    last = np.empty(n, dtype=bool)
    np.not_equal(ss[1:], ss[:-1], out=last[:-1])
    last[-1] = True
    # per-row change of the total cost when the row moves from the positive to the negative
    # action: c0 - c1 of its class; its total over the rows at or below a score is a cumsum
    d_neg = float(matrix[0, 0] - matrix[0, 1])
    d_pos = float(matrix[1, 0] - matrix[1, 1])
    total_flag_all = float(np.dot(np.array([n_neg, n_pos], dtype=float), matrix[:, 1]))
    if last.all():
        del last
        u, m, ends = ss, n, None
        del ss
        cost = np.empty(n + 1)
        step = cost[1:]  # filled and summed in place
    else:
        ends = np.flatnonzero(last)
        del last
        m = ends.shape[0]
        u = ss[ends]
        del ss
        cost = np.empty(m + 1)
        step = np.empty(n)
    # (filled by mask in place: a look-up table indexed by the flags would make an index array)
    step.fill(d_neg)
    np.copyto(step, d_pos, where=is_pos)
    del is_pos
    np.cumsum(step, out=step)
    if ends is not None:
        np.take(step, ends, out=cost[1:])
    del step
    cost[0] = 0.0
    cost += total_flag_all
    cost /= float(n)
    with np.errstate(over="ignore"):
        gap = (u[-1] - u[0]) / (m - 1) if m > 1 else 1.0
    lo_ext = _beyond(u[0], gap, -1.0)
    hi_ext = _beyond(u[-1], gap, 1.0)
    if bounds is not None:
        if bounds[0] < u[0]:
            lo_ext = bounds[0]
        if bounds[1] > u[-1]:
            hi_ext = bounds[1]

    def share_at(j: int) -> float:
        # flagged share of decision j (the rows above the j-th distinct score), by the same
        # operations as the array built below
        if j == m:
            return 0.0
        rows_at_or_below = 0 if j == 0 else (j if ends is None else int(ends[j - 1]) + 1)
        return (float(n) - float(rows_at_or_below)) / float(n)

    admissible = np.ones(m + 1, dtype=bool)
    if cap is not None:
        # the share falls with j, so the admissible decisions are all those from the first one
        first, past = 0, m  # share_at(m) = 0 is always admissible
        while first < past:
            j = (first + past) // 2
            if share_at(j) <= cap * (1 + 1e-12):
                past = j
            else:
                first = j + 1
        admissible[:first] = False
    lower = _DecisionEnds(u, lo_ext, hi_ext, upper=False)
    upper = _DecisionEnds(u, lo_ext, hi_ext, upper=True)
    index, value, lo, hi, flat = _pick_optimum(cost, lower, upper, admissible)
    del lower, upper
    mid = _neighbour_middles(u, lo_ext, hi_ext)
    del u
    if ends is None:
        share = np.arange(n, -1, -1, dtype=np.float64)
    else:
        share = np.empty(m + 1)
        share[0] = n
        np.subtract(float(n), ends + 1.0, out=share[1:])
        del ends
    share[-1] = 0.0
    share /= float(n)
    return CutoffSearchResult(
        cutoff=value,
        cost=float(cost[index]),
        interval=(lo, hi),
        flat=flat,
        cutoffs=mid,
        costs=cost,
        flagged_share=share,
        admissible=admissible,
        capacity=cap,
    )


def _pick_optimum(
    cost: np.ndarray, lower: np.ndarray, upper: np.ndarray, admissible: np.ndarray
) -> tuple[int, float, float, float, bool]:
    """Middle of the widest run of minimal-cost decisions.

    Returns ``(index, value, low, high, flat)`` where ``index`` is the decision that contains
    the chosen value.
    """
    if admissible.all():
        c = cost
        scale = max(abs(float(cost.max())), abs(float(cost.min())))
    else:
        c = np.where(admissible, cost, np.inf)
        scale = float(np.max(np.abs(cost[admissible])))
    best = c.min()
    # relative tie tolerance; no absolute floor, which would tie genuinely different costs when
    # all costs are tiny (costs of 1e-300, or a large cost matrix whose big entries never apply)
    tol = 1e-9 * scale
    opt = np.flatnonzero(c <= best + tol)
    breaks = np.flatnonzero(np.diff(opt) > 1)
    starts = opt[np.concatenate([[0], breaks + 1])]
    stops = opt[np.concatenate([breaks, [opt.shape[0] - 1]])]
    widths = upper[stops] - lower[starts]
    r = int(np.argmax(widths))
    lo, hi = float(lower[starts[r]]), float(upper[stops[r]])
    value = float(_middle(lo, hi))
    if isinstance(upper, _DecisionEnds):
        index = upper.count_at_most(value)
    else:
        index = int(np.searchsorted(upper, value, side="right"))
    index = min(max(index, int(starts[r])), int(stops[r]))
    return index, value, lo, hi, bool(stops[r] > starts[r])


def _prepare(scores, y, costs, sample_weight):
    s = check_scores(scores, name="scores", ndim=1)
    n = check_same_length(("scores", s), ("y", np.asarray(y)))
    yi = _binary_targets(y, n)
    matrix = _resolve_costs(costs, n, 2)
    if matrix.shape[-1] != 2:
        raise ValueError(
            f"`costs` must have two actions (negative, positive) for a cutoff; got "
            f"{matrix.shape[-1]}. Use tune_class_offsets for more actions."
        )
    w = None if sample_weight is None else check_sample_weight(sample_weight, n)
    if w is not None and np.all(w == 1.0):
        w = None
    # The rule and the flagged shares do not change when the costs or the weights are scaled;
    # scaling both by powers of two (exact) keeps the cumulative sums from overflowing for
    # costs or weights near the largest double. Mean costs are scaled back by `unit`.
    unit = power_of_two_unit(matrix)
    if w is not None:
        w = w / power_of_two_unit(w)
    return s, yi, w, matrix / unit, unit


def search_cutoff(
    scores: Any,
    y: Any,
    costs: Any,
    *,
    sample_weight: Any = None,
    capacity: float | None = None,
    score_bounds: tuple[float, float] | None = None,
) -> CutoffSearchResult:
    """Find the cutoff with the least empirical cost, exactly, over every distinct score.

    The positive action (column 1 of the cost matrix) is taken when ``score > cutoff``.

    Parameters
    ----------
    scores : array-like of shape (n,)
        Held-out scores, higher meaning "more likely positive" (probabilities, log-odds, ...).
    y : array-like of shape (n,)
        True classes coded 0 (negative) and 1 (positive).
    costs : mapping, array-like of shape (2, 2) or (n, 2, 2)
        Cost matrix (rows: true class, columns: negative / positive action), the binary
        shorthand ``{"tp", "fp", "fn", "tn"}``, or one matrix per row (e.g. amounts at stake).
    sample_weight : array-like of shape (n,), default=None
        Row weights; costs and shares are weighted.
    capacity : float in (0, 1], default=None
        Largest weighted share of rows that may receive the positive action. Because tied rows
        share one action, the flagged share can stay below ``capacity``.
    score_bounds : (float, float), default=None
        Range the scores can take (``(0, 1)`` for probabilities). It decides the representative
        cutoffs at the two ends of the curve; without it the ends are placed one mean gap
        between distinct scores beyond the extreme scores.

    Returns
    -------
    CutoffSearchResult

    Notes
    -----
    Cost is O(n log n): one ``argsort`` and a few cumulative sums. Where several neighbouring
    decisions share the minimal cost the optimum is a flat interval; ``flat`` is set and the
    middle of the widest such interval is returned. Means are per unit of weight.

    Examples
    --------
    >>> from probwrap.decision import search_cutoff
    >>> res = search_cutoff([0.1, 0.4, 0.4, 0.8], [0, 0, 1, 1], {"fp": 1.0, "fn": 4.0},
    ...                     score_bounds=(0, 1))
    >>> res.cutoff, res.cost, res.interval
    (0.25, 0.25, (0.1, 0.4))
    """
    s, yi, w, matrix, unit = _prepare(scores, y, costs, sample_weight)
    if w is None and matrix.ndim == 2:
        res = _search_plain_rows(
            s, yi, matrix, check_capacity(capacity), _check_bounds(score_bounds)
        )
    else:
        res = _search_rows(
            s, _RowCosts(matrix, yi, w), check_capacity(capacity), _check_bounds(score_bounds)
        )
    # mean costs never exceed the largest cost entry; scaling back can pass the largest double
    # only by rounding (a mean of costs at the top of the range)
    if unit == 1.0:
        return res
    big = np.finfo(float).max
    costs_back = res.costs  # a fresh array of this call: scaled in place (no second copy)
    with np.errstate(over="ignore"):
        costs_back *= unit
    np.clip(costs_back, -big, big, out=costs_back)
    return replace(res, cost=float(np.clip(res.cost * unit, -big, big)), costs=costs_back)


def _search_rows(s, row_costs: _RowCosts, cap, bounds) -> CutoffSearchResult:
    rows = _SortedRows(s, bounds)
    total, flagged, weight = rows.curve(*row_costs.sorted_inputs(rows))
    cost = total / weight
    share = flagged / weight
    admissible = np.ones_like(share, dtype=bool) if cap is None else share <= cap * (1 + 1e-12)
    index, value, lo, hi, flat = _pick_optimum(cost, rows.lower, rows.upper, admissible)
    return CutoffSearchResult(
        cutoff=value,
        cost=float(cost[index]),
        interval=(lo, hi),
        flat=flat,
        cutoffs=rows.mid,
        costs=cost,
        flagged_share=share,
        admissible=admissible,
        capacity=cap,
    )


def _thin_cost_curve(result: CutoffSearchResult, max_points: int) -> CutoffSearchResult:
    """The same search result with the curve kept at no more than about ``max_points`` decisions.

    The optimum (``cutoff``, ``cost``, ``interval``, ``flat``) is unchanged. The kept decisions
    are evenly spaced along the curve (by decision index, i.e. by share of distinct scores), plus
    both ends of every run of minimal cost and the decision holding ``cutoff``, so the minimum
    still shows on a plot. Curves that are already short are returned as they are.
    """
    m1 = result.costs.shape[0]
    if m1 <= max_points:
        return result
    # (no temporaries as long as the curve when every decision is admissible)
    if result.admissible.all():
        c = result.costs
        scale = max(abs(float(c.max())), abs(float(c.min())))
    else:
        c = np.where(result.admissible, result.costs, np.inf)
        scale = (float(np.max(np.abs(result.costs[result.admissible])))
                 if result.admissible.any() else 0.0)
    best = float(c.min())
    opt = np.flatnonzero(c <= best + 1e-9 * scale)
    breaks = np.flatnonzero(np.diff(opt) > 1)
    run_ends = np.concatenate([opt[np.concatenate([[0], breaks + 1])],
                               opt[np.concatenate([breaks, [opt.shape[0] - 1]])]])
    holder = np.searchsorted(result.cutoffs, result.cutoff)
    keep = np.unique(np.concatenate([
        np.linspace(0, m1 - 1, max_points).round().astype(np.intp),
        run_ends[:64], run_ends[-64:], np.clip([holder - 1, holder], 0, m1 - 1),
    ]))
    return replace(
        result,
        cutoffs=result.cutoffs[keep],
        costs=result.costs[keep],
        flagged_share=result.flagged_share[keep],
        admissible=result.admissible[keep],
    )


def capacity_cutoff(
    scores: Any,
    capacity: float,
    *,
    sample_weight: Any = None,
    score_bounds: tuple[float, float] | None = None,
) -> float:
    """Lowest cutoff that gives the positive action to at most ``capacity`` of the rows.

    The cutoff lies in the middle of the range of cutoffs that flag the same rows (rows with tied
    scores are flagged together, so the flagged share may stay below ``capacity``).

    Examples
    --------
    >>> from probwrap.decision import capacity_cutoff
    >>> capacity_cutoff([0.1, 0.2, 0.3, 0.9], 0.5, score_bounds=(0, 1))
    0.25
    """
    s = check_scores(scores, name="scores", ndim=1)
    cap = check_capacity(capacity)
    if cap is None:
        raise ValueError("`capacity` must be a share of rows in (0, 1]; got None.")
    w = None if sample_weight is None else check_sample_weight(sample_weight, s.shape[0])
    if w is not None:
        w = w / power_of_two_unit(w)  # shares are scale-free; this keeps their sums finite
    rows = _SortedRows(s, _check_bounds(score_bounds))
    _, flagged, weight = rows.curve(
        np.zeros(s.shape[0]), 0.0, None if w is None else w[rows.order]
    )
    j = int(np.argmax(flagged / weight <= cap * (1 + 1e-12)))
    return float(rows.mid[j])


def cutoff_interval(
    scores: Any,
    y: Any,
    costs: Any,
    *,
    sample_weight: Any = None,
    fold: Any = None,
    capacity: float | None = None,
    score_bounds: tuple[float, float] | None = None,
    n_resamples: int = 200,
    confidence_level: float = 0.95,
    random_state: Any = None,
) -> CutoffInterval:
    """How precisely the held-out rows determine the cutoff: bootstrap and fold spread.

    The rows are sorted once; each bootstrap resample only re-weights them (a row drawn ``c``
    times gets ``c`` times its weight) and repeats the cumulative sums, so a resample costs O(n).

    Parameters
    ----------
    scores, y, costs, sample_weight, capacity, score_bounds
        As for :func:`search_cutoff`.
    fold : array-like of int of shape (n,), default=None
        Fold of each row (negative values: no fold). The cutoff is searched on each fold alone.
    n_resamples : int, default=200
        Number of bootstrap resamples.
    confidence_level : float, default=0.95
        Coverage of the percentile interval.
    random_state : int, RandomState instance or None, default=None
        Seed of the resampling.

    Returns
    -------
    CutoffInterval

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import cutoff_interval
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(size=500)
    >>> y = (rng.uniform(size=500) < p).astype(int)
    >>> ci = cutoff_interval(p, y, {"fp": 1.0, "fn": 3.0}, score_bounds=(0, 1),
    ...                      n_resamples=50, random_state=0)
    >>> bool(ci.low < 0.25 < ci.high)
    True
    """
    s, yi, w, matrix, _ = _prepare(scores, y, costs, sample_weight)
    cap = check_capacity(capacity)
    bounds = _check_bounds(score_bounds)
    if int(n_resamples) < 1:
        raise ValueError(f"`n_resamples` must be a positive integer; got {plain(n_resamples)!r}.")
    if not 0.0 < float(confidence_level) < 1.0:
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    from sklearn.utils import check_random_state

    rng = check_random_state(random_state)
    w1 = np.ones(s.shape[0]) if w is None else w
    # Weights are frequencies: a row of weight zero is absent, so resamples draw from the rows
    # of positive weight only (a resample of zero-weight rows alone would have no cost curve).
    present = np.flatnonzero(w1 > 0)
    n = present.shape[0]
    rows = _SortedRows(s[present], bounds)
    rc = _RowCosts(matrix if matrix.ndim == 2 else matrix[present], yi[present],
                   None if w is None else w[present])
    wp = w1[present]
    d_sorted = ((rc.c0 - rc.c1) * wp)[rows.order]
    c1w_sorted = (rc.c1 * wp)[rows.order]
    w_sorted = wp[rows.order]
    found = np.empty(int(n_resamples))
    for b in range(int(n_resamples)):
        # a row drawn c times gets c times its weight; counts are put in score order directly
        counts = np.bincount(rng.randint(0, n, size=n), minlength=n).astype(float)
        cs = counts[rows.order]
        total, flagged, weight = rows.curve(
            d_sorted * cs, float(np.dot(c1w_sorted, cs)), w_sorted * cs
        )
        admissible = (
            np.ones(total.shape[0], dtype=bool)
            if cap is None
            else flagged / weight <= cap * (1 + 1e-12)
        )
        found[b] = _pick_optimum(total / weight, rows.lower, rows.upper, admissible)[1]
    found = found[np.isfinite(found)]
    alpha = (1.0 - float(confidence_level)) / 2.0
    low, high = (float(v) for v in np.quantile(found, [alpha, 1.0 - alpha]))

    fold_cutoffs = []
    if fold is not None:
        f = np.asarray(fold)
        check_same_length(("scores", s), ("fold", f))
        for k in np.unique(f[f >= 0]):
            mask = f == k
            if not np.any(w1[mask] > 0):
                continue
            sub_w = None if w is None else w[mask]
            sub_matrix = matrix if matrix.ndim == 2 else matrix[mask]
            res = _search_rows(s[mask], _RowCosts(sub_matrix, yi[mask], sub_w), cap, bounds)
            fold_cutoffs.append(res.cutoff)
    fold_arr = np.asarray(fold_cutoffs, dtype=float)
    return CutoffInterval(
        low=low,
        high=high,
        confidence_level=float(confidence_level),
        bootstrap_cutoffs=found,
        fold_cutoffs=fold_arr,
        fold_low=float(fold_arr.min()) if fold_arr.size else low,
        fold_high=float(fold_arr.max()) if fold_arr.size else high,
    )
