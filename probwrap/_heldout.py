"""The one place where wrappers obtain held-out predictions.

Every wrapper (calibration, cost policy, prior shift) needs predictions of its inner estimator on
rows that the estimator did not see during fitting. :class:`HeldOutClassifierBase` provides them:

* by cross-fitting (stratified, shuffled K-fold by default; any scikit-learn splitter or an
  iterable of ``(train, test)`` index pairs that partitions the rows), after which a clone of the
  estimator is refitted on all rows for prediction;
* or, for an estimator wrapped in :class:`sklearn.frozen.FrozenEstimator`, without any fitting:
  the estimator is already fitted and every row passed to ``fit`` is held-out data to it.

``X`` is handed to the inner estimator untouched (DataFrames keep their column names, sparse
matrices stay sparse, text pipelines receive strings); only ``y`` and ``sample_weight`` are
validated here. ``sample_weight`` reaches the inner estimator when its ``fit`` accepts it (or, with
metadata routing enabled, when it is requested with ``set_fit_request``).
"""

from __future__ import annotations

import dataclasses
import numbers
import warnings
from typing import Any

import numpy as np
from joblib import Parallel, delayed
from sklearn import get_config
from sklearn.base import BaseEstimator, ClassifierMixin, MetaEstimatorMixin, clone
from sklearn.exceptions import NotFittedError
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import StratifiedKFold, check_cv
from sklearn.utils import _safe_indexing, get_tags, indexable
from sklearn.utils.metadata_routing import MetadataRouter, MethodMapping, process_routing
from sklearn.utils.multiclass import check_classification_targets
from sklearn.utils.validation import column_or_1d, has_fit_parameter

from ._feature_input import check_feature_input
from ._predictions import (
    HeldOutPredictions,
    ModelOutputError,
    check_model_columns,
    check_model_probabilities,
    rounding_message,
    rounding_rows,
    rows_summing_to_one,
)
from ._predictions import resolve_response as _resolve_response
from ._row_hash import row_hashes as _row_hashes
from ._validation import (
    check_labels,
    check_sample_weight,
    check_target_labels,
    plain,
)
from ._weights import whole_counts
from .calibration._base import rescale_extreme_weights

__all__ = ["HeldOutClassifierBase", "HeldOutPredictions"]


def _is_dask(obj: Any) -> bool:
    """Whether ``obj`` is a Dask collection or a Spark DataFrame (rows the wrappers tally where
    they live, through ``probwrap.scale._entry``); checked without importing either."""
    return hasattr(obj, "__dask_graph__") or (
        type(obj).__module__.startswith("pyspark.sql") and hasattr(obj, "mapInPandas")
    )


def _multiclass_dask(estimator: Any, X: Any, y: Any, sample_weight: Any) -> bool:
    """Dask input with a frozen estimator of more than two classes."""
    from sklearn.frozen import FrozenEstimator

    dask_input = _is_dask(X) or _is_dask(y) or _is_dask(sample_weight)
    return (
        dask_input
        and isinstance(estimator, FrozenEstimator)
        and len(getattr(estimator, "classes_", ())) > 2
    )


def check_fitted(estimator: Any, attribute: str) -> None:
    """Raise scikit-learn's ``NotFittedError`` unless ``estimator`` has the fitted ``attribute``.

    What ``check_is_fitted(estimator, attribute)`` decides for the wrappers, without its first
    step: that one computes the estimator's tags, which for nested wrappers walks every layer down
    to a deep copy inside ``FrozenEstimator`` on every ``predict`` call (most of the wrappers'
    overhead over the wrapped model). The wrappers always require fitting, so the tags cannot
    change the answer.
    """
    if not hasattr(estimator, attribute):
        raise NotFittedError(
            f"This {type(estimator).__name__} instance is not fitted yet. Call 'fit' with "
            "appropriate arguments before using this estimator."
        )


# Rows per call when a frozen model predicts a large NumPy array at fit time (see below).
PREDICT_CHUNK_ROWS = 16_384


def _predict_in_chunks(method: Any, X: Any) -> np.ndarray:
    """``np.asarray(method(X), dtype=float)``, called on fixed blocks of rows of a large array.

    A model's own ``predict_proba`` holds several arrays as long as the rows at once (a
    ``LogisticRegression``: the margins, their exponentials and the two columns, 4x the output's
    positive column). Called on blocks of ``PREDICT_CHUNK_ROWS`` rows written into one output
    array, the peak is the output plus one block's worth. Only for 2-d NumPy arrays of more than
    two blocks (other inputs, which may not slice by rows, are predicted in one call). The blocks
    are fixed, so the result never depends on anything but the rows; for scikit-learn's models
    it is bit for bit the one-call result (rows are predicted independently; a test checks
    linear, tree, naive Bayes, discriminant and neural-network models), and a model whose
    row outputs depend on the other rows in the call would be called the same way every time.
    """
    n = X.shape[0] if isinstance(X, np.ndarray) and X.ndim == 2 else 0
    if n <= 2 * PREDICT_CHUNK_ROWS:
        return np.asarray(method(X), dtype=float)
    first = np.asarray(method(X[:PREDICT_CHUNK_ROWS]), dtype=float)
    if first.shape[0] != PREDICT_CHUNK_ROWS:  # not one output row per input row: one call
        return np.asarray(method(X), dtype=float)
    out = np.empty((n,) + first.shape[1:])
    out[:PREDICT_CHUNK_ROWS] = first
    del first
    for start in range(PREDICT_CHUNK_ROWS, n, PREDICT_CHUNK_ROWS):
        stop = min(start + PREDICT_CHUNK_ROWS, n)
        out[start:stop] = np.asarray(method(X[start:stop]), dtype=float)
    return out


def row_count(value: Any) -> int | None:
    """Row count of ``value`` when it has one (arrays, frames, sparse matrices, sequences), else
    None (scalars, strings, mappings, lazy frames of unknown length)."""
    shape = getattr(value, "shape", None)
    if shape is not None:
        try:
            return int(shape[0]) if len(shape) else None
        except TypeError:  # a lazy frame with an unknown row count
            return None
    if hasattr(value, "__len__") and not isinstance(value, (str, bytes, dict)):
        return len(value)
    return None


def check_rows_match(X: Any, n: int) -> None:
    """Raise if ``X`` has a row count other than ``n`` (the number of labels)."""
    n_x = row_count(X)
    if n_x is not None and n_x != n:
        raise ValueError(
            f"`X` has {n_x} rows but `y` has {n} labels; give one label per row of `X` "
            "(inconsistent numbers of samples)."
        )


#: what to do when the model's fit takes no ``sample_weight`` (e.g. a Pipeline)
_ROUTING_ADVICE = (
    "To weight the model's fit too, turn on scikit-learn's metadata routing "
    "(sklearn.set_config(enable_metadata_routing=True)) and request the weights on the step "
    "that takes them (e.g. LogisticRegression().set_fit_request(sample_weight=True))."
)


def _all_equal(sample_weight: Any) -> bool:
    """Whether the weights weight nothing: all equal to 1, or all equal and below 1 (they sum
    to less than the number of rows, so they count as Kish's effective size, one per row;
    docs/weights.md). Equal whole numbers above 1 are row counts (weight 2: every row twice),
    which a model fitted without them does not see."""
    try:
        w = np.asarray(sample_weight, dtype=float).ravel()
    except (TypeError, ValueError):
        return False
    return (w.size > 0 and bool(np.all(w == w[0])) and bool(np.isfinite(w[0]))
            and 0 < w[0] <= 1)


class FoldScoringError(ValueError):
    """A fold model was fitted on its training part but refused that fold's held-out rows
    (``fold``: the fold's index; the message is the model's own)."""

    def __init__(self, message: str, fold: int = -1) -> None:
        super().__init__(message, fold)
        self.fold = fold

    def __str__(self) -> str:
        return str(self.args[0])


def _fit_predict_fold(
    estimator: Any, X: Any, y: np.ndarray, train: np.ndarray, test: np.ndarray,
    params: dict, response: str, keep: bool = False, fold: int = -1,
) -> tuple[np.ndarray, np.ndarray, Any]:
    """Fit a clone of ``estimator`` on the ``train`` rows (labels as given) and return its
    ``classes_``, ``response`` on the ``test`` rows and (``keep``) the fitted clone, else None;
    row-wise ``params`` follow the rows. A ``ValueError`` of the scoring (not of the fit), such
    as a category the training part lacks, is raised as :class:`FoldScoringError`."""
    n = y.shape[0]
    fold_params = {
        key: (_safe_indexing(value, train)
              if row_count(value) == n else value)
        for key, value in params.items()
    }
    # (a class absent from the training rows is reported once by the caller, for every fold)
    model = clone(estimator).fit(_safe_indexing(X, train), y[train], **fold_params)
    try:
        raw = getattr(model, response)(_safe_indexing(X, test))
    except ValueError as exc:
        raise FoldScoringError(str(exc), fold) from exc
    out = np.asarray(raw, dtype=float)
    check_model_columns(out, response, len(model.classes_), len(test),
                        f"A fold model ({type(model).__name__})", "held-out rows")
    # rows off by rounding divided by their sums; the caller warns once for all the folds
    out, n_bad, worst = rounding_rows(out, response)
    return np.asarray(model.classes_), out, (model if keep else None), (n_bad, worst)


def _is_missing(value: Any) -> bool:
    """True for None, NaN, pandas' NA and NaT (a value unequal to itself or refusing it)."""
    if value is None:
        return True
    try:
        return bool(value != value)
    except (TypeError, ValueError):
        return True


def _unseen_values(X: Any, train: np.ndarray, test: np.ndarray, most: int = 3) -> list[str]:
    """Up to ``most`` non-numeric columns of ``X`` (a pandas DataFrame or a NumPy object array)
    with values in the ``test`` rows that the ``train`` rows lack, each as "column 'name':
    'a', 'b'" (at most three values); empty for numeric or other inputs."""
    try:
        import pandas as pd
    except ImportError:  # pragma: no cover
        pd = None
    out: list[str] = []
    if pd is not None and isinstance(X, pd.DataFrame):
        columns = [(repr(str(c)), X.iloc[:, j]) for j, c in enumerate(X.columns)
                   if not pd.api.types.is_numeric_dtype(X.iloc[:, j])
                   or pd.api.types.is_bool_dtype(X.iloc[:, j])]
        take = [(label, col.iloc[train], col.iloc[test]) for label, col in columns]
    elif isinstance(X, np.ndarray) and X.ndim == 2 and X.dtype == object:
        take = [(str(j), X[train, j], X[test, j]) for j in range(X.shape[1])]
    else:
        return out
    for label, tr, te in take:
        try:  # (unhashable values, or missing values that refuse comparison: skip the column)
            seen = set(np.asarray(tr, dtype=object).tolist())
            new = []
            for v in np.asarray(te, dtype=object).tolist():
                if v not in seen and v not in new and not _is_missing(v):
                    new.append(v)
        except (TypeError, ValueError):
            continue
        if new:
            shown = ", ".join(repr(plain(v)) for v in new[:3]) + (", ..." if len(new) > 3 else "")
            out.append(f"column {label}: {shown}")
            if len(out) >= most:
                break
    return out


