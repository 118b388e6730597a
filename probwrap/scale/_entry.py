"""The one entry through which the wrappers (layer 2) reach the scale layer.

The wrappers import from here and from nowhere else in :mod:`probwrap.scale`; the scale modules
import the array core (layer 1) and the shared lower modules (``_predictions``, ``_validation``)
but never a wrapper, so the two layers never import each other (checked by
``tests/test_import_layers.py``). Dask itself is imported only when Dask input is given.

The wrappers treat a Spark DataFrame like a Dask collection (``_heldout._is_dask`` recognises
both). The fits below are written once over :mod:`probwrap.scale._rows`, which hands them Dask
blocks or Spark partitions alike; only monitoring (Dask blocks against a Spark batch column) and
prediction (Dask arrays against ``add_predictions``) differ by engine.
"""

from __future__ import annotations

from typing import Any

from . import _dask, _multiclass, _multiclass_wrappers, _rows
from ._bootstrap import tally_cutoff_interval, tally_exact_interval, tally_prior_interval
from ._build import tally_scores
from ._dask import owner_resolution, tally_is_count_table, warn_batch_repeats
from ._rows import rows_of
from ._tally import _check_resolution as check_resolution
from ._tally import replicate_seed

__all__ = [
    "check_resolution",
    "dask_predict",
    "estimate_multiclass_target",
    "first_block_row_costs",
    "fold_scorer",
    "fit_multiclass_calibration",
    "fit_multiclass_source",
    "heldout_cost_dask",
    "heldout_from_dask",
    "monitor_dask",
    "owner_resolution",
    "replicate_seed",
    "tally_cutoff_interval",
    "tally_exact_interval",
    "tally_is_count_table",
    "tally_prior_interval",
    "tally_scores",
    "unlabelled_proba_from_dask",
    "unlabelled_repeat_tallies",
    "warn_batch_repeats",
]


def _spark(obj: Any) -> bool:
    from ._spark import is_spark_frame

    return is_spark_frame(obj)


def heldout_from_dask(owner: Any, X: Any, y: Any, sample_weight: Any, response: str):
    """Held-out tally rows of a frozen binary model on Dask or Spark rows."""
    return _rows.heldout_from_rows(owner, X, y, sample_weight, response)


def unlabelled_proba_from_dask(estimator: Any, X: Any, sample_weight: Any = None, **kwargs):
    """Posteriors of unlabelled Dask or Spark rows as tally rows, and (``folds``) the fold
    models' posteriors of the same rows (a small set) or, with ``moments_of``, the sums of their
    fold-averaged score on a grid of priors (more rows): ``(proba, weights, tally, folds)``."""
    return _rows.unlabelled_proba_from_rows(estimator, X, sample_weight, **kwargs)


def unlabelled_repeat_tallies(X: Any, sample_weight: Any, estimator: Any, scorer: Any,
                              n_classes: int, by_features: bool,
                              n_rows: int | None = None, tally: Any = None) -> tuple:
    """:func:`probwrap.shift._repeats.repeat_tallies` of unlabelled Dask or Spark rows, grouped
    where they live by their features (``by_features``) or by the posteriors of ``estimator``
    (and of ``scorer``'s fold models, a base model refit on the labelled rows): five numbers
    come back, whatever the number of rows (:mod:`probwrap.scale._repeat_keys`), and three
    more sums where ``tally`` (the labelled rows' distinct feature hashes and rows of each)
    is given with ``by_features``: how often the rows meet the labelled rows
    (:func:`probwrap.shift._repeats.selection_from_sums`)."""
    from ._repeat_keys import key_block

    rows = rows_of(X, None, sample_weight, estimator)
    return rows.key_tallies(key_block, rows.shared(estimator),
                            None if scorer is None else rows.shared(scorer), int(n_classes),
                            bool(by_features), tally if by_features else None,
                            n_rows=n_rows)


def spark_cells_rows(estimator: Any, X: Any, sample_weight: Any, cells: str, folds: Any,
                     n_classes: int) -> tuple:
    """The rows of a Spark DataFrame ``X`` of at most ``KEPT_ROWS`` rows with the column
    ``cells`` (``adapt(cells=...)``): ``(proba, fold posteriors or None, weights or None,
    cells)`` from one pass. More rows are refused (:func:`probwrap.scale._rows.refuse_cells`;
    one count of the rows first)."""
    from ._folds import cells_rows
    from ._spark import SparkRows, _column
    from ._tally import kept_rows_limit

    _column(X, cells, "cells")
    n_rows = int(X.count())
    if n_rows > kept_rows_limit():
        _rows.refuse_cells(n_rows)
    proba, fold_proba, w, cell = cells_rows(SparkRows(X, cells, sample_weight, estimator),
                                            estimator, folds, n_classes)
    return proba, fold_proba, (None if sample_weight is None else w), cell


def fold_scorer(estimator: Any, folds: Any, n_classes: int):
    """A base model refit on the labelled rows and its fold models (``[(model, columns of its
    classes), ...]``), to score Dask or Spark rows where they live (sent there once)."""
    from ._folds import FoldScorer

    return FoldScorer(estimator, folds, n_classes)


def monitor_dask(owner: Any, X: Any, batches: Any, batch_size: Any, sample_weight: Any):
    """Per-batch prior estimates: Dask blocks, or the labels of a Spark batch column."""
    if _spark(X):
        from ._spark import monitor_spark

        return monitor_spark(owner, X, batches, batch_size, sample_weight)
    return _dask.monitor_dask(owner, X, batches, batch_size, sample_weight)


def dask_predict(method: Any, X: Any, n_columns: Any, dtype: Any = float):
    """Predictions block by block (Dask); Spark DataFrames are scored by ``add_predictions``."""
    if _spark(X):
        raise ValueError(
            "predict / predict_proba / expected_costs do not take a Spark DataFrame (Spark has no "
            "lazy array to return); add the probability and action columns to the frame with "
            "probwrap.scale.add_predictions(model, frame)."
        )
    return _dask.dask_predict(method, X, n_columns, dtype)


def fit_multiclass_source(owner: Any, X: Any, y: Any, sample_weight: Any):
    return _multiclass.fit_multiclass_source(owner, X, y, sample_weight)


def estimate_multiclass_target(est: Any, estimator: Any, X: Any, sample_weight: Any = None,
                               random_state: Any = None, folds: Any = None, cells: Any = None,
                               check_rows: Any = None):
    return _multiclass.estimate_multiclass_target(est, estimator, X, sample_weight, random_state,
                                                  folds=folds, cells=cells,
                                                  check_rows=check_rows)


def fit_multiclass_calibration(owner: Any, X: Any, y: Any, sample_weight: Any, template: Any):
    return _multiclass_wrappers.fit_multiclass_calibration(owner, X, y, sample_weight, template)


def first_block_row_costs(policy: Any, X: Any, k: int, y: Any = None, sample_weight: Any = None):
    return _multiclass_wrappers.first_block_row_costs(policy, X, k, y, sample_weight)


def heldout_cost_dask(policy: Any, X: Any, y: Any, sample_weight: Any) -> float:
    return _multiclass_wrappers.heldout_cost_dask(policy, X, y, sample_weight)
