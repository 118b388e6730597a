"""How precisely held-out rows determine a cutoff: bootstrap and fold spread."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_same_length, plain
from .._weights import whole_counts
from ._cutoff import _check_bounds, _pick_optimum, _prepare, _search_rows, check_capacity
from ._cutoff_rows import _RowCosts, _SortedRows

__all__ = ["CutoffInterval", "CutoffIntervalCoverageWarning", "cutoff_interval"]

#: Below this many (effective) rows :func:`cutoff_interval` warns that its coverage is short:
#: ``benchmarks/cutoff_interval_small.py`` measured 95 % intervals covering the population's
#: least-cost cutoff in 69-91 % of draws of 20 rows and 83-94 % of 50 rows (statsmodels' fair,
#: scikit-learn's breast cancer), 90-98 % from 100 rows on.
FEW_INTERVAL_ROWS = 100


class CutoffIntervalCoverageWarning(UserWarning):
    """A cutoff interval from so few rows that it covers the best cutoff less often than it says."""


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
    tie_low, tie_high : float
        Ends of the range of cutoffs that cost the same least amount on all the rows
        (``search_cutoff(...).interval``); ``(low, high)`` always contains it. NaN where the
        interval was built without the rows (from a tally).
    widened_to_ties : bool
        True when the bootstrap percentiles alone fell inside that range and ``(low, high)`` was
        widened to contain it (common on a few dozen rows or fewer).
    exact_low, exact_high : float
        Below 100 effective rows (one cost matrix for every row, no ``capacity`` and no
        ``groups``): the range of cutoffs that no exact binomial test shows dearer than another
        cutoff (see :func:`cutoff_interval`), which covered the population's least-cost cutoff
        in 97.5-100 % of draws of 20 and 50 rows where ``(low, high)`` covered it in 68-95 %,
        at 1.5-1.9 times the width. NaN otherwise. With unequal weights the rows between two
        cutoffs count as Kish's effective rows (since 4 December 2026; NaN before), except
        whole-number counts without a common factor (a count table), which count their cases:
        the range of the rows repeated (since 5 December 2026). Intervals
        drawn from a tally (Dask or Spark fits through their tallies,
        ``probwrap.scale._bootstrap.tally_cutoff_interval``) compute it from the tally's rows
        per bin, or its weights and squared weights per bin; the command line's ``cutoff``
        verb reports it as ``cutoff_exact_range``.
    """

    low: float
    high: float
    confidence_level: float
    bootstrap_cutoffs: np.ndarray
    fold_cutoffs: np.ndarray
    fold_low: float
    fold_high: float
    tie_low: float = float("nan")
    tie_high: float = float("nan")
    widened_to_ties: bool = False
    exact_low: float = float("nan")
    exact_high: float = float("nan")


def _binomial_tails(hits: np.ndarray, between: np.ndarray, even: float
                    ) -> tuple[np.ndarray, np.ndarray]:
    """``P(X <= hits)`` and ``P(X >= hits)`` for ``X ~ Binomial(between, even)``, through the
    regularised incomplete beta function, the binomial tails' continuous extension to counts
    that are not whole: ``I_{1-p}(n - c, c + 1)`` and ``I_p(c, n - c + 1)`` (equal to
    ``scipy.stats.binom.cdf(c, n, p)`` and ``binom.sf(c - 1, n, p)`` for whole ``c`` and ``n``).
    Counts within 1e-9 of a whole number are read as it (rounding of sums of weights)."""
    from scipy import special

    c, n = np.broadcast_arrays(np.asarray(hits, float), np.asarray(between, float))
    tol = 1e-9 * np.maximum(n, 1.0)
    c = np.where(np.abs(c - np.round(c)) <= tol, np.round(c), c)
    n = np.where(np.abs(n - np.round(n)) <= tol, np.round(n), n)
    c = np.clip(c, 0.0, n)
    with np.errstate(invalid="ignore", divide="ignore"):
        lower = np.where((n > 0) & (c < n),
                         special.betainc(np.maximum(n - c, 1e-300), c + 1.0, 1.0 - even), 1.0)
        upper = np.where((n > 0) & (c > 0),
                         special.betainc(np.maximum(c, 1e-300), n - c + 1.0, even), 1.0)
    return lower, upper


