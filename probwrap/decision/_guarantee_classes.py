"""Per-class recall floors with a guarantee, for multiclass least-cost rules.

The binary version (:func:`probwrap.decision.guaranteed_cutoff`) certifies cutoffs. With more
classes the rule is "least expected cost under adjusted probabilities" (see
:func:`probwrap.decision.apply_class_offsets`), and the family searched here is one-dimensional:
the probabilities of the *protected* classes (those given a recall floor) are multiplied by a
common factor ``exp(t)``, i.e. the class offsets are ``t`` for protected classes and 0 for the
others. ``t = 0`` is the plain least-expected-cost rule; a large ``t`` gives every row the action
that is cheapest when a protected class is true.

A row of class ``j`` counts as *caught* when its action is one of the cheapest actions for class
``j`` (the minima of row ``j`` of the cost matrix: "treat it as a ``j``"). The recall of class
``j`` is the weighted share of its rows caught.

The family is fixed before the labels are looked at (it depends on the probabilities and the cost
matrix only), so Learn-then-Test's fixed-sequence procedure applies (Angelopoulos, Bates, Candès,
Jordan & Lei, Ann. Appl. Stat. 2025): each value of ``t`` is a hypothesis "some floored class's
recall is below its floor"; its p-value is the largest of the classes' binomial-tail p-values
(valid for the union of the per-class nulls: under it at least one class fails, and that class's
p-value is valid; the paper treats several risks this way — the section is cited from memory).
The values are tested in an order set by the model's own expected recall (the probabilities,
never the labels): the rule whose smallest margin of expected recall over its floor is largest
comes first. With one floored class that is simply from the largest ``t`` down. Certification
stops at the first rule that is not rejected at level ``delta``; the least-cost certified rule
is returned. Every certified rule meets every floor on new rows with probability at least
``1 - delta``.

With several floors the protected classes share one boost: they are protected together against
the other classes, not against each other, so floors that need one protected class to win rows
from another may be unreachable in this family (the error says so).

Each row's chosen action changes at most ``n_actions - 1`` times as ``t`` grows (the expected
costs are straight lines in ``exp(t)``), so every distinct rule is visited exactly: no grid.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_sample_weight, plain
from ._guarantee import (
    GuaranteeUnreachableError,
    _miss_allowance,
    _upper_risk,
    binomial_tail_pvalue,
    counts_as_rows,
    evidence_counts,
)
from ._offsets import _envelope, _prepare

__all__ = ["GuaranteedOffsets", "guaranteed_class_offsets"]


@dataclass(frozen=True)
class GuaranteedOffsets:
    """Outcome of :func:`guaranteed_class_offsets`.

    Attributes
    ----------
    offsets : ndarray of shape (n_classes,)
        Class offsets of the chosen rule (``boost`` for the protected classes, 0 for the others);
        pass them to :func:`~probwrap.decision.apply_class_offsets`.
    boost : float
        The chosen ``t``.
    cost : float
        Mean (weighted) cost per row of the chosen rule on the held-out rows.
    unconstrained_cost : float
        Mean cost of the plain least-expected-cost rule (``t = 0``) on the same rows.
    floors : dict
        ``{class index: recall floor}`` as asked.
    method : str
        ``"high_probability"`` or ``"expectation"``.
    confidence : float or None
        ``1 - delta`` for ``"high_probability"``; None for ``"expectation"``.
    achieved : dict
        ``{class index: recall on the held-out rows}`` under the chosen rule.
    bounds : dict
        ``{class index: guaranteed recall}``: the one-sided Clopper–Pearson lower bound at level
        ``confidence`` (high probability), or ``1 - (misses + 1) / (n + 1)`` (expectation).
    p_value : float
        Largest of the floored classes' binomial-tail p-values at the chosen rule (nan for
        ``"expectation"``).
    lower, upper : ndarray of shape (m,)
        The boost intervals of every distinct rule, in increasing ``t``.
    costs : ndarray of shape (m,)
        Mean cost of each rule.
    p_values : ndarray of shape (m,)
        Each rule's p-value (nan where not tested).
    certified : ndarray of bool of shape (m,)
    """

    offsets: np.ndarray
    boost: float
    cost: float
    unconstrained_cost: float
    floors: dict
    method: str
    confidence: float | None
    achieved: dict
    bounds: dict
    p_value: float
    lower: np.ndarray
    upper: np.ndarray
    costs: np.ndarray
    p_values: np.ndarray
    certified: np.ndarray

    @property
    def binding(self) -> bool:
        """True when the plain least-cost rule (``t = 0``) is not certified."""
        zero = min(int(np.searchsorted(self.upper, 0.0, side="right")), self.upper.shape[0] - 1)
        return not bool(self.certified[zero])


def _check_floors(floors: Any, k: int) -> dict[int, float]:
    if not isinstance(floors, Mapping) or not floors:
        raise ValueError(
            "`recall_floors` must be a non-empty dict {class index: recall floor in (0, 1)}; got "
            f"{plain(floors)!r}."
        )
    out: dict[int, float] = {}
    for key, value in floors.items():
        if isinstance(key, bool) or not isinstance(key, (int, np.integer)) or not 0 <= key < k:
            raise ValueError(
                f"`recall_floors` keys must be class indices 0 .. {k - 1}; got {plain(key)!r}."
            )
        try:
            t = float(value)
        except (TypeError, ValueError) as exc:
            raise ValueError(
                f"`recall_floors[{int(key)}]` must be a number in (0, 1); got {plain(value)!r}."
            ) from exc
        if isinstance(value, bool) or not 0.0 < t < 1.0:
            raise ValueError(
                f"`recall_floors[{int(key)}]` must be a number in (0, 1); got {plain(value)!r}."
            )
        out[int(key)] = t
    if len(out) == k:
        raise ValueError(
            "`recall_floors` names every class; one common boost of the protected classes then "
            "changes nothing. Leave at least one class without a floor."
        )
    return out


def guaranteed_class_offsets(
    proba: Any,
    y: Any,
    costs: Any,
    *,
    recall_floors: Mapping[int, float],
    confidence: float = 0.9,
    method: str = "high_probability",
    sample_weight: Any = None,
) -> GuaranteedOffsets:
    """Least-cost multiclass rule among those certified to meet per-class recall floors.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes)
        Held-out class probabilities.
    y : array-like of int of shape (n,)
        True class indices (columns of ``proba``).
    costs : array-like of shape (n_classes, n_actions)
        Cost matrix (one row per true class, one column per action; actions may differ from
        classes, e.g. a reject action).
    recall_floors : dict
        ``{class index: floor}``, e.g. ``{2: 0.9}``: at least 90 % of class-2 rows get one of the
        cheapest actions for class 2. At least one class must be left without a floor.
    confidence : float in (0, 1), default=0.9
        For ``method="high_probability"``: the probability (over held-out sets) that every
        certified rule meets every floor on new rows.
    method : {"high_probability", "expectation"}, default="high_probability"
        Learn-then-Test (binomial-tail p-values, fixed-sequence testing), or conformal risk
        control (Angelopoulos, Bates, Fisch, Lei & Schuster, ICLR 2024, eq. (4)), which needs a
        miss rate that moves one way with the boost and so takes exactly one floored class.
    sample_weight : array-like of shape (n,), default=None
        Whole-number weights are row frequencies (a row of weight 2 counts as two rows in
        every count and p-value); other weights are relative and each floored class's rows
        count as Kish's effective number, as in :func:`guaranteed_cutoff`.

    Returns
    -------
    GuaranteedOffsets

    Raises
    ------
    GuaranteeUnreachableError
        When no rule can be certified. A rule without the guarantee is never returned instead.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import guaranteed_class_offsets, zero_one_costs
    >>> rng = np.random.default_rng(0)
    >>> y = rng.integers(0, 3, 3000)
    >>> logits = rng.normal(0.0, 1.0, (3000, 3)) + 1.5 * np.eye(3)[y]
    >>> p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)
    >>> g = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={2: 0.9})
    >>> bool(g.achieved[2] >= 0.9), bool(g.bounds[2] >= 0.9), bool(g.p_value <= 0.1)
    (True, True, True)
    """
    p, yi, matrix, w_scaled, unit = _prepare(proba, y, costs, sample_weight)
    # counts and p-values read the weights as given (row frequencies), not rescaled
    w = check_sample_weight(sample_weight, p.shape[0])
    if matrix.ndim != 2:
        raise ValueError(
            "`costs` must be one cost matrix of shape (n_classes, n_actions) here; per-row costs "
            "have no fixed set of cheapest actions per class."
        )
    k = p.shape[1]
    floors = _check_floors(recall_floors, k)
    if method not in ("high_probability", "expectation"):
        raise ValueError(
            "`method` must be one of ['high_probability', 'expectation']; got "
            f"{plain(method)!r}."
        )
    if method == "expectation":
        if len(floors) != 1:
            raise ValueError(
                "`method='expectation'` takes exactly one floored class (with several, a class's "
                "miss rate need not move one way with the boost); use "
                "method='high_probability'."
            )
        delta = None
    else:
        delta = _miss_allowance(confidence)

    mask = np.zeros(k, dtype=bool)
    mask[list(floors)] = True
    # cheapest actions per true class: a row of class j is caught when it gets one of them
    caught_table = matrix <= matrix.min(axis=1, keepdims=True) + 1e-12 * np.abs(matrix).max()
    # expected cost of each action as a line A + u B in u = exp(t)
    A = p[:, ~mask] @ matrix[~mask]
    B = p[:, mask] @ matrix[mask]
    start, (r, u, old, new) = _envelope(A, B)

    cls = sorted(floors)
    n_rows = w.shape[0]
    onehot = np.zeros((n_rows, len(cls)))
    for c_i, j in enumerate(cls):
        onehot[:, c_i] = (yi == j) * w
    totals = onehot.sum(axis=0)
    if np.any(totals <= 0):
        missing = [j for j, tot in zip(cls, totals, strict=True) if tot <= 0]
        raise ValueError(
            f"`recall_floors` names classes {missing} that have no held-out rows of positive "
            "weight; a recall cannot be judged without them."
        )
    base_cost = float(np.dot(w_scaled, matrix[yi, start]))
    base_hits = onehot.T @ caught_table[yi, start].astype(float)
    # the model's own expectation of each floored class's recall (no labels): it orders the tests
    pw = p[:, cls] * w[:, None]
    caught_by = caught_table[cls].T.astype(float)  # (actions, floored classes)
    base_exp = (pw * caught_by[start]).sum(axis=0)
    with np.errstate(divide="ignore"):
        t_ev = np.log(u)
    d_cost = w_scaled[r] * (matrix[yi[r], new] - matrix[yi[r], old])
    d_exp = pw[r] * (caught_by[new] - caught_by[old])
    d_hit = (
        caught_table[yi[r], new].astype(float) - caught_table[yi[r], old]
    )[:, None] * onehot[r]
    order = np.argsort(t_ev, kind="stable")
    ts, dc, dh, de = t_ev[order], d_cost[order], d_hit[order], d_exp[order]
    if ts.shape[0]:
        last = np.empty(ts.shape[0], dtype=bool)
        last[:-1] = ts[1:] != ts[:-1]
        last[-1] = True
        ends = np.flatnonzero(last)
        points = ts[ends]
        cost = np.concatenate([[base_cost], base_cost + np.cumsum(dc)[ends]])
        hits = np.vstack([base_hits[None, :], base_hits + np.cumsum(dh, axis=0)[ends]])
        expect = np.vstack([base_exp[None, :], base_exp + np.cumsum(de, axis=0)[ends]])
    else:
        points = np.zeros(0)
        cost = np.array([base_cost])
        hits = base_hits[None, :]
        expect = base_exp[None, :]
    lower = np.concatenate([[-np.inf], points])
    upper = np.concatenate([points, [np.inf]])
    keep = upper > lower
    lower, upper, cost, hits, expect = (
        lower[keep], upper[keep], cost[keep], hits[keep], expect[keep]
    )
    m = lower.shape[0]
    misses = np.maximum(totals[None, :] - hits, 0.0)
    alphas = np.array([1.0 - floors[j] for j in cls])
    # what the tests and bounds read: whole-number weights are row counts, other weights count
    # as Kish's effective number of each floored class's rows (see evidence_counts)
    as_rows = counts_as_rows(
        w, None if sample_weight is None else "guaranteed_class_offsets"
    )
    t_sq = (onehot * w[:, None]).sum(axis=0)
    misses, totals_ev = evidence_counts(misses, totals[None, :], t_sq[None, :], as_rows)
    totals_ev = totals_ev[0]

    p_values = np.full(m, np.nan)
    if method == "high_probability":
        # Test order: by the smallest margin of the model's expected recall over its floor,
        # largest first (then the larger boost first). It uses the probabilities, never the
        # labels, so fixed-sequence testing stays valid; with one floored class it is simply
        # from the largest boost down.
        p_mass = np.maximum((p[:, cls] * w[:, None]).sum(axis=0), np.finfo(float).tiny)
        margin = (expect / p_mass[None, :] - np.array([floors[j] for j in cls])).min(axis=1)
        margin = np.round(margin, 12)  # rounding noise must not reorder equal margins
        order_t = np.lexsort((-np.arange(m), -margin))
        per_class = np.column_stack([
            binomial_tail_pvalue(misses[order_t, c_i], totals_ev[c_i], alphas[c_i])
            for c_i in range(len(cls))
        ])
        p_seq = per_class.max(axis=1)
        p_values[order_t] = p_seq
        failed = np.flatnonzero(p_seq > delta)
        n_ok = failed[0] if failed.size else m
        certified = np.zeros(m, dtype=bool)
        certified[order_t[:n_ok]] = True
    else:
        inflated = (misses[:, 0] + 1.0) / (totals_ev[0] + 1.0)
        certified = inflated <= alphas[0] * (1 + 1e-12)

    if not certified.any():
        raise GuaranteeUnreachableError(_unreachable(floors, method, delta, totals_ev, cls))
    cost_curve = np.where(certified, cost, np.inf)
    best = float(cost_curve.min())
    tol = 1e-9 * max(abs(best), float(np.max(np.abs(cost[certified]))))
    ties = np.flatnonzero(cost_curve <= best + tol)
    i = int(ties[len(ties) // 2])
    boost = _representative(lower, upper, i)
    offsets = np.where(mask, boost, 0.0)
    weight = w_scaled.sum()
    zero = int(np.searchsorted(upper, 0.0, side="right"))  # interval holding t = 0
    zero = min(zero, m - 1)
    achieved, bounds = {}, {}
    for c_i, j in enumerate(cls):
        achieved[j] = float(hits[i, c_i] / totals[c_i])
        if method == "high_probability":
            bounds[j] = 1.0 - _upper_risk(float(misses[i, c_i]), float(totals_ev[c_i]), delta)
        else:
            bounds[j] = 1.0 - float((misses[i, c_i] + 1.0) / (totals_ev[c_i] + 1.0))
    return GuaranteedOffsets(
        offsets=offsets,
        boost=boost,
        cost=float(cost[i] / weight * unit),
        unconstrained_cost=float(cost[zero] / weight * unit),
        floors=dict(floors),
        method=method,
        confidence=None if delta is None else 1.0 - delta,
        achieved=achieved,
        bounds=bounds,
        p_value=float(p_values[i]),
        lower=lower,
        upper=upper,
        costs=cost / weight * unit,
        p_values=p_values,
        certified=certified,
    )


def _representative(lower: np.ndarray, upper: np.ndarray, i: int) -> float:
    """A boost inside interval ``i`` (0 when the interval holds it: the plain rule)."""
    lo, hi = float(lower[i]), float(upper[i])
    if lo < 0.0 < hi:
        return 0.0
    finite = np.concatenate([lower[np.isfinite(lower)], upper[np.isfinite(upper)]])
    span = float(finite.max() - finite.min()) if finite.size > 1 else 0.0
    ext = max(1.0, span / max(lower.shape[0] - 1, 1))
    if math.isinf(lo) and math.isinf(hi):
        return 0.0
    if math.isinf(lo):
        return hi - ext
    if math.isinf(hi):
        return lo + ext
    return 0.5 * (lo + hi)


def _unreachable(floors, method, delta, totals, cls) -> str:
    what = ", ".join(f"class {j} recall at least {floors[j]:g}" for j in cls)
    if method == "expectation":
        return (
            f"No rule keeps {what} on average: even the most protective rule's inflated miss "
            f"rate (misses + 1)/(n + 1) exceeds the allowance with n = {float(totals[0]):g} rows "
            "of that class."
        )
    need = {
        j: math.ceil(math.log(delta) / math.log1p(-(1.0 - floors[j]))) for j in cls
    }
    have = {j: float(t) for j, t in zip(cls, totals, strict=True)}
    return (
        f"No rule can be certified to give {what} with confidence {1 - delta:g}: the first "
        "rule tested (the one the model expects to meet the floors best) was not rejected. "
        "With no misses at all each class needs at least "
        f"{need} held-out rows (it has {have}); otherwise the model cannot reach the floors on "
        "these rows. Lower a floor or the confidence, or use more held-out rows."
    )
