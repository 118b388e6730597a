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

from .._packed_sort import packed_order as _packed_order
from .._validation import (
    check_same_length,
    check_sample_weight,
    check_scores,
    label_column,
    plain,
    power_of_two_unit,
)
from ._costs import _resolve_costs
from ._cutoff_rows import (
    _beyond,
    _DecisionEnds,
    _middle,
    _neighbour_middles,
    _neighbour_middles_in_place,
    _RowCosts,
    _SortedRows,
)

__all__ = [
    "CutoffSearchResult",
    "search_cutoff",
    "capacity_cutoff",
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


def check_capacity(capacity: Any, *, name: str = "capacity") -> float | None:
    """Validate a capacity (share of rows) in (0, 1]; ``None`` passes through."""
    if capacity is None:
        return None
    text = capacity.strip() if isinstance(capacity, str) else None
    try:
        value = float(capacity)
    except (TypeError, ValueError) as exc:
        hint = ""
        if text is not None and text.endswith("%"):
            try:
                hint = f" For {text} give {float(text[:-1]) / 100:g}."
            except ValueError:
                pass
        raise ValueError(f"`{name}` must be a share of rows in (0, 1]; got "
                         f"{plain(capacity)!r}.{hint}") from exc
    if isinstance(capacity, bool) or not (0.0 < value <= 1.0):
        hint = ""
        if not isinstance(capacity, bool) and 1.0 < value <= 100.0:
            # 10 is most often meant as 10 per cent: say so, never read it that way silently
            hint = (f" If {plain(capacity)!r} is a percentage, give {value / 100:g}; a number of "
                    "rows is a share too: rows / the number of rows expected.")
        raise ValueError(f"`{name}` must be a share of rows in (0, 1]; got "
                         f"{plain(capacity)!r}.{hint}")
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


def _binary_targets(y: Any, n: int, *, small: bool = False) -> np.ndarray:
    """``y`` as 0/1 codes: intp, or (``small=True``) one-byte codes kept as they are."""
    arr = label_column(y, "y")  # (one column (n, 1) read as its values)
    if arr.dtype.kind == "b":
        arr = arr.astype(np.int8)
    if arr.dtype.kind in "iu":  # (two reductions, no temporaries)
        binary = arr.size == 0 or (int(arr.min()) >= 0 and int(arr.max()) <= 1)
    else:
        binary = arr.dtype.kind == "f" and bool(np.all((arr == 0) | (arr == 1)))
    if not binary:
        # (a set, not np.unique: labels of mixed types cannot be sorted)
        seen = sorted({repr(plain(v)) for v in arr.tolist()})[:5]
        raise ValueError(
            "`y` must hold binary targets coded 0 (negative) and 1 (positive); got values "
            f"{', '.join(seen)}."
        )
    if small and arr.dtype.itemsize == 1 and arr.dtype.kind in "iu":
        return arr
    return arr.astype(np.intp, copy=False)


#: At most this many rows per block where the search works through its arrays in blocks.
_COST_BLOCK = 1 << 16


#: At least this many rows per block (fewer NumPy calls; at 10^5 rows blocks of 3,125 made the
#: cumulative cost 0.75 sorts, blocks of 16,384 0.45, with the same values).
_MIN_BLOCK = 1 << 14


def _block_rows(n: int) -> int:
    """Rows per block for ``n`` rows: about ``n / 32`` (the blocks' temporaries stay a small
    share of the scores' memory), at least :data:`_MIN_BLOCK` (few Python steps), at most
    :data:`_COST_BLOCK` (cache-sized) and never more than ``n``."""
    return max(1, min(_COST_BLOCK, max(_MIN_BLOCK, n // 32), n))


def _counts_to_costs(label: np.ndarray, d_neg: float, d_pos: float) -> int:
    """Overwrite the 0/1 classes ``label`` (int64, in score order) with the cumulative cost
    steps ``d_neg * negatives + d_pos * positives`` over the first 1, 2, ... rows, as float64
    in the same memory (``label.view(np.float64)``).

    The counts are exact integers, so each total is two rounded products and one rounded sum
    (a sequential floating-point sum of the steps rounds once per row); with integer costs the
    totals are exact either way, hence the same bits. Returns the number of positives (the
    last count, read before it is overwritten).
    """
    np.cumsum(label, out=label)
    n = label.shape[0]
    n_pos = int(label[-1]) if n else 0
    out = label.view(np.float64)
    block = _block_rows(n)
    upto = np.arange(1, block + 1, dtype=np.int64)
    neg = np.empty(block, dtype=np.int64)
    pos_cost = np.empty(block)
    for i in range(0, n, block):
        pos = label[i:i + block]
        m = pos.shape[0]
        np.subtract(upto[:m], pos, out=neg[:m])
        if i:
            neg[:m] += i
        np.multiply(pos, d_pos, out=pos_cost[:m])  # read before the block is overwritten
        target = out[i:i + block]
        np.multiply(neg[:m], d_neg, out=target)
        target += pos_cost[:m]
    return n_pos


def _search_plain_rows(
    s: np.ndarray, y: np.ndarray, matrix: np.ndarray, cap: float | None, bounds,
    max_points: int | None = None,
) -> CutoffSearchResult:
    """:func:`_search_rows` for unweighted rows and one cost matrix, near the cost of one sort.

    The rows are put in score order with their classes by one plain sort of packed keys
    (:func:`_packed_order`). Where the scores cannot be packed exactly, the scores of each
    class are sorted separately with plain sorts (no index), then the two sorted runs are
    merged: a stable ``argsort`` of the two runs (one linear merge) tells which merged entries
    are positives and, gathered through, gives the merged scores. Either way the tied rows come
    negatives first, so the cumulative sums are the same. No per-row index into the original
    rows is needed. The classes, then their cumulative count, then the cumulative cost
    (:func:`_counts_to_costs`) are written into the buffer that becomes the cost curve; the flagged shares are built only
    once the sorted scores are freed (the capacity check reads the few shares it needs).

    With ``max_points``, the curve is returned as :func:`_thin_cost_curve` would thin it, but
    the representative cutoffs and shares are computed at the kept decisions only (the full
    curve is never built: the memory stays at the sorted scores and the costs).
    """
    n = s.shape[0]
    buf = np.empty(n + 1)  # the classes, the steps, then the cumulative sums, in score order
    label = buf[1:].view(np.int64)
    # the sorted scores, later the distinct ones, then the returned middles between them: one
    # buffer written over (a fresh array costs its page faults: a third of a sort at 1e6 rows)
    keys = np.empty(n + 1)
    packed = _packed_order(s, y, label, keys.view(np.int64))
    if packed is not None:
        ss = keys[:n]
        del packed
        n_pos = -1  # read off the cumulative count of the positives below (no pass over y)
    else:
        n_pos = int(np.count_nonzero(y))
        n_neg = n - n_pos
        positive = y == 1
        runs = np.empty(n)
        part = s[np.flatnonzero(~positive)]
        part.sort()
        runs[:n_neg] = part
        part = s[np.flatnonzero(positive)]
        part.sort()
        runs[n_neg:] = part
        del positive, part
        order = np.argsort(runs, kind="stable")  # two sorted runs: one linear merge
        ss = np.take(runs, order, out=keys[:n])  # merged scores: a gather along two runs
        np.greater_equal(order, n_neg, out=label)
        del order, runs
    last = np.empty(n, dtype=bool)
    np.not_equal(ss[1:], ss[:-1], out=last[:-1])
    last[-1] = True
    # per-row change of the total cost when the row moves from the positive to the negative
    # action: c0 - c1 of its class; its total over the rows at or below a score is a cumsum
    d_neg = float(matrix[0, 0] - matrix[0, 1])
    d_pos = float(matrix[1, 0] - matrix[1, 1])
    # the total of the steps over the first j rows is d_neg * (negatives among them) + d_pos *
    # (positives among them): the positives are counted by an integer cumulative sum in place
    # (exact, and far faster than a sequential floating-point sum), then each count is turned
    # into the total in blocks that stay in cache, written over the count it came from
    n_pos_counted = _counts_to_costs(label, d_neg, d_pos)
    del label
    if n_pos < 0:
        n_pos = n_pos_counted  # the same integer as counting the nonzero classes
    n_neg = n - n_pos
    total_flag_all = float(np.dot(np.array([n_neg, n_pos], dtype=float), matrix[:, 1]))
    step = buf[1:]
    in_place = True  # the middles are written over the distinct scores in `keys`
    if last.all():
        del last
        u, m, ends = ss, n, None
        del ss
        cost = buf
    else:
        ends = np.flatnonzero(last)
        del last
        m = ends.shape[0]
        in_place = 2 * (m + 1) >= n  # else a small fresh array: `keys` is not kept alive
        if in_place:
            # the last of each run of ties, moved down within `keys` (ends[i] >= i: each block
            # reads only entries at or above the ones it writes, none written yet)
            block = _block_rows(m)
            for i in range(0, m, block):
                part = ends[i:i + block]
                keys[i:i + part.shape[0]] = ss[part]
            u = keys[:m]
        else:
            u = ss[ends]
            del keys
        del ss
        cost = np.empty(m + 1)
        np.take(step, ends, out=cost[1:])
    del step, buf
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
        if bounds[1] >= u[-1]:
            # top scores at the bound itself (probabilities of exactly 1): "act on none" is the
            # cutoff at the bound, not one beyond it
            hi_ext = bounds[1]

    def shares_at(j: Any) -> np.ndarray:
        # flagged shares of decisions j (the rows above the j-th distinct score), by the same
        # operations as the array built below
        j = np.asarray(j)
        k = np.minimum(np.maximum(j - 1, 0), max(m - 1, 0))  # (np.clip of integers)
        below = np.where(j == 0, 0.0, (j if ends is None else ends[k] + 1.0))
        out = np.subtract(float(n), np.asarray(below, dtype=float))
        out /= float(n)
        return np.where(j == m, 0.0, out)

    admissible = np.ones(m + 1, dtype=bool)
    if cap is not None:
        # the share falls with j, so the admissible decisions are all those from the first one
        first, past = 0, m  # share m is 0: always admissible
        while first < past:
            j = (first + past) // 2
            if float(shares_at(j)) <= cap * (1 + 1e-12):
                past = j
            else:
                first = j + 1
        admissible[:first] = False
    lower = _DecisionEnds(u, lo_ext, hi_ext, upper=False)
    upper = _DecisionEnds(u, lo_ext, hi_ext, upper=True)
    runs: list = []
    index, value, lo, hi, flat = _pick_optimum(cost, lower, upper, admissible, runs)
    if max_points is not None and m + 1 > max_points:
        # the thinned curve directly: the holder of the cutoff is the first decision whose
        # middle is not below it (the middles ascend; `value` lies in decision `index`)
        around = np.minimum(np.maximum(np.arange(index - 1, index + 3), 0), m)
        holder = int(around[np.searchsorted(_middle(lower[around], upper[around]), value)])
        keep = _thin_indices(cost, admissible, holder, max_points, runs)
        result = CutoffSearchResult(
            cutoff=value,
            cost=float(cost[index]),
            interval=(lo, hi),
            flat=flat,
            cutoffs=_middle(lower[keep], upper[keep]),
            costs=cost[keep],
            flagged_share=shares_at(keep),
            admissible=admissible[keep],
            capacity=cap,
        )
        return result
    del lower, upper
    if in_place:
        del u
        _neighbour_middles_in_place(keys, m, lo_ext, hi_ext)
        mid = keys if m == n else keys[:m + 1]
        del keys
    else:
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


def _optimal_runs(cost: np.ndarray, admissible: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First and last decision of each run of admissible decisions whose cost is within the tie
    tolerance of the least admissible cost (at least one decision must be admissible)."""
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
    return starts, stops


def _pick_optimum(
    cost: np.ndarray, lower: np.ndarray, upper: np.ndarray, admissible: np.ndarray,
    runs: list | None = None,
) -> tuple[int, float, float, float, bool]:
    """Middle of the widest run of minimal-cost decisions.

    Returns ``(index, value, low, high, flat)`` where ``index`` is the decision that contains
    the chosen value. A list passed as ``runs`` receives the runs of minimal cost
    (:func:`_optimal_runs`), for :func:`_thin_indices`.
    """
    starts, stops = _optimal_runs(cost, admissible)
    if runs is not None:
        runs[:] = [starts, stops]
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


def _unit_view(sample_weight: Any, n: int) -> bool:
    """Whether ``sample_weight`` is a float64 array of ``n`` ones that all share one value in
    memory (a broadcast view, stride 0, as the wrappers pass unit weights): then the row checks
    of :func:`check_sample_weight` and the test for all ones read that one value, with the same
    outcome (the weights are dropped) and without a copy as long as the rows."""
    return (
        isinstance(sample_weight, np.ndarray)
        and sample_weight.ndim == 1
        and sample_weight.shape[0] == n
        and n > 0
        and sample_weight.strides[0] == 0
        and sample_weight.dtype == np.float64
        and float(sample_weight[0]) == 1.0
    )


def _prepare(scores, y, costs, sample_weight):
    s = check_scores(scores, name="scores", ndim=1)
    n = check_same_length(("scores", s), ("y", np.asarray(y)))
    yi = _binary_targets(y, n, small=True)  # (one-byte 0/1 codes are not widened)
    matrix = _resolve_costs(costs, n, 2)
    if matrix.shape[-1] != 2:
        raise ValueError(
            f"`costs` must have two actions (negative, positive) for a cutoff; got "
            f"{matrix.shape[-1]}. Use tune_class_offsets for more actions."
        )
    if sample_weight is None or _unit_view(sample_weight, n):
        w = None  # (unit weights as one value repeated: no copy, nothing to check per row)
    else:
        w = check_sample_weight(sample_weight, n)
        if np.all(w == 1.0):
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
    Cost is O(n log n): for unweighted rows with one cost matrix, one plain sort of 64-bit keys
    that carry each row's class in the lowest bit; with ``sample_weight`` or per-row costs, one
    ``argsort``; then a few cumulative sums. Where several neighbouring
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
    return _search_cutoff(scores, y, costs, sample_weight, capacity, score_bounds)


def _search_cutoff(
    scores, y, costs, sample_weight, capacity, score_bounds, max_points: int | None = None
) -> CutoffSearchResult:
    """:func:`search_cutoff`; with ``max_points``, the curve thinned as by
    :func:`_thin_cost_curve` (for unweighted rows and one cost matrix without ever building
    the full curve's cutoffs and shares)."""
    s, yi, w, matrix, unit = _prepare(scores, y, costs, sample_weight)
    if w is None and matrix.ndim == 2:
        res = _search_plain_rows(
            s, yi, matrix, check_capacity(capacity), _check_bounds(score_bounds), max_points
        )
    else:
        res = _search_rows(
            s, _RowCosts(matrix, yi, w), check_capacity(capacity), _check_bounds(score_bounds)
        )
        if max_points is not None:
            res = _thin_cost_curve(res, max_points)
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


def _thin_indices(
    costs: np.ndarray, admissible: np.ndarray, holder: int, max_points: int,
    runs: list | None = None,
):
    """Decisions :func:`_thin_cost_curve` keeps: evenly spaced ones, both ends of the runs of
    minimal cost (the first and last 64) and the two around ``holder``. ``runs`` are those
    runs as :func:`_pick_optimum` found them on the same ``costs`` (found again without)."""
    m1 = costs.shape[0]
    starts, stops = _optimal_runs(costs, admissible) if runs is None else runs
    run_ends = np.concatenate([starts, stops])
    keep = np.concatenate([
        np.linspace(0, m1 - 1, max_points).round().astype(np.intp),
        run_ends[:64], run_ends[-64:], np.minimum(np.maximum([holder - 1, holder], 0), m1 - 1),
    ])
    # np.unique's values, by a sort: NumPy 2's hashed unique takes about 0.5 ms on these 4,200
    # entries, as long as sorting 10^5 scores
    keep.sort()
    first = np.empty(keep.shape[0], dtype=bool)
    first[0] = True
    np.not_equal(keep[1:], keep[:-1], out=first[1:])
    return keep[first]


def _thin_cost_curve(result: CutoffSearchResult, max_points: int) -> CutoffSearchResult:
    """The same search result with the curve kept at no more than about ``max_points`` decisions.

    The optimum (``cutoff``, ``cost``, ``interval``, ``flat``) is unchanged. The kept decisions
    are evenly spaced along the curve (by decision index, i.e. by share of distinct scores), plus
    both ends of every run of minimal cost and the decision holding ``cutoff``, so the minimum
    still shows on a plot. Curves that are already short are returned as they are.
    """
    if result.costs.shape[0] <= max_points:
        return result
    holder = int(np.searchsorted(result.cutoffs, result.cutoff))
    keep = _thin_indices(result.costs, result.admissible, holder, max_points)
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
    scores are flagged together, so the flagged share may stay below ``capacity``). With
    ``score_bounds`` the cutoff stays within them wherever a cutoff within them flags the same
    rows: when the rows at the top score ``high`` alone exceed ``capacity``, no row is flagged
    and the cutoff is ``high`` itself (act when score > cutoff).

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