def _exact_range(rows: _SortedRows, y_sorted: np.ndarray, matrix: np.ndarray,
                 level: float, tie_low: float, tie_high: float,
                 counts_sorted: np.ndarray | None = None,
                 squares_sorted: np.ndarray | None = None) -> tuple[float, float]:
    """Cutoffs that no one-sided exact binomial test at ``1 - level`` shows dearer than another.

    Decisions ``j < k`` differ only on the rows scoring between them: ``j`` takes the positive
    action there, ``k`` the negative. With ``c`` positives among those ``r`` rows, ``j`` costs
    ``(r - c) * fp_extra - c * fn_extra`` more, where ``fp_extra`` is a negative row's cost of the
    positive action minus the negative's and ``fn_extra`` a positive row's cost of the negative
    action minus the positive's; the two cost the same in the population when the rows'
    positive share there is ``even = fp_extra / (fp_extra + fn_extra)``. ``j`` is dropped when
    the binomial tail of ``c`` under ``even`` (lower for ``j < k``, upper for ``j > k``) is below
    ``1 - level`` for some ``k``; the range spans the kept decisions and the rows' tied range.

    ``y_sorted`` holds, in score order, each entry's positives and ``counts_sorted`` its rows
    (None: one row per entry, ``y_sorted`` its 0/1 label); entries are rows, or the
    (bin, label) cells of a tally whose weights count rows.

    Unequal weights (``squares_sorted`` given): ``counts_sorted`` holds each entry's weight,
    ``y_sorted`` its positive weight and ``squares_sorted`` its sum of squared weights. The
    rows between two decisions then count as Kish's (1965) effective number
    ``n = (sum w)^2 / sum w^2`` with the weighted positive share kept, ``c = n * (sum w y) /
    (sum w)``, and the tails are the binomial's continuous extension (:func:`_binomial_tails`):
    when every row between shares the positive probability ``even``, the weighted share has
    mean ``even`` and variance ``even (1 - even) / n``, as a binomial share of ``n`` rows (the
    effective-size reading of a weighted proportion of Kish 1965 and Korn & Graubard 1998, from
    memory). Equal weights give back the counts of rows; scaling the weights changes nothing.
    """
    from scipy.stats import binom

    fp_extra = float(matrix[0, 1] - matrix[0, 0])
    fn_extra = float(matrix[1, 0] - matrix[1, 1])
    if not (fp_extra > 0 and fn_extra > 0):  # one action never dearer: nothing to test
        return tie_low, tie_high
    even = fp_extra / (fp_extra + fn_extra)
    pos = np.concatenate([[0.0], np.cumsum(y_sorted)[rows.ends]])
    if counts_sorted is None:
        cnt = np.concatenate([[0.0], (rows.ends + 1).astype(float)])
    else:  # whole numbers summed: exact in floating point
        cnt = np.concatenate([[0.0], np.cumsum(counts_sorted)[rows.ends]])
    between = cnt[None, :] - cnt[:, None]  # rows between decision j (row) and k (column)
    hits = pos[None, :] - pos[:, None]
    if squares_sorted is not None:
        # weights: Kish's effective rows between two decisions, the weighted share kept
        sq = np.concatenate([[0.0], np.cumsum(squares_sorted)[rows.ends]])
        squares = np.abs(sq[None, :] - sq[:, None])
        size = np.abs(between)
        with np.errstate(invalid="ignore", divide="ignore"):
            n_eff = np.where(squares > 0, size * size / np.where(squares > 0, squares, 1.0), 0.0)
            c_eff = np.where(size > 0, np.abs(hits) * n_eff / np.where(size > 0, size, 1.0), 0.0)
        lower, upper = _binomial_tails(c_eff, n_eff, even)
        up = np.where(between > 0, lower, 1.0)
        down = np.where(between < 0, upper, 1.0)
        kept = np.flatnonzero(np.minimum(up, down).min(axis=1) >= 1.0 - level)
        if kept.size == 0:
            return tie_low, tie_high
        return (min(float(rows.lower[kept.min()]), tie_low),
                max(float(rows.upper[kept.max()]), tie_high))
    up = np.where(between > 0, binom.cdf(hits, np.maximum(between, 1), even), 1.0)
    down = np.where(between < 0, binom.sf(-hits - 1, np.maximum(-between, 1), even), 1.0)
    kept = np.flatnonzero(np.minimum(up, down).min(axis=1) >= 1.0 - level)
    if kept.size == 0:
        return tie_low, tie_high
    return (min(float(rows.lower[kept.min()]), tie_low),
            max(float(rows.upper[kept.max()]), tie_high))


