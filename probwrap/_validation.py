"""Input checks shared by every layer.

Every function here raises a ``ValueError`` whose message names the offending argument and says
what was expected. Nothing is modified in place: each function returns a new array (or a
read-only view that callers must not write to).
"""

from __future__ import annotations

import importlib
import math
import numbers
import re
import sys
import warnings
from typing import Any

import numpy as np

__all__ = [
    "loaded_classes",
    "check_scores",
    "check_proba",
    "check_labels",
    "check_binary_labels",
    "check_sample_weight",
    "check_same_length",
    "label_column",
    "class_index_labels",
    "costs_in_class_order",
    "costs_by_position",
    "cost_frame_rows",
    "costs_by_labels",
    "power_of_two_unit",
    "check_label_types",
    "check_target_labels",
    "plain",
    "row_sum",
    "row_max",
    "shared_factor",
    "COUNT_TABLE_MAX_CASES",
    "whole_counts",
    "counted_rows",
    "case_rows",
]


# NumPy reduces a short last axis row by row (a loop of k per row): for (1000, 2) probabilities
# ``a.sum(axis=1)`` costs about ten times adding the two columns. Below 8 columns NumPy adds a
# row's entries one after another, left to right, so adding whole columns in that order gives
# the same sums bit for bit (checked by a consistency test); from 8 columns on NumPy's unrolled
# sum groups them differently and the plain reduction is used.
_COLUMN_LOOP_MAX = 7


def row_sum(a: np.ndarray, keepdims: bool = False) -> np.ndarray:
    """``a.sum(axis=1, keepdims=keepdims)`` of a 2-d float array, bit for bit, faster for few columns.

    Examples
    --------
    >>> import numpy as np
    >>> row_sum(np.array([[0.25, 0.75], [0.5, 0.25]]))
    array([1.  , 0.75])
    """
    k = a.shape[1]
    if not 2 <= k <= _COLUMN_LOOP_MAX or a.dtype.kind != "f":
        return a.sum(axis=1, keepdims=keepdims)
    out = a[:, 0] + a[:, 1]
    for j in range(2, k):
        out += a[:, j]
    return out[:, None] if keepdims else out


def row_max(a: np.ndarray, keepdims: bool = False) -> np.ndarray:
    """``a.max(axis=1, keepdims=keepdims)`` of a 2-d float array, faster for few columns.

    Examples
    --------
    >>> import numpy as np
    >>> row_max(np.array([[0.25, 0.75], [0.5, 0.25]]))
    array([0.75, 0.5 ])
    """
    k = a.shape[1]
    if not 2 <= k <= _COLUMN_LOOP_MAX or a.dtype.kind != "f":
        return a.max(axis=1, keepdims=keepdims)
    out = np.maximum(a[:, 0], a[:, 1])
    for j in range(2, k):
        np.maximum(out, a[:, j], out=out)
    return out[:, None] if keepdims else out


