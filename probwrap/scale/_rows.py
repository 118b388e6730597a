"""Rows kept where they live — Dask blocks or Spark partitions — behind one small interface.

The driver-side fits (the multiclass calibration maps and priors in :mod:`._multiclass` and
:mod:`._multiclass_wrappers`, the held-out cost of a cost rule, the binary held-out tallies)
are written once against this interface and run unchanged on either engine:

- ``rows.map_reduce(fn, *args)``: the sum (tallies merge) over row blocks of
  ``fn(*args, Xb, yb, wb)`` — ``fn(*args, Xb, wb)`` for unlabelled rows — computed where the
  rows live; only the small results travel;
- ``rows.persist(make, *args)``: ``make(*args, Xb, yb, wb)`` of every block kept where the block
  lives (Dask: persisted on the workers; Spark: a cached DataFrame of pickled blocks), with
  ``.reduce(fn, *args)`` summing ``fn(block, *args)`` over them and ``.release()``;
- ``rows.apply_first(fn, *args)``: ``fn(Xb, *args)`` on the first block (to learn a shape);
- ``rows.shared(value)``: ``value`` (large: models) as an argument of the two above that
  reaches each worker once (Dask: one object of the task graph; Spark: as it is, since the
  arguments already travel as one broadcast variable).

``Xb`` is what the estimator takes (a Dask block; for Spark the pandas DataFrame of the model's
feature columns, or their NumPy array when the model has no feature names), ``yb`` the labels and
``wb`` the weights (or None).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._tally import (
    DEFAULT_RESOLUTION,
    ZERO_WEIGHT,
    replicate_seed,
    warn_weight_unit,
    weight_unit_of,
)

__all__ = [
    "heldout_from_rows",
    "in_weight_unit",
    "rows_of",
    "unlabelled_proba_from_rows",
]


# -- weights far from 1 on kept blocks ----------------------------------------------------------
class _Largest:
    """A block result whose "sum" (the reduction over blocks) is the larger value."""

    def __init__(self, value: float) -> None:
        self.value = value

    def __add__(self, other: _Largest) -> _Largest:
        return _Largest(max(self.value, other.value))


def _largest_weight(block: Any) -> _Largest:
    """Largest weight of a kept block (its weights are the block's last entry)."""
    w = np.asarray(block[-1])
    return _Largest(float(w.max()) if w.size else 0.0)


def _scaled_call(block: Any, fn: Any, unit: float, *args: Any) -> Any:
    """``fn`` of a kept block whose weights (its last entry) are divided by ``unit``."""
    return fn((*block[:-1], np.asarray(block[-1]) / unit), *args)


class _ScaledBlocks:
    """Kept blocks seen with their weights divided by a power of two (``unit``)."""

    def __init__(self, parts: Any, unit: float) -> None:
        self._parts = parts
        self.unit = unit

    def reduce(self, fn: Any, *args: Any) -> Any:
        return self._parts.reduce(_scaled_call, fn, self.unit, *args)

    def release(self) -> None:
        self._parts.release()


def in_weight_unit(parts: Any, weighted: bool) -> tuple[Any, float]:
    """Kept blocks (``rows.persist``) with weights beyond about 1e+-77 divided by a power of
    two, as the wrappers rescale in-memory weights (``probwrap._heldout.rescale_extreme_weights``):
    ``(blocks, unit)``. One more pass over the kept blocks for their largest weight, only when
    weights were given (``weighted``); ordinary weights come back untouched with unit 1.0.
    """
    if not weighted:
        return parts, 1.0
    unit = weight_unit_of(parts.reduce(_largest_weight).value)
    return (parts if unit == 1.0 else _ScaledBlocks(parts, unit)), unit


def refuse_cells(n_rows: int) -> None:
    """The refusal of ``adapt(cells=...)`` on more than ``KEPT_ROWS`` Dask or Spark rows: they are read
    as tallies and sums where they live, and the cells' clustered variance of the mean score
    (at every candidate prior, for the score interval) would need each cell's own sums back,
    as many as there are cells."""
    from ._tally import kept_rows_limit

    raise ValueError(
        f"`cells` is taken with at most {kept_rows_limit():,} Dask or Spark rows, whose rows come to the "
        f"client so that adapt runs as in memory; these {n_rows:,} rows are reduced to tallies "
        "and sums where they live, which keep no cells (the cells' clustered variance of the "
        "mean score, at every candidate prior, would need each cell's own sums). Collect the "
        "rows, or leave `cells` out (docs/scale.md, 'Limits of the Dask path')."
    )


def _is_spark(X: Any) -> bool:
    from ._spark import is_spark_frame

    return is_spark_frame(X)


def rows_of(X: Any, y: Any, sample_weight: Any, estimator: Any) -> Any:
    """``X`` (with ``y`` and ``sample_weight``) as Dask or Spark rows for ``estimator``."""
    if _is_spark(X):
        from ._spark import SparkRows

        return SparkRows(X, y, sample_weight, estimator)
    from ._dask import DaskRows

    return DaskRows(X, y, sample_weight, estimator)


def _tally_step(X: Any) -> tuple[Any, str]:
    """The engine's tally of a binary model's log-odds, and the engine's name."""
    if _is_spark(X):
        from ._spark import spark_tally_of_model

        return spark_tally_of_model, "Spark"
    from ._dask import dask_tally_of_model

    return dask_tally_of_model, "Dask"


def _check_binary(estimator: Any, engine: str) -> np.ndarray:
    classes = np.asarray(estimator.classes_)
    if classes.shape[0] != 2:
        raise ValueError(
            f"{engine} input is tallied for binary classifiers here; the estimator has "
            f"{classes.shape[0]} classes (multiclass models take the multiclass path of the "
            "wrappers)."
        )
    return classes


def heldout_from_rows(owner: Any, X: Any, y: Any, sample_weight: Any, response: str):
    """Held-out predictions of a frozen binary estimator on Dask or Spark rows, as tally rows.

    The returned :class:`~probwrap._predictions.HeldOutPredictions` has one row per
    (bin, class) of the tally, weighted by the tallied weight; ``from_tally`` is set. With a
    Spark DataFrame ``y`` and ``sample_weight`` name its columns.
    """
    from sklearn.frozen import FrozenEstimator

    from ._dask import heldout_rows_from_tally, owner_resolution

    tally_of_model, engine = _tally_step(X)
    estimator = owner.estimator
    if not isinstance(estimator, FrozenEstimator):
        raise ValueError(
            f"{engine} input needs an already fitted estimator wrapped in "
            f"sklearn.frozen.FrozenEstimator: the wrappers do not fit models on {engine} data, "
            f"they only tally a frozen model's predictions; got {type(estimator).__name__}."
        )
    if y is None:
        raise ValueError(
            f"{type(owner).__name__} requires y to be passed, but the target y is None"
            + ("; with a Spark DataFrame give the name of its label column." if engine == "Spark"
               else ".")
        )
    _check_binary(estimator, engine)
    # Wrappers that report bootstrap intervals ask for Poisson replicates (``_dask_replicates``),
    # drawn per block from a generator seeded by their random_state and the block index.
    n_rep = int(owner._dask_replicates()) if hasattr(owner, "_dask_replicates") else 0
    seed = replicate_seed(getattr(owner, "random_state", None)) if n_rep else 0
    tally = tally_of_model(
        estimator, response, X, y, sample_weight, resolution=owner_resolution(owner),
        n_replicates=n_rep, seed=seed, stream=0,
    )
    # weights beyond about 1e+-77 were tallied divided by a power of two: the in-memory warning
    warn_weight_unit(tally.weight_unit, type(owner).__name__, tally.total_weight, stacklevel=6)
    return heldout_rows_from_tally(owner, estimator, tally, response)


def unlabelled_proba_from_rows(
    estimator: Any,
    X: Any,
    sample_weight: Any = None,
    *,
    n_replicates: int = 0,
    random_state: Any = None,
    resolution: float = DEFAULT_RESOLUTION,
    owner: str = "PriorShiftWrapper.adapt",
    folds: Any = None,
    moments_of: Any = None,
    cells: bool = False,
    fold_replicates: int = 0,
):
    """Binary posteriors of unlabelled Dask or Spark rows as tally rows:
    ``(proba (m, 2), weights, tally, fold posteriors)``.

    Replicates (if any) use stream 1 of the seed, so they are independent of the labelled
    tally's (stream 0) for the same ``random_state``. Weights beyond about 1e+-77 come back
    divided by a power of two, with the in-memory path's warning naming ``owner``.

    ``folds`` (a :class:`probwrap.scale._folds.FoldScorer`: a base model refit on the labelled
    rows and its fold models): for a small set (at most ``KEPT_ROWS`` rows, whose rows come back
    as rows) one more pass scores every block with the refit and every fold model where it
    lives, and the rows' posteriors, the fold models' posteriors (one (m, 2) array per fold)
    and the weights all come from that pass, in block order; the last entry is None otherwise
    (no fold models, or a larger set, which comes back as a tally of the refit model's score).
    A larger set with ``folds`` and ``moments_of`` (the wrapper's fitted
    :class:`~probwrap.shift.PriorEstimator`, for its score interval): one more pass sums the
    fold-averaged score on a grid of priors where the rows live
    (:class:`probwrap.shift._fold_moments.FoldScoreMoments`, the last entry then); with
    ``fold_replicates`` the same pass draws that many Poisson-bootstrap replicates of the rows
    it tallies once per fold model (one draw per row, shared by its copies; seeded by
    ``random_state`` and the block), for a bootstrap interval
    (``FoldScoreMoments.row_replicates``).

    ``cells`` (the caller has cells for the rows, ``adapt(cells=...)``): a set beyond
    ``KEPT_ROWS`` rows is refused after the tally (:func:`refuse_cells`).
    """
    tally_of_model, engine = _tally_step(X)
    _check_binary(estimator, engine)
    seed = replicate_seed(random_state) if n_replicates else 0
    tally = tally_of_model(
        estimator, "predict_proba", X, None, sample_weight, resolution=resolution,
        n_replicates=n_replicates, seed=seed, stream=1,
    )
    if tally.n_rows == 0:
        raise ValueError("`X` has no rows; a tally needs at least one row.")
    if tally.total_weight <= 0:
        raise ValueError(ZERO_WEIGHT)
    warn_weight_unit(tally.weight_unit, owner, tally.total_weight, stacklevel=5)
    from ._dask import kept_rows_of

    kept = kept_rows_of(tally)
    if kept is not None:
        # a small set: the rows' own probabilities, as in memory (no tally: ``None``)
        proba, _, w = kept
        weighted = tally.kept_rows[2] is not None
        if folds is None:
            return proba, (w if weighted else None), None, None
        # a refit base model: the fold models score the same rows where they live (sent
        # once), in one pass with the refit model, so that every row's posteriors line up
        from ._folds import scored_rows

        proba, fold_proba, w = scored_rows(rows_of(X, None, sample_weight, estimator), folds,
                                           tally.weight_unit)
        return proba, (w if weighted else None), None, fold_proba
    if cells:
        refuse_cells(tally.n_rows)
    from ._dask import _warn_binned_rows

    _warn_binned_rows(owner, tally, stacklevel=5)
    proba, w = tally.to_scores(proba=True)
    moments = None
    if folds is not None and moments_of is not None:
        from ._folds import fold_moments

        moments = fold_moments(rows_of(X, None, sample_weight, estimator), folds, moments_of,
                               tally.weight_unit, resolution, n_replicates=int(fold_replicates),
                               seed=replicate_seed(random_state) if fold_replicates else 0)
    return proba, w, tally, moments