#: Why ``exact_low`` / ``exact_high`` are NaN, by the first condition that fails (the command
#: line's ``cutoff_exact_range_note`` and the tally paths' docs quote these).
EXACT_RANGE_NOTES = {
    "rows": f"not computed: {FEW_INTERVAL_ROWS} or more (effective) rows, where the bootstrap "
            "interval covers as it says",
    "capacity": "not computed: a capacity limit (the exact tests compare cutoffs by cost alone)",
    "costs": "not computed: costs that differ from row to row (the tests need one cost matrix)",
    "groups": "not computed: grouped rows (the tests count rows, not groups)",
    "tally": "not computed: the tally carries neither its rows per bin nor its squared weights "
             "per bin (a tally pickled before 4 December 2026), so its effective rows between "
             "two cutoffs are unknown",
}


def exact_range_note(n_effective: float, *, capacity: Any = None, per_row_costs: bool = False,
                     groups: bool = False, equal_weights: bool = True) -> str | None:
    """Why a cutoff interval has no exact range (the first reason), or None when it has one.

    ``equal_weights`` is no longer a reason (since 4 December 2026 unequal weights count the
    rows between two cutoffs by Kish's effective number); it is kept for callers that pass it.

    Examples
    --------
    >>> from probwrap.decision._cutoff_interval import exact_range_note
    >>> exact_range_note(40.0) is None, exact_range_note(400.0)[:25]
    (True, 'not computed: 100 or more')
    """
    if not n_effective < FEW_INTERVAL_ROWS:
        return EXACT_RANGE_NOTES["rows"]
    if capacity is not None:
        return EXACT_RANGE_NOTES["capacity"]
    if per_row_costs:
        return EXACT_RANGE_NOTES["costs"]
    if groups:
        return EXACT_RANGE_NOTES["groups"]
    return None


def exact_cutoff_range(
    scores: Any,
    y: Any,
    costs: Any,
    *,
    sample_weight: Any = None,
    capacity: float | None = None,
    score_bounds: tuple[float, float] | None = None,
    confidence_level: float = 0.95,
) -> tuple[float, float, str | None]:
    """``exact_low``, ``exact_high`` of :func:`cutoff_interval` without its bootstrap.

    The range needs no resampling, so the command line reports it with ``--resamples 0`` too.
    Returns ``(exact_low, exact_high, note)``: NaN and the reason (:data:`EXACT_RANGE_NOTES`)
    where :func:`cutoff_interval` leaves them NaN, ``note`` None otherwise.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision._cutoff_interval import exact_cutoff_range
    >>> p = np.linspace(0.05, 0.95, 30)
    >>> y = (p > 0.5).astype(int)
    >>> lo, hi, note = exact_cutoff_range(p, y, {"fp": 1.0, "fn": 1.0}, score_bounds=(0, 1))
    >>> bool(lo < 0.5 < hi), note
    (True, None)
    """
    s, yi, w, matrix, _ = _prepare(scores, y, costs, sample_weight)
    cap = check_capacity(capacity)
    bounds = _check_bounds(score_bounds)
    if not 0.0 < float(confidence_level) < 1.0:
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    w1 = np.ones(s.shape[0]) if w is None else w
    present = np.flatnonzero(w1 > 0)
    wp = w1[present]
    counts = _case_counts(sample_weight, present)
    effective = _effective_rows(wp, counts) if present.size else 0.0
    note = exact_range_note(effective, capacity=cap, per_row_costs=matrix.ndim != 2)
    if note is not None or present.size == 0:
        return float("nan"), float("nan"), note
    rows = _SortedRows(s[present], bounds)
    equal = bool(np.ptp(wp) == 0.0)
    rc = _RowCosts(matrix, yi[present], None if equal else wp)
    tie_low, tie_high = (float(v) for v in _search_rows(s[present], rc, None, bounds).interval)
    lo, hi = _row_exact_range(rows, yi[present], wp, matrix, float(confidence_level),
                              tie_low, tie_high, counts)
    return lo, hi, None