def fold_columns(fold_classes: np.ndarray, out: np.ndarray, classes: np.ndarray,
                 response: str) -> np.ndarray:
    """A fold model's ``response`` on some rows, in the columns of all ``classes``: a class
    absent from the fold's training rows gets probability 0, or a score 50 below the row's
    lowest score."""
    k = classes.shape[0]
    cols = np.array([np.flatnonzero(classes == c)[0] for c in fold_classes])
    if out.ndim == 1 and k == 2 and fold_classes.shape[0] == 2:
        return out
    if out.ndim == 1:
        raise ValueError(
            f"Only {fold_classes.shape[0]} classes in a training fold but {k} in all "
            f"rows: {response} of such a fold gives one score per row, which cannot "
            "stand for every class. Use fewer folds or more rows of the rare classes."
        )
    block = np.zeros((out.shape[0], k))
    block[:, cols] = out
    missing = np.setdiff1d(np.arange(k), cols)
    if response != "predict_proba" and missing.size:
        # a score far below every other score of that row
        block[:, missing] = out.min(axis=1, keepdims=True) - 50.0
    return block


def _adjacent_equal(sorted_keys: np.ndarray, block: int = 1 << 16) -> bool:
    """Whether two neighbours of ``sorted_keys`` are equal, block by block (no comparison array
    as long as the keys)."""
    n = sorted_keys.shape[0]
    for start in range(0, max(n - 1, 0), block):
        stop = min(start + block, n - 1)
        if np.any(sorted_keys[start + 1:stop + 1] == sorted_keys[start:stop]):
            return True
    return False


#: ``feature_cells``'s ``index`` when none is passed: hash the rows there
_HASH_ROWS = object()


#: Most feature columns the count-table check adds as linear terms.
TABLE_FEATURES_MAX = 100


def numeric_features(X: Any) -> np.ndarray | None:
    """``X`` as a 2-d float array when it is a 2-d NumPy array or a DataFrame of numbers
    (booleans count) with at most :data:`TABLE_FEATURES_MAX` columns and finite values, else
    None: the table's features for the check of groups that vary more than binomial
    (:func:`probwrap._weights.warn_overdispersed_table`). Never a copy of a float array.

    Examples
    --------
    >>> import numpy as np
    >>> numeric_features(np.array([[1, 2], [3, 4]])).dtype.kind
    'f'
    >>> numeric_features(np.array([["a"], ["b"]])) is None
    True
    """
    try:
        if hasattr(X, "dtypes") and hasattr(X, "to_numpy"):
            if not all(getattr(d, "kind", "O") in "biuf" for d in np.atleast_1d(X.dtypes)):
                return None
            out = X.to_numpy(dtype=float)
        elif isinstance(X, np.ndarray) and X.dtype.kind in "biuf":
            out = np.asarray(X, dtype=float)
        else:
            return None
    except (TypeError, ValueError):
        return None
    if out.ndim != 2 or out.shape[1] > TABLE_FEATURES_MAX or not np.all(np.isfinite(out)):
        return None
    return out


def feature_cells(X: Any, sample_weight: np.ndarray | None, y_index: np.ndarray, *,
                  index: Any = _HASH_ROWS) -> np.ndarray | None:
    """Cell of every row (rows with identical features share one) when weighted rows with
    identical features carry different labels, else None.

    That is the shape of counts (:func:`probwrap.aggregated.expand_counts`, a frequency table):
    a group's ``k`` successes are one row of label 1 and its ``n - k`` failures one row of label
    0 with the same features. Folds that put the two rows apart give each fold model the
    group's own label as its only evidence at those features and hold out the opposite label,
    so the held-out predictions point the wrong way (statsmodels' star98, 200 school districts,
    a random forest: held-out log loss 0.36 on row folds against 0.62 on folds of districts, and
    the calibrated test log loss 0.91 against the model's own 0.64). Checked with weights that
    are not all equal (equal weights of any size, e.g. all 2 or all 1/n, are treated as no
    weights: before 4 December 2026 any weights other than 1 counted, so rescaling them moved
    the folds and ``"auto"``'s choice on a forest's tied scores), on 2-d NumPy arrays and
    DataFrames (other inputs give None). Otherwise, with
    or without weights, the cells of rows that are copies of one another
    (:func:`copied_row_cells`), every other row in a cell of its own, or None. ``index``:
    :func:`feature_cell_index` of ``X`` when the caller has it already (the rows are hashed
    here otherwise).
    """
    # equal weights (of any size: 1, 2, 1/n) say nothing about counts; they leave the folds as
    # without weights, so rescaling every weight cannot move them
    sw = None if sample_weight is None else np.asarray(sample_weight, dtype=float).ravel()
    if sw is not None and np.any(sw > 0) and np.any(sw == 0):
        # rows of weight 0 carry no information: their labels part no cell, and 0/1 weights
        # are equal weights on the rows they keep (since 5 December 2026)
        keep = sw > 0
        sw = sw[keep]
        cells_kept = True
    else:
        keep, cells_kept = None, False
    weighted = sw is not None and sw.size > 0 and bool(np.any(sw != sw[0]))
    n = y_index.shape[0]
    cells = feature_cell_index(X, n) if index is _HASH_ROWS else index
    if cells is None:
        return None
    if weighted:
        n_cells = int(cells.max()) + 1
        lo = np.full(n_cells, np.iinfo(np.intp).max)
        hi = np.full(n_cells, -1)
        y_index = np.asarray(y_index, dtype=np.intp)
        if cells_kept:
            np.minimum.at(lo, cells[keep], y_index[keep])
            np.maximum.at(hi, cells[keep], y_index[keep])
        else:
            np.minimum.at(lo, cells, y_index)
            np.maximum.at(hi, cells, y_index)
        if np.any(hi > lo):
            return cells
    try:
        return copied_row_cells(X, cells)
    except (TypeError, ValueError):  # a column whose values cannot be compared
        return None


def feature_cell_index(X: Any, n: int) -> np.ndarray | None:
    """Index of every row's group of identical features (``np.unique``'s inverse of the row
    hashes), or None when every row is distinct, the rows cannot be hashed (inputs other than
    2-d numeric NumPy arrays and DataFrames) or their number is not ``n``: the first step of
    :func:`feature_cells`, which a caller asking for the cells with and without weights (a
    count table's cells and its cases' cells) passes to both as ``index`` to hash once."""
    if hasattr(X, "iloc") and hasattr(X, "columns"):
        def row_keys() -> np.ndarray:
            import pandas as pd

            return pd.util.hash_pandas_object(X, index=False).to_numpy()
    elif isinstance(X, np.ndarray) and X.ndim == 2 and X.dtype.kind in "biuf":
        def row_keys() -> np.ndarray:
            return _row_hashes(X)
    else:
        return None
    try:
        # every row distinct is the usual case, decided without the inverse and without a
        # second array as long as the rows: the keys are sorted in place (fresh unless a
        # DataFrame's hashes are a view) and made again only where some rows repeat
        keys = row_keys()
        if not keys.flags.owndata:
            keys = keys.copy()
        keys.sort()
        if not _adjacent_equal(keys):
            return None
        del keys
        _, cells = np.unique(row_keys(), return_inverse=True)
    except (TypeError, ValueError):
        return None
    cells = np.asarray(cells, dtype=np.intp).ravel()
    if cells.shape[0] != n:
        return None
    n_cells = int(cells.max()) + 1 if n else 0
    if n_cells == n:
        return None
    return cells


def copied_row_cells(X: Any, cells: np.ndarray, min_columns: int = 2) -> np.ndarray | None:
    """Cells of the rows that are copies of one another, every other row a cell of its own; None
    when there are no copies.

    A row counts as a copy when another row has exactly its features and one of its values
    occurs in no row outside that group, in a column with at least a quarter as many distinct
    values as there are distinct rows (of two or more columns) whose repeated values are far
    more than chance gives rows on its grid (:func:`_ties_by_chance`): a value that marks one
    observation, as an age or a measurement with many digits does, passed twice (a file
    concatenated with itself, an upsampled class). Folds that put the copies apart let each fold model see the row it is
    checked on, so the held-out predictions look better than the model is and the calibration
    fitted to them is too confident: 100 labelled rows of scikit-learn's breast cancer passed
    three times, gradient boosting, test log loss of PriorShiftWrapper's probabilities 1.58
    times that of the rows passed once (geometric mean of 6 draws; repro in
    docs/evidence/small_data_log.md, the section of 4 December 2026 on models and data the sweeps
    had not tried). Rows that merely share common values — the same answers to a few multiple-choice
    questions — are independent draws of the same features and stay
    in the folds they were given, and so do rows that repeat because their measurements are
    whole numbers (days, years of age: lifelines' waltons data, a tree 1.37 times scikit-learn's
    sigmoid log loss with such rows kept together, 1.02 times with the folds as given).
    ``min_columns``: the fewest columns that can mark copies (2 for a model's features, where
    one column's shared values are a tree's tied scores; ``probwrap calibrate fit`` passes 1
    for the file's columns beside score and label, with ``cells`` over the whole row).
    """
    n = cells.shape[0]
    size = np.bincount(cells)[cells]
    shared = size >= 2
    if not shared.any():
        return None
    if hasattr(X, "iloc") and hasattr(X, "columns"):
        import pandas as pd

        columns = [pd.factorize(X.iloc[:, j], use_na_sentinel=False)[0]
                   for j in range(X.shape[1])]
    else:
        columns = [np.unique(X[:, j], return_inverse=True)[1].ravel() for j in range(X.shape[1])]
    # only a column with at least a quarter as many values as there are distinct rows can
    # mark an observation (an age, a measurement); the values of a column of few levels, or of
    # a single column (tied scores of a tree), are shared by design
    n_distinct = int(cells.max()) + 1
    exclusive = np.zeros(n, dtype=bool)
    for j, codes in enumerate(columns if len(columns) >= min_columns else []):
        codes = np.asarray(codes, dtype=np.intp)
        counts = np.bincount(codes)
        if 4 * counts.shape[0] >= n_distinct and not _ties_by_chance(X, j, counts):
            exclusive |= counts[codes] == size
    if len(columns) >= min_columns and not exclusive.any() and _whole_rows_beyond_chance(
            columns, cells, None):
        exclusive[:] = True
    copies = shared & exclusive
    if not copies.any():
        return None
    out = np.where(copies, cells, int(cells.max()) + 1 + np.arange(n))
    return np.unique(out, return_inverse=True)[1].ravel().astype(np.intp)


