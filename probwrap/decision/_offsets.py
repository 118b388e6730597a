"""Per-class offsets on the log-probability scale, tuned for least empirical cost.

The tuned rule takes, for each row, the least-expected-cost action under the adjusted
probabilities ``q_k ∝ p_k exp(b_k)``. Offsets ``b`` are fitted on held-out predictions by
coordinate descent; each step changes one offset ``b_j`` and is an exact 1-d sweep:

with the other offsets fixed, the (unnormalised) expected cost of action ``a`` for a row is a
straight line ``A_a + t B_a`` in ``t = exp(b_j)``. The row's chosen action is the lower envelope of
those lines, which switches at most ``n_actions - 1`` times; collecting every row's switch points,
sorting them and accumulating the cost changes gives the empirical cost for every value of ``b_j``
at once, in O(n a^2 + n log n). No grid is involved.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from .._validation import (
    check_same_length,
    check_sample_weight,
    class_index_labels,
    plain,
    power_of_two_unit,
)
from ._bayes import _check_proba_2d
from ._costs import _resolve_costs
from ._cutoff import _pick_optimum

__all__ = [
    "ClassOffsetResult",
    "OffsetCurve",
    "apply_class_offsets",
    "class_offset_curve",
    "tune_class_offsets",
]

#: Offsets are kept within +-OFFSET_LIMIT (natural-log units): exp(40) already exceeds any ratio
#: between two probabilities that matters in practice.
OFFSET_LIMIT = 40.0


@dataclass(frozen=True)
class OffsetCurve:
    """Empirical cost as a function of one class offset, the others fixed.

    Attributes
    ----------
    lower, upper : ndarray of shape (m + 1,)
        Every offset in ``[lower[i], upper[i])`` gives the same actions on every row (the ends
        are placed one mean gap beyond the outermost switch point).
    costs : ndarray of shape (m + 1,)
        Mean (weighted) cost per row in each interval.
    breakpoints : ndarray of shape (m,)
        Distinct offsets at which some row changes action.
    """

    lower: np.ndarray
    upper: np.ndarray
    costs: np.ndarray
    breakpoints: np.ndarray


@dataclass(frozen=True)
class ClassOffsetResult:
    """Outcome of :func:`tune_class_offsets`.

    Attributes
    ----------
    offsets : ndarray of shape (n_classes,)
        Fitted offsets (the first is 0: only differences matter).
    cost : float
        Mean (weighted) cost per row with the fitted offsets.
    initial_cost : float
        Mean cost with the starting offsets (zeros: the plain Bayes rule).
    n_sweeps : int
        Number of passes over the classes.
    converged : bool
        Whether a full pass brought no improvement before ``max_sweeps``.
    """

    offsets: np.ndarray
    cost: float
    initial_cost: float
    n_sweeps: int
    converged: bool


def _check_offsets(offsets: Any, n_classes: int) -> np.ndarray:
    try:
        b = np.array(offsets, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`offsets` must be numeric of shape ({n_classes},) ({exc}).") from exc
    if b.shape != (n_classes,):
        raise ValueError(f"`offsets` must have shape ({n_classes},); got shape {b.shape}.")
    if not np.all(np.isfinite(b)):
        raise ValueError("`offsets` must be finite.")
    return b


def apply_class_offsets(proba: Any, offsets: Any) -> np.ndarray:
    """Adjusted probabilities ``q_k = p_k exp(b_k) / sum_l p_l exp(b_l)``.

    Exact zeros stay zero. Equal offsets change nothing.

    Examples
    --------
    >>> from probwrap.decision import apply_class_offsets
    >>> import numpy as np
    >>> apply_class_offsets([[0.5, 0.5]], [0.0, np.log(3.0)]).round(3)
    array([[0.25, 0.75]])
    """
    p = _check_proba_2d(proba)
    b = _check_offsets(offsets, p.shape[1])
    return _offset_proba(p, b)


def _offset_proba(p: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``p_k exp(b_k)`` normalised per row, without 0 / 0 when every term underflows.

    Rows whose largest term is tiny (``[[1, 0]]`` with offsets ``[0, 800]``: ``exp(-800)``
    underflows) are recomputed on the log scale, relative to their own largest term; other rows
    keep the direct product.
    """
    q = p * np.exp(b - b.max())
    tiny = q.max(axis=1) < 2.0**-900
    if tiny.any():
        with np.errstate(divide="ignore"):
            log_q = np.log(p[tiny]) + b  # exact zeros stay zero (log 0 = -inf)
        q[tiny] = np.exp(log_q - log_q.max(axis=1, keepdims=True))
    return q / q.sum(axis=1, keepdims=True)


def _adjusted_expected(p: np.ndarray, matrix: np.ndarray, b: np.ndarray) -> np.ndarray:
    q = _offset_proba(p, b)
    if matrix.ndim == 2:
        return q @ matrix
    return np.einsum("nk,nka->na", q, matrix)