def _case_counts(sample_weight: Any, present: np.ndarray) -> np.ndarray | None:
    """The whole-number counts of the rows ``present`` (of weight > 0) when ``sample_weight``
    (as given, already validated) is a count table (:func:`probwrap._weights.whole_counts`),
    else None."""
    if sample_weight is None:
        return None
    counts = whole_counts(np.asarray(sample_weight, dtype=float).ravel())
    return None if counts is None else counts[present]


def _effective_rows(w: np.ndarray, counts: np.ndarray | None) -> float:
    """The rows that weights ``w`` (all > 0) stand for in the exact range: a count table's
    cases (``counts``: :func:`_case_counts`), else Kish's (1965) effective size
    ``(sum w)^2 / sum w^2`` (the rows themselves when the weights are equal)."""
    if counts is not None:
        return float(counts.sum())
    return float(w.sum() ** 2 / np.dot(w, w))


def _row_exact_range(rows: _SortedRows, y: np.ndarray, w: np.ndarray, matrix: np.ndarray,
                     level: float, tie_low: float, tie_high: float,
                     counts: np.ndarray | None = None) -> tuple[float, float]:
    """:func:`_exact_range` of rows of positive weight ``w``: counts of rows when the weights
    are equal, a count table's cases when ``counts`` (:func:`_case_counts`) are given, Kish's
    effective rows between two cutoffs otherwise."""
    o = rows.order
    if np.ptp(w) == 0.0:
        return _exact_range(rows, y[o].astype(float), matrix, level, tie_low, tie_high)
    if counts is not None:
        # a count table (whole-number weights): its cases, as the rows repeated by their counts
        # (since 5 December 2026; before, Kish's size, a wider range than the repeated rows')
        c = counts.astype(float)
        return _exact_range(rows, (c * y)[o], matrix, level, tie_low, tie_high,
                            counts_sorted=c[o])
    u = w / w.max()  # (only the ratios matter; no square underflows or overflows)
    return _exact_range(rows, (u * y)[o], matrix, level, tie_low, tie_high,
                        counts_sorted=u[o], squares_sorted=(u * u)[o])


def tally_exact_range(p: np.ndarray, y: np.ndarray, weights: np.ndarray, rows: np.ndarray | None,
                      matrix: np.ndarray, capacity: float | None, level: float,
                      squares: np.ndarray | None = None) -> tuple[float, float, str | None]:
    """The exact range from tallied rows: one entry per (bin, label) with probability ``p``.

    ``weights`` are the entries' tallied weights; ``rows`` their numbers of rows of positive
    weight (None: unknown); ``squares`` their sums of squared weights (None: unknown). With
    equal row weights (``weights / rows`` the same everywhere) the entries count rows, and the
    range is that of :func:`cutoff_interval` on rows scored at their bins' representative
    probabilities: equal to it on the rows themselves when no bin holds two distinct scores.
    With unequal weights the entries count as Kish's effective rows from ``weights`` and
    ``squares``, as :func:`cutoff_interval` counts unequal weights, with the same condition for
    equality (the sums of a bin's weights and squared weights are those of its rows).
    Returns ``(exact_low, exact_high, note)`` as :func:`exact_cutoff_range` does.
    """
    equal = False
    if rows is not None:
        rows = np.asarray(rows, dtype=float)
        keep = rows > 0
        ratio = weights[keep] / rows[keep]
        equal = bool(ratio.size and np.allclose(ratio, ratio[0], rtol=1e-9, atol=0.0))
    if not equal and squares is None:
        return float("nan"), float("nan"), EXACT_RANGE_NOTES["tally"]
    if equal:
        n = float(rows.sum())
    else:
        keep = np.asarray(weights, float) > 0
        top = float(np.max(weights[keep]))
        u, q = weights[keep] / top, np.asarray(squares, float)[keep] / (top * top)
        n = float(u.sum() ** 2 / q.sum())
    note = exact_range_note(n, capacity=capacity, per_row_costs=matrix.ndim != 2)
    if note is not None:
        return float("nan"), float("nan"), note
    s, yk = p[keep], y[keep]
    bounds = (0.0, 1.0)
    sorted_rows = _SortedRows(s, bounds)
    o = sorted_rows.order
    if equal:
        rk = rows[keep]
        rc = _RowCosts(matrix, yk, rk)
        tie_low, tie_high = (float(v) for v in _search_rows(s, rc, None, bounds).interval)
        lo, hi = _exact_range(sorted_rows, (yk * rk)[o].astype(float), matrix, float(level),
                              tie_low, tie_high, counts_sorted=rk[o])
        return lo, hi, None
    rc = _RowCosts(matrix, yk, u)
    tie_low, tie_high = (float(v) for v in _search_rows(s, rc, None, bounds).interval)
    lo, hi = _exact_range(sorted_rows, (yk * u)[o], matrix, float(level), tie_low, tie_high,
                          counts_sorted=u[o], squares_sorted=q[o])
    return lo, hi, None