def copied_case_cells(X: Any, counts: np.ndarray, index: Any = _HASH_ROWS) -> np.ndarray | None:
    """The cells :func:`copied_row_cells` gives the rows of a count table repeated by their
    ``counts`` (``np.repeat(X, counts, axis=0)``), read from the table without repeating it:
    per table row, its cases' cell (one cell for every case of the rows with its features)
    where the repeated rows are copies of a row, -1 where each of its cases is a cell of its
    own; None when the repeated rows hold no copies (or ``X`` cannot be hashed).

    A table's rows are usually distinct, so the table itself holds no copies, while its rows
    repeated do: a continuous value found in no other row, passed as many times as its count.
    The rule is :func:`copied_row_cells`'s, with every number counted in cases (the rows
    sharing a value, the pairs of equal values of :func:`_ties_by_chance`), so a table and its
    rows repeated keep the same cases together (docs/aggregated_outcomes.md,
    "Count tables with cross-fitted models and tallies"). ``index``: :func:`feature_cell_index` of ``X`` when the
    caller has it (None: every row distinct).
    """
    counts = np.asarray(counts, dtype=np.int64).ravel()
    n = counts.shape[0]
    if not (hasattr(X, "iloc") and hasattr(X, "columns")) and not (
            isinstance(X, np.ndarray) and X.ndim == 2 and X.dtype.kind in "biuf"):
        return None
    if X.shape[0] != n or X.shape[1] < 2:
        return None
    if index is _HASH_ROWS:
        index = feature_cell_index(X, n)
    keep = np.flatnonzero(counts > 0)
    if keep.shape[0] == 0:
        return None
    cells = np.arange(n) if index is None else np.asarray(index, dtype=np.intp)
    cells = np.unique(cells[keep], return_inverse=True)[1].ravel()
    c = counts[keep].astype(np.float64)
    size = np.bincount(cells, weights=c)[cells]
    shared = size >= 2
    if not shared.any():
        return None
    try:
        if hasattr(X, "iloc"):
            import pandas as pd

            Xk = X.iloc[keep]
            columns = [pd.factorize(Xk.iloc[:, j], use_na_sentinel=False)[0]
                       for j in range(Xk.shape[1])]
        else:
            Xk = X[keep]
            columns = [np.unique(Xk[:, j], return_inverse=True)[1].ravel()
                       for j in range(Xk.shape[1])]
        n_distinct = int(cells.max()) + 1
        exclusive = np.zeros(keep.shape[0], dtype=bool)
        for j, codes in enumerate(columns):
            codes = np.asarray(codes, dtype=np.intp)
            in_cases = np.bincount(codes, weights=c)
            if 4 * in_cases.shape[0] >= n_distinct and not _ties_by_chance(
                    Xk, j, in_cases, weights=c):
                exclusive |= in_cases[codes] == size
        if not exclusive.any():
            ratio = _whole_row_tie_ratio(columns, cells, c)
            if ratio >= 10.0:
                exclusive[:] = True
            elif ratio >= _WHOLE_ROW_UNSURE_RATIO and _tie_pairs_spread(
                    cells, c) >= _UNSURE_PAIRS_SPREAD:
                _warn_unsure_copies(ratio, int(keep.shape[0]), float(c.sum()))
    except (TypeError, ValueError):  # a column whose values cannot be compared
        return None
    copies = shared & exclusive
    if not copies.any():
        return None
    out = np.full(n, -1, dtype=np.intp)
    out[keep[copies]] = np.unique(cells[copies], return_inverse=True)[1].ravel()
    return out


#: The whole-row test of :func:`_whole_rows_beyond_chance`: rows sharing all their features
#: count as copies when the pairs of them are at least this many times what independent draws
#: from the columns' own value shares would share (ten, as :func:`_ties_by_chance`: common
#: practice). ``False`` switches the test off.
_WHOLE_ROW_COPIES = True

#: Whole-number weights whose rows share their whole feature vector at least this many times as
#: often as independent columns would, but under the ten that marks copies, warn: the rows
#: repeated by their counts could be copies of a row (each weight counting one unit several
#: times) or independent cases whose columns go together, and the folds split them as cases.
#: mlmRev's Gcsemv (two exam scores), weights 1-4 on 100 rows, copies by construction:
#: 6.6-9.6 times, and `auto` 1.19-1.46 times scikit-learn's sigmoid on a cross-fitted extra
#: trees model; statsmodels' fair (eight survey answers that go together, no copies): 3.4-8.8
#: times on 250-1,000 people, so no factor tells the two apart. The six tallied tables of
#: benchmarks/hunt27_sweep.py (108 draws of 40-300 people) gave at most 2.07: three leaves them
#: quiet (docs/evidence/small_data_log.md, the section on tiny multiclass sets and copied
#: survey rows).
_WHOLE_ROW_UNSURE_RATIO = 3.0


#: ... and only where the pairs of tied cases are spread over the feature vectors as copies
#: spread them: :func:`_tie_pairs_spread` at least this. Copies whose number does not depend on
#: the features give pairs to every row whose weight is two or more, while independent cases
#: whose columns go together pile their pairs on the few most common vectors. Measured on cells
#: that raised the warning (docs/evidence/small_data_log.md, "Whole rows shared
#: three to ten times chance: tallies against copies"): mlmRev's Gcsemv with weights 1-2, 1-4
#: and 1-6 on 60-200 rows 0.24-0.63 (42 cells); tallies of 100-1,000 people of statsmodels'
#: fair, AER's Affairs and GSS7402 and PSID7682, stevedata's anes_vote84 0.003-0.037 (25 of 253
#: tallies of eleven surveys and eight shipped tables). A tenth lies between the two (common
#: practice: a round number in the gap, not fitted).
_UNSURE_PAIRS_SPREAD = 0.1


def _tie_pairs_spread(cells: np.ndarray, weights: np.ndarray) -> float:
    """How evenly the pairs of tied cases lie over the distinct feature vectors: the number of
    vectors that would hold them if they were equal, ``(sum p)^2 / sum p^2`` with ``p`` the
    pairs in each vector (``m (m - 1) / 2`` for ``m`` cases; an inverse Simpson index, Simpson
    1949, of the pairs), over the number of distinct vectors; 0 when no pair.

    Examples
    --------
    >>> import numpy as np
    >>> round(_tie_pairs_spread(np.arange(4), np.array([2.0, 2.0, 2.0, 2.0])), 6)  # copies
    1.0
    >>> round(_tie_pairs_spread(np.arange(4), np.array([9.0, 1.0, 1.0, 1.0])), 6)  # one common vector
    0.25
    """
    size = np.bincount(np.asarray(cells, dtype=np.intp),
                       weights=np.asarray(weights, dtype=np.float64))
    pairs = size * (size - 1.0) / 2.0
    total = float(pairs.sum())
    if total <= 0.0 or size.shape[0] == 0:
        return 0.0
    return total * total / float(np.dot(pairs, pairs)) / float(size.shape[0])


def _warn_unsure_copies(ratio: float, n_rows: int, n_cases: float) -> None:
    """The warning of ``_WHOLE_ROW_UNSURE_RATIO``."""
    warnings.warn(
        f"sample_weight: the whole-number weights are read as counts of independent cases "
        f"({n_rows} rows, {n_cases:.0f} cases), and the folds split each row's cases; but the "
        f"cases share their whole feature vector {ratio:.1f} times as often as independent "
        "columns would, which copies of a row (a weight counting one unit several times) give "
        "as well as columns that go together. If a row's weight counts copies of one unit, its "
        "copies sit on both sides of a fold and the held-out checks are too kind: pass folds "
        "that keep each row whole (`cv` as index pairs of the rows) or weights that are not "
        "counts.",
        UserWarning,
        stacklevel=4,
    )


def _whole_rows_beyond_chance(columns: list, cells: np.ndarray, weights: np.ndarray | None) -> bool:
    """Whether rows (or a count table's cases, ``weights`` the counts) share their whole feature
    vector far more often than independent draws would: the pairs of rows in one cell of
    identical features against ``n (n - 1) / 2`` times the chance that two draws agree on every
    column, the product over the columns of the sum of their values' squared shares (the
    birthday problem on the product grid, columns read as independent; Feller 1968, vol. 1,
    ch. II.3, cited from memory).

    The per-column test of :func:`copied_row_cells` looks for one value that marks a row; on
    rows whose every column is a short grid (survey answers, ages and incomes in whole numbers,
    scores in halves) no column marks one, and whole-number weights 1-4 on 100 distinct rows of
    mediation's framing (15 such columns) were read as 250 independent cases whose copies the
    folds put apart: each held-out case had its copies in the training part, the step maps
    learned their labels (binning's cross-validated log loss 0.449 against temperature's
    0.502) and ``auto`` chose binning, 0.679 on new rows against scikit-learn's sigmoid's 0.527
    with the same weights (docs/evidence/small_data_log.md, the hunt28_sweep.py hunt). Fifteen such
    columns agree by chance about once in 10^6 pairs; a tallied table of a few factors (Toxaemia's
    class, smoking and urea) shares its cells as often as the factors' shares say.
    """
    return _whole_row_tie_ratio(columns, cells, weights) >= 10.0


def _whole_row_tie_ratio(columns: list, cells: np.ndarray, weights: np.ndarray | None) -> float:
    """The pairs of rows (cases) in one cell of identical features over the pairs that
    independent columns would give them (:func:`_whole_rows_beyond_chance`); 0 when the test
    is off, there are fewer than two columns or two cases, or no pair."""
    if not _WHOLE_ROW_COPIES or len(columns) < 2:
        return 0.0
    c = np.ones(cells.shape[0]) if weights is None else np.asarray(weights, dtype=np.float64)
    n = float(np.sum(c))
    if n < 2.0:
        return 0.0
    size = np.bincount(cells, weights=c)
    pairs = float(np.sum(size * (size - 1.0) / 2.0))
    if pairs <= 0.0:
        return 0.0
    log_agree = 0.0
    for codes in columns:
        share = np.bincount(np.asarray(codes, dtype=np.intp), weights=c) / n
        log_agree += float(np.log(max(np.sum(share ** 2), 1e-300)))
    chance = n * (n - 1.0) / 2.0 * float(np.exp(log_agree))
    return pairs / chance if chance > 0.0 else float("inf")


def case_cells_of(copies: np.ndarray, cases: np.ndarray) -> np.ndarray:
    """Every case's cell from :func:`copied_case_cells`'s ``copies`` (per table row) and
    ``cases`` (the row of every case): a copied row's cases share their cell, each other case
    is a cell of its own (numbered 0, 1, ...)."""
    cells = np.asarray(copies)[cases]
    cells = np.where(cells < 0, int(cells.max()) + 1 + np.arange(cases.shape[0]), cells)
    return np.unique(cells, return_inverse=True)[1].ravel().astype(np.intp)