def _realised(matrix: np.ndarray, yi: np.ndarray, actions: np.ndarray) -> np.ndarray:
    if matrix.ndim == 2:
        return matrix[yi, actions]
    return matrix[np.arange(yi.shape[0]), yi, actions]


def _mean_cost(p, yi, matrix, w, b) -> float:
    actions = np.argmin(_adjusted_expected(p, matrix, b), axis=1)
    return float(np.dot(w, _realised(matrix, yi, actions)) / w.sum())


def _lines(p: np.ndarray, matrix: np.ndarray, b: np.ndarray, j: int):
    """Intercepts A (n, a) and slopes B (n, a) of expected cost as lines in t = exp(b_j)."""
    others = np.arange(p.shape[1]) != j
    top = b[others].max()
    scale = np.exp(b - top)
    scale[j] = 0.0
    weighted = p * scale
    if matrix.ndim == 2:
        A = weighted @ matrix
        B = p[:, j : j + 1] * np.exp(-top) * matrix[j][None, :]
    else:
        A = np.einsum("nk,nka->na", weighted, matrix)
        B = p[:, j : j + 1] * np.exp(-top) * matrix[:, j, :]
    return A, B


def _envelope(A: np.ndarray, B: np.ndarray):
    """Lower envelope of the lines A + t B over t > 0, for every row at once.

    Returns the starting action of each row (as t -> 0+) and the switch events
    ``(row, t, old_action, new_action)``. Ties are broken as ``np.argmin`` breaks them just
    after the switch point: smaller slope first, then lower action index.
    """
    n, m = A.shape
    rows = np.arange(n)
    first = A <= A.min(axis=1, keepdims=True)
    start = np.argmin(np.where(first, B, np.inf), axis=1)
    cur = start.copy()
    t_cur = np.zeros(n)
    ev_row, ev_t, ev_old, ev_new = [], [], [], []
    for _ in range(m - 1):
        Ac = A[rows, cur][:, None]
        Bc = B[rows, cur][:, None]
        steeper_down = B < Bc
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            # a switch point beyond the largest double is inf: "never", as intended
            tb = (A - Ac) / (Bc - B)
        tb = np.where(steeper_down, np.maximum(tb, t_cur[:, None]), np.inf)
        t_next = tb.min(axis=1)
        has = np.isfinite(t_next)
        if not has.any():
            break
        nxt = np.argmin(np.where(tb <= t_next[:, None], B, np.inf), axis=1)
        ev_row.append(rows[has])
        ev_t.append(t_next[has])
        ev_old.append(cur[has])
        ev_new.append(nxt[has])
        cur = np.where(has, nxt, cur)
        t_cur = np.where(has, t_next, t_cur)
    if ev_row:
        return start, tuple(np.concatenate(v) for v in (ev_row, ev_t, ev_old, ev_new))
    empty_i = np.zeros(0, dtype=np.intp)
    return start, (empty_i, np.zeros(0), empty_i, empty_i)


def _sweep(p, yi, matrix, w, b, j) -> OffsetCurve:
    A, B = _lines(p, matrix, b, j)
    start, (r, t, old, new) = _envelope(A, B)
    weight = w.sum()
    base = float(np.dot(w, _realised(matrix, yi, start)))
    with np.errstate(divide="ignore"):
        u = np.log(t)
    if matrix.ndim == 2:
        delta = w[r] * (matrix[yi[r], new] - matrix[yi[r], old])
    else:
        delta = w[r] * (matrix[r, yi[r], new] - matrix[r, yi[r], old])
    order = np.argsort(u, kind="stable")
    us, ds = u[order], delta[order]
    if us.shape[0] == 0:
        lo = b[j] - 1.0
        return OffsetCurve(
            lower=np.array([lo]), upper=np.array([b[j] + 1.0]),
            costs=np.array([base / weight]), breakpoints=np.zeros(0),
        )
    last = np.empty(us.shape[0], dtype=bool)
    last[:-1] = us[1:] != us[:-1]
    last[-1] = True
    ends = np.flatnonzero(last)
    points = us[ends]
    cost = np.concatenate([[base], base + np.cumsum(ds)[ends]]) / weight
    finite = points[np.isfinite(points)]
    if finite.shape[0] > 1:
        ext = max(1.0, (finite[-1] - finite[0]) / (finite.shape[0] - 1))
    else:
        ext = 1.0
    first_finite = finite[0] if finite.shape[0] else b[j]
    lower = np.concatenate([[first_finite - ext], points])
    upper = np.concatenate([points, [(finite[-1] if finite.shape[0] else b[j]) + ext]])
    # A switch at t = 0 (u = -inf) applies before every finite offset.
    lower = np.where(np.isneginf(lower), first_finite - ext, lower)
    return OffsetCurve(lower=lower, upper=upper, costs=cost, breakpoints=points)


