"""Realised cost of actions taken, and a scorer for model selection by cost."""

from __future__ import annotations

from typing import Any

import numpy as np
from sklearn.metrics import make_scorer

from .._validation import (
    check_labels,
    check_same_length,
    check_sample_weight,
    cost_frame_rows,
    costs_in_class_order,
    power_of_two_unit,
)
from ._costs import check_cost_matrix, check_row_costs

__all__ = ["realised_cost", "make_cost_scorer"]


def _action_index(y_pred: np.ndarray, actions: np.ndarray) -> np.ndarray:
    index, _ = check_labels(y_pred, name="y_pred", classes=actions, min_classes=1)
    return index


def realised_cost(
    y_true: Any,
    y_pred: Any,
    *,
    costs: Any,
    classes: Any = None,
    actions: Any = None,
    row_costs: Any = None,
    sample_weight: Any = None,
) -> float:
    """Mean cost per row of the actions taken, ``sum_i w_i C_i[y_i, a_i] / sum_i w_i``.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        True class labels.
    y_pred : array-like of shape (n,)
        Actions taken (labels from ``actions``; the class labels when actions are classes).
    costs : mapping or array-like of shape (n_classes, n_actions)
        Cost matrix (rows: classes in ``classes`` order, columns: actions) or the binary
        shorthand. Ignored where ``row_costs`` is given, except for its shape.
    classes : array-like of shape (n_classes,), default=None
        Class labels in the order of the rows of ``costs``. Default: the sorted distinct labels of
        ``y_true``, which must then number as many as the rows of ``costs`` -- pass ``classes``
        explicitly when a fold may miss a class. A pandas DataFrame of costs is read by its
        labels: its rows put in ``classes`` order (default: its row labels are the classes), its
        columns in ``actions`` order.
    actions : array-like of shape (n_actions,), default=None
        Action labels in the order of the columns. Default: ``classes`` (square matrices only).
    row_costs : array-like of shape (n, n_classes, n_actions), default=None
        One cost matrix per row (e.g. amounts at stake); overrides ``costs``.
    sample_weight : array-like of shape (n,), default=None
        Row weights.

    Returns
    -------
    float

    Examples
    --------
    >>> from probwrap.decision import realised_cost
    >>> realised_cost([0, 1, 1, 0], [0, 0, 1, 1], costs={"fp": 2.0, "fn": 35.0})
    9.25
    """
    # a DataFrame is read by its labels: rows in `classes` order (default: its row labels,
    # which then are the classes), columns in `actions` order (default: the classes)
    if classes is None and cost_frame_rows(costs) is not None:
        classes = cost_frame_rows(costs)
    if classes is not None:
        costs = costs_in_class_order(costs, classes, actions)
    matrix = check_cost_matrix(costs)
    y_true_arr = np.asarray(y_true)
    y_pred_arr = np.asarray(y_pred)
    n = check_same_length(("y_true", y_true_arr), ("y_pred", y_pred_arr))
    if classes is None:
        classes_arr = np.unique(y_true_arr)
    else:
        classes_arr = np.asarray(classes)
    if classes_arr.shape[0] != matrix.shape[0]:
        raise ValueError(
            f"`costs` has {matrix.shape[0]} rows but there are {classes_arr.shape[0]} classes "
            f"({classes_arr.tolist()[:5]}); pass `classes` in the order of the rows."
        )
    y_index, _ = check_labels(y_true_arr, name="y_true", classes=classes_arr, min_classes=1)
    if actions is None:
        if matrix.shape[1] != matrix.shape[0]:
            raise ValueError(
                f"`actions` must name the {matrix.shape[1]} columns of `costs` (it is not square)."
            )
        actions_arr = classes_arr
    else:
        actions_arr = np.asarray(actions)
        if actions_arr.ndim != 1 or actions_arr.shape[0] != matrix.shape[1]:
            raise ValueError(
                f"`actions` must name each of the {matrix.shape[1]} columns of `costs`; got "
                f"shape {actions_arr.shape}."
            )
    a_index = _action_index(y_pred_arr, actions_arr)
    w = check_sample_weight(sample_weight, n)
    if row_costs is not None:
        per_row = check_row_costs(
            row_costs, n, n_classes=matrix.shape[0], n_actions=matrix.shape[1]
        )
        values = per_row[np.arange(n), y_index, a_index]
    else:
        values = matrix[y_index, a_index]
    # Costs and weights are divided by powers of two near their largest entries (exact), so
    # that the weighted sum cannot overflow however large they are (costs up to ~1.8e308); for
    # ordinary inputs the result is bit-identical to the unscaled formula.
    cost_unit, weight_unit = power_of_two_unit(values), power_of_two_unit(w)
    w = w / weight_unit
    return cost_unit * float(np.dot(w, values / cost_unit) / w.sum())


def make_cost_scorer(costs: Any, *, classes: Any = None, actions: Any = None) -> Any:
    """Scorer for GridSearchCV / cross_validate: minus the mean realised cost.

    scikit-learn maximises scores, so the scorer returns ``-realised_cost``. Per-row costs reach
    it through metadata routing: ``scorer.set_score_request(row_costs=True)`` and pass
    ``row_costs=`` to the search's ``fit`` (with ``sklearn.set_config(enable_metadata_routing=
    True)``); scikit-learn slices them to each validation fold.

    Parameters
    ----------
    costs : mapping or array-like of shape (n_classes, n_actions)
        Cost specification (see :func:`realised_cost`).
    classes : array-like of shape (n_classes,), default=None
        Class labels in the order of the rows of ``costs``; recommended. A DataFrame of costs
        is read by its labels (default classes: its row labels), as in :func:`realised_cost`.
    actions : array-like of shape (n_actions,), default=None
        Action labels in the order of the columns (default: ``classes``).

    Returns
    -------
    scorer
        A scikit-learn scorer ``scorer(estimator, X, y)``; it calls ``estimator.predict``.

    Examples
    --------
    >>> from sklearn.datasets import make_classification
    >>> from sklearn.linear_model import LogisticRegression
    >>> from sklearn.model_selection import cross_val_score
    >>> from probwrap.decision import make_cost_scorer
    >>> X, y = make_classification(n_samples=200, random_state=0)
    >>> scorer = make_cost_scorer({"fp": 2.0, "fn": 35.0}, classes=[0, 1])
    >>> scores = cross_val_score(LogisticRegression(), X, y, cv=3, scoring=scorer)
    >>> bool((scores <= 0).all())
    True
    """
    if classes is None and cost_frame_rows(costs) is not None:
        classes = cost_frame_rows(costs)  # a DataFrame's row labels name its classes
    if classes is not None:
        costs = costs_in_class_order(costs, classes, actions)
    matrix = check_cost_matrix(costs)
    classes_list = None if classes is None else np.asarray(classes)
    if classes_list is not None and classes_list.shape[0] != matrix.shape[0]:
        raise ValueError(
            f"`classes` has {classes_list.shape[0]} labels but `costs` has {matrix.shape[0]} rows."
        )
    return make_scorer(
        realised_cost,
        greater_is_better=False,
        costs=matrix,
        classes=classes_list,
        actions=None if actions is None else np.asarray(actions),
    )
