"""Checks and predictions of one block of rows where it lives (a Dask block, a Spark chunk).

The distributed paths refuse what the in-memory path refuses, with the same messages: labels
(missing, mixing numbers and text, numbers in an object array, unknown to the model), weights
(NaN, infinite, negative, not one per row) and non-finite model output. A block may be empty
(an empty Dask partition): it predicts nothing, and a block may carry only zero weights (the
total is checked once all blocks are summed).
"""

from __future__ import annotations

import re
import warnings
from typing import Any

import numpy as np

from .._predictions import check_model_probabilities
from ._tally import check_block_weights

__all__ = [
    "block_label_index",
    "block_weights",
    "check_class_rows",
    "class_rows",
    "n_block_rows",
    "predict_block",
]


def _block_labels(yb: Any) -> np.ndarray:
    """One block's labels as a NumPy array. A pandas nullable column (``Int64``, ``boolean``,
    ``Float64``) becomes its NumPy dtype (before pandas 2.2 ``to_numpy`` gave an object array,
    which the label check refuses as numbers in an object array), and a categorical column its
    categories' type; with missing values a
    numeric one becomes floats with NaN, so the missing labels are named as in memory."""
    if hasattr(yb, "cat") and hasattr(yb.cat, "codes"):  # categorical: its categories' type
        import pandas as pd

        cats = _block_labels(pd.Series(yb.cat.categories))
        codes = np.asarray(yb.cat.codes)
        if (codes >= 0).all():
            return cats[codes]
        if cats.dtype.kind in "iufb":
            return np.where(codes >= 0, cats[np.maximum(codes, 0)].astype(float), np.nan)
        return np.where(codes >= 0, cats[np.maximum(codes, 0)].astype(object), None)
    numpy_dtype = getattr(getattr(yb, "dtype", None), "numpy_dtype", None)
    if numpy_dtype is not None and hasattr(yb, "isna") and hasattr(yb, "to_numpy"):
        if not bool(np.asarray(yb.isna()).any()):
            return yb.to_numpy(dtype=numpy_dtype)
        if numpy_dtype.kind in "iuf":
            return yb.to_numpy(dtype=float, na_value=np.nan)
    return _decimal_labels(yb.to_numpy() if hasattr(yb, "to_numpy") else np.asarray(yb))


def _decimal_labels(y: np.ndarray) -> np.ndarray:
    """Labels of a decimal column (Spark ``DecimalType``, SQL ``DECIMAL``: Python ``Decimal``
    objects in an object array) as their numbers: whole numbers as integers, others as
    floats, missing ones (None) as NaN, so that they are matched to the model's classes (or
    named as missing) as numeric labels are. Any other array comes back as it is."""
    import decimal

    if y.dtype.kind != "O" or y.size == 0:
        return y
    values = y.ravel()
    if not all(v is None or isinstance(v, decimal.Decimal) for v in values.tolist()):
        return y
    known = [v for v in values.tolist() if v is not None and v.is_finite()]
    if len(known) == values.size and all(v == v.to_integral_value() for v in known):
        return np.array([int(v) for v in known], dtype=np.int64).reshape(y.shape)
    return np.array([np.nan if v is None else float(v) for v in values.tolist()],
                    dtype=float).reshape(y.shape)


def block_label_index(classes: np.ndarray, yb: Any, name: str = "y") -> np.ndarray:
    """Indices in the sorted ``classes`` of one block's labels, refused as in memory.

    Missing labels (NaN, None, ``pd.NA``), labels mixing numbers and text, and numbers in an
    object array stop with the in-memory messages (``check_target_labels``; the row is counted
    within the block), labels the model does not know with their names.
    """
    from .._validation import check_target_labels

    y = _block_labels(yb)
    if y.ndim == 2 and y.shape[1] == 1:
        y = y[:, 0]
    y = y.ravel()
    try:
        check_target_labels(y, name)
    except ValueError as exc:
        # a row number within the block (Dask block or Spark partition)
        message = re.sub(r"first at row (\d+)\)", r"first at row \1 of its block of rows)",
                         str(exc))
        if "numbers in an object array" in message:
            # an object column is often one whose other blocks hold text: which message a user
            # meets would otherwise depend on which block fails first
            message += (" If other blocks of rows hold text labels, the column mixes label "
                        "types: labels must be all numbers or all text.")
        raise ValueError(message) from None
    if y.size == 0:
        return np.zeros(0, dtype=np.int64)
    try:
        pos = np.clip(np.searchsorted(classes, y), 0, classes.shape[0] - 1)
        bad = np.asarray(classes[pos] != y, dtype=bool)
    except TypeError:  # labels of another type than the classes (text against numbers)
        known = {c: i for i, c in enumerate(classes.tolist())}
        pos = np.array([known.get(v, -1) for v in y.tolist()], dtype=np.int64)
        bad = pos < 0
    if np.any(bad):
        unknown = np.unique(y[bad].astype(str) if y.dtype.kind == "O" else y[bad])
        raise ValueError(
            f"`{name}` has labels {unknown[:5].tolist()} that the frozen estimator does not "
            f"know; its classes are {classes.tolist()}."
        )
    return pos.astype(np.int64)