def _prepare(proba, y, costs, sample_weight):
    p = _check_proba_2d(proba)
    # integers, booleans and whole-number floats (0., 1.), or one column of them
    yi = class_index_labels(y, p.shape[1], name="y")
    n = check_same_length(("proba", p), ("y", yi))
    matrix = _resolve_costs(costs, n, p.shape[1])
    w = check_sample_weight(sample_weight, n)
    # The rule is unchanged when costs or weights are scaled; scaling both by powers of two
    # (exact) keeps the sums finite for values near the largest double. Costs are reported in
    # the original units (times `unit`).
    unit = power_of_two_unit(matrix)
    return p, yi, matrix / unit, w / power_of_two_unit(w), unit


def class_offset_curve(
    proba: Any,
    y: Any,
    costs: Any,
    offsets: Any,
    class_index: int,
    *,
    sample_weight: Any = None,
) -> OffsetCurve:
    """Exact empirical cost as a function of the offset of one class, the others fixed.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes)
        Held-out class probabilities.
    y : array-like of int of shape (n,)
        True class indices (columns of ``proba``).
    costs : mapping, array-like of shape (n_classes, n_actions) or (n, n_classes, n_actions)
        Cost specification.
    offsets : array-like of shape (n_classes,)
        Current offsets; entry ``class_index`` is the one varied.
    class_index : int
        Which offset to vary.
    sample_weight : array-like of shape (n,), default=None
        Row weights.

    Returns
    -------
    OffsetCurve

    Examples
    --------
    >>> from probwrap.decision import class_offset_curve, zero_one_costs
    >>> curve = class_offset_curve([[0.6, 0.4], [0.3, 0.7]], [1, 1], zero_one_costs(2),
    ...                            [0.0, 0.0], 1)
    >>> curve.breakpoints.round(3), curve.costs
    (array([-0.847,  0.405]), array([1. , 0.5, 0. ]))
    """
    p, yi, matrix, w, unit = _prepare(proba, y, costs, sample_weight)
    b = _check_offsets(offsets, p.shape[1])
    j = int(class_index)
    if not 0 <= j < p.shape[1]:
        raise ValueError(f"`class_index` must be in [0, {p.shape[1]}); got {plain(class_index)!r}.")
    curve = _sweep(p, yi, matrix, w, b, j)
    return replace(curve, costs=curve.costs * unit)


def tune_class_offsets(
    proba: Any,
    y: Any,
    costs: Any,
    *,
    sample_weight: Any = None,
    max_sweeps: int = 20,
) -> ClassOffsetResult:
    """Fit per-class log-probability offsets that minimise the empirical cost.

    Coordinate descent from zero offsets (the plain Bayes rule): each step sets one offset to the
    middle of the widest interval of least cost found by an exact sweep (see
    :func:`class_offset_curve`), and keeps the change only if the cost falls. The result is never
    worse than the plain Bayes rule on these rows. Coordinate descent can stop at a point where
    no single offset can improve while a joint move could.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes) or (n,)
        Held-out class probabilities (1-d: positive-class probabilities).
    y : array-like of int of shape (n,)
        True class indices (columns of ``proba``).
    costs : mapping, array-like of shape (n_classes, n_actions) or (n, n_classes, n_actions)
        Cost specification; actions may differ from classes (e.g. a reject action).
    sample_weight : array-like of shape (n,), default=None
        Row weights.
    max_sweeps : int, default=20
        Largest number of passes over the classes.

    Returns
    -------
    ClassOffsetResult

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import tune_class_offsets
    >>> p = np.array([[0.7, 0.3], [0.6, 0.4], [0.2, 0.8], [0.9, 0.1]])
    >>> res = tune_class_offsets(p, [1, 1, 1, 0], {"fp": 1.0, "fn": 1.0})
    >>> res.initial_cost, res.cost
    (0.5, 0.0)
    """
    p, yi, matrix, w, unit = _prepare(proba, y, costs, sample_weight)
    if int(max_sweeps) < 1:
        raise ValueError(f"`max_sweeps` must be a positive integer; got {plain(max_sweeps)!r}.")
    k = p.shape[1]
    b = np.zeros(k)
    cost = _mean_cost(p, yi, matrix, w, b)
    initial = cost
    converged = False
    sweeps = 0
    for _ in range(int(max_sweeps)):
        sweeps += 1
        improved = False
        for j in range(1, k):
            curve = _sweep(p, yi, matrix, w, b, j)
            admissible = curve.upper > curve.lower
            index, value, _, _, _ = _pick_optimum(
                curve.costs, curve.lower, curve.upper, admissible
            )
            tol = 1e-12 * max(1.0, abs(cost))
            if curve.costs[index] >= cost - tol:
                continue
            trial = b.copy()
            trial[j] = float(np.clip(value, -OFFSET_LIMIT, OFFSET_LIMIT))
            trial_cost = _mean_cost(p, yi, matrix, w, trial)
            if trial_cost < cost - tol:
                b, cost, improved = trial, trial_cost, True
        if not improved:
            converged = True
            break
    return ClassOffsetResult(
        offsets=b, cost=cost * unit, initial_cost=initial * unit, n_sweeps=sweeps,
        converged=converged,
    )
