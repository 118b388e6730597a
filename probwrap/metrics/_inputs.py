"""Private input handling shared by the metrics.

Every metric takes ``y_true`` (labels), ``y_prob`` (probabilities) and an optional
``sample_weight``. The helpers here turn them into float arrays that the metrics can use
directly, with the shared checks of :mod:`probwrap._validation` doing the work and naming the
offending argument in every error.
"""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np

from .._validation import (
    check_binary_labels,
    check_labels,
    check_proba,
    check_same_length,
    check_sample_weight,
    check_target_labels,
    plain,
    shared_factor,
)
from ..calibration._base import WeightScaleWarning, count_weights

__all__ = [
    "STRATEGIES",
    "UnsortedLabelsWarning",
    "binary_targets",
    "check_n_bins",
    "check_strategy",
    "class_indices",
    "prepare_any",
    "prepare_binary",
    "warn_floored",
]

STRATEGIES = ("uniform", "quantile")


class UnsortedLabelsWarning(UserWarning):
    """``labels=`` given out of sorted order with 2-d ``y_prob``.

    probwrap's ``labels`` names the class of each column of ``y_prob``, in order; scikit-learn's
    ``labels`` (``log_loss``, ``brier_score_loss``) is the label set, whose sorted order gives
    the columns. The two readings agree exactly when ``labels`` is sorted; otherwise they pair
    the columns with other classes and give other numbers, so this warning says which reading
    was used. Filter it when the columns really are in the given order (e.g. the ``classes_`` of
    a model that does not sort them).
    """


#: The floor of the log-probabilities :class:`UnsortedLabelsWarning` compares: the log loss's
#: default clip (``probwrap.metrics.log_loss``'s ``clip``, float64 machine epsilon).
_LOG_FLOOR = float(np.finfo(np.float64).eps)


def _warn_unsorted_labels(labels: Any, idx: np.ndarray, p: np.ndarray) -> None:
    """:class:`UnsortedLabelsWarning` when ``labels`` (one per column of ``p``) is not in sorted
    order, the order matters for these rows (a class of ``y_true`` sorts to another column),
    and the probabilities fit the sorted reading clearly better: the rows' mean log-probability
    of their class is higher with column ``j`` read as the ``j``-th sorted label, by more than
    two standard errors of the paired difference. Columns that fit
    the given order (class names listed in column order) stay quiet; labels that cannot be
    sorted together are left alone."""
    classes = np.asarray(labels)
    try:
        order = np.argsort(classes, kind="stable")
    except TypeError:
        return
    rank = np.empty_like(order)
    rank[order] = np.arange(order.shape[0])  # the column of each class in the sorted reading
    if np.array_equal(rank[idx], idx):
        return  # sorted, or only classes absent from y_true out of place: the same number
    rows = np.arange(idx.shape[0])
    # floored at the log loss's default clip (float64 machine epsilon), as the metric scores
    # the rows: at the smallest positive float a probability of exactly 0 (a forest, nearest
    # neighbours) weighed -708 and its spread hid the misreading
    # (benchmarks/multiclass_rules28.py: on ten bundled multiclass sets, misreadings missed that
    # cost above 0.5 nats 43 -> 12 of 1,725, false alarms 0 -> 0; docs/evidence/small_data_log.md)
    log_given = np.log(np.maximum(p[rows, idx], _LOG_FLOOR))
    log_sorted = np.log(np.maximum(p[rows, rank[idx]], _LOG_FLOOR))
    given, by_sort = float(np.mean(log_given)), float(np.mean(log_sorted))
    # clearly better: the mean gain per row above two standard errors of it (paired rows; a
    # rule of thumb), so that a model with near-equal columns does not warn by chance
    gain = log_sorted - log_given
    n = gain.shape[0]
    if n < 2 or not np.mean(gain) > 2.0 * np.std(gain, ddof=1) / np.sqrt(n):
        return
    shown = [plain(c) for c in classes.tolist()][:6]
    warnings.warn(
        f"`labels` {shown} is not sorted: it is read as the class of each column of `y_prob` "
        f"(column 0 is {shown[0]!r}), not as scikit-learn's label set, whose sorted order "
        f"would make column 0 {plain(classes[order[0]])!r}; the rows fit that sorted reading "
        f"better (mean log-probability of their class {by_sort:.3g} against {given:.3g}). If "
        "the columns are in sorted order (a scikit-learn model's predict_proba), pass the "
        "labels sorted or model.classes_; if they are in the given order, filter "
        "probwrap.metrics.UnsortedLabelsWarning.",
        UnsortedLabelsWarning, stacklevel=4,
    )