def _as_float_array(values: Any, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`{name}` must be numeric; could not convert it to floats ({exc}).") from exc
    return arr


def check_scores(scores: Any, *, name: str = "scores", ndim: int | None = 1) -> np.ndarray:
    """Return ``scores`` as a finite float array of the requested dimension.

    ``ndim=1`` expects shape (n,), ``ndim=2`` expects shape (n, k) with k >= 2 and ``None``
    accepts either.
    """
    arr = _as_float_array(scores, name)
    if ndim is None:
        if arr.ndim not in (1, 2):
            raise ValueError(f"`{name}` must be 1-d (n,) or 2-d (n, k); got shape {arr.shape}.")
    elif ndim == 1:
        if arr.ndim == 2 and arr.shape[1] == 1:
            arr = arr[:, 0]
        if arr.ndim != 1:
            raise ValueError(
                f"`{name}` must be 1-d of shape (n,) for a binary map; got shape {arr.shape}."
            )
    elif ndim == 2:
        if arr.ndim != 2 or arr.shape[1] < 2:
            raise ValueError(f"`{name}` must be 2-d of shape (n, k) with k >= 2; got shape {arr.shape}.")
    if arr.shape[0] == 0:
        raise ValueError(f"`{name}` is empty; at least one row is needed.")
    if not np.isfinite(arr).all():
        bad = ~np.isfinite(arr)
        where = np.argwhere(bad)[0]
        kind = "NaN" if np.isnan(arr[tuple(where)]) else "infinite"
        raise ValueError(
            f"`{name}` contains {int(bad.sum())} {kind} or non-finite value(s) "
            f"(first at index {tuple(int(i) for i in where)}); scores must be finite."
        )
    return arr


def check_proba(
    proba: Any, *, name: str = "y_prob", ndim: int | None = None, column_as_1d: bool = False
) -> np.ndarray:
    """Return ``proba`` as a float array with every entry in [0, 1].

    2-d input must have rows that sum to one (within 1e-6). With ``column_as_1d``, a single
    column (n, 1) — such as a one-column DataFrame — is read as the positive class's
    probabilities, shape (n,), as scikit-learn's metrics read it.
    """
    arr = _as_float_array(proba, name)
    if column_as_1d and arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if ndim is not None and arr.ndim != ndim:
        raise ValueError(f"`{name}` must be {ndim}-d; got shape {arr.shape}.")
    if arr.ndim not in (1, 2):
        raise ValueError(f"`{name}` must be 1-d (n,) or 2-d (n, k); got shape {arr.shape}.")
    if arr.shape[0] == 0:
        raise ValueError(f"`{name}` is empty; at least one row is needed.")
    # one pass each for the smallest and largest entry: NaN makes both NaN and fails the test,
    # infinite entries fail it too; only then the finite check runs, for its message
    lo, hi = arr.min(), arr.max()
    if not (lo >= 0.0 and hi <= 1.0):
        if not np.all(np.isfinite(arr)):
            raise ValueError(
                f"`{name}` contains NaN or infinite values; probabilities must be finite."
            )
        raise ValueError(
            f"`{name}` must contain probabilities in [0, 1]; got values from {lo:.6g} "
            f"to {hi:.6g}."
        )
    if arr.ndim == 2:
        sums = row_sum(arr)
        off = sums - 1.0
        # max |off| > 1e-6, without the absolute values (negation is exact)
        if off.max() > 1e-6 or off.min() < -1e-6:
            i = int(np.argmax(np.abs(off)))
            # half precision keeps about three significant digits: its rows miss one by up to
            # ~1e-3 however they were made
            hint = ""
            if getattr(proba, "dtype", None) == np.float16:
                hint = (f" `{name}` is float16, whose rows sum to one only within about 1e-3; "
                        "pass float64 probabilities (or divide each row by its sum).")
            raise ValueError(
                f"Each row of `{name}` must sum to one; row {i} sums to {sums[i]:.6g}.{hint}"
            )
    return arr


def check_same_length(*pairs: tuple[str, Any]) -> int:
    """Check that all named arrays have the same number of rows and return it."""
    lengths = [(name, len(value)) for name, value in pairs if value is not None]
    n = lengths[0][1]
    for name, length in lengths[1:]:
        if length != n:
            raise ValueError(
                f"`{name}` has {length} rows but `{lengths[0][0]}` has {n}; lengths must match."
            )
    return n


def plain(value: Any) -> Any:
    """``value`` with NumPy scalars turned into Python ones (recursively in tuples and lists),
    so that messages show ``nan`` or ``0.5`` rather than ``np.float64(nan)``."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, (tuple, list)):
        return type(value)(plain(v) for v in value)
    return value


def cutoff_text(value: float, spec: str = ".6g") -> str:
    """``value`` formatted with ``spec``, except that a number strictly between 0 and 1 whose
    text would read as exactly 0 or 1 keeps two significant digits of its distance from that
    end.

    A cutoff of 0.9999999981 on probabilities printed as ``1`` (or ``1.0000``) reads as
    "act when the probability exceeds 1", a rule that acts on no row; the rows above it are
    there.

    Examples
    --------
    >>> from probwrap._validation import cutoff_text
    >>> cutoff_text(0.9999999980881329), cutoff_text(2.04e-5, ".4f"), cutoff_text(0.31, ".4f")
    ('0.9999999981', '0.000020', '0.3100')
    """
    v = float(value)
    text = format(v, spec)
    if 0.0 < v < 1.0 and float(text) in (0.0, 1.0):
        gap = min(v, 1.0 - v)
        # decimals that keep two significant digits of the distance to the end (at most 17)
        decimals = int(np.ceil(-np.log10(gap))) + 1
        # (a number nearer 0 than 17 decimals show: in powers of ten)
        text = f"{v:.{decimals}f}" if decimals <= 17 else f"{v:.2g}"
    return text


def cutoff_texts(values: Any, spec: str = ".6g") -> list[str]:
    """Texts of cutoffs shown side by side (a same-cost range and the cutoff in it):
    :func:`cutoff_text` of each with ``spec`` (``".<k>g"``), given as many more significant
    digits (up to 17, which tell every two doubles apart) as make different values read
    differently and equal ones alike.

    A range from 0.99999999808 to 0.99999999812 printed with two digits of the distance to 1
    read ``[0.9999999981, 0.9999999981)``, a range with no cutoff in it; at ``.6g``, 0.99999932
    and 0.99999948 both read ``0.999999``.

    Examples
    --------
    >>> from probwrap._validation import cutoff_texts
    >>> cutoff_texts([0.99999999808, 0.9999999981, 0.99999999812])
    ['0.99999999808', '0.9999999981', '0.99999999812']
    >>> cutoff_texts([0.25, 0.25, 0.5])
    ['0.25', '0.25', '0.5']
    """
    vals = [float(v) for v in values]
    found = re.fullmatch(r"\.(\d+)g", spec)
    if found is None:
        raise ValueError(f"`spec` must be '.<k>g'; got {spec!r}.")
    for k in range(int(found.group(1)), 18):
        texts = [cutoff_text(v, f".{k}g") for v in vals]
        if all((texts[i] == texts[j]) == (vals[i] == vals[j])
               for i in range(len(vals)) for j in range(i)):
            return texts
    return texts


def _type_kind(t: type) -> str:
    if issubclass(t, (numbers.Number, np.bool_)):
        return "number"
    if issubclass(t, str):
        return "string"
    return t.__name__


def check_label_types(arr: np.ndarray, name: str) -> None:
    """Labels must be all numbers (booleans count) or all strings, so that they can be sorted.

    Only object arrays can mix kinds; a mix makes NumPy's sorting raise a bare ``TypeError``.
    """
    if arr.dtype.kind != "O":
        return
    # by type, not by value: a handful of types however many rows
    kinds = {_type_kind(t) for t in set(map(type, arr.ravel().tolist()))}
    if len(kinds) > 1:
        raise ValueError(
            f"`{name}` mixes label types ({', '.join(sorted(kinds))}); labels must be all "
            "numbers or all strings."
        )
    if kinds - {"number", "string"}:
        raise ValueError(
            f"`{name}` holds labels of type {kinds.pop()}; labels must be numbers or strings."
        )


def _is_missing(value: Any) -> bool:
    return value is None or (isinstance(value, (float, np.floating)) and value != value) or (
        type(value).__name__ in ("NAType", "NaTType")
    )


def check_target_labels(y: np.ndarray, name: str = "y", *, object_numbers: bool = False) -> None:
    """Refuse labels that scikit-learn would reject with an unclear message.

    Checked before scikit-learn's own target checks, so that the message names ``name``, the
    first bad row and what to do: a missing label (NaN, ``None``, ``pd.NA``), labels that mix
    numbers and strings (NumPy's sort fails with a bare ``TypeError``), and numbers or booleans
    stored in an object array (scikit-learn calls their type "unknown"; allowed with
    ``object_numbers=True`` where nothing is handed to scikit-learn).

    Examples
    --------
    >>> import numpy as np
    >>> check_target_labels(np.array(["a", "b"], dtype=object))
    >>> try:
    ...     check_target_labels(np.array([0, 1], dtype=object))
    ... except ValueError as exc:
    ...     print(str(exc)[:56])
    Unknown label type: `y` holds numbers in an object array
    """
    arr = np.asarray(y)
    if arr.dtype.kind == "f":
        bad = np.isnan(arr)
        if bad.any():
            raise ValueError(
                f"`{name}` contains {int(bad.sum())} NaN label(s) (first at row "
                f"{int(np.flatnonzero(bad)[0])}); labels must be known for every row."
            )
        return
    if arr.dtype.kind != "O":
        return
    values = arr.ravel().tolist()
    # one pass over the types (a handful), then only the rows of a suspect type
    types = set(map(type, values))
    if any(t is type(None) or t.__name__ in ("NAType", "NaTType") or issubclass(t, float)
           for t in types):
        missing = [i for i, v in enumerate(values) if _is_missing(v)]
        if missing:
            raise ValueError(
                f"`{name}` contains {len(missing)} missing label(s) (None or NaN; first at row "
                f"{missing[0]}); labels must be known for every row."
            )
    check_label_types(arr, name)
    if not object_numbers and values and _type_kind(type(values[0])) == "number":
        raise ValueError(
            f"Unknown label type: `{name}` holds numbers in an object array (dtype=object), "
            "which scikit-learn cannot read as class labels; pass them with a numeric dtype, "
            f"e.g. `{name}.astype(int)` or `{name}.astype(bool)`."
        )


def label_column(y: Any, name: str = "y") -> np.ndarray:
    """``y`` as a 1-d array of labels, a single column (n, 1) read as its values (n,).

    Every wrapper and metric reads a one-column label array (a one-column DataFrame, or
    ``y.reshape(-1, 1)``) as its column; this gives the displays and the report the same
    reading (before, ``GroupReliabilityDisplay`` stopped with a bare ``IndexError`` and the
    cost and decision curves and the report refused it).

    Examples
    --------
    >>> import numpy as np
    >>> label_column(np.array([[0], [1], [1]])).tolist()
    [0, 1, 1]
    """
    arr = np.asarray(y)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(
            f"`{name}` must be 1-d of shape (n,) (or one column, (n, 1)); got shape {arr.shape}."
        )
    return arr


def class_index_labels(y: Any, n_classes: int, *, name: str = "y") -> np.ndarray:
    """Labels that are column indices ``0 .. n_classes - 1``, as intp.

    Integers, booleans (False/True are 0/1) and whole-number floats (0., 1., 2.) are read as
    indices, and a single column (n, 1) as its values, as the binary cutoff search reads 0/1
    labels; text, fractions or indices out of range are refused, naming what was found.

    Examples
    --------
    >>> import numpy as np
    >>> class_index_labels(np.array([True, False]), 2).tolist()
    [1, 0]
    >>> class_index_labels(np.array([[2.0], [0.0]]), 3).tolist()
    [2, 0]
    """
    arr = label_column(y, name)
    if arr.dtype.kind == "b":
        arr = arr.astype(np.intp)
    elif arr.dtype.kind == "f":
        if not np.all(np.isfinite(arr)) or np.any(arr != np.round(arr)):
            bad = arr[~np.isfinite(arr) | (arr != np.round(arr))][:3].tolist()
            raise ValueError(
                f"`{name}` must hold class indices 0 .. {n_classes - 1} (whole numbers); got "
                f"{bad}."
            )
        arr = arr.astype(np.intp)
    elif arr.dtype.kind not in "iu":
        seen = sorted({repr(plain(v)) for v in arr[:1000].tolist()})[:5]
        raise ValueError(
            f"`{name}` must hold class indices 0 .. {n_classes - 1} (the columns of the "
            f"probabilities); got labels {', '.join(seen)}. Code them as the column each "
            "class's probability is in."
        )
    idx, _ = check_labels(arr, name=name, classes=np.arange(n_classes), min_classes=1)
    return idx


def _frame_labels(axis: Any) -> list | None:
    """The labels of a pandas axis, or None for 0..n-1 in order (positions, not labels: the
    default index, or one rebuilt as integers)."""
    labels = [plain(v) for v in axis.tolist()]
    if all(type(v) is int and v == i for i, v in enumerate(labels)):
        return None
    return labels


def costs_in_class_order(costs: Any, classes: Any, actions: Any = None,
                         *, name: str = "costs") -> Any:
    """A cost matrix given as a pandas DataFrame, its rows put in ``classes`` order (and its
    columns in the order of ``actions``, or of the classes when no actions are named) when
    they are labelled; anything else unchanged.

    The wrappers read a matrix's rows in ``classes_`` order. A DataFrame whose rows are
    labelled with the classes in another order was read by position, silently: on
    scikit-learn's wine data with labels ``barolo``, ``grignolino``, ``barbera`` a frame with
    rows and columns in that order gave other decisions than the same costs as an array in
    ``classes_`` order. Rows (columns) with the default labels 0..n-1 keep being read by
    position; labels that are not the classes (the actions) are refused, naming both.

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame([[0, 1], [5, 0]], index=["spam", "ham"], columns=["spam", "ham"])
    >>> costs_in_class_order(frame, ["ham", "spam"]).tolist()
    [[0.0, 5.0], [1.0, 0.0]]
    """
    if type(costs).__name__ != "DataFrame" or not hasattr(costs, "index"):
        return costs
    class_list = [plain(c) for c in np.asarray(classes).tolist()]
    rows = _frame_labels(costs.index)
    cols = _frame_labels(costs.columns)
    values = np.asarray(costs.to_numpy(dtype=float, na_value=np.nan))
    if rows is not None:
        if sorted(map(repr, rows)) != sorted(map(repr, class_list)):
            raise ValueError(
                f"`{name}` is a DataFrame whose rows are labelled {rows[:6]}, not the classes "
                f"{class_list[:6]}; label its rows with the classes (in any order), or give "
                "the rows in classes_ order with the default index 0..n-1."
            )
        values = values[[rows.index(c) for c in class_list]]
    if cols is not None:
        wanted = class_list if actions is None else [plain(a) for a in np.asarray(
            actions, dtype=object).tolist()]
        if sorted(map(repr, cols)) == sorted(map(repr, wanted)):
            values = values[:, [cols.index(a) for a in wanted]]
        elif actions is None and len(cols) == len(class_list):
            raise ValueError(
                f"`{name}` is a DataFrame whose columns (the actions) are labelled {cols[:6]}, "
                f"not the classes {class_list[:6]}, and `actions` is not given, so the class "
                f"labels would name the actions; pass actions={cols!r}, or label the columns "
                "with the classes."
            )
        elif actions is not None:
            raise ValueError(
                f"`{name}` is a DataFrame whose columns are labelled {cols[:6]}, not the "
                f"`actions` {wanted[:6]}; label them with the actions (in any order)."
            )
    return values


def costs_by_labels(costs: Any, classes: Any, actions: Any = None, *,
                    name: str = "costs") -> Any:
    """:func:`costs_in_class_order` for functions without an ``actions`` argument to name
    the columns: columns labelled with the classes are put in class order, columns with other
    labels (action names) are read by position, in their order.

    Used by the report, the cost curve display and the group metrics, which know the classes
    (from the labels, the model or ``labels=``) but name actions only for display.

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame([[5, 0], [0, 1]], index=["spam", "ham"], columns=["keep", "drop"])
    >>> costs_by_labels(frame, ["ham", "spam"]).tolist()
    [[0.0, 1.0], [5.0, 0.0]]
    """
    if type(costs).__name__ != "DataFrame" or not hasattr(costs, "index"):
        return costs
    cols = _frame_labels(costs.columns)
    class_list = [plain(c) for c in np.asarray(classes, dtype=object).tolist()]
    if actions is None and cols is not None and sorted(map(repr, cols)) != sorted(
            map(repr, class_list)):
        actions = cols
    return costs_in_class_order(costs, class_list, actions, name=name)


def cost_frame_rows(costs: Any) -> list | None:
    """The row labels of a cost DataFrame, or None (not a DataFrame, or rows 0..n-1 in order).

    Examples
    --------
    >>> import pandas as pd
    >>> cost_frame_rows(pd.DataFrame([[0, 1], [5, 0]], index=["spam", "ham"]))
    ['spam', 'ham']
    """
    if type(costs).__name__ != "DataFrame" or not hasattr(costs, "index"):
        return None
    return _frame_labels(costs.index)


def costs_by_position(costs: Any, n_classes: int | None = None, *, name: str = "costs") -> Any:
    """A cost DataFrame for a function that knows the classes only as positions 0..k-1 (the
    columns of the probabilities, or 0/1 labels).

    Rows labelled 0..k-1 in another order are put in order (row ``i`` is class ``i``); rows
    with other labels (class names this function cannot place) are read by position with a
    ``UserWarning`` naming them, where they used to be read so without a word. Column labels
    name actions, which such functions take by position: they are left as they are. Anything
    that is not a DataFrame is returned unchanged.

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame([[5, 0], [0, 1]], index=[1, 0])
    >>> costs_by_position(frame).tolist()
    [[0.0, 1.0], [5.0, 0.0]]
    """
    if type(costs).__name__ != "DataFrame" or not hasattr(costs, "index"):
        return costs
    rows = _frame_labels(costs.index)
    if rows is None:
        return costs
    k = len(rows) if n_classes is None else n_classes
    if sorted(map(repr, rows)) == sorted(map(repr, range(k))):
        values = np.asarray(costs.to_numpy(dtype=float, na_value=np.nan))
        return values[[rows.index(i) for i in range(k)]]
    warnings.warn(
        f"`{name}` is a DataFrame whose rows are labelled {rows[:6]}, but this function knows "
        "the classes only by position (the columns of the probabilities, or 0/1 labels), so "
        "its rows are read by position: row i is class i. Put the rows in that order, or "
        "label them 0..k-1.",
        UserWarning, stacklevel=3,
    )
    return costs


def check_labels(y: Any, *, name: str = "y", classes: Any = None, min_classes: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """Encode labels as integer indices.

    Returns ``(y_index, classes)``. When ``classes`` is given, every label must be one of them
    (otherwise the unknown labels are named in the error). When it is not, the sorted distinct
    labels become the classes and there must be at least ``min_classes`` of them.
    """
    return _label_codes(y, name, classes, min_classes, np.intp)


def _label_codes(
    y: Any, name: str, classes: Any, min_classes: int, dtype: Any
) -> tuple[np.ndarray, np.ndarray]:
    """:func:`check_labels` with the indices returned as ``dtype`` (written once)."""
    arr = np.asarray(y)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(f"`{name}` must be 1-d of shape (n,); got shape {arr.shape}.")
    if arr.shape[0] == 0:
        raise ValueError(f"`{name}` is empty; at least one row is needed.")
    if arr.dtype.kind == "f" and np.isnan(arr).any():
        raise ValueError(f"`{name}` contains NaN; labels must be known for every row.")
    check_label_types(arr, name)
    if classes is None:
        if arr.dtype.kind in "biuf":
            # Fast path without a sort for numeric labels with at most two distinct values.
            lo, hi = arr.min(), arr.max()
            is_hi = arr == hi
            # integers between lo and lo + 1 are lo or hi: no pass needed to check that
            if (arr.dtype.kind in "biu" and int(hi) - int(lo) <= 1) or np.all(is_hi | (arr == lo)):
                classes_arr = np.asarray([lo] if lo == hi else [lo, hi], dtype=arr.dtype)
                if classes_arr.shape[0] < min_classes:
                    raise ValueError(
                        f"`{name}` contains only 1 class ({classes_arr.tolist()}); at least "
                        f"{min_classes} classes are needed."
                    )
                return is_hi.astype(dtype), classes_arr
        classes_arr = np.unique(arr)
        if classes_arr.shape[0] < min_classes:
            raise ValueError(
                f"`{name}` contains only {classes_arr.shape[0]} class "
                f"({classes_arr.tolist()}); at least {min_classes} classes are needed."
            )
        return np.searchsorted(classes_arr, arr).astype(dtype, copy=False), classes_arr
    classes_arr = np.asarray(classes)
    order = np.argsort(classes_arr, kind="stable")
    sorted_classes = classes_arr[order]
    pos = np.searchsorted(sorted_classes, arr)
    pos_clipped = np.minimum(pos, len(sorted_classes) - 1)
    known = sorted_classes[pos_clipped] == arr
    if not np.all(known):
        unknown = np.unique(arr[~known])[:5].tolist()
        raise ValueError(
            f"`{name}` contains labels {unknown} that are not among the known classes "
            f"{classes_arr.tolist()}."
        )
    return order[pos_clipped].astype(dtype, copy=False), classes_arr


def check_binary_labels(y: Any, *, name: str = "y", classes: Any = None) -> tuple[np.ndarray, np.ndarray]:
    """Encode binary labels as 0/1 floats; the second (sorted) class is the positive one.

    Returns ``(y01, classes)``. Raises when there are more or fewer than two distinct labels.
    """
    idx, classes_arr = _label_codes(y, name, classes, 2, float)
    if classes is None and classes_arr.shape[0] > 2:
        raise ValueError(
            f"`{name}` has {classes_arr.shape[0]} distinct labels {classes_arr[:5].tolist()}; a "
            "binary map needs exactly two. Use a multiclass map or a calibration wrapper."
        )
    if classes_arr.shape[0] != 2:
        raise ValueError(f"`{name}` must have exactly two classes; got {classes_arr.tolist()}.")
    return idx, classes_arr


def loaded_classes(module: str, *names: str) -> tuple[type, ...]:
    """The classes ``names`` of the module ``module`` (scikit-learn's), or ``()`` while that
    module is not imported: no object can then be an instance of them (a class's module, and the
    packages above it, are imported before any instance exists), so ``isinstance(x, ())`` gives
    the same False without importing it. A fit of a model from none of these modules thus does
    not import ``sklearn.ensemble``, ``sklearn.calibration``, ``sklearn.compose``,
    ``sklearn.multiclass`` and ``sklearn.pipeline`` (77 modules, about 4 MB: the tuned
    ``CostPolicyWrapper`` fit's peak memory rose from 3.8x to 4.3x the scores at 1e6 rows;
    ``benchmarks/performance.py``, docs/performance.md).

    Examples
    --------
    >>> from probwrap._validation import loaded_classes
    >>> loaded_classes("a.module.never.imported", "Anything")
    ()
    >>> import numpy
    >>> loaded_classes("numpy", "ndarray") == (numpy.ndarray,)
    True
    """
    if module not in sys.modules:
        return ()
    loaded = importlib.import_module(module)
    # (a name not yet defined, in a module still being imported, has no instance either)
    found = (getattr(loaded, name, None) for name in names)
    return tuple(c for c in found if isinstance(c, type))


def check_sample_weight(sample_weight: Any, n: int, *, name: str = "sample_weight") -> np.ndarray:
    """Return weights as a float array of length ``n`` (ones when ``None``).

    Weights must be finite, non-negative and not all zero.
    """
    if sample_weight is None:
        return np.ones(n, dtype=float)
    if isinstance(sample_weight, numbers.Number):
        sw = np.full(n, float(sample_weight))
    else:
        sw = _as_float_array(sample_weight, name)
        if sw.ndim != 1:
            raise ValueError(f"`{name}` must be 1-d of shape (n,); got shape {sw.shape}.")
        if sw.shape[0] != n:
            raise ValueError(f"`{name}` has {sw.shape[0]} entries but the data have {n} rows.")
        sw = sw.copy()
    if not np.all(np.isfinite(sw)):
        raise ValueError(f"`{name}` contains NaN or infinite values.")
    if np.any(sw < 0):
        raise ValueError(f"`{name}` must be non-negative; got a minimum of {sw.min():.6g}.")
    if not np.any(sw > 0):
        raise ValueError(f"`{name}` is zero for every row; at least one weight must be positive.")
    return sw


def power_of_two_unit(values: Any) -> float:
    """A power of two ``u`` with ``max |values| / u`` in [1, 2) (1.0 for all-zero input).

    Dividing by ``u`` is exact (barring underflow of entries far below the largest), so a
    statistic that does not change when its inputs are scaled (weights in a weighted mean, a cost
    matrix in a least-cost rule) can be computed on ``values / u`` without overflowing sums and
    gives bit-identical results for ordinary inputs.
    """
    top = float(np.max(np.abs(values))) if np.size(values) else 0.0
    if top == 0.0 or not math.isfinite(top):
        return 1.0
    return math.ldexp(1.0, math.frexp(top)[1] - 1)


def shared_factor(w: np.ndarray) -> int | None:
    """The largest whole number dividing every positive weight, or None when some positive
    weight is not a whole number (or beyond 2**53, where doubles hold no fractions).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap._validation import shared_factor
    >>> shared_factor(np.array([3000.0, 1000.0, 0.0, 2000.0])), shared_factor(np.array([1.5, 2.0]))
    (1000, None)
    """
    positive = np.asarray(w, dtype=float)
    positive = positive[positive > 0]
    if not positive.size or not np.all(positive == np.round(positive)):
        return None
    if float(positive.max()) >= 2.0**53:
        return None
    return int(np.gcd.reduce(positive.astype(np.int64)))


#: Whole-number weights are read as counts of cases by the steps that count rows (``auto``'s
#: choice, the tuned cutoff's anchor, the exact cutoff range) while their total is at most this
#: many cases: the choice then scores the cases one by one, as it scores the rows repeated
#: (``np.repeat``). Above it (more cases than a choice needs: ``auto`` scores at most 20,000
#: rows) the weights keep the relative reading (Kish's size) there.
COUNT_TABLE_MAX_CASES = 1_000_000


def whole_counts(w: np.ndarray) -> np.ndarray | None:
    """``w`` as whole-number counts of cases (int64), or None when they are not a count table.

    A count table's weights are whole numbers, some of them above 1 (one row per distinct
    cell, weighted by how many cases it stands for), with no common factor above 1 and a total
    of at most :data:`COUNT_TABLE_MAX_CASES`. Weights that are all 0 or 1, any weight that is
    not a whole number (normalised, survey or importance weights), and whole numbers that all
    share a factor above 1 (equal weights of 1,000, or counts multiplied by a constant: more
    often a scaled weight than a count, and the factor must not move a choice; they draw the
    :class:`~probwrap.calibration.WeightScaleWarning` of :func:`warn_count_reading` where
    their scale moves a result) give None: those keep their reading (rows, or Kish's
    effective size).

    Examples
    --------
    >>> import numpy as np
    >>> whole_counts(np.array([3.0, 0.0, 2.0])).tolist(), whole_counts(np.array([1.5, 2.0]))
    ([3, 0, 2], None)
    >>> whole_counts(np.array([3000.0, 2000.0])) is None  # every weight a multiple of 1,000
    True
    """
    w = np.asarray(w, dtype=float)
    # (the largest weight first: weights of at most 1, unit weights above all, are decided
    # without shared_factor's row-long temporaries)
    if not w.size or not float(w.max()) > 1.0 or shared_factor(w) != 1:
        return None
    if np.any(w < 0) or float(w.sum()) > COUNT_TABLE_MAX_CASES:
        return None
    return np.round(w).astype(np.int64)


def counted_rows(w: np.ndarray) -> np.ndarray:
    """How many rows each row counts for where a step counts rows: its whole-number count in a
    count table (:func:`whole_counts`), otherwise 1 for a row of positive weight, 0 for none.

    Examples
    --------
    >>> import numpy as np
    >>> counted_rows(np.array([3.0, 0.0, 2.0])).tolist(), counted_rows(np.array([0.5, 0.0])).tolist()
    ([3, 0, 2], [1, 0])
    """
    counts = whole_counts(w)
    if counts is not None:
        return counts
    return (np.asarray(w, dtype=float) > 0).astype(np.int64)


def case_rows(w: np.ndarray) -> np.ndarray | None:
    """Index of every case of a count table (:func:`whole_counts`): each row repeated by its
    count, as ``np.repeat(np.arange(len(w)), w)``; None when ``w`` is not a count table.

    Examples
    --------
    >>> import numpy as np
    >>> case_rows(np.array([2.0, 0.0, 3.0])).tolist()
    [0, 0, 2, 2, 2]
    """
    counts = whole_counts(w)
    if counts is None:
        return None
    return np.repeat(np.arange(counts.shape[0]), counts)


class ImpliedPositiveClassWarning(UserWarning):
    """A binary setting that names no class was read for ``classes_[1]``, a text label.

    The binary cost shorthand (``{"fp": .., "fn": ..}``), a single ``cutoff`` and a single-number
    ``target_prior`` all refer to "the positive class", which scikit-learn's convention makes the
    second of the sorted ``classes_``. For 0/1, -1/1 or False/True labels that is the one meant;
    for text labels it is whichever sorts last (``'low'`` < ``'normal'``: ``'normal'`` is
    "positive"), which is often not the outcome the user had in mind. The warning names the label
    used and how to say it explicitly.
    """


#: Text label pairs whose second member is "positive" in plain reading: no warning for them.
NAMED_POSITIVE_PAIRS = frozenset({
    ("no", "yes"), ("n", "y"), ("false", "true"), ("f", "t"), ("0", "1"),
    ("negative", "positive"), ("neg", "pos"), ("-1", "1"),
})


def warn_implied_positive(classes: Any, what: str, explicit: str, *, stacklevel: int = 3) -> None:
    """Warn when ``what`` (a binary setting naming no class) acts on a text ``classes_[1]``.

    Parameters
    ----------
    classes : array-like of shape (2,)
        The estimator's ``classes_``.
    what : str
        The setting, as the message names it (e.g. ``"binary cost shorthand (tp/fp/fn/tn)"``).
    explicit : str
        How to name the class explicitly instead (one sentence fragment; ``{first}`` and
        ``{second}`` are replaced by the two labels' reprs).
    stacklevel : int, default=3
        Passed to :func:`warnings.warn`.

    Examples
    --------
    >>> import warnings
    >>> from probwrap._validation import warn_implied_positive
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warn_implied_positive(["low", "normal"], "single `target_prior`",
    ...                           "give a dict such as {{{first}: 0.2, {second}: 0.8}}")
    >>> "'normal'" in str(caught[0].message)
    True
    """
    labels = list(classes)
    if len(labels) != 2:
        return
    if any(isinstance(c, (bool, np.bool_, numbers.Number)) for c in labels):
        return
    first, second = (plain(c) for c in labels)
    if (str(first).strip().lower(), str(second).strip().lower()) in NAMED_POSITIVE_PAIRS:
        return
    how = explicit.format(first=repr(first), second=repr(second))
    warnings.warn(
        f"The {what} treats {second!r} as the positive class: the second of `classes_` "
        f"({first!r}, {second!r}), which scikit-learn sorts, not the outcome the labels name. "
        f"If {first!r} is the positive class, {how}. A setting that names the class itself "
        "does not warn.",
        ImpliedPositiveClassWarning,
        stacklevel=stacklevel,
    )
