"""The two labels of a binary report: which is positive, and their display names."""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import (
    NAMED_POSITIVE_PAIRS,
    costs_by_labels,
    costs_by_position,
    label_column,
    plain,
)
from ..plot._common import binary_labels

__all__ = ["binary_truth", "binary_class_names", "report_costs"]


def _is_zero_one(labels: Any) -> bool:
    values = [v.item() if hasattr(v, "item") else v for v in labels]
    return all(isinstance(v, (bool, int, float)) and v in (0, 1) for v in values)


def binary_truth(y_true: Any, class_names: Any) -> tuple[np.ndarray, Any]:
    """0/1 labels and the two original labels ``[negative, positive]``.

    Labels 0/1 (or booleans) have positive class 1. Any other pair must be named, in the order
    ``(negative, positive)``, by ``class_names``: which class is positive is never guessed from
    the sort order.
    """
    arr = label_column(y_true, "y_true")
    found = np.unique(arr)
    if found.shape[0] > 2 or _is_zero_one(found):
        return binary_labels(arr, name="y_true"), found
    shown = [str(v.item() if hasattr(v, "item") else v) for v in found]
    if class_names is not None and len(class_names) == 2 and set(shown) <= {
            str(c) for c in class_names}:
        order = [found[shown.index(str(c))] if str(c) in shown else None for c in class_names]
        return (arr == order[1]).astype(float), [str(c) for c in class_names]
    pair = " and ".join(repr(v) for v in shown)
    if class_names is not None:
        raise ValueError(f"`class_names` {[str(c) for c in class_names]} must name the two labels "
                         f"of `y_true`, {pair}, in the order (negative, positive).")
    example = tuple(reversed(shown)) if len(shown) == 2 else ("negative", "positive")
    if tuple(v.strip().lower() for v in shown) in NAMED_POSITIVE_PAIRS:
        example = tuple(shown)  # no/yes, false/true: the example is the plain reading
    raise ValueError(
        f"`y_true` holds the labels {pair}, not 0/1; say which is the positive class (the class "
        f"`y_prob` is the probability of) with class_names=(negative, positive), e.g. "
        f"class_names={plain(example)!r} if `y_prob` is the probability of {example[1]!r}."
    )


def binary_class_names(class_names: Any, labels: Any) -> tuple[str, str]:
    """Display names ``(negative, positive)``: ``class_names``, else the labels unless 0/1."""
    if class_names is not None:
        names = [str(c) for c in class_names]
        if len(names) != 2:
            raise ValueError(f"`class_names` must name the 2 classes (negative, positive); got "
                             f"{len(names)}: {names}.")
        return names[0], names[1]
    if labels is not None and len(labels) == 2 and not _is_zero_one(labels):
        return tuple(str(v.item() if hasattr(v, "item") else v) for v in labels)
    return "negative", "positive"


def report_costs(costs: Any, classes: Any, class_names: Any = None,
                 action_names: Any = None) -> Any:
    """The report's ``costs`` with a pandas DataFrame read by its labels.

    Rows labelled with the classes (their labels, or the ``class_names`` shown for them) are
    put in class order; columns labelled with the ``action_names`` in their order, columns
    labelled with the classes in class order, other column labels read by position. A
    DataFrame used to be read by position: breast cancer costs with rows (malignant, benign)
    were read the other way round. Anything else is returned unchanged.
    """
    if type(costs).__name__ != "DataFrame" or not hasattr(costs, "index"):
        return costs
    if classes is None:
        return costs_by_position(costs, name="costs")
    keys = [plain(c) for c in np.asarray(classes, dtype=object).tolist()]
    rows = [plain(v) for v in costs.index.tolist()]
    shown = [str(r) for r in rows]
    if (class_names is not None and len(class_names) == len(keys)
            and sorted(map(repr, rows)) != sorted(map(repr, keys))
            and sorted(shown) == sorted(str(c) for c in class_names)):
        keys = [rows[shown.index(str(c))] for c in class_names]  # rows named as shown
    actions = None
    cols = [plain(v) for v in costs.columns.tolist()]
    if action_names is not None and sorted(str(c) for c in cols) == sorted(
            str(a) for a in action_names) and len(set(map(str, cols))) == len(cols):
        actions = [cols[[str(c) for c in cols].index(str(a))] for a in action_names]
    return costs_by_labels(costs, keys, actions, name="costs")