def _ties_by_chance(X: Any, j: int, counts: np.ndarray,
                    weights: np.ndarray | None = None) -> bool:
    """Whether the repeated values of numeric column ``j`` are as many as rows drawn on its grid
    would share by chance, so that a repeated value does not mark a copied row.

    The grid is the column's range divided by its smallest gap (whole days from 6 to 75: 70
    points). ``n`` rows spread evenly over ``G`` points share about ``n (n - 1) / (2 G)`` pairs
    of equal values (the birthday problem; Feller 1968, vol. 1, ch. II.3, cited from memory); a column counts as tied by
    chance when the pairs of equal values it holds are fewer than ten times that number (ten:
    common practice, room for values that are not spread evenly). Three copies of 100 rows of
    scikit-learn's breast cancer measurements hold 9 to 200 times as many pairs as chance gives
    them (above ten in 29 of 30 columns; one such column marks the copies); the durations in whole days of lifelines' waltons data (81 rows, 28 values) hold about
    twice as many. Values repeated too evenly for chance (each id of a file passed three times,
    three times) are not chance ties either. Text and categorical columns are never tied by chance here (their values are
    not on a grid). ``weights``: each row's count of cases (:func:`copied_case_cells`;
    ``counts`` then counts cases per value), the rows read as repeated by them.
    """
    column = X.iloc[:, j] if hasattr(X, "iloc") else X[:, j]
    try:
        values = np.asarray(column, dtype=np.float64)
    except (TypeError, ValueError):
        return False
    if values.ndim != 1 or not np.all(np.isfinite(values)):
        return False
    distinct = np.unique(values)
    if distinct.shape[0] < 2:
        return True
    gaps = np.diff(distinct)
    grid = (distinct[-1] - distinct[0]) / gaps.min() + 1.0
    n = float(values.shape[0]) if weights is None else float(np.sum(weights))
    chance = n * (n - 1.0) / (2.0 * grid)
    pairs = float(np.sum(counts.astype(np.float64) * (counts - 1.0) / 2.0))
    if pairs >= 10.0 * chance:
        return False
    # rows drawn by chance leave some grid points empty and others crowded; every value
    # repeated alike (an id column of a file passed three times: each id 3 times) is far too
    # even for that: the index of dispersion of the counts on the grid, sum (c - m)^2 / m with
    # m = n / G, is chi-squared on G - 1 degrees of freedom under even draws (Fisher's index;
    # Cochran 1954, cited from memory); real ties spread wider than even draws (waltons' days:
    # 221 on 69 degrees of freedom), copies of ids give 0
    from scipy.special import gammaln
    from scipy.stats import chi2

    # on a grid of few points the counts cannot be too even for chance at all: the most even
    # arrangement has a multinomial probability above the test's 1e-3 under even draws (a 0/1
    # column split 15/15 in 30 rows: 0.14, Feller 1968, vol. 1, ch. VI.9, cited from memory),
    # and the chi-squared approximation, whose lower tail is 0 at a dispersion of 0, is wrong
    # there (Stat2Data's TipJoke: a one-hot card column split evenly in a draw of 30 bills read
    # its 15 rows as copies of one row, and the kept-together fold left a 15-neighbour model 13
    # training rows)
    cases, points = int(round(n)), max(int(round(grid)), 2)
    low, extra = divmod(cases, points)
    most_even = (gammaln(cases + 1.0) - extra * gammaln(low + 2.0)
                 - (points - extra) * gammaln(low + 1.0) - cases * np.log(points))
    if most_even >= np.log(1e-3):
        return True
    mean = n / grid
    dispersion = float(np.sum(counts.astype(np.float64) ** 2)) / mean - n
    return bool(chi2.cdf(dispersion, grid - 1.0) >= 1e-3)


def keep_cells_together(fold: np.ndarray, cells: np.ndarray) -> np.ndarray:
    """Folds in which every cell's rows sit in the fold of its first row; empty folds dropped
    and the rest renumbered 0, 1, ... (rows outside any shared cell keep their fold)."""
    _, first, inverse = np.unique(cells, return_index=True, return_inverse=True)
    moved = np.asarray(fold)[first][inverse.ravel()]
    _, renumbered = np.unique(moved, return_inverse=True)
    return renumbered.ravel()


def warn_weightless_classes(owner: Any, classes: np.ndarray, y_index: np.ndarray,
                            sample_weight: np.ndarray, *, stacklevel: int) -> None:
    """Warn naming the classes that have rows in ``y`` but only rows of ``sample_weight`` 0.

    Such a class is absent for every fit (the model's, the maps', the cutoff search's) although
    it stays among ``classes_``; a frozen model's class with no rows at all already gets the
    warning of :meth:`_HeldOutMixin._fit_heldout`. Until 5 December 2026 rows of weight 0 kept it
    silent: heplots' NeuroCog, 'Schizophrenia' weighted 0 in 80 rows, ``method="auto"`` chose
    vector scaling (frozen) or temperature (cross-fitted) without a word while a named method
    warned that no map could be fitted for the class.
    """
    rows = np.bincount(y_index, minlength=classes.shape[0])
    weighted = np.bincount(y_index[sample_weight > 0], minlength=classes.shape[0])
    weightless = np.flatnonzero((rows > 0) & (weighted == 0))
    if not weightless.size:
        return
    names = ", ".join(repr(plain(classes[j])) for j in weightless[:5])
    warnings.warn(
        f"{type(owner).__name__}: every row of class(es) {names} in `y` has `sample_weight` 0, "
        "so nothing fitted here learns or checks them (their probabilities follow the model "
        "and the maps fitted on the other classes). Give those rows a positive weight, or "
        "leave the class out.",
        UserWarning,
        stacklevel=stacklevel + 1,
    )


def rows_for_models(owner: Any, estimator: Any, classes: np.ndarray, y_index: np.ndarray,
                    sample_weight: np.ndarray | None, est_params: dict) -> np.ndarray | None:
    """The rows every model fitted inside a wrapper is fitted on (each fold model's training
    part and the final refit): ``None`` for all rows, else the indices of the rows kept.

    Rows of weight 0 carry no information (docs/weights.md), so they are left out and the
    models are those fitted on the other rows, for a model that reads ``sample_weight`` and
    one that does not (which would otherwise count them as rows of weight 1). The rows of a
    class whose every row weighs 0 stay, at weight 0, where the model receives the weights: the
    class then stays among the models' classes, as it stays among the wrapper's
    (:func:`warn_weightless_classes` names it). A model that takes no weights could keep such a
    class only by learning it from those rows, so that is refused, naming the class.
    """
    if sample_weight is None:
        return None
    sw = np.asarray(sample_weight)
    if not np.any(sw == 0) or not np.any(sw > 0):
        return None
    y_index = np.asarray(y_index, dtype=np.intp)
    weighted = np.bincount(y_index[sw > 0], minlength=classes.shape[0])
    lone = weighted[y_index] == 0
    if lone.any() and not any(str(key).endswith("sample_weight") for key in est_params):
        names = ", ".join(repr(plain(classes[j]))
                          for j in np.unique(y_index[lone])[:5])
        raise ValueError(
            f"{type(owner).__name__}: every row of class(es) {names} in `y` has `sample_weight` "
            f"0, and `estimator` ({type(estimator).__name__}) takes no sample_weight, so the "
            "models fitted here could keep the class only by learning it from rows that weigh "
            "nothing. Give those rows a positive weight, leave the class's rows out of X and y, "
            "or pass a model that accepts sample_weight."
        )
    return np.flatnonzero((sw > 0) | lone)


def params_of_rows(params: dict, rows: np.ndarray, n: int) -> dict:
    """``params`` with every row-wise value (one entry per row of the ``n``) taken at ``rows``."""
    return {key: (_safe_indexing(value, rows) if row_count(value) == n else value)
            for key, value in params.items()}


def _positive_part(sample_weight: Any) -> Any:
    """The positive weights of ``sample_weight`` (all of them where none is positive, or where
    they cannot be read as numbers): the weights of the rows a model fitted here receives."""
    try:
        w = np.asarray(sample_weight, dtype=float).ravel()
    except (TypeError, ValueError):
        return sample_weight
    return w[w > 0] if np.any(w > 0) else w


def is_frozen(estimator: Any) -> bool:
    """Whether ``estimator`` is an already-fitted :class:`~sklearn.frozen.FrozenEstimator`."""
    return isinstance(estimator, FrozenEstimator)



def _class_fix(smallest: str) -> str:
    """The advice when the estimator cannot be fitted even on all rows: its own message says
    what is wrong (too few rows of a class for the model, or something else, such as NaN)."""
    return (f"If the estimator's message below is about too few rows of a class, give "
            f"{smallest} more rows, or regularise it (its message may say how); otherwise fix "
            "what it names.")


#: Mean positive weight below which weights handed to a cross-fitted model get a warning: at
#: 1e-6 of a row LogisticRegression's fixed penalty outweighs the data a millionfold and
#: GaussianNB skips a class whose weights sum to about 0 (``np.isclose(n, 0)``, absolute
#: tolerance 1e-8, in its update), so the fold models can give every row one probability
#: (the threshold is our judgement: weight-scale hunt, benchmarks/weight_scale_hunt.py).
_MODEL_WEIGHT_FLOOR = 1e-6


def _warn_weights_too_small_for_model(sw: np.ndarray | None, estimator: Any, owner: str, *,
                                      stacklevel: int = 4) -> None:
    """A ``WeightScaleWarning`` when weights far below one per row reach a model fitted here.

    The wrappers pass ``sample_weight`` to the model unchanged (docs/weights.md); the wrapper's
    own steps read such weights by their ratios, but scikit-learn models read their scale.
    Until 5 December 2026 weights x 1e-12 turned a cross-fitted GaussianNB or LogisticRegression on
    breast cancer into a constant model with only the calibration map's Kish warning, which
    does not name the model.
    """
    if sw is None:
        return
    positive = sw[sw > 0]
    if not positive.size or float(positive.mean()) >= _MODEL_WEIGHT_FLOOR:
        return
    from .calibration._base import WeightScaleWarning

    warnings.warn(
        f"{owner}: `sample_weight` averages {float(positive.mean()):.3g} per row, and the model "
        f"fitted here ({type(estimator).__name__}) receives the weights as given; scikit-learn "
        "models read that scale (LogisticRegression's penalty then outweighs the data, "
        "GaussianNB ignores a class whose weights sum to about 0), so it may give every row one "
        "probability. Rescale the weights to sum to the number of rows "
        "(w * len(w) / w.sum()): the wrapper's own steps read only their ratios there.",
        WeightScaleWarning,
        stacklevel=stacklevel,
    )


