"""A budget on one action: at most a share of rows, given to the rows that save the most."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._validation import check_sample_weight, check_scores, plain, power_of_two_unit
from ._cutoff import check_capacity
from ._cutoff_rows import _SortedRows

__all__ = ["ActionBudget", "action_savings", "fit_action_budget", "budget_actions"]


@dataclass(frozen=True)
class ActionBudget:
    """A fitted budget on one action.

    Attributes
    ----------
    action : int
        Column index of the budgeted action.
    capacity : float
        Largest weighted share of rows that may take it.
    saving_threshold : float
        A row takes the budgeted action only when it is its least-expected-cost action and it
        saves at least this much against the next best action. 0 when the budget does not bind.
    share : float
        Weighted share of the fitting rows that take the action under the budget.
    binding : bool
        Whether the budget removed any row from the action.
    """

    action: int
    capacity: float
    saving_threshold: float
    share: float
    binding: bool


def _check_costs_2d(exp_costs: Any, action: Any) -> tuple[np.ndarray, int]:
    E = check_scores(exp_costs, name="expected_costs", ndim=2)
    try:
        a = int(action)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`action` must be a column index; got {plain(action)!r}.") from exc
    if not 0 <= a < E.shape[1]:
        raise ValueError(
            f"`action` must be a column index in [0, {E.shape[1]}); got {plain(action)!r}."
        )
    return E, a


def action_savings(expected_costs: Any, action: int) -> np.ndarray:
    """Expected cost saved by taking ``action`` instead of the best other action, per row.

    Positive where ``action`` is the least-expected-cost action.

    Examples
    --------
    >>> from probwrap.decision import action_savings
    >>> action_savings([[3.0, 1.0, 2.0], [1.0, 4.0, 2.0]], 1)
    array([ 1., -3.])
    """
    E, a = _check_costs_2d(expected_costs, action)
    others = np.delete(E, a, axis=1)
    return others.min(axis=1) - E[:, a]


def budget_actions(expected_costs: Any, action: int, saving_threshold: float) -> np.ndarray:
    """Least-expected-cost actions, with ``action`` kept only where it saves enough.

    Rows whose best action is ``action`` but whose saving is below ``saving_threshold`` take
    their best other action instead.

    Examples
    --------
    >>> from probwrap.decision import budget_actions
    >>> budget_actions([[3.0, 1.0, 2.0], [5.0, 1.0, 4.0]], 1, 2.0)
    array([2, 1])
    """
    E, a = _check_costs_2d(expected_costs, action)
    best = np.argmin(E, axis=1)
    with np.errstate(over="ignore"):  # an overflowing saving is +inf: the action is kept
        saving = np.delete(E, a, axis=1).min(axis=1) - E[:, a]
    masked = E.copy()
    masked[:, a] = np.inf
    alternative = np.argmin(masked, axis=1)
    drop = (best == a) & (saving < float(saving_threshold))
    return np.where(drop, alternative, best)


def fit_action_budget(
    expected_costs: Any, action: int, capacity: float, *, sample_weight: Any = None
) -> ActionBudget:
    """Fill a budget on one action with the rows that save the most by taking it.

    Parameters
    ----------
    expected_costs : array-like of shape (n, n_actions)
        Expected cost of every action for every row (see :func:`expected_costs`).
    action : int
        Column index of the budgeted action.
    capacity : float in (0, 1]
        Largest weighted share of rows that may take ``action``.
    sample_weight : array-like of shape (n,), default=None
        Row weights.

    Returns
    -------
    ActionBudget
        On these rows the share never exceeds ``capacity``; rows with equal savings are kept or
        dropped together, so it may stay below it. Apply to new rows with :func:`budget_actions`.

    Examples
    --------
    >>> from probwrap.decision import fit_action_budget
    >>> E = [[3.0, 1.0], [5.0, 1.0], [2.0, 1.5], [1.0, 4.0]]
    >>> budget = fit_action_budget(E, 1, 0.5)
    >>> budget.saving_threshold, budget.share
    (1.25, 0.5)
    """
    E, a = _check_costs_2d(expected_costs, action)
    cap = check_capacity(capacity)
    if cap is None:
        raise ValueError("`capacity` must be a share of rows in (0, 1]; got None.")
    w = check_sample_weight(sample_weight, E.shape[0])
    w = w / power_of_two_unit(w)  # shares are scale-free; this keeps the sums finite
    # the rows that take the action, as budget_actions decides them (on the costs as given)
    mask = np.argmin(E, axis=1) == a
    unit = 1.0
    with np.errstate(over="ignore"):
        saving = np.delete(E, a, axis=1).min(axis=1) - E[:, a]
    if not np.all(np.abs(saving[mask]) < 2.0**1000):
        # differences of costs near the largest double overflow (and cut-offs between savings
        # that large can too); the ranks of the savings do not change when all costs are
        # divided by one power of two (exact; savings that underflow tie at 0, and tied rows
        # are kept or dropped together, so the share still holds)
        unit = power_of_two_unit(E)
        Eu = E / unit
        saving = np.delete(Eu, a, axis=1).min(axis=1) - Eu[:, a]
    total = w.sum()
    if w[mask].sum() <= cap * total * (1 + 1e-12):
        return ActionBudget(a, cap, 0.0, float(w[mask].sum() / total), False)
    rows = _SortedRows(saving[mask], None)
    wm = w[mask]
    _, flagged, _ = rows.curve(np.zeros(wm.shape[0]), 0.0, wm[rows.order])
    share = flagged / total
    j = int(np.argmax(share <= cap * (1 + 1e-12)))
    # rows saving at least the threshold keep the action: it must lie in (lower, upper]
    threshold = rows.mid[j] if rows.mid[j] > rows.lower[j] else rows.upper[j]
    with np.errstate(over="ignore"):
        # +inf when no double lies above the savings to keep out (savings at the top of the
        # range): then no row keeps the action, as intended
        threshold = float(threshold * unit)
    return ActionBudget(a, cap, threshold, float(share[j]), True)