def tally_row_counts(tally: Any, weights: np.ndarray) -> np.ndarray | None:
    """Rows behind each (bin, label) weight of ``tally.to_rows()``, when the tally shows that
    every row of positive weight weighed the same; None otherwise (or when it cannot tell).

    Equal weights are read from the tally's totals: Kish's effective number of rows
    ``(sum w)^2 / sum w^2`` equals the number of rows of positive weight exactly when the
    weights are equal; each cell then holds its weight divided by that common weight.
    """
    n = getattr(tally, "weighted_rows_by_label", None)
    if n is None or tally.squared_weight is None or tally.squared_weight <= 0:
        return None
    n_rows = float(np.sum(n))
    if n_rows < 1 or not np.isclose(tally.effective_rows, n_rows, rtol=1e-9, atol=0.0):
        return None
    rows = np.asarray(weights, dtype=float) / (tally.total_weight / n_rows)
    whole = np.round(rows)
    if not np.allclose(rows, whole, rtol=0.0, atol=1e-6) or whole.sum() != n_rows:
        return None
    return whole


def warn_few_interval_rows(effective: float, units: str, low: float, high: float,
                           widened: bool, exact_low: float, exact_high: float, *,
                           stacklevel: int = 3) -> None:
    """The :class:`CutoffIntervalCoverageWarning` of an interval on fewer than
    :data:`FEW_INTERVAL_ROWS` effective rows (quoting the exact range where there is one)."""
    warnings.warn(
        f"the cutoff interval rests on {effective:.3g} {units}, fewer than "
        f"{FEW_INTERVAL_ROWS}: on 20-50 rows of real data, 95 % bootstrap intervals covered "
        f"the population's least-cost cutoff in only 69-94 % of draws "
        f"(benchmarks/cutoff_interval_small.py); read [{low:.4g}, {high:.4g}] as the "
        f"least the uncertainty could be"
        + (", already widened to the range of cutoffs that cost the same on these rows"
           if widened else "")
        + (f"; no exact binomial test sets apart the cutoffs in [{exact_low:.4g}, "
           f"{exact_high:.4g}] (exact_low, exact_high), a range that covered it in "
           f"97.5-100 % of draws of 20-50 rows" if np.isfinite(exact_low) else ""),
        CutoffIntervalCoverageWarning, stacklevel=stacklevel + 1,
    )


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
    groups: Any = None,
) -> CutoffInterval:
    """How precisely the held-out rows determine the cutoff: bootstrap and fold spread.

    The interval is the percentile interval of the cutoffs found on bootstrap resamples,
    widened where needed to contain the range of cutoffs that cost the same least amount on
    the rows themselves (``search_cutoff(...).interval``): the rows cannot tell those cutoffs
    apart, so no interval drawn from them is narrower. Each resample reports the middle of its
    own tied range, and on a few dozen rows or fewer those middles crowd together and the
    plain percentiles fall inside the rows' own tied range (five breast-cancer rows:
    [0.50, 0.59] against equally cheap cutoffs from 0.18 to 0.99). Coverage of the population's least-cost cutoff
    is still below the nominal level on small sets (69-94 % for a 95 % interval on 20-50 rows
    of real data, 90-98 % from 100 rows; ``benchmarks/cutoff_interval_small.py``), so with
    fewer than 100 effective rows (Kish) a :class:`CutoffIntervalCoverageWarning` says so; with
    ``groups``, fewer than 100 effective groups (Kish's size of the groups' total weights, the
    number of groups when they weigh alike), since whole groups are what the resamples draw.
    There, with one cost matrix for all rows, no ``capacity`` and no
    ``groups``, ``exact_low`` / ``exact_high`` give a wider range that did cover: a cutoff is
    left out of it only when, for some other cutoff, the rows scoring between the two hold so
    few (or so many) positives that a one-sided exact binomial test at ``1 - confidence_level``
    rejects the positive share at which the two cost the same (the second is then cheaper on
    rows like these). It covered in 97.5-100 % of draws of 20 and 50 rows (95 % level), at
    1.5-1.9 times the width (``benchmarks/cutoff_interval_small.py --compare``); neither the
    bootstrap of ``m`` of the ``n`` rows nor a bootstrap test of the excess cost came closer to
    the nominal level without being far wider. With unequal weights (since 4 December 2026)
    the rows between two cutoffs count as Kish's (1965) effective number ``(sum w)^2 / sum
    w^2`` with their weighted positive share kept, and the binomial tails are the regularised
    incomplete beta functions they equal for whole counts: under the null the weighted share
    has the binomial share's mean and variance exactly; equal weights give back the counts.
    A count table (whole-number weights without a common factor, some above 1) counts its
    cases instead: ``exact_low`` / ``exact_high`` are those of its rows repeated (since
    5 December 2026).

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
    groups : array-like of shape (n,), default=None
        Group of each row: whole groups are resampled (a cluster bootstrap), every row of a
        drawn group with it, as in :func:`probwrap.metrics.bootstrap_interval`. Pass the group
        index of counts expanded to a success and a failure row per group
        (:func:`probwrap.aggregated.expand_counts`): resampling those rows one by one breaks
        each group into its successes alone or its failures alone. Resample ``b`` then draws
        ``random_state.randint(0, n_groups, size=n_groups)`` over the groups (in sorted order)
        that hold a row of positive weight.

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
    unit_of_row = None  # None: every row is its own resampling unit
    if groups is not None:
        g = np.asarray(groups)
        if g.ndim != 1 or g.shape[0] != s.shape[0]:
            raise ValueError(f"`groups` must be 1-d with one group per row ({s.shape[0]}); got "
                             f"shape {g.shape}.")
        if g.dtype.kind == "f" and np.any(np.isnan(g)):
            raise ValueError("`groups` contains NaN; give every row a group.")
        try:
            _, unit_of_row = np.unique(g[present], return_inverse=True)
        except TypeError as exc:
            raise ValueError(f"`groups` must hold sortable labels of one kind ({exc}).") from exc
        unit_of_row = unit_of_row.ravel()
    n_units = n if unit_of_row is None else int(unit_of_row.max()) + 1
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
        counts = np.bincount(rng.randint(0, n_units, size=n_units),
                             minlength=n_units).astype(float)
        if unit_of_row is not None:
            counts = counts[unit_of_row]  # every row as often as its group was drawn
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
    # the rows' own range of equally cheap cutoffs (as search_cutoff finds it on the rows of
    # positive weight): an interval narrower than what the rows cannot tell apart claims a
    # precision they lack
    whole = _search_rows(s[present], rc, cap, bounds)
    tie_low, tie_high = (float(v) for v in whole.interval)
    widened = bool(tie_low < low or tie_high > high)
    low, high = min(low, tie_low), max(high, tie_high)
    # what the draws resample: rows, or whole groups (Kish's size of their total weights; the
    # count of rows, or of groups, when unweighted)
    sizes = wp if unit_of_row is None else np.bincount(unit_of_row, weights=wp,
                                                       minlength=n_units)
    effective = float(sizes.sum() ** 2 / np.dot(sizes, sizes))
    # the exact range counts a count table's cases, as the rows repeated; the
    # bootstrap above resamples the table's rows, so its warning keeps their Kish size
    counts = _case_counts(sample_weight, present) if unit_of_row is None else None
    exact_low = exact_high = float("nan")
    if exact_range_note(_effective_rows(sizes, counts) if unit_of_row is None else effective,
                        capacity=cap, per_row_costs=matrix.ndim != 2,
                        groups=groups is not None) is None:
        # equal weights: the rows count as rows; unequal: Kish's rows between two cutoffs
        exact_low, exact_high = _row_exact_range(rows, yi[present], wp, matrix,
                                                 float(confidence_level), tie_low, tie_high,
                                                 counts)
    if effective < FEW_INTERVAL_ROWS:
        units = ("(effective) rows" if unit_of_row is None else
                 f"(effective) groups, the units it resamples ({n} rows in {n_units} groups)")
        warn_few_interval_rows(effective, units, low, high, widened, exact_low, exact_high,
                               stacklevel=2)

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
        tie_low=tie_low,
        tie_high=tie_high,
        widened_to_ties=widened,
        exact_low=exact_low,
        exact_high=exact_high,
    )
