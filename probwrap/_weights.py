"""How the wrappers' calibration steps read ``sample_weight``, and the warnings that say so.

The calibration maps read weights by one rule (docs/weights.md): row counts when they sum to
at least the number of rows of positive weight, otherwise relative weights counted as Kish's
(1965) effective sample size ``(sum w)**2 / sum w**2``
(:func:`probwrap.calibration._base.count_weights`). The warnings here are shared by the
wrappers that apply that rule, so that each says the same thing in the same words.
"""

from __future__ import annotations

import warnings

import numpy as np

from ._validation import shared_factor
from .calibration._base import WeightScaleWarning, count_weights

__all__ = ["COUNT_TABLE_MAX_CASES", "case_rows", "count_scale_weights", "counted_rows",
           "shared_factor", "warn_count_reading", "warn_count_summary", "whole_counts"]


def count_scale_weights(w: np.ndarray, owner: str, what: str, *, stacklevel: int = 4) -> np.ndarray:
    """``w`` on the maps' count scale (:func:`~probwrap.calibration._base.count_weights`),
    with a :class:`~probwrap.calibration.WeightScaleWarning` naming ``owner`` when they were
    rescaled to Kish's effective size (they sum to less than the rows of positive weight);
    ``what`` says which step reads them ("for the calibration map").

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     count_scale_weights(np.full(4, 0.25), "Demo", "for the map").tolist()
    [1.0, 1.0, 1.0, 1.0]
    >>> str(caught[0].message)[:47]
    'Demo: `sample_weight` sums to less than the num'
    """
    out, rescaled = count_weights(np.asarray(w, dtype=float))
    if rescaled:
        warnings.warn(
            f"{owner}: `sample_weight` sums to less than the number of rows, so the weights "
            f"cannot be row frequencies; {what} they are rescaled to sum to Kish's effective "
            f"sample size ({out.sum():.4g}).",
            WeightScaleWarning,
            stacklevel=stacklevel,
        )
    return out


def warn_count_reading(
    w: np.ndarray, owner: str, what: str, effect: str, *, stacklevel: int = 4
) -> None:
    """Warn once when ``w`` is read as row counts (it sums to at least the rows of positive
    weight) but does not look like counts, so that its scale moves a result.

    Weights that sum to less than the rows are relative ones (Kish's size; the scale then
    changes nothing, and :func:`count_scale_weights` says so). Weights that sum to more are
    row counts under the maps' rule, and multiplying them by 1,000 means a thousand copies of
    every row. That reading is the intended one for whole numbers without a common factor (a
    frequency table); it is doubtful for whole numbers that all share a factor above 1 (every
    row seen at least that many times: more often a scaled weight than a count) and for
    weights that are not whole numbers (a row cannot be seen 1.5 times). Those draw a
    :class:`~probwrap.calibration.WeightScaleWarning` naming ``owner``: ``"{what} N rows,
    so multiplying every weight by a constant changes {effect}"`` (``what`` the step that
    counts, ending in a verb; ``effect`` what moves with the scale).
    """
    w = np.asarray(w, dtype=float)
    n_rows = int(np.count_nonzero(w))
    with np.errstate(over="ignore"):
        total = float(w.sum())
    if not (n_rows and total >= n_rows and np.isfinite(total)):
        return
    factor = shared_factor(w)
    if factor == 1:
        return
    u = w[w > 0] / float(w.max())  # scaled first: the sum of squares cannot overflow
    kish = float(u.sum() ** 2 / (u @ u))
    warn_count_summary(n_rows, total, factor, kish, owner, what, effect,
                       stacklevel=stacklevel + 1)


def warn_count_summary(
    n_rows: int, total: float, factor: int | None, kish: float, owner: str, what: str,
    effect: str, *, remedy: str | None = None, stacklevel: int = 4
) -> None:
    """:func:`warn_count_reading` from a summary of the weights (rows of positive weight, their
    sum, their shared whole factor or None when some is not a whole number, Kish's effective
    size), for weights that are not at hand (a tally of Dask or Spark rows); ``remedy``
    replaces the last sentence (what to pass instead)."""
    if not (n_rows and total >= n_rows and np.isfinite(total)) or factor == 1:
        return
    if factor is None:
        why = "they are not all whole numbers, yet sum to at least the number of rows"
    else:
        why = f"every weight is a multiple of {factor}"
    warnings.warn(
        f"{owner}: `sample_weight` is read as row counts ({why}): {what} {total:.4g} rows, so "
        f"multiplying every weight by a constant changes {effect}. "
        + (remedy if remedy is not None else
           "If the weights are relative (survey, importance or scaled weights), pass them "
           "divided by their sum: they then count as Kish's effective sample size "
           f"({kish:.4g} rows) whatever their scale."),
        WeightScaleWarning,
        stacklevel=stacklevel,
    )


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
    if not w.size or shared_factor(w) != 1 or not float(w.max()) > 1.0:
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