def _label_array(y_true: Any) -> np.ndarray:
    arr = np.asarray(y_true)
    if arr.ndim == 2 and arr.shape[1] == 1:
        arr = arr[:, 0]
    if arr.ndim != 1:
        raise ValueError(f"`y_true` must be 1-d of shape (n,); got shape {arr.shape}.")
    if arr.shape[0] == 0:
        raise ValueError("`y_true` is empty; at least one row is needed.")
    # NaN, None or pd.NA named with the first row; mixed numbers and text refused
    check_target_labels(arr, "y_true", object_numbers=True)
    return arr


def _distinct_labels(labels: Any, n_expected: int, what: str) -> np.ndarray:
    arr = np.asarray(labels)
    if arr.ndim != 1 or arr.shape[0] != n_expected:
        raise ValueError(
            f"`labels` must list {n_expected} classes ({what}); got {np.asarray(labels).tolist()!r}."
        )
    if np.unique(arr).shape[0] != n_expected:
        raise ValueError(f"`labels` must not repeat a class; got {arr.tolist()!r}.")
    return arr


def binary_targets(y_true: Any, labels: Any = None) -> np.ndarray:
    """Return 0/1 floats for binary labels; the second sorted label (or ``labels[1]``) is 1.

    A ``y_true`` with a single distinct value is accepted when that value is 0 or 1 (or a
    boolean), since its meaning is then clear; any other single label needs ``labels=``.
    """
    arr = _label_array(y_true)
    if labels is not None:
        classes = _distinct_labels(labels, 2, "[negative, positive]")
        idx, _ = check_labels(arr, name="y_true", classes=classes)
        return idx.astype(float)
    distinct = np.unique(arr)
    if distinct.shape[0] > 2:
        raise ValueError(
            f"`y_true` has {distinct.shape[0]} distinct labels {distinct[:5].tolist()}; 1-d "
            "`y_prob` (positive-class probabilities) needs exactly two. Pass 2-d class "
            "probabilities of shape (n, k) for more classes."
        )
    if distinct.shape[0] == 1:
        value = distinct[0].item() if hasattr(distinct[0], "item") else distinct[0]
        if arr.dtype.kind in "biuf" and value in (0, 1):
            return (arr == 1).astype(float)
        raise ValueError(
            f"`y_true` holds the single label {plain(value)!r}; it cannot tell which class is positive. "
            "Pass labels=[negative, positive]."
        )
    y01, _ = check_binary_labels(arr, name="y_true")
    return y01


def class_indices(y_true: Any, n_classes: int, labels: Any = None) -> np.ndarray:
    """Return integer column indices in ``0..n_classes-1`` for the labels of 2-d ``y_prob``."""
    arr = _label_array(y_true)
    if labels is not None:
        classes = _distinct_labels(labels, n_classes, "one per column of `y_prob`, in order")
        idx, _ = check_labels(arr, name="y_true", classes=classes)
        return np.asarray(idx, dtype=np.intp)
    if arr.dtype.kind == "b":
        arr = arr.astype(np.intp)
    if arr.dtype.kind not in "iuf":
        raise ValueError(
            f"`y_true` holds labels of type {arr.dtype}; with 2-d `y_prob` the labels must be "
            "column indices 0..k-1, or pass labels= listing the class of each column."
        )
    if arr.dtype.kind == "f" and np.any(arr != np.round(arr)):
        raise ValueError(
            "`y_true` must hold whole-number column indices 0..k-1 for 2-d `y_prob`; got "
            "fractional values. Pass labels= if the classes are not column indices."
        )
    if arr.min() < 0 or arr.max() >= n_classes:
        raise ValueError(
            f"`y_true` must hold column indices 0..{n_classes - 1} for `y_prob` with {n_classes} "
            f"columns; got values from {arr.min()} to {arr.max()}. Pass labels= to name classes."
        )
    return arr.astype(np.intp)


def _prepare_proba(y_true: Any, y_prob: Any, sample_weight: Any) -> tuple[np.ndarray, np.ndarray]:
    p = check_proba(y_prob, name="y_prob", column_as_1d=True)
    if p.ndim == 2 and p.shape[1] < 2:
        raise ValueError(f"`y_prob` must have at least two columns when 2-d; got {p.shape}.")
    n = check_same_length(("y_prob", p), ("y_true", np.asarray(y_true)))
    w = check_sample_weight(sample_weight, n)
    return p, w


