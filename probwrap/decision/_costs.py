"""Cost specifications: binary shorthand, cost matrices, per-row costs, reject actions.

A cost matrix has one row per true class (in ``classes`` order) and one column per action; the
entry is the cost of taking that action when that class is true. Negative entries are gains.
Per-row costs add a leading axis: shape (n, n_classes, n_actions).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from .._validation import costs_by_position, plain, power_of_two_unit

__all__ = [
    "BINARY_COST_KEYS",
    "binary_cost_matrix",
    "check_cost_matrix",
    "check_row_costs",
    "zero_one_costs",
    "add_reject_action",
    "plugin_cutoff",
]

#: Keys of the binary shorthand: true/false positive, false/true negative.
BINARY_COST_KEYS = ("tp", "fp", "fn", "tn")


def binary_cost_matrix(costs: Mapping[str, float], *, name: str = "costs") -> np.ndarray:
    """Build the (2, 2) cost matrix from the binary shorthand.

    Parameters
    ----------
    costs : mapping
        Keys among ``"tp"``, ``"fp"``, ``"fn"``, ``"tn"``; a missing key costs 0. The first
        action (column 0) is "treat as negative", the second "treat as positive", and the rows
        are the negative and the positive class.
    name : str, default="costs"
        Argument name used in error messages.

    Returns
    -------
    ndarray of shape (2, 2)
        ``[[tn, fp], [fn, tp]]``.

    Examples
    --------
    >>> from probwrap.decision import binary_cost_matrix
    >>> binary_cost_matrix({"fp": 2.0, "fn": 35.0})
    array([[ 0.,  2.],
           [35.,  0.]])
    """
    unknown = sorted(str(k) for k in costs if k not in BINARY_COST_KEYS)
    if unknown:
        raise ValueError(
            f"`{name}` has unknown key(s) {unknown}; the binary shorthand accepts only "
            f"{list(BINARY_COST_KEYS)} (true/false positive, false/true negative). A full "
            "cost matrix is a list of rows, one per true class in `classes_` order, each "
            "holding the cost of every action: e.g. [[0, fp], [fn, 0]]."
        )
    values = {}
    for key in BINARY_COST_KEYS:
        value = costs.get(key, 0.0)
        try:
            value = float(value)
        except (TypeError, ValueError) as exc:
            raise ValueError(f"`{name}[{plain(key)!r}]` must be a number; got {plain(value)!r}.") from exc
        if not np.isfinite(value):
            raise ValueError(f"`{name}[{plain(key)!r}]` must be finite; got {plain(value)!r}.")
        values[key] = value
    return np.array([[values["tn"], values["fp"]], [values["fn"], values["tp"]]], dtype=float)


def check_cost_matrix(
    costs: Any, *, n_classes: int | None = None, n_actions: int | None = None, name: str = "costs"
) -> np.ndarray:
    """Validate a cost specification and return it as a float (n_classes, n_actions) matrix.

    Parameters
    ----------
    costs : mapping or array-like of shape (n_classes, n_actions)
        The binary shorthand (see :func:`binary_cost_matrix`) or a matrix whose rows are true
        classes and whose columns are actions. At least two actions are needed.
    n_classes, n_actions : int, default=None
        Expected number of rows / columns, when known.
    name : str, default="costs"
        Argument name used in error messages.

    Returns
    -------
    ndarray of shape (n_classes, n_actions)
        A new array; the input is never modified.

    Examples
    --------
    >>> from probwrap.decision import check_cost_matrix
    >>> check_cost_matrix([[0, 1], [5, 0]]).tolist()
    [[0.0, 1.0], [5.0, 0.0]]
    """
    if isinstance(costs, Mapping):
        matrix = binary_cost_matrix(costs, name=name)
        if n_classes is not None and n_classes != 2:
            raise ValueError(
                f"`{name}` uses the binary shorthand (tp/fp/fn/tn) but there are {n_classes} "
                f"classes; give an ({n_classes}, n_actions) cost matrix instead."
            )
    else:
        try:
            matrix = np.array(costs, dtype=float)
        except (TypeError, ValueError) as exc:
            raise ValueError(
                f"`{name}` must be a dict with keys {list(BINARY_COST_KEYS)} or a numeric "
                f"(n_classes, n_actions) matrix; got {type(costs).__name__} ({exc})."
            ) from exc
        if matrix.ndim != 2:
            raise ValueError(
                f"`{name}` must be a 2-d (n_classes, n_actions) cost matrix; got shape "
                f"{matrix.shape}."
            )
    if matrix.shape[1] < 2:
        raise ValueError(
            f"`{name}` must have at least two actions (columns); got shape {matrix.shape}."
        )
    if matrix.shape[0] < 2:
        raise ValueError(
            f"`{name}` must have at least two classes (rows); got shape {matrix.shape}."
        )
    if n_classes is not None and matrix.shape[0] != n_classes:
        raise ValueError(
            f"`{name}` has {matrix.shape[0]} rows but there are {n_classes} classes; rows are "
            "true classes (in classes_ order) and columns are actions."
        )
    if n_actions is not None and matrix.shape[1] != n_actions:
        raise ValueError(
            f"`{name}` has {matrix.shape[1]} columns but {n_actions} actions were named."
        )
    if not np.all(np.isfinite(matrix)):
        raise ValueError(f"`{name}` contains NaN or infinite costs; every cost must be finite.")
    return matrix


def check_row_costs(
    row_costs: Any,
    n_samples: int,
    *,
    n_classes: int | None = None,
    n_actions: int | None = None,
    name: str = "row_costs",
) -> np.ndarray:
    """Validate per-row costs of shape (n_samples, n_classes, n_actions).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.decision import check_row_costs
    >>> check_row_costs(np.zeros((3, 2, 2)), 3).shape
    (3, 2, 2)
    """
    try:
        arr = np.array(row_costs, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(
            f"`{name}` must be a numeric (n_samples, n_classes, n_actions) array ({exc})."
        ) from exc
    expected = (n_samples, n_classes or "n_classes", n_actions or "n_actions")
    if arr.ndim != 3:
        raise ValueError(
            f"`{name}` must have shape {expected} (one cost matrix per row); got shape {arr.shape}."
        )
    if (
        arr.shape[0] != n_samples
        or (n_classes is not None and arr.shape[1] != n_classes)
        or (n_actions is not None and arr.shape[2] != n_actions)
    ):
        raise ValueError(f"`{name}` must have shape {expected}; got shape {arr.shape}.")
    if arr.shape[1] < 2 or arr.shape[2] < 2:
        raise ValueError(
            f"`{name}` needs at least two classes and two actions; got shape {arr.shape}."
        )
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"`{name}` contains NaN or infinite costs; every cost must be finite.")
    return arr


def _resolve_costs(
    costs: Any, n_samples: int, n_classes: int, *, name: str = "costs"
) -> np.ndarray:
    """Return a validated (k, a) matrix or (n, k, a) per-row array (a DataFrame's rows read as
    the classes 0..k-1, see :func:`probwrap._validation.costs_by_position`)."""
    costs = costs_by_position(costs, n_classes, name=name)
    if not isinstance(costs, Mapping) and np.ndim(costs) == 3:
        return check_row_costs(costs, n_samples, n_classes=n_classes, name=name)
    return check_cost_matrix(costs, n_classes=n_classes, name=name)


def zero_one_costs(n_classes: int) -> np.ndarray:
    """The 0-1 loss: cost 1 for choosing any class but the true one, 0 otherwise.

    Examples
    --------
    >>> from probwrap.decision import zero_one_costs
    >>> zero_one_costs(3)
    array([[0., 1., 1.],
           [1., 0., 1.],
           [1., 1., 0.]])
    """
    if int(n_classes) < 2:
        raise ValueError(f"`n_classes` must be at least 2; got {plain(n_classes)!r}.")
    return 1.0 - np.eye(int(n_classes))


def add_reject_action(costs: Any, reject_cost: Any) -> np.ndarray:
    """Append a reject / refer action (a new last column) to a cost matrix.

    Parameters
    ----------
    costs : mapping or array-like of shape (n_classes, n_actions)
        Cost specification without the reject action.
    reject_cost : float or array-like of shape (n_classes,)
        Cost of referring a row whatever its class, or one cost per true class.

    Returns
    -------
    ndarray of shape (n_classes, n_actions + 1)

    Notes
    -----
    With the 0-1 loss and one reject cost ``d`` in (0, 1), the Bayes rule on these costs is Chow's
    (1970) rule: refer a row exactly when its largest class probability is below ``1 - d``.

    Examples
    --------
    >>> from probwrap.decision import add_reject_action, zero_one_costs
    >>> add_reject_action(zero_one_costs(2), 0.2)
    array([[0. , 1. , 0.2],
           [1. , 0. , 0.2]])
    """
    matrix = check_cost_matrix(costs_by_position(costs))
    try:
        reject = np.array(reject_cost, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`reject_cost` must be a number or one number per class ({exc}).") from exc
    if reject.ndim == 0:
        reject = np.full(matrix.shape[0], float(reject))
    if reject.shape != (matrix.shape[0],):
        raise ValueError(
            f"`reject_cost` must be a number or have shape ({matrix.shape[0]},); got shape "
            f"{reject.shape}."
        )
    if not np.all(np.isfinite(reject)):
        raise ValueError("`reject_cost` must be finite.")
    return np.column_stack([matrix, reject])


def plugin_cutoff(costs: Any) -> float:
    """Probability cutoff of the Bayes rule for binary costs (Elkan 2001).

    Taking the positive action is cheaper in expectation exactly when ``p > cutoff`` with

        cutoff = (c_fp - c_tn) / ((c_fp - c_tn) + (c_fn - c_tp)).

    Parameters
    ----------
    costs : mapping or array-like of shape (2, 2)
        Binary cost specification. Both ``c_fp > c_tn`` and ``c_fn > c_tp`` must hold (each error
        costs more than the corresponding correct decision); otherwise one action is never worse
        than the other and no cutoff separates them.

    Returns
    -------
    float in (0, 1)

    Examples
    --------
    >>> from probwrap.decision import plugin_cutoff
    >>> round(plugin_cutoff({"fp": 2.0, "fn": 35.0}), 4)
    0.0541
    """
    matrix = check_cost_matrix(costs_by_position(costs, 2), n_classes=2, n_actions=2)
    with np.errstate(over="ignore"):
        d_neg = matrix[0, 1] - matrix[0, 0]  # c_fp - c_tn
        d_pos = matrix[1, 0] - matrix[1, 1]  # c_fn - c_tp
        total = d_neg + d_pos
    if not (d_neg > 0 and d_pos > 0):
        raise ValueError(
            "`costs` must make each error dearer than the matching correct decision "
            f"(c_fp > c_tn and c_fn > c_tp); got c_fp - c_tn = {d_neg:g} and c_fn - c_tp = "
            f"{d_pos:g}, so one action is never worse and no cutoff separates them."
        )
    if not np.isfinite(total):
        # costs near the largest float (1e308 each made the sum inf and the cutoff 0, not
        # 0.5): the same ratio on the costs divided by a power of two near the largest (exact)
        scaled = matrix / power_of_two_unit(matrix)
        d_neg = scaled[0, 1] - scaled[0, 0]
        total = d_neg + (scaled[1, 0] - scaled[1, 1])
    return float(d_neg / total)
