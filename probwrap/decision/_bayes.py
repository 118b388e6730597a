"""Bayes actions: the least-expected-cost action for each row."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import check_proba, power_of_two_unit
from ._costs import _resolve_costs

__all__ = ["expected_costs", "bayes_actions"]


def _check_proba_2d(proba: Any, name: str = "proba") -> np.ndarray:
    p = check_proba(proba, name=name)
    if p.ndim == 1:
        p = np.column_stack([1.0 - p, p])
    return p


def expected_costs(proba: Any, costs: Any) -> np.ndarray:
    """Expected cost of every action for every row: ``sum_k p_k C[k, a]``.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes) or (n,)
        Class probabilities (rows sum to one); 1-d input holds positive-class probabilities of a
        binary problem.
    costs : mapping, array-like of shape (n_classes, n_actions) or (n, n_classes, n_actions)
        Cost matrix (rows: true classes, columns: actions; negative entries are gains), the binary
        shorthand ``{"tp", "fp", "fn", "tn"}``, or one matrix per row.

    Returns
    -------
    ndarray of shape (n, n_actions)

    Examples
    --------
    >>> from probwrap.decision import expected_costs
    >>> expected_costs([0.1, 0.5], {"fp": 2.0, "fn": 35.0})
    array([[ 3.5,  1.8],
           [17.5,  1. ]])
    """
    p = _check_proba_2d(proba)
    matrix = _resolve_costs(costs, p.shape[0], p.shape[1])
    unit = power_of_two_unit(matrix)
    if unit <= 2.0**1000:
        return _expected(p, matrix)
    # Costs near the largest double: sums of products can overflow (rows of `proba` may sum to
    # slightly more than one). Computed on costs divided by a power of two (exact), then scaled
    # back and kept within the doubles; the true values lie within the range of the costs.
    big = np.finfo(float).max
    with np.errstate(over="ignore"):
        return np.clip(_expected(p, matrix / unit) * unit, -big, big)


def _expected(p: np.ndarray, matrix: np.ndarray) -> np.ndarray:
    if matrix.ndim == 2:
        return p @ matrix
    return np.einsum("nk,nka->na", p, matrix)


def bayes_actions(proba: Any, costs: Any, *, actions: Any = None) -> np.ndarray:
    """Least-expected-cost action of each row: ``argmin_a sum_k p_k C[k, a]``.

    Ties go to the action with the lower column index.

    Parameters
    ----------
    proba : array-like of shape (n, n_classes) or (n,)
        Class probabilities, or positive-class probabilities of a binary problem.
    costs : mapping, array-like of shape (n_classes, n_actions) or (n, n_classes, n_actions)
        Cost specification (see :func:`expected_costs`).
    actions : array-like of shape (n_actions,), default=None
        Labels of the actions. When given they are returned; otherwise column indices.

    Returns
    -------
    ndarray of shape (n,)

    Examples
    --------
    >>> from probwrap.decision import bayes_actions
    >>> bayes_actions([0.02, 0.2], {"fp": 2.0, "fn": 35.0}, actions=["ship", "inspect"])
    array(['ship', 'inspect'], dtype='<U7')
    """
    p = _check_proba_2d(proba)
    matrix = _resolve_costs(costs, p.shape[0], p.shape[1])
    # least expected cost is unchanged by scaling all costs: divide by a power of two (exact)
    # so that huge costs cannot overflow to ties at infinity
    cost = _expected(p, matrix / power_of_two_unit(matrix))
    index = np.argmin(cost, axis=1)
    if actions is None:
        return index
    labels = np.asarray(actions)
    if labels.ndim != 1 or labels.shape[0] != cost.shape[1]:
        raise ValueError(
            f"`actions` must name each of the {cost.shape[1]} actions (columns of `costs`); got "
            f"shape {labels.shape}."
        )
    return labels[index]