def prepare_binary(
    y_true: Any, y_prob: Any, sample_weight: Any, labels: Any = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validate a binary problem: returns ``(y01, p, w)`` with ``p`` the positive-class column.

    ``y_prob`` may be 1-d (positive-class probabilities) or two columns (the second is used).
    """
    p, w = _prepare_proba(y_true, y_prob, sample_weight)
    if p.ndim == 2:
        if p.shape[1] != 2:
            raise ValueError(
                f"`y_prob` must be 1-d positive-class probabilities (or two columns) for this "
                f"binary metric; got shape {p.shape}."
            )
        idx = class_indices(y_true, 2, labels)
        if labels is not None:
            _warn_unsorted_labels(labels, idx, p)
        y01 = idx.astype(float)
        return y01, p[:, 1], w
    return binary_targets(y_true, labels), p, w


def prepare_any(
    y_true: Any, y_prob: Any, sample_weight: Any, labels: Any = None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Validate a binary (1-d ``y_prob``) or multiclass (2-d ``y_prob``) problem.

    Returns ``(y, p, w)``: for 1-d ``p``, ``y`` is 0/1 floats; for 2-d ``p``, ``y`` holds
    integer column indices.
    """
    p, w = _prepare_proba(y_true, y_prob, sample_weight)
    if p.ndim == 1:
        return binary_targets(y_true, labels), p, w
    idx = class_indices(y_true, p.shape[1], labels)
    if labels is not None:
        _warn_unsorted_labels(labels, idx, p)
    return idx, p, w


def check_n_bins(n_bins: Any, name: str = "n_bins") -> int:
    if isinstance(n_bins, bool) or not isinstance(n_bins, numbers.Integral) or n_bins < 1:
        raise ValueError(f"`{name}` must be a whole number >= 1; got {plain(n_bins)!r}.")
    return int(n_bins)


def check_strategy(strategy: Any) -> str:
    if strategy not in STRATEGIES:
        raise ValueError(f"`strategy` must be one of {list(STRATEGIES)}; got {plain(strategy)!r}.")
    return str(strategy)


def warn_floored(n_floored: int, floor: float, what: str) -> None:
    """Warn that ``n_floored`` rows were moved to ``floor`` (never silently)."""
    if n_floored:
        warnings.warn(
            f"{n_floored} row(s) {what}; they were moved to {floor:.3g} (see the `clip` note in "
            "the docstring).",
            UserWarning,
            stacklevel=3,
        )


def count_scale_weights(w: np.ndarray, what: str) -> np.ndarray:
    """Weights on the row-count scale for a statistic whose null distribution counts rows.

    Whole-number weights without a common factor above 1 (a count table: weight 2 counts a row
    twice) are kept as given; so are unit weights. Weights that sum to less than the number of
    rows of positive weight (normalised to sum 1, or frequencies scaled by 1e-3) cannot be
    frequencies, and since 5 December 2026 neither are weights that are not all whole numbers
    (importance weights such as the IPCW weights of
    :func:`probwrap.late_labels.labels_at_horizon`, survey weights) nor unequal whole numbers
    that all share a factor above 1 (counts multiplied by 1,000): all of these are rescaled
    to sum to Kish's (1965) effective sample size ``(sum w)**2 / sum w**2``, with a
    :class:`~probwrap.calibration.WeightScaleWarning`, so that the p-value, or whether a group
    is judged, does not depend on the scale of the weights (docs/weights.md: scaling the
    weights must not change a choice). Equal weights become 1 each without a warning.
    Until 5 December 2026 weights summing to at least the rows were counted as they stood, so
    ``hosmer_lemeshow_test``'s p-value went from 0.037 to 0.0 with every weight times 1,000 (a
    simulated draw of 400 rows), and ``calibration_by_group`` judged 0 of 118 broods of lme4's grouseticks at weight 1 and
    41 at weight 1,000, all without a word.

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> count_scale_weights(np.array([1.0, 2.0, 3.0]), "demo").tolist()  # counts: kept
    [1.0, 2.0, 3.0]
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     a = count_scale_weights(np.array([1.0, 2.0, 3.0]) * 1e3, "demo")
    >>> round(float(a.sum()), 4)  # Kish's size: 6**2 / 14
    2.5714
    """
    out, rescaled = count_weights(w)
    if rescaled:
        warnings.warn(
            f"{what}: `sample_weight` sums to less than the number of rows, so it cannot be row "
            "frequencies; it was rescaled to sum to Kish's effective sample size "
            f"({out.sum():.4g}).",
            WeightScaleWarning,
            stacklevel=3,
        )
        return out
    positive = out[out > 0]
    if not positive.size or not np.isfinite(positive).all():
        return out
    factor = shared_factor(positive)
    if factor == 1:
        return out  # unit weights, or whole-number counts: row frequencies
    top = float(positive.max())
    if float(positive.min()) == top:
        return np.where(out > 0, 1.0, 0.0)  # equal weights: a scale, every row counts once
    u = out / top  # scaled first: the sum of squares cannot overflow
    kish = u * (u.sum() / (u @ u))
    why = ("they are not all whole numbers" if factor is None
           else f"every weight is a multiple of {factor}")
    warnings.warn(
        f"{what}: `sample_weight` is not a table of row counts ({why}), so it is read as "
        "relative weights and rescaled to sum to Kish's effective sample size "
        f"({kish.sum():.4g} rows, not {float(out.sum()):.6g}); multiplying every weight by a "
        "constant changes nothing. Pass whole-number counts to count rows.",
        WeightScaleWarning,
        stacklevel=3,
    )
    return kish