def block_weights(wb: Any, n: int) -> np.ndarray:
    """One block's weights as floats (ones for None), refused as in memory when NaN, infinite,
    negative or not one per row (a block may have only zero weights)."""
    if wb is None:
        return np.ones(n)
    if hasattr(wb, "to_numpy"):  # a pandas Series (nullable: NaN for NA)
        w = wb.to_numpy(dtype=float, na_value=np.nan).ravel()
    else:
        try:
            w = np.asarray(wb, dtype=float).ravel()
        except (TypeError, ValueError) as exc:
            raise ValueError(
                f"`sample_weight` must be numeric; could not convert it to floats ({exc})."
            ) from exc
    if w.shape[0] != n:
        raise ValueError(
            f"`sample_weight` has {w.shape[0]} entries in a block of {n} rows; give one weight "
            "per row, partitioned like `X`."
        )
    check_block_weights(w)
    return w


def n_block_rows(Xb: Any) -> int:
    """Number of rows of a block (a NumPy array, a pandas DataFrame, a sparse matrix)."""
    shape = getattr(Xb, "shape", None)
    return int(shape[0]) if shape is not None else len(Xb)


def predict_block(estimator: Any, response: str, Xb: Any, width: int | None) -> np.ndarray:
    """``estimator.<response>(Xb)`` as floats, refused (as in memory) when not finite; an empty
    block gives an empty result of ``width`` columns (1-d for None) without calling the model
    (scikit-learn refuses zero rows)."""
    if n_block_rows(Xb) == 0:
        return np.empty((0,) if width is None else (0, width))
    values = np.asarray(getattr(estimator, response)(Xb), dtype=float)
    if not np.all(np.isfinite(values)):
        raise ValueError(
            f"`estimator` returned NaN or infinite values from {response}; held-out "
            "predictions must be finite."
        )
    check_model_probabilities(values, response, "`estimator`", "held-out rows")
    return values


def class_rows(y: np.ndarray, w: np.ndarray, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows of each class, and rows of each class with positive weight (as floats, to add)."""
    return (np.bincount(y, minlength=k).astype(float),
            np.bincount(y[w > 0], minlength=k).astype(float))


def check_class_rows(owner: Any, classes: np.ndarray, rows: np.ndarray, weighted: np.ndarray,
                     *, absent_warning: bool = True) -> None:
    """The in-memory checks of a frozen model's held-out labels (``_fit_heldout``), from the rows
    of each class counted block by block: at least two classes (and two with positive weight),
    and a warning naming the model's classes with no held-out rows (or only rows of weight 0)."""
    from .._validation import plain

    if np.count_nonzero(rows) < 2:
        raise ValueError(
            "`y` contains only 1 class; the held-out rows must contain at least two classes."
        )
    if np.count_nonzero(weighted) < 2:
        raise ValueError(
            "Only one class has a positive `sample_weight`; at least two classes must carry "
            "weight."
        )
    absent = np.flatnonzero(rows == 0)
    if absent_warning and absent.size:
        names = ", ".join(repr(plain(classes[j])) for j in absent[:5])
        warnings.warn(
            f"{type(owner).__name__}: class(es) {names} of the frozen model have no held-out "
            "rows in `y`; nothing fitted here is checked on them (their probabilities follow "
            "the model and the map fitted on the other classes). Hold out labelled rows of "
            "every class.",
            UserWarning,
            stacklevel=5,
        )
    weightless = np.flatnonzero((rows > 0) & (weighted == 0))
    if absent_warning and weightless.size:
        # as in memory (probwrap._heldout.warn_weightless_classes)
        names = ", ".join(repr(plain(classes[j])) for j in weightless[:5])
        warnings.warn(
            f"{type(owner).__name__}: every row of class(es) {names} in `y` has "
            "`sample_weight` 0, so nothing fitted here learns or checks them (their "
            "probabilities follow the model and the maps fitted on the other classes). Give "
            "those rows a positive weight, or leave the class out.",
            UserWarning,
            stacklevel=5,
        )
