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

from ._validation import COUNT_TABLE_MAX_CASES, case_rows, counted_rows, shared_factor, whole_counts
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