class HeldOutClassifierBase(ClassifierMixin, MetaEstimatorMixin, BaseEstimator):
    """Base class of the probwrap wrappers: held-out predictions, routing, tags.

    Subclasses define ``__init__`` with at least ``estimator``, ``cv``, ``n_jobs`` and
    ``random_state`` and call :meth:`_fit_heldout` from their ``fit``.
    """

    _heldout_response = "predict_proba"

    # -- fitting -------------------------------------------------------------------------
    def _make_splitter(self, y: np.ndarray) -> Any:
        cv = self.cv
        if cv is None:
            cv = 5
        if isinstance(cv, str) and cv == "prefit":
            raise ValueError(
                "`cv='prefit'` is not used by probwrap: to calibrate or tune an already fitted "
                "model without refitting it, wrap it in sklearn.frozen.FrozenEstimator and pass "
                "that as `estimator` (the rows given to fit are then all held out)."
            )
        if isinstance(cv, numbers.Integral) and not isinstance(cv, bool):
            if cv < 2:
                raise ValueError(f"`cv` must be at least 2 folds; got {cv}.")
            return StratifiedKFold(n_splits=int(cv), shuffle=True, random_state=self.random_state)
        try:
            return check_cv(cv, y, classifier=True)
        except (TypeError, ValueError) as exc:
            raise ValueError(
                "`cv` must be an int >= 2, a scikit-learn splitter or an iterable of "
                f"(train, test) index pairs; got {plain(cv)!r} ({exc})."
            ) from exc

    def _route_fit_params(
        self, sample_weight: Any, fit_params: dict, *, weights_used_here: str | None = None
    ) -> tuple[dict, dict]:
        """Split fit parameters into those for the estimator and those for the splitter.

        ``weights_used_here``: ``None`` when the wrapper's own step uses ``sample_weight``
        (held-out rows); otherwise why it does not, for the warning when the estimator takes none.
        """
        if get_config().get("enable_metadata_routing", False):
            routed = process_routing(self, "fit", sample_weight=sample_weight, **fit_params)
            return dict(routed.estimator.fit), dict(routed.splitter.split)
        params = dict(fit_params)
        split_params = {}
        if "groups" in params and not has_fit_parameter(self.estimator, "groups"):
            # as GridSearchCV's and cross_validate's `groups` without routing: for the splitter
            # (until 5 December 2026 they went to the model's fit, a TypeError, or a group splitter
            # said "The 'groups' parameter should not be None")
            cv = self.cv if self.cv is not None else 5
            if isinstance(cv, numbers.Integral) or isinstance(cv, str):
                raise ValueError(
                    f"`groups` were passed to fit, but `cv={plain(cv)!r}` makes stratified folds, "
                    "which do not read groups. To keep each group in one fold, pass a group "
                    "splitter, e.g. `cv=GroupKFold(5)` (sklearn.model_selection)."
                )
            split_params["groups"] = params.pop("groups")
        if sample_weight is not None:
            # weights passed to a step by name (``logisticregression__sample_weight`` for a
            # Pipeline) do reach the model: no warning that it is fitted without them
            by_step = any(str(key).endswith("__sample_weight") for key in params)
            if has_fit_parameter(self.estimator, "sample_weight"):
                params["sample_weight"] = sample_weight
            elif _all_equal(_positive_part(sample_weight)):
                # weights of 1 (or all equal below 1, which count one row each) weight nothing:
                # the model fitted without them is the model they ask for, so nothing is lost
                # and there is nothing to warn about (on an ordinary scaler + logistic
                # regression Pipeline every fit with weights of 1 warned)
                # (rows of weight 0 beside them are left out of every model fitted here:
                # rows_for_models)
                pass
            elif by_step:
                pass
            elif weights_used_here is None:
                warnings.warn(
                    f"`estimator` ({type(self.estimator).__name__}) does not accept "
                    "sample_weight; it is fitted without weights, and the weights are used only "
                    f"by the wrapper's own step.{self._weights_advice()}",
                    UserWarning,
                    stacklevel=3,
                )
            else:
                warnings.warn(
                    f"`sample_weight` is ignored: `estimator` ({type(self.estimator).__name__}) "
                    f"does not accept it, and {weights_used_here}.{self._weights_advice()}",
                    UserWarning,
                    stacklevel=3,
                )
        return params, split_params

    def _weights_advice(self) -> str:
        """How to weight the model's own fit too: by the Pipeline's final step's name where
        that works, and through scikit-learn's metadata routing."""
        hint = self._step_weights_hint()
        if not hint:
            return " " + _ROUTING_ADVICE
        return (hint + " Or turn on scikit-learn's metadata routing "
                "(sklearn.set_config(enable_metadata_routing=True)) and request the weights on "
                "that step (set_fit_request(sample_weight=True)).")

    def _step_weights_hint(self) -> str:
        """What to pass so that a Pipeline's final step is weighted too ('' otherwise)."""
        steps = getattr(self.estimator, "steps", None)
        if not steps:
            return ""
        name, last = steps[-1]
        if last is None or last == "passthrough" or not has_fit_parameter(last, "sample_weight"):
            return ""
        return (f" To weight the model too, pass the weights to its final step by name as well: "
                f"fit(X, y, sample_weight=w, {name}__sample_weight=w).")

    def _accept_heldout(self, estimator: Any, classes: Any, values: np.ndarray,
                        response: str) -> None:
        """Check the held-out predictions and keep the model's fitted attributes (both the
        row-by-row and the count-table cross-fitting end here)."""
        if not np.all(np.isfinite(values)):
            raise ValueError(
                f"`estimator` returned NaN or infinite values from {response}; held-out "
                "predictions must be finite."
            )
        check_model_probabilities(values, response, "`estimator`", "held-out rows")
        self.estimator_ = estimator
        self.classes_ = np.asarray(classes)
        if hasattr(estimator, "n_features_in_"):
            self.n_features_in_ = estimator.n_features_in_
        if hasattr(estimator, "feature_names_in_"):
            self.feature_names_in_ = estimator.feature_names_in_

    def _fit_heldout(
        self,
        X: Any,
        y: Any,
        sample_weight: Any = None,
        fit_params: dict | None = None,
        *,
        response: str | None = None,
    ) -> HeldOutPredictions:
        """Obtain held-out predictions and set ``estimator_``, ``classes_``, ``n_features_in_``.

        Parameters
        ----------
        X : array-like, DataFrame, sparse matrix or anything the estimator accepts
            Passed to the estimator untouched.
        y : array-like of shape (n,)
            Labels.
        sample_weight : array-like of shape (n,), default=None
            Row weights; passed on to the estimator where it accepts them.
        fit_params : dict, default=None
            Further fit parameters (routed with metadata routing when it is enabled).
        response : {"predict_proba", "decision_function", "auto"}, default=None
            Which output to collect (``None``: the class attribute ``_heldout_response``).
        """
        if self.estimator is None:
            raise ValueError("`estimator` must be a classifier; got None.")
        self._fold_models = None  # set by _cross_fit for a wrapper that keeps them
        if fit_params and is_frozen(self.estimator):
            # a frozen model is not refitted and there are no folds to split: nothing reads
            # them (until 5 December 2026 they were dropped without a word, with routing on or off)
            warnings.warn(
                f"{type(self).__name__}: fit parameter(s) {sorted(map(str, fit_params))} are not "
                "used: `estimator` is a FrozenEstimator, which is not refitted here, and all "
                "rows given to fit are held out (no folds to split). Leave them out, or pass "
                "an unfitted model to have it cross-fitted with them.",
                UserWarning,
                stacklevel=3,
            )
        if _is_dask(X) or _is_dask(y) or _is_dask(sample_weight):
            # Dask input (frozen estimators only): predictions are tallied block by block on the
            # cluster; the held-out rows are the tally's weighted (bin, class) rows.
            from .scale._entry import heldout_from_dask

            response = _resolve_response(self.estimator, response or self._heldout_response)
            return heldout_from_dask(self, X, y, sample_weight, response)
        if y is None:
            raise ValueError(
                f"{type(self).__name__} requires y to be passed, but the target y is None."
            )
        fit_params = dict(fit_params or {})
        y_arr = column_or_1d(y, warn=True)
        check_target_labels(y_arr, "y")
        check_classification_targets(y_arr)
        n = y_arr.shape[0]
        check_rows_match(X, n)
        # 1-d X or repeated column names that the model's scikit-learn step refuses: said
        # here, before the folds, not at the end of a cross-fitting message
        check_feature_input(X, self.estimator, y_arr)
        sw = None
        if sample_weight is not None:
            sw = rescale_extreme_weights(check_sample_weight(sample_weight, n), type(self).__name__)
        response = _resolve_response(self.estimator, response or self._heldout_response)
        # the rows' groups of identical features, hashed once for every cell check below
        index = feature_cell_index(X, n)

        if is_frozen(self.estimator):
            estimator = self.estimator
            if not hasattr(estimator.estimator, "classes_"):
                raise ValueError(
                    f"`estimator` is a FrozenEstimator around an unfitted "
                    f"{type(estimator.estimator).__name__} (it has no classes_); fit the model "
                    "first, or pass it unwrapped to have it cross-fitted here."
                )
            est_classes = np.asarray(estimator.classes_)
            y_index, _ = check_labels(y_arr, name="y", classes=est_classes, min_classes=1)
            if np.unique(y_index).shape[0] < 2:
                raise ValueError(
                    "`y` contains only 1 class; the held-out rows must contain at least two "
                    "classes."
                )
            absent = np.flatnonzero(np.bincount(y_index, minlength=est_classes.shape[0]) == 0)
            if absent.size:
                names = ", ".join(repr(plain(est_classes[j])) for j in absent[:5])
                warnings.warn(
                    f"{type(self).__name__}: class(es) {names} of the frozen model have no "
                    "held-out rows in `y`; nothing fitted here is checked on them (their "
                    "probabilities follow the model and the map fitted on the other classes). "
                    "Hold out labelled rows of every class.",
                    UserWarning,
                    stacklevel=3,
                )
            # the labels wait as one-byte (or two-byte) codes while the model predicts
            y_index = y_index.astype(np.min_scalar_type(est_classes.shape[0] - 1))
            values = _predict_in_chunks(getattr(estimator, response), X)
            check_model_columns(np.asarray(values), response, est_classes.shape[0], n,
                                f"The frozen model ({type(estimator).__name__})", "`X`")
            values = rows_summing_to_one(values, response,
                                         f"The frozen model ({type(estimator).__name__})")
            # every row is in no fold: a read-only view of one value, not n of them
            fold = np.broadcast_to(np.array(-1, dtype=int), (n,))
            n_folds = 0
            classes = est_classes
            cells = feature_cells(X, sw, y_index, index=index)
        else:
            y_index, classes = check_labels(y_arr, name="y")
            est_params, split_params = self._route_fit_params(
                sw if sample_weight is not None else None, fit_params
            )
            if any(k.endswith("sample_weight") for k in est_params):
                _warn_weights_too_small_for_model(sw, self.estimator, type(self).__name__)
            table = self._table_case_folds(X, y_arr, y_index, classes, sw, est_params,
                                           split_params, index=index)
            if table is not None:
                return self._fit_heldout_table(X, y_arr, y_index, classes, sw, est_params,
                                               response, *table, index=index)
            # rows of weight 0 take part in no model fitted here (docs/weights.md)
            fit_rows = rows_for_models(self, self.estimator, classes, y_index, sw, est_params)
            splitter = self._make_splitter(y_arr)
            if fit_rows is not None:
                splits = self._splits_of_weighted_rows(X, y_arr, splitter, y_index, classes,
                                                       sw, split_params, fit_rows)
            else:
                with warnings.catch_warnings():
                    # Tiny classes trigger a warning from StratifiedKFold; handled below.
                    warnings.filterwarnings("ignore", message="The least populated class")
                    try:
                        splits = list(splitter.split(X, y_arr, **split_params))
                    except ValueError as exc:
                        if not isinstance(self.cv if self.cv is not None else 5,
                                          numbers.Integral):
                            raise
                        raise ValueError(self._too_many_folds(y_index, classes, exc)) from exc
            fold = np.full(n, -1, dtype=int)
            for i, (_, test) in enumerate(splits):
                if np.any(fold[test] >= 0):
                    raise ValueError(
                        "`cv` must partition the rows: every row must be in exactly one test "
                        "fold."
                    )
                fold[test] = i
            if np.any(fold < 0):
                raise ValueError(
                    "`cv` must partition the rows: some rows are in no test fold, so they would "
                    "have no held-out prediction."
                )
            cells = feature_cells(X, sw, y_index, index=index)
            if fit_rows is None:
                if cells is not None:
                    splits, fold = self._splits_keeping_cells(splits, fold, cells, y_index)
            else:
                # copies of a row are kept together as in the fit on the weighted rows alone:
                # the cells and each cell's fold are decided among the weighted rows, and a
                # zero row joins the fold of the weighted rows with its features (until the
                # evening of 5 December 2026 the cells were found among all rows and followed
                # their first row, so a zero row there took its weighted copies to its own
                # fold: benchmarks/zero_weight_folds_check.py)
                pos = np.flatnonzero(sw > 0)
                pos_cells = feature_cells(_safe_indexing(indexable(X)[0], pos), sw[pos],
                                          np.asarray(y_index)[pos])
                pos_fold = fold[pos]
                if pos_cells is not None:
                    _, pos_fold = self._splits_keeping_cells(None, pos_fold, pos_cells,
                                                             np.asarray(y_index)[pos])
                if isinstance(self.cv if self.cv is not None else 5, numbers.Integral):
                    # (folds of `cv` stay as given: _splits_keeping_cells only warns there)
                    splits, fold = self._folds_with_zero_rows(splits, fold, pos, pos_fold,
                                                              fit_rows, sw, index)
            n_folds = len(splits)
            n_classes = classes.shape[0]
            short = [i for i, (train, _) in enumerate(splits)
                     if np.unique(y_index[train]).shape[0] < n_classes]
            if short:
                warnings.warn(
                    f"Some classes are absent from the training part of fold(s) {short[:5]}; the "
                    "models fitted there give those classes a held-out probability of 0 (or the "
                    "lowest score). Use fewer folds or more rows of the rare classes.",
                    UserWarning,
                    stacklevel=3,
                )
            try:
                values = self._cross_fit(X, y_arr, splits, est_params, response, classes)
            except ModelOutputError:
                raise
            except FoldScoringError as exc:
                raise ValueError(self._fold_scoring_failure(X, splits, response, exc)) from exc
            except ValueError as exc:  # (numpy's LinAlgError is a ValueError)
                if not short:
                    raise ValueError(self._fold_failure(X, y_arr, y_index, classes, splits,
                                                        est_params, exc)) from exc
                # the estimator refused a training part that lacks a class: say which and why
                counts = np.bincount(y_index, minlength=n_classes)
                rare = [f"{plain(classes[j])!r} ({int(counts[j])} row(s))"
                        for j in range(n_classes) if counts[j] < n_folds]
                raise ValueError(
                    f"Cross-fitting `estimator` ({type(self.estimator).__name__}) failed: the "
                    f"training part of fold(s) {short[:5]} of {n_folds} lacks a class, and the "
                    f"estimator cannot be fitted without it. Rare classes: {', '.join(rare)}. "
                    "Give every class at least 2 rows (better: as many as folds), use fewer "
                    "folds (`cv`), or pass a model fitted elsewhere inside "
                    "sklearn.frozen.FrozenEstimator so nothing is refitted here. "
                    f"The estimator said: {exc}"
                ) from exc
            if fit_rows is None:
                estimator = clone(self.estimator).fit(X, y_arr, **est_params)
            else:
                # the final model on the rows the fold models were fitted on (before 5 December
                # 2026 a model without sample_weight took the zero rows here at weight 1)
                estimator = clone(self.estimator).fit(
                    _safe_indexing(indexable(X)[0], fit_rows), y_arr[fit_rows],
                    **params_of_rows(est_params, fit_rows, n))

        if sw is not None:
            weighted = np.unique(np.asarray(y_index)[sw > 0])
            if weighted.shape[0] < 2:
                raise ValueError(
                    "Only one class has a positive `sample_weight`; at least two classes must "
                    "carry weight."
                )
            warn_weightless_classes(self, classes, np.asarray(y_index), sw, stacklevel=3)
        values = np.asarray(values, dtype=float)
        self._accept_heldout(estimator, classes, values, response)
        ho = HeldOutPredictions(
            values=values,
            response=response,
            classes=self.classes_,
            y_index=np.asarray(y_index, dtype=int),
            # unit weights as a read-only view of one value (no per-row array)
            sample_weight=sw if sw is not None else np.broadcast_to(np.array(1.0), (n,)),
            fold=fold,
            n_folds=n_folds,
            estimator=estimator,
            cells=cells,
            # a count table's cases: the cells its rows repeated by their counts would get
            # (copied_case_cells: -1 for a row whose cases are cells of their own)
            case_cells=(copied_case_cells(X, whole_counts(sw), index=index)
                        if sw is not None and whole_counts(sw) is not None else None),
        )
        # (for the check of groups that vary more: the table's features)
        ho.table_features = numeric_features(X) if cells is not None else None
        return ho

    #: Whether a count table's cells are split into case-level folds when the model is
    #: cross-fitted (``cv`` a number): each row's count is shared among the folds as the same
    #: splitter shares the rows repeated by their counts (``np.repeat``), each fold model is
    #: fitted on the table with the counts left in its training part, and the held-out rows are
    #: (row, fold) pieces weighted by the cases held out there (since 5 December 2026,
    #: docs/aggregated_outcomes.md, "Cross-fitting a count table by its cases"). Wrappers whose
    #: later steps need one held-out row per row of ``X`` set it to False.
    _split_table_cases = False

    def _table_case_folds(
        self, X: Any, y: np.ndarray, y_index: np.ndarray, classes: np.ndarray,
        sw: np.ndarray | None, est_params: dict, split_params: dict, *,
        index: Any = _HASH_ROWS,
    ) -> tuple[np.ndarray, np.ndarray] | None:
        """For a count table cross-fitted on ``cv`` folds: ``(counts, fold)``, with ``fold``
        the fold of every case (the rows repeated by their counts, in order), else None (the
        table's rows are the units of the folds, as before 5 December 2026).

        The cases are split by the wrapper's own splitter (stratified, shuffled with
        ``random_state``) run on the labels of the rows repeated in order, so a table and
        ``np.repeat`` of its rows get the same folds of cases; where the repeated rows would be
        copies of a row (:func:`copied_case_cells`) a copied row's cases are kept in one fold
        as :meth:`_splits_keeping_cells` keeps the repeated rows' copies. Not used
        when the model takes no ``sample_weight`` (its fold models could not see the counts), with other fit
        parameters or splitter groups, with folds given as ``cv``, or where the wrapper says
        so (:attr:`_split_table_cases`).
        """
        if sw is None or not self._split_table_cases or split_params:
            return None
        if set(est_params) != {"sample_weight"}:
            return None
        if get_config().get("enable_metadata_routing") and (
            est_params["sample_weight"] is not sw
            or not has_fit_parameter(self.estimator, "sample_weight")
        ):
            # routing on: only where the model receives the wrapper's own weights, as with
            # routing off (a model whose fit takes them, requesting them by their own name);
            # weights requested under another name, or reaching a Pipeline's steps, keep the
            # rows as the folds' units, as routing off does (since 5 December 2026: before, routing
            # on always kept the rows, so a count table gave another wrapper than routing off)
            return None
        cv = self.cv if self.cv is not None else 5
        if not isinstance(cv, numbers.Integral) or isinstance(cv, bool):
            return None
        counts = whole_counts(sw)
        if counts is None:
            return None
        cases = np.repeat(np.arange(counts.shape[0]), counts)
        y_cases = y[cases]
        splitter = self._make_splitter(y_cases)
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="The least populated class")
            try:
                splits = list(splitter.split(np.zeros((cases.shape[0], 1)), y_cases))
            except ValueError as exc:
                raise ValueError(self._too_many_folds(y_index[cases], classes, exc)) from exc
        fold = np.empty(cases.shape[0], dtype=np.intp)
        for i, (_, test) in enumerate(splits):
            fold[test] = i
        copies = copied_case_cells(X, counts, index=index)
        if copies is not None:
            # the repeated rows' copies of a row (a value found in no other row: star98's
            # district measurements, or any continuous feature repeated by its count) are kept
            # in one fold, as _splits_keeping_cells keeps them for the rows repeated: the same
            # rule on the same folds of cases, so a table and its repeated rows get the same
            # folds (before this, such a table kept its rows as the folds' units,
            # or, its rows distinct, split a row's cases among the folds)
            _, fold = self._splits_keeping_cells(splits, fold, case_cells_of(copies, cases),
                                                 np.asarray(y_index)[cases])
        return counts, np.asarray(fold, dtype=np.intp)

    def _fit_heldout_table(
        self, X: Any, y: np.ndarray, y_index: np.ndarray, classes: np.ndarray, sw: np.ndarray,
        est_params: dict, response: str, counts: np.ndarray, case_fold: np.ndarray, *,
        index: Any = _HASH_ROWS,
    ) -> HeldOutPredictions:
        """Held-out predictions of a count table cross-fitted by its cases
        (:meth:`_table_case_folds`): fold ``f``'s model is fitted on the rows with the cases
        left in its training part as their weights and scores the rows it holds cases of.
        The held-out rows are the runs of the cases (the rows repeated, in order) that share a
        row and a fold, each weighted by its length: repeated by their weights they are the
        repeated rows' held-out cases in the same order, so the steps that draw folds of cases
        from them (``auto``'s choice on a frozen score, the tuned cutoff's anchor) draw the
        same ones."""
        cases = np.repeat(np.arange(counts.shape[0]), counts)
        n_folds = int(case_fold.max()) + 1
        held = np.zeros((counts.shape[0], n_folds), dtype=np.int64)
        np.add.at(held, (cases, case_fold), 1)
        n_classes = classes.shape[0]
        splits, params = [], []
        for f in range(n_folds):
            left = counts - held[:, f]
            splits.append((np.flatnonzero(left > 0), np.flatnonzero(held[:, f] > 0)))
            params.append({"sample_weight": left.astype(float)})
        short = [f for f, (train, _) in enumerate(splits)
                 if np.unique(y_index[train]).shape[0] < n_classes]
        if short:
            warnings.warn(
                f"Some classes are absent from the training part of fold(s) {short[:5]}; the "
                "models fitted there give those classes a held-out probability of 0 (or the "
                "lowest score). Use fewer folds or more rows of the rare classes.",
                UserWarning,
                stacklevel=4,
            )
        try:
            blocks = self._cross_fit_blocks(X, y, splits, params, response, classes)
        except FoldScoringError as exc:
            raise ValueError(self._fold_scoring_failure(X, splits, response, exc)) from exc
        except ValueError as exc:  # (numpy's LinAlgError is a ValueError)
            raise ValueError(self._fold_failure(X, y, y_index, classes, splits, est_params,
                                                exc)) from exc
        # the final model, as the fold models (whose training parts hold the rows with cases
        # left), on the rows of positive count: rows of weight 0 join no model here either
        # (until the evening of 5 December 2026 they entered it at weight 0, and a model that
        # draws rows, a random forest, drew them: benchmarks/zero_weight_folds_check.py)
        fit_rows = rows_for_models(self, self.estimator, classes, y_index, sw, est_params)
        if fit_rows is None:
            estimator = clone(self.estimator).fit(X, y, **est_params)
        else:
            estimator = clone(self.estimator).fit(
                _safe_indexing(indexable(X)[0], fit_rows), y[fit_rows],
                **params_of_rows(est_params, fit_rows, counts.shape[0]))
        if np.unique(np.asarray(y_index)[sw > 0]).shape[0] < 2:
            raise ValueError(
                "Only one class has a positive `sample_weight`; at least two classes must "
                "carry weight."
            )
        warn_weightless_classes(self, classes, np.asarray(y_index), sw, stacklevel=4)
        start = np.flatnonzero(np.concatenate([
            [True], (cases[1:] != cases[:-1]) | (case_fold[1:] != case_fold[:-1])]))
        row, fold = cases[start], case_fold[start]
        size = np.diff(np.append(start, cases.shape[0]))
        offset = np.cumsum([0] + [test.shape[0] for _, test in splits])
        at = np.empty(row.shape[0], dtype=np.intp)
        for f, (_, test) in enumerate(splits):
            mine = fold == f
            at[mine] = offset[f] + np.searchsorted(test, row[mine])
        values = np.concatenate(blocks, axis=0)[at]
        self._accept_heldout(estimator, classes, values, response)
        ho = HeldOutPredictions(
            values=values,
            response=response,
            classes=self.classes_,
            y_index=np.asarray(y_index, dtype=int)[row],
            sample_weight=size.astype(float),
            fold=fold,
            n_folds=n_folds,
            estimator=estimator,
            cells=None,
            case_cells=None,  # (copied rows' cases share a fold: see _table_case_folds)
        )
        ho.table_row = row
        ho.row_weight = sw
        groups = feature_cells(X, sw, y_index, index=index)  # (for the check of groups that vary more)
        ho.table_groups = None if groups is None else groups[row]
        features = numeric_features(X) if groups is not None else None
        ho.table_features = None if features is None else features[row]
        return ho

    def _warn_overdispersed_table(self, ho: HeldOutPredictions, p: np.ndarray | None,
                                  what: str, *, stacklevel: int = 5,
                                  remedy: str | None = None,
                                  fit_remedy: str | None = None) -> None:
        """Warn when a binary count table read as cases (a frozen model's, or one
        cross-fitted by its cases) has groups of identical features that vary more than
        binomial around the held-out probabilities ``p`` (of the second class), or that a Platt
        map of them fits poorly (lack of fit of the map or of the model, told apart since
        5 December 2026, with the table's numeric features: ``ho.table_features``)
        (:func:`probwrap._weights.warn_overdispersed_table`)."""
        from ._weights import warn_overdispersed_table

        if p is None or ho.from_tally or ho.response != "predict_proba" or len(ho.classes) != 2:
            return
        table = getattr(ho, "table_row", None) is not None
        if table:
            groups = getattr(ho, "table_groups", None)
        elif ho.n_folds == 0 and whole_counts(np.asarray(ho.sample_weight)) is not None:
            groups = ho.cells
        else:
            return
        warn_overdispersed_table(p, ho.y_index, ho.sample_weight, groups, type(self).__name__,
                                 what, stacklevel=stacklevel, remedy=remedy,
                                 fit_remedy=fit_remedy,
                                 features=getattr(ho, "table_features", None))

    def _splits_of_weighted_rows(self, X: Any, y: np.ndarray, splitter: Any,
                                 y_index: np.ndarray, classes: np.ndarray, sw: np.ndarray,
                                 split_params: dict, fit_rows: np.ndarray) -> list:
        """The folds with some rows of weight 0: no zero row in a training part (but the rows
        of a class weighted 0 throughout, ``fit_rows``, which stay in every one at weight 0).

        Rows of weight 0 carry no information (docs/weights.md), so the weighted rows' folds,
        the fold models and their held-out predictions are those of the other rows alone:

        * ``cv`` a number, or a splitter object (with ``groups`` or other split parameters, each
          taken at the weighted rows): the splitter draws among the weighted rows, and each
          zero row is held out in one fold, its group's where the group has weighted rows,
          else in turn (until the afternoon of 5 December 2026 only a number of folds without
          a class weighted 0 throughout drew so; a splitter object, a group splitter and such a
          class drew over all rows, and the zero rows moved the weighted rows to other folds:
          benchmarks/zero_weight_folds_check.py);
        * folds given as (train, test) pairs: the zero rows leave every training part and keep
          their place in the test parts, where they weigh nothing. A fold that is then left
          without a weighted held-out row, or whose training part keeps weighted rows of
          fewer than two classes, is refused, naming the fold.
        """
        cv = self.cv if self.cv is not None else 5
        n = y.shape[0]
        pos = np.flatnonzero(sw > 0)
        zero = np.flatnonzero(sw == 0)
        keep = np.zeros(n, dtype=bool)
        keep[fit_rows] = True
        lone = np.flatnonzero(keep & (sw == 0))  # rows of classes weighted 0 throughout
        number = isinstance(cv, numbers.Integral)
        if not number and not hasattr(cv, "split"):
            return self._given_folds_without_zero_rows(X, y, splitter, y_index, sw,
                                                       split_params, keep)
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message="The least populated class")
            try:
                if number:
                    sub = list(splitter.split(np.zeros((pos.shape[0], 1)), y_index[pos]))
                else:
                    sub = list(splitter.split(_safe_indexing(indexable(X)[0], pos), y[pos],
                                              **params_of_rows(split_params, pos, n)))
            except ValueError as exc:
                if not number:
                    raise
                raise ValueError(
                    self._too_many_folds(y_index[pos], classes, exc)
                    + " (Rows of `sample_weight` 0 are not counted: they join no fold model.)"
                ) from exc
        k = len(sub)
        zero_fold = np.arange(zero.shape[0]) % max(k, 1)
        groups = split_params.get("groups")
        if groups is not None and row_count(groups) == n and k:
            # a zero row joins its group's fold; zero rows of groups without weighted rows are
            # held out group by group, in turn
            try:
                _, code = np.unique(np.asarray(groups), return_inverse=True)
            except TypeError:  # values that cannot be sorted: in turn, row by row
                code = None
            if code is not None:
                code = code.ravel()
                group_fold = np.full(int(code.max()) + 1, -1)
                for i, (_, test) in enumerate(sub):
                    group_fold[code[pos[test]]] = i
                zg = code[zero]
                seen = group_fold[zg] >= 0
                _, unseen = np.unique(zg[~seen], return_inverse=True)
                zero_fold = np.where(seen, group_fold[zg], 0)
                zero_fold[~seen] = unseen.ravel() % k
        return [(np.sort(np.concatenate([pos[train], lone])),
                 np.sort(np.concatenate([pos[test], zero[zero_fold == i]])))
                for i, (train, test) in enumerate(sub)]

    def _given_folds_without_zero_rows(self, X: Any, y: np.ndarray, splitter: Any,
                                       y_index: np.ndarray, sw: np.ndarray,
                                       split_params: dict, keep: np.ndarray) -> list:
        """Folds given as (train, test) pairs without the rows of weight 0 in their training
        parts (see :meth:`_splits_of_weighted_rows`); refused where a fold has no weighted
        held-out row, or a training part weighted rows of fewer than two classes."""
        splits = list(splitter.split(X, y, **split_params))
        k = len(splits)
        out = []
        for i, (train, test) in enumerate(splits):
            train, test = np.asarray(train), np.asarray(test)
            if train.dtype == bool:
                train = np.flatnonzero(train)
            if test.dtype == bool:
                test = np.flatnonzero(test)
            train = train[keep[train]]
            if not np.any(sw[test] > 0):
                raise ValueError(
                    f"Fold {i + 1} of {k} of `cv` holds only rows of `sample_weight` 0 in its "
                    "test part: rows of weight 0 carry no information, so nothing would be "
                    "checked there. Give some of its rows a positive weight, or pass folds "
                    "whose test parts each hold weighted rows."
                )
            held = np.unique(y_index[train][sw[train] > 0])
            if held.shape[0] < 2:
                raise ValueError(
                    f"The training part of fold {i + 1} of {k} of `cv` keeps rows of "
                    f"{'no class' if held.shape[0] == 0 else 'only one class'} with a positive "
                    "`sample_weight` (rows of weight 0 carry no information and are left out "
                    "of the fold models), so no model can be fitted there to tell the classes "
                    "apart. Pass folds whose training parts hold weighted rows of at least two "
                    "classes."
                )
            out.append((train, test))
        return out

    @staticmethod
    def _folds_with_zero_rows(splits: list, fold: np.ndarray, pos: np.ndarray,
                              pos_fold: np.ndarray, fit_rows: np.ndarray, sw: np.ndarray,
                              index: np.ndarray | None) -> tuple[list, np.ndarray]:
        """The folds of all rows from ``pos_fold``, the folds of the weighted rows ``pos`` with
        their copies kept together among them (:meth:`_splits_keeping_cells` on those rows):
        each row of weight 0 is held out in the fold of the first weighted row with its
        features (``index``: :func:`feature_cell_index` of all rows), else in the fold it had
        (in turn where the folds were renumbered). No zero row joins a training part, but the
        rows of a class weighted 0 throughout (``fit_rows``), which join every one, as in
        :meth:`_splits_of_weighted_rows`. ``splits`` and ``fold`` as given where nothing
        moves."""
        zero = np.flatnonzero(sw == 0)
        n_folds = int(pos_fold.max()) + 1
        zero_fold = fold[zero] if n_folds == len(splits) else np.arange(zero.shape[0]) % n_folds
        if index is not None and zero.shape[0]:
            index = np.asarray(index, dtype=np.intp)
            cell_fold = np.full(int(index.max()) + 1, -1)
            _, first = np.unique(index[pos], return_index=True)
            cell_fold[index[pos][first]] = pos_fold[first]
            joined = cell_fold[index[zero]]
            zero_fold = np.where(joined >= 0, joined, zero_fold)
        if np.array_equal(pos_fold, fold[pos]) and np.array_equal(zero_fold, fold[zero]):
            return splits, fold
        new = np.empty_like(fold)
        new[pos] = pos_fold
        new[zero] = zero_fold
        keep = np.zeros(fold.shape[0], dtype=bool)
        keep[fit_rows] = True
        lone = np.flatnonzero(keep & (sw == 0))
        return [(np.sort(np.concatenate([pos[pos_fold != i], lone])), np.flatnonzero(new == i))
                for i in range(n_folds)], new

    def _splits_keeping_cells(
        self, splits: list, fold: np.ndarray, cells: np.ndarray, y_index: np.ndarray
    ) -> tuple[list, np.ndarray]:
        """Folds that keep rows with identical features together (see :func:`feature_cells`).

        With ``cv`` a number of folds, each cell joins the fold its first row was given (so the
        folds stay stratified by the cells' first rows, and are unchanged where no cell is
        shared); with folds given by the caller, a warning when they part such a cell.
        """
        cv = self.cv if self.cv is not None else 5
        n_cells = int(cells.max()) + 1
        _, first = np.unique(cells, return_index=True)
        parted = np.zeros(n_cells, dtype=bool)
        parted[cells[fold != fold[first][cells]]] = True
        mixed = np.zeros(n_cells, dtype=bool)
        mixed[cells[y_index != y_index[first][cells]]] = True
        spans = parted & mixed
        # cells of one label parted: copies of a row (copied_row_cells; or identical weighted
        # rows beside a frequency table's mixed cells), whose held-out rows the fold models saw
        copies = parted & ~mixed
        if not spans.any() and not copies.any():
            return splits, fold
        if not isinstance(cv, numbers.Integral) and not spans.any():
            warnings.warn(
                f"{type(self).__name__}: the folds of `cv` put copies of a row apart "
                f"({int(copies.sum())} group(s) of rows with identical features, one of their "
                "values found in no other row): each fold model then sees the rows it is "
                "checked on, so the held-out predictions, and the calibration fitted to them, "
                "are too confident. Keep each row's copies in one fold (for example "
                "sklearn.model_selection.GroupKFold on the groups), pass each row once (with "
                "sample_weight counts), or pass `cv` as a number of folds, which keeps copies "
                "together.",
                UserWarning,
                stacklevel=4,
            )
            return splits, fold
        if not isinstance(cv, numbers.Integral):
            warnings.warn(
                f"{type(self).__name__}: the folds of `cv` put weighted rows with identical "
                f"features but different labels apart ({int(spans.sum())} such group(s) of "
                "rows), as in counts expanded to a success row and a failure row per group: "
                "each fold model then sees a group's own label and its held-out prediction "
                "points the wrong way. Keep each group's rows in one fold (for example "
                "sklearn.model_selection.GroupKFold on the group index), or pass `cv` as a "
                "number of folds, which keeps such rows together.",
                UserWarning,
                stacklevel=4,
            )
            return splits, fold
        kept = keep_cells_together(fold, cells)
        n_kept = int(kept.max()) + 1
        if not spans.any() and n_kept >= 2:
            # copies only: keep them together unless that leaves a fold's training part without
            # a class the folds had (a few distinct rows, each repeated: the folds as given)
            had = min(np.unique(y_index[fold != i]).shape[0] for i in np.unique(fold))
            if min(np.unique(y_index[kept != i]).shape[0] for i in range(n_kept)) < had:
                return splits, fold
        if n_kept < 2:
            warnings.warn(
                f"{type(self).__name__}: every row has the same features, so folds cannot keep "
                "rows with identical features together; the rows are split as given, and each "
                "fold model sees the labels it is checked on.",
                UserWarning,
                stacklevel=4,
            )
            return splits, fold
        all_rows = np.arange(fold.shape[0])
        new_splits = [(all_rows[kept != i], all_rows[kept == i]) for i in range(n_kept)]
        return new_splits, kept

    def _too_many_folds(self, y_index, classes, exc) -> str:
        """The stratified splitter refused ``cv`` folds: say so in the user's class counts."""
        counts = np.bincount(y_index, minlength=classes.shape[0])
        shown = ", ".join(f"{plain(classes[k])!r}: {int(counts[k])}"
                          for k in range(classes.shape[0]))
        k = int(self.cv if self.cv is not None else 5)
        most = int(counts.max())
        fix = (f"use `cv={most}` or fewer" if most >= 2 else "give every class at least 2 rows")
        return (f"`cv={k}` stratified folds need more rows of a class than there are folds, but "
                f"the {y_index.shape[0]} rows hold {shown} per class: {fix} (better, as many "
                "rows of every class as folds), or pass a model fitted elsewhere inside "
                "sklearn.frozen.FrozenEstimator so nothing is refitted here. "
                f"The splitter said: {exc}")

    def _fold_failure(self, X, y, y_index, classes, splits, est_params, exc) -> str:
        """Why cross-fitting failed with every class in every training part, in the counts the
        user controls: the class counts on all rows (the estimator's own message quotes the
        training part it failed on), whether all rows fit, and the fixes."""
        name = type(self.estimator).__name__
        n_classes = classes.shape[0]
        counts = np.bincount(y_index, minlength=n_classes)
        parts = np.array([np.bincount(y_index[train], minlength=n_classes)
                          for train, _ in splits])
        low, high = parts.min(axis=0), parts.max(axis=0)
        j = int(np.argmin(counts))
        shown = ", ".join(f"{plain(classes[k])!r}: {int(counts[k])}" for k in range(n_classes))
        ranges = ", ".join(
            f"{plain(classes[k])!r}: {int(low[k])}"
            + ("" if low[k] == high[k] else f" to {int(high[k])}") for k in range(n_classes))
        try:
            clone(self.estimator).fit(X, y, **est_params)
            fits_all = True
        except ValueError:
            fits_all = False
        smallest = f"the smallest class ({plain(classes[j])!r}, {int(counts[j])} rows)"
        regularise = "regularise it (its own message below may say how)"
        if fits_all:
            fix = (f"It fits on all the rows: use more folds (`cv`; each training part then "
                   f"holds more of every class), give {smallest} more rows, {regularise}, or "
                   "pass a model fitted elsewhere inside sklearn.frozen.FrozenEstimator so "
                   "nothing is refitted here.")
        else:
            fix = (f"It fails on all the rows too, so more folds cannot help: "
                   f"{_class_fix(smallest)}")
        return (f"Cross-fitting `estimator` ({name}) failed on the training part of a fold. "
                f"Rows per class in all {y.shape[0]} rows: {shown}; in the training parts of "
                f"the {len(splits)} folds (`cv`): {ranges}. {fix} The estimator said (counting "
                f"the rows of the training part it was given): {exc}")

    def _fold_scoring_failure(self, X, splits, response: str, exc: FoldScoringError) -> str:
        """Why cross-fitting failed after a fold model was fitted: it refused the fold's
        held-out rows, most often for values its training part never held (a category of a
        pandas column seen in few rows: scikit-learn's ``OneHotEncoder`` raises "Found unknown
        categories" by default). The class counts and more folds are beside the point here."""
        name = type(self.estimator).__name__
        i = int(exc.fold)
        where = (f"fold {i + 1} of {len(splits)}" if 0 <= i < len(splits)
                 else f"a fold of {len(splits)}")
        found = _unseen_values(X, splits[i][0], splits[i][1]) if 0 <= i < len(splits) else []
        accept = ("let the model accept unseen values (for example scikit-learn's "
                  "OneHotEncoder(handle_unknown=\"ignore\") or "
                  "handle_unknown=\"infrequent_if_exist\"), merge rare values before fitting")
        frozen = ("pass a model fitted elsewhere inside sklearn.frozen.FrozenEstimator so "
                  "nothing is refitted here")
        if found:
            advice = (" Values in the held-out rows that the training part lacks: "
                      + "; ".join(found) + ". Every fold model meets rows its training part did "
                      "not hold, so a value seen in only a few rows (a rare category) can be new "
                      f"to it: {accept}, or {frozen}.")
        else:  # (a missing value only in held-out rows, a check of the model's own, ...)
            advice = (" Fix what the model's message below names; where it is a value the "
                      f"training part never held (a rare category), {accept}, or {frozen}.")
        return (f"Cross-fitting `estimator` ({name}) fitted the training part of {where} but "
                f"failed on that fold's held-out rows (`{response}`).{advice} The estimator "
                f"said: {exc}")

    def _all_rows_failure(self, y_index: np.ndarray, classes: np.ndarray, exc: Exception) -> str:
        """Why fitting the estimator on all rows failed (a strategy that fits it once, with no
        folds), in the words of :meth:`_fold_failure`: the class counts and the fixes."""
        counts = np.bincount(y_index, minlength=classes.shape[0])
        j = int(np.argmin(counts))
        shown = ", ".join(f"{plain(classes[k])!r}: {int(counts[k])}"
                          for k in range(classes.shape[0]))
        smallest = f"the smallest class ({plain(classes[j])!r}, {int(counts[j])} rows)"
        return (f"Fitting `estimator` ({type(self.estimator).__name__}) on all the rows "
                f"failed. Rows per class in all {y_index.shape[0]} rows: {shown}. "
                f"{_class_fix(smallest)} The estimator said: {exc}")

    def _cross_fit(self, X, y, splits, est_params, response, classes) -> np.ndarray:
        """Held-out ``response`` of a clone fitted on each split's training rows.

        The clones are fitted on the labels as given (not re-coded as 0..k-1), so settings of
        the estimator that name classes (``class_weight={"fraud": 5, ...}``, a constant
        prediction) keep their meaning. A class absent from a training part gets probability 0
        in its column, or a score 50 below the row's lowest score.
        """
        blocks = self._cross_fit_blocks(X, y, splits, [est_params] * len(splits), response,
                                        classes)
        n = y.shape[0]
        values = None
        for (_, test), block in zip(splits, blocks, strict=True):
            if values is None:
                values = np.empty((n,) + block.shape[1:], dtype=float)
            values[test] = block
        return values

    def _cross_fit_blocks(self, X, y, splits, fold_params, response, classes) -> list:
        """Each split's held-out ``response`` (in ``classes`` columns) of a clone fitted on its
        training rows with that split's ``fold_params``; keeps the fold models where the
        wrapper asks (``_keep_fold_models``)."""
        X = indexable(X)[0]  # sparse formats without row indexing become CSR, as in scikit-learn
        keep = bool(getattr(self, "_keep_fold_models", False))
        results = Parallel(n_jobs=self.n_jobs)(
            delayed(_fit_predict_fold)(self.estimator, X, y, train, test, params, response,
                                       keep, i)
            for i, ((train, test), params) in enumerate(zip(splits, fold_params, strict=True))
        )
        # rows divided by their sums: one warning for all the folds (it was one per fold, five
        # alike in one fit of a model with float16 output; and none from parallel workers)
        rounded = [info for *_, info in results if info[0]]
        if rounded:
            warnings.warn(
                rounding_message(f"Fold models ({type(self.estimator).__name__})",
                                 sum(k for k, _ in rounded), max(w for _, w in rounded),
                                 f" in {len(rounded)} of {len(results)} folds"),
                UserWarning,
                stacklevel=5,
            )
        # the fold models, for a wrapper that scores new rows with them too (PriorShiftWrapper)
        self._fold_models = [(model, fold_classes) for fold_classes, _, model, _ in results] \
            if keep else None
        return [fold_columns(fold_classes, out, classes, response)
                for fold_classes, out, _, _ in results]

    # -- prediction helpers ----------------------------------------------------------------
    def _dask_predict(self, method: Any, X: Any, n_columns: int | None, dtype: Any = float):
        """Apply ``method`` to every block of Dask ``X``; returns a Dask array."""
        from .scale._entry import dask_predict

        check_fitted(self, "estimator_")
        return dask_predict(method, X, n_columns, dtype)

    def _inner_output(self, X: Any, response: str) -> np.ndarray:
        check_fitted(self, "estimator_")
        out = np.asarray(getattr(self.estimator_, response)(X), dtype=float)
        check_model_columns(out, response, len(self.estimator_.classes_), row_count(X),
                            f"The wrapped estimator ({type(self.estimator_).__name__})", "`X`")
        if not np.all(np.isfinite(out)):
            raise ValueError(
                f"The wrapped estimator returned NaN or infinite values from {response} for `X`."
            )
        check_model_probabilities(out, response, "The wrapped estimator", "`X`")
        return rows_summing_to_one(out, response,
                                   f"The wrapped estimator ({type(self.estimator_).__name__})")

    # -- scikit-learn protocol ---------------------------------------------------------------
    def get_metadata_routing(self) -> MetadataRouter:
        """Route ``fit`` metadata to the inner estimator and ``split`` metadata to the splitter."""
        router = MetadataRouter(owner=type(self).__name__)
        router.add_self_request(self)
        router.add(
            estimator=self.estimator,
            method_mapping=MethodMapping().add(caller="fit", callee="fit"),
        )
        cv = self.cv if self.cv is not None else 5
        if not isinstance(cv, numbers.Integral):
            router.add(
                splitter=check_cv(cv, classifier=True),
                method_mapping=MethodMapping().add(caller="fit", callee="split"),
            )
        else:
            router.add(
                splitter=StratifiedKFold(n_splits=max(int(cv), 2)),
                method_mapping=MethodMapping().add(caller="fit", callee="split"),
            )
        return router

    def __sklearn_tags__(self):
        tags = super().__sklearn_tags__()
        if self.estimator is not None:
            inner = get_tags(self.estimator)
            tags.input_tags = dataclasses.replace(inner.input_tags)
        return tags
