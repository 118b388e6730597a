"""Dask input: tallies built block by block on a cluster, and the wrappers' Dask path.

Everything here imports Dask lazily; probwrap itself never needs it. Blocks of rows are turned
into small :class:`~probwrap.scale.ScoreTally` objects where the data live (on the workers), and
only those tallies are merged, as a tree, and brought back to the client.
"""

from __future__ import annotations

import threading
import warnings
from typing import Any

import numpy as np

from .._predictions import check_model_probabilities
from .._validation import plain
from ._tally import (
    DEFAULT_RESOLUTION,
    ZERO_WEIGHT,
    ScoreTally,
    _check_resolution,
    _combine,
    _tally_block,
)

__all__ = ["DaskRows", "is_dask_collection", "tally_dask_scores", "dask_predict"]


def is_dask_collection(obj: Any) -> bool:
    """Whether ``obj`` is a Dask collection (array, DataFrame, Series), without importing Dask."""
    return hasattr(obj, "__dask_graph__")


def _is_dask_array(obj: Any) -> bool:
    return is_dask_collection(obj) and hasattr(obj, "chunks") and hasattr(obj, "ndim")


def _import_dask():
    try:
        import dask
        import dask.array as da
    except ImportError as exc:  # pragma: no cover - dask is installed in the test extra
        raise ImportError(
            "Dask input needs the optional dependency dask: pip install 'probwrap[dask]'."
        ) from exc
    return dask, da


def _row_blocks(X: Any) -> tuple[list, list | None]:
    """Delayed row blocks of a Dask array / DataFrame / Series, and their lengths if known."""
    if _is_dask_array(X):
        if X.ndim == 2 and len(X.chunks[1]) > 1:
            X = X.rechunk({1: X.shape[1]})
        if X.ndim not in (1, 2):
            raise ValueError(f"`X` must be a 1-d or 2-d Dask array; got {X.ndim} dimensions.")
        blocks = list(X.to_delayed().ravel())
        lengths = list(X.chunks[0])
        if any(np.isnan(c) for c in lengths):
            lengths = None
        return blocks, lengths
    if hasattr(X, "npartitions") and hasattr(X, "to_delayed"):
        return _partitions(X), None
    raise ValueError(f"`X` is a Dask collection of unsupported type {type(X).__name__}.")


def _partitions(frame: Any) -> list:
    """Delayed partitions of a Dask DataFrame or Series, as the collection defines them.

    Without ``optimize_graph=False``, Dask's optimiser may combine partitions differently for
    different column selections of one frame (reading fewer columns of a Parquet file gives
    fewer, larger partitions), so ``df[features]`` and ``df["label"]`` would no longer line up.
    """
    return list(frame.to_delayed(optimize_graph=False))


def _aligned_blocks(v: Any, name: str, X: Any, blocks: list, lengths: list | None) -> list:
    """Blocks of ``v`` (labels or weights) aligned with the row blocks of ``X``."""
    if v is None:
        return [None] * len(blocks)
    dask, da = _import_dask()
    if is_dask_collection(v):
        if not _is_dask_array(v):
            parts = _partitions(v)
            if len(parts) != len(blocks):
                raise ValueError(
                    f"`{name}` has {len(parts)} partitions but `X` has {len(blocks)} blocks; "
                    "they must be partitioned alike: take both from one Dask DataFrame, or "
                    f"with known divisions `{name}.repartition(divisions=X.divisions)`."
                )
            return parts
        if lengths is None:
            parts = list(v.to_delayed().ravel())
            if len(parts) != len(blocks):
                raise ValueError(
                    f"`{name}` has {len(parts)} blocks but `X` has {len(blocks)}; they must be "
                    "chunked alike."
                )
            return parts
        if v.shape[0] != sum(lengths):
            raise ValueError(f"`{name}` has {v.shape[0]} entries but `X` has {sum(lengths)} rows.")
        return list(v.rechunk((tuple(lengths),)).to_delayed().ravel())
    arr = np.asarray(v)
    if lengths is None:
        lengths = list(dask.compute(*[dask.delayed(len)(b) for b in blocks]))
    if arr.shape[0] != sum(lengths):
        raise ValueError(f"`{name}` has {arr.shape[0]} entries but `X` has {sum(lengths)} rows.")
    cuts = np.cumsum([0, *lengths])
    return [arr[cuts[i] : cuts[i + 1]] for i in range(len(blocks))]


def _frozen_multiclass(owner: Any, y: Any) -> tuple[Any, np.ndarray]:
    from sklearn.frozen import FrozenEstimator

    estimator = owner.estimator
    if not isinstance(estimator, FrozenEstimator):
        raise ValueError(
            "Dask or Spark input needs an already fitted estimator wrapped in "
            "sklearn.frozen.FrozenEstimator; got " + type(estimator).__name__ + "."
        )
    if y is None:
        raise ValueError(f"{type(owner).__name__} requires y to be passed, but the target y is None.")
    return estimator, np.asarray(estimator.classes_)


class DaskBlocks:
    """Per-block values persisted on the workers (see :meth:`DaskRows.persist`)."""

    def __init__(self, dask: Any, parts: list) -> None:
        self._dask = dask
        self._parts = parts

    def reduce(self, fn: Any, *args: Any) -> Any:
        """Sum over the blocks of ``fn(block, *args)``, added on the client in block order."""
        return _reduce(self._dask, fn, self._parts, *args)

    def release(self) -> None:
        """Let the workers drop the persisted blocks."""
        self._parts.clear()


class DaskRows:
    """Rows of a Dask collection with their (optional) labels and weights, block by block.

    The interface the driver-side fits use for Dask and Spark alike (the Spark twin is
    :class:`probwrap.scale._spark.SparkRows`): ``map_reduce(fn, *args)`` sums
    ``fn(*args, Xb, yb, wb)`` over the blocks (``fn(*args, Xb, wb)`` for unlabelled rows);
    ``persist(make, *args)`` keeps ``make(*args, Xb, yb, wb)`` of every block where the block
    lives, for repeated reductions; ``apply_first(fn, *args)`` is ``fn(Xb, *args)`` of the first
    block. ``estimator`` is accepted for symmetry with Spark, where it names the feature columns.
    """

    engine = "Dask"

    def __init__(self, X: Any, y: Any, sample_weight: Any, estimator: Any = None) -> None:
        self._dask, _ = _import_dask()
        blocks, lengths = _row_blocks(X)
        self._blocks = blocks
        ws = _aligned_blocks(sample_weight, "sample_weight", X, blocks, lengths)
        if y is None:
            self._pieces = [(b, wb) for b, wb in zip(blocks, ws, strict=True)]
        else:
            ys = _aligned_blocks(y, "y", X, blocks, lengths)
            self._pieces = [t for t in zip(blocks, ys, ws, strict=True)]

    def map_reduce(self, fn: Any, *args: Any, indexed: bool = False) -> Any:
        """The sum (``_combine``) of ``fn(*args, *block)`` over the blocks; with ``indexed``
        ``fn(*args, key, *block)``, ``key`` the block's index as a list (``[i]``: a seed for
        draws that depend on the block, not on where it runs; Spark's key is
        ``[partition, chunk]``)."""
        call = self._dask.delayed(fn, pure=True)
        parts = [call(*args, *([[i]] if indexed else []), *piece)
                 for i, piece in enumerate(self._pieces)]
        return _tree_merge(self._dask, parts).compute()

    def persist(self, make: Any, *args: Any) -> DaskBlocks:
        call = self._dask.delayed(make, pure=True)
        return DaskBlocks(self._dask, _persist(self._dask, [call(*args, *p) for p in self._pieces]))

    def apply_first(self, fn: Any, *args: Any) -> Any:
        return self._dask.delayed(fn, pure=True)(self._blocks[0], *args).compute()

    def key_tallies(self, fn: Any, *args: Any, n_rows: int | None = None) -> tuple:
        """The rows grouped by the keys ``fn(*args, Xb, wb)`` gives each block's rows, added up
        by a shuffle of the keys between tasks (unlabelled rows;
        :func:`probwrap.scale._repeat_keys.dask_key_tallies`)."""
        from ._repeat_keys import dask_key_tallies

        return dask_key_tallies(self._dask, self._pieces, fn, args, n_rows)

    def shared(self, value: Any) -> Any:
        """``value`` (models) as one object of the task graph, for the arguments of
        ``map_reduce`` / ``persist``: every block's task reads it, and it reaches each worker
        once instead of travelling inside every task."""
        return self._dask.delayed(value, pure=True, traverse=False)


def _tree_merge(dask: Any, parts: list) -> Any:
    """Tree of pairwise merges (tallies) or sums (see ``_combine``) of delayed block results."""
    merge = dask.delayed(_combine, pure=True)
    while len(parts) > 1:
        parts = [
            merge(parts[i], parts[i + 1]) if i + 1 < len(parts) else parts[i]
            for i in range(0, len(parts), 2)
        ]
    return parts[0]


def _persist(dask: Any, parts: list) -> list:
    return list(dask.persist(*parts))


def _reduce(dask: Any, fn, parts: list, *args) -> Any:
    """Sum of ``fn(part, *args)`` over the blocks (small results only); empty blocks (kept as
    None) are left out."""
    call = dask.delayed(_unless_empty, pure=True)
    results = [r for r in dask.compute(*[call(part, fn, *args) for part in parts])
               if r is not None]
    return combine_all(results)


def _unless_empty(part: Any, fn: Any, *args: Any) -> Any:
    return None if part is None else fn(part, *args)


def combine_all(results: list) -> Any:
    """Sum (see ``_combine``) of the results of the kept blocks, in order; no blocks: no rows."""
    if not results:
        raise ValueError("`X` has no rows; at least one row is needed.")
    out = results[0]
    for r in results[1:]:
        out = _combine(out, r)
    return out


def tally_dask_scores(
    scores: Any,
    y: Any,
    sample_weight: Any,
    n_labels: int,
    resolution: float,
    n_replicates: int = 0,
    seed: int = 0,
) -> ScoreTally:
    """Tally of Dask (or mixed Dask / NumPy) scores, labels and weights, block by block."""
    dask, da = _import_dask()
    if not is_dask_collection(scores):
        scores = da.from_array(np.asarray(scores, dtype=float), chunks=1_000_000)
    if getattr(scores, "ndim", 1) != 1:
        raise ValueError(f"`scores` must be 1-d of shape (n,); got shape {scores.shape}.")
    blocks, lengths = _row_blocks(scores)
    ys = _aligned_blocks(y, "y", scores, blocks, lengths)
    ws = _aligned_blocks(sample_weight, "sample_weight", scores, blocks, lengths)
    block = dask.delayed(_tally_block, pure=True)
    parts = [
        block(b, yb, wb, n_labels, resolution, n_replicates, [seed, 0, i])
        for i, (b, yb, wb) in enumerate(zip(blocks, ys, ws, strict=True))
    ]
    tally = _tree_merge(dask, parts).compute()
    if tally.n_rows == 0:
        raise ValueError("`scores` is empty; a tally needs at least one row.")
    if tally.total_weight <= 0:
        raise ValueError(ZERO_WEIGHT)
    return tally


# -- the wrappers' Dask path ------------------------------------------------------------------------
def _binary_scores(values: np.ndarray, response: str) -> np.ndarray:
    """Binary log-odds from one block of inner-estimator output, at full resolution."""
    values = np.asarray(values, dtype=float)
    if not np.all(np.isfinite(values)):
        raise ValueError(
            f"`estimator` returned NaN or infinite values from {response}; held-out predictions "
            "must be finite."
        )
    check_model_probabilities(values, response, "`estimator`", "held-out rows")
    if response == "decision_function":
        return values.ravel() if values.ndim == 1 else values[:, -1] - values[:, 0]
    lp = np.log(np.maximum(values, np.nextafter(0.0, 1.0)))
    return lp[:, 1] - lp[:, 0]


def _block_tally(
    estimator, response, classes, resolution, Xb, yb, wb, n_replicates=0, seed=None
) -> ScoreTally:
    from ._blocks import block_label_index, predict_block

    y_index = None if yb is None else block_label_index(classes, yb)
    width = None if response == "decision_function" else classes.shape[0]
    outputs = predict_block(estimator, response, Xb, width)
    s = _binary_scores(outputs, response)
    if wb is not None and hasattr(wb, "to_numpy"):  # a pandas Series (nullable: NaN for NA)
        wb = wb.to_numpy(dtype=float, na_value=np.nan)
    return _tally_block(
        s, y_index, wb, 2 if yb is not None else 1, resolution, n_replicates, seed, outputs
    )


def dask_tally_of_model(
    estimator: Any,
    response: str,
    X: Any,
    y: Any = None,
    sample_weight: Any = None,
    *,
    resolution: float = DEFAULT_RESOLUTION,
    n_replicates: int = 0,
    seed: int = 0,
    stream: int = 0,
) -> ScoreTally:
    """Tally of a fitted binary model's log-odds on Dask rows, computed on the cluster.

    Block ``i`` draws its bootstrap replicates from ``default_rng([seed, stream, i])``.
    """
    dask, _ = _import_dask()
    classes = np.asarray(estimator.classes_)
    order = np.argsort(classes)
    if not np.array_equal(order, np.arange(classes.shape[0])):
        raise ValueError("The frozen estimator's classes_ must be sorted (as scikit-learn sorts).")
    blocks, lengths = _row_blocks(X)
    ys = _aligned_blocks(y, "y", X, blocks, lengths)
    ws = _aligned_blocks(sample_weight, "sample_weight", X, blocks, lengths)
    block = dask.delayed(_block_tally, pure=True)
    parts = [
        block(estimator, response, classes, resolution, b, yb, wb, n_replicates, [seed, stream, i])
        for i, (b, yb, wb) in enumerate(zip(blocks, ys, ws, strict=True))
    ]
    return _tree_merge(dask, parts).compute()


def owner_resolution(owner: Any) -> float:
    """A wrapper's ``tally_resolution`` (validated; the default for objects without one)."""
    value = getattr(owner, "tally_resolution", DEFAULT_RESOLUTION)
    try:
        return _check_resolution(value)
    except ValueError:
        raise ValueError(
            f"`tally_resolution` must be a positive finite number; got {plain(value)!r}."
        ) from None


def heldout_rows_from_tally(owner: Any, estimator: Any, tally: ScoreTally, response: str):
    """The held-out predictions of a frozen binary estimator whose rows were tallied (Dask or
    Spark): one row per (bin, class) of the tally; sets the owner's fitted attributes."""
    from .._predictions import HeldOutPredictions

    classes = np.asarray(estimator.classes_)
    if tally.total_weight <= 0:
        raise ValueError(ZERO_WEIGHT)
    if tally.rows_by_label is not None:
        # the in-memory checks (two classes, two with weight), from the tallied row counts
        from ._blocks import check_class_rows

        check_class_rows(owner, classes, tally.rows_by_label, tally.weighted_rows_by_label)
    elif np.count_nonzero(tally.label_weight > 0) < 2:
        raise ValueError(
            "`y` contains only 1 class (with positive weight); the held-out rows must contain "
            "at least two classes."
        )
    owner.tally_ = tally
    kept = kept_rows_of(tally)
    if kept is not None:
        # a small set: the rows themselves, so the fit is the in-memory fit of the same rows
        # (see probwrap.scale._tally.KEPT_ROWS)
        values, y_index, w = kept
        from_tally = False
    else:
        _warn_binned_rows(type(owner).__name__, tally, stacklevel=7)
        scores, y_index, w = tally.to_rows()
        values = scores if response == "decision_function" else np.column_stack(
            [_expit(-scores), _expit(scores)]
        )
        from_tally = True
    owner.estimator_ = estimator
    owner.classes_ = classes
    if hasattr(estimator, "n_features_in_"):
        owner.n_features_in_ = estimator.n_features_in_
    if hasattr(estimator, "feature_names_in_"):
        owner.feature_names_in_ = estimator.feature_names_in_
    class_rows = tally.weighted_rows_by_label
    cases = from_tally and tally_is_count_table(tally)
    if cases:
        # a count table's tally: its weights count cases, as in memory, where
        # the steps that count rows count the table's cases (docs/weights.md)
        class_rows = np.round(np.asarray(tally.label_weight, dtype=float)).astype(np.int64)
    ho = HeldOutPredictions(
        values=values,
        response=response,
        classes=classes,
        y_index=y_index,
        sample_weight=w,
        fold=np.full(y_index.shape[0], -1, dtype=int),
        n_folds=0,
        estimator=estimator,
        from_tally=from_tally,
        weighted_class_rows=class_rows,
    )
    ho.tally_cases = cases
    return ho


def tally_is_count_table(tally: ScoreTally) -> bool:
    """Whether the rows behind ``tally`` carried a count table's weights
    (:func:`probwrap._weights.whole_counts`): whole numbers without a common factor above 1,
    some above 1, at most ``COUNT_TABLE_MAX_CASES`` cases in all, tallied without rescaling.
    Read from the tally's summary (its shared whole factor, total weight and rows of positive
    weight), so a Dask or Spark tally reads such weights as cases, as the rows in memory do."""
    from .._weights import COUNT_TABLE_MAX_CASES

    if tally.weight_factor != 1 or getattr(tally, "weight_unit", 1.0) != 1.0:
        return False
    rows = tally.weighted_rows_by_label
    if rows is None:
        return False
    total = float(tally.total_weight)
    return int(np.sum(rows)) < total <= COUNT_TABLE_MAX_CASES


def _warn_binned_rows(owner: str, tally: ScoreTally, *, stacklevel: int) -> None:
    """The :class:`~probwrap.scale.BinnedFitWarning` of a model's tally of at most KEPT_ROWS rows
    that came without its rows (on Spark: rows that changed between the tally and the second
    pass collecting them; see probwrap.scale._spark._tally_partitions)."""
    from ._tally import kept_rows_limit, warn_binned_small_set

    if 0 < tally.n_rows <= kept_rows_limit():
        warn_binned_small_set(
            owner, tally.n_rows, tally.resolution,
            "the rows did not reach the client beside the tally (on Spark: the frame's rows "
            "changed between the two passes over them, or its partitions could not send them)",
            "fit a deterministic frame (cache() or checkpoint() it first), or collect the rows "
            "(frame.toPandas(), or compute() a Dask collection) and fit in memory",
            stacklevel=stacklevel + 1,
        )


def kept_rows_of(tally: ScoreTally) -> tuple | None:
    """``(outputs, label indices or None, weights)`` of a tally's kept rows (None if it has
    none): the weights divided by the tally's power-of-two unit, as the in-memory path divides
    weights far from 1 (``rescale_extreme_weights``), and unit weights when none were given."""
    from ._tally import kept_rows_limit

    kept = tally.kept_rows
    if kept is None or tally.n_rows > kept_rows_limit() or kept[0].shape[0] != tally.n_rows:
        return None
    values, labels, weights = kept
    if weights is None:
        w = np.ones(tally.n_rows)
    else:
        w = weights / tally.weight_unit if tally.weight_unit != 1.0 else weights
    return values, labels, w


def _expit(x: np.ndarray) -> np.ndarray:
    from scipy.special import expit

    return expit(x)


def dask_predict(method: Any, X: Any, n_columns: int | None, dtype: Any = float) -> Any:
    """Apply an in-memory prediction ``method`` block by block; returns a Dask array.

    ``n_columns`` is the width of 2-d output (None for 1-d output such as ``predict``).
    """
    dask, da = _import_dask()
    blocks, lengths = _row_blocks(X)
    out = []
    for i, b in enumerate(blocks):
        n_i = np.nan if lengths is None else lengths[i]
        shape = (n_i,) if n_columns is None else (n_i, n_columns)
        out.append(da.from_delayed(dask.delayed(method)(b), shape=shape, dtype=dtype))
    return da.concatenate(out, axis=0)


# -- PriorShiftWrapper.monitor on Dask input: one batch per block --------------------------------
def _monitor_block(shared, seed, Xb, wb):
    """Prior estimate of one block on the worker that holds it (a block fits in memory).

    ``shared``: ``(model, prior estimator, labelled tally or None, fold scorer or None,
    labelled repeat counts or None)``, one object of the task graph that every block's task
    reads (sent to each worker once)."""
    from .._validation import check_sample_weight
    from ._blocks import n_block_rows, predict_block

    estimator, est, source, folds, counts = shared
    if n_block_rows(Xb) == 0:  # an empty partition: no batch (left out, with a warning)
        return None
    proba = predict_block(estimator, "predict_proba", Xb, est.n_classes_)
    fold_proba = None if folds is None else list(folds.fold_proba(Xb))
    counts, codes, selected = batch_repeat_reference(counts, Xb)
    return monitor_proba(est, source, seed, proba, check_sample_weight(wb, proba.shape[0]),
                         fold_proba, counts, codes, selected)


def batch_repeat_reference(counts: Any, Xb: Any) -> tuple:
    """``(labelled repeat counts, feature codes of the batch's rows or None, (the rows'
    feature hashes, the labelled rows' tally) or None)`` for one ``monitor`` batch on a worker
    or executor: ``counts`` is ``(counts by features and posteriors or None, counts by
    posteriors or None[, the labelled rows' distinct feature hashes and rows of each])``
    (``PriorShiftWrapper._repeat_reference(by_rows=True)``, ``()`` and
    ``_labelled_row_tally``); with the first, the batch's rows are grouped by their features
    too, as in memory (since 5 December 2026; before, by their posteriors alone),
    and with the third a batch selected on its features is judged by how often its rows meet
    the labelled rows (:func:`probwrap.shift._repeats.selection_rate`), the hashes read here as
    in memory (:func:`probwrap.shift._repeats.identity_row_keys`; since 5 December
    2026)."""
    from ..shift._repeats import identity_row_keys, row_key_pairs

    if counts is None:
        return None, None, None
    by_rows, plain_counts = counts[:2]
    tally = counts[2] if len(counts) > 2 else None
    if by_rows is not None:
        keys = row_key_pairs(Xb)
        if keys is not None:
            codes = np.unique(np.ascontiguousarray(keys).view(np.dtype((np.void, 16))).ravel(),
                              return_inverse=True)[1].ravel().astype(float)
            hashes = None if tally is None else identity_row_keys(Xb)
            return by_rows, codes, (None if hashes is None else (hashes, tally))
    return plain_counts, None, None


#: One batch's estimate at a time per process records its warnings (``warnings.catch_warnings``
#: swaps module-wide state, which two threads of a Dask worker must not do at once).
_RECORDING = threading.Lock()


def monitor_proba(est, source, seed, proba, w, fold_proba=None, counts=None, row_codes=None,
                  selected=None):
    """One row of a monitor table from a batch's probabilities and weights (Dask or Spark),
    the power of two the batch's weights were divided by (1.0 unless they lie beyond about
    1e+-77, whose sums of squares would overflow or underflow; a batch's estimate does not
    depend on the scale of its weights), and the warnings of the estimate as
    ``[(category, message), ...]``: the client raises them once per condition for the whole
    table (:func:`warn_monitor_batches`), not once per batch on whichever worker ran it.
    ``fold_proba``: the batch's posteriors from each fold model of a base model refit on the
    labelled rows (read as in memory, ``prior_by_batch(fold_proba=...)``).

    ``counts``: the labelled rows' repeat counts (``PriorShiftWrapper._repeat_reference()``;
    None: not kept as rows): the fourth entry returned is then the batch's
    :func:`probwrap.shift._repeats.repeats_of_rows` (None where its rows do not repeat beyond
    chance), judged on the batch's rows as ``monitor`` judges a batch in memory; the client
    raises one :class:`~probwrap.shift.RepeatedRowsWarning` for the table. ``row_codes``:
    codes of the batch's features (:func:`batch_repeat_reference`), with ``counts`` read by
    features too. The repeats are judged first, so that the batch's mixture check counts
    them by their design effect (:func:`probwrap.shift._repeats.mixture_design_effect`), as
    ``monitor`` in memory does (``prior_by_batch(repeat_design_effect=...)``; since
    5 December 2026: before, Dask and Spark batches counted repeated rows as independent).
    ``selected``: ``(the rows' feature hashes, the labelled rows' tally)`` of
    :func:`batch_repeat_reference`, the rule for batches selected on a feature, as in memory
    (``repeats_of_rows(row_keys=, labelled_keys=)``)."""
    from ..shift._repeats import mixture_design_effect, repeats_of_rows

    row_keys, tally = (None, None) if selected is None else selected
    with _RECORDING, warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        repeats = repeats_of_rows(est, counts, proba, fold_proba, w, row_codes=row_codes,
                                  row_keys=row_keys, labelled_keys=tally)
        deff = None if repeats is None else mixture_design_effect(repeats)
        row, unit = _monitor_row(est, source, seed, proba, w, fold_proba,
                                 repeat_design_effect=deff)
    return row, unit, [(c.category, str(c.message)) for c in caught], repeats


def _condition(category: type, message: str) -> tuple:
    """What makes two batches' warnings "the same condition": the category and the message with
    its numbers masked (a batch's counts, estimates and intervals)."""
    import re

    return category, re.sub(r"\d+(?:\.\d+)?(?:e[-+]?\d+)?", "#", message)


def warn_monitor_batches(per_batch: list, n_batches: int, *, stacklevel: int = 5) -> None:
    """The warnings of a Dask or Spark ``monitor``'s batch estimates, one per condition for the
    whole table, as ``prior_by_batch`` gives one ``PriorIntervalConflictWarning`` per call:
    how many batches warned alike, which ones (the first five), and the first one's message.

    ``per_batch``: ``[(batch label, [(category, message), ...]), ...]`` in table order.
    """
    groups: dict = {}
    for label, caught in per_batch:
        for category, message in caught:
            entry = groups.setdefault(_condition(category, message), (category, message, []))
            if not entry[2] or entry[2][-1] != label:
                entry[2].append(label)
    for category, message, labels in groups.values():
        names = ", ".join(str(b) for b in labels[:5]) + (", ..." if len(labels) > 5 else "")
        warnings.warn(
            f"PriorShiftWrapper.monitor: {len(labels)} of {n_batches} batches (batch {names}) "
            f"warned alike; first, batch {labels[0]}: {message}",
            category,
            stacklevel=stacklevel,
        )


def _monitor_row(est, source, seed, proba, w, fold_proba=None, repeat_design_effect=None):
    from ._bootstrap import tally_prior_interval
    from ._tally import weight_unit_of

    unit = weight_unit_of(w.max()) if w.size else 1.0
    if unit != 1.0:
        w = w / unit

    if source is None or source.n_replicates == 0 or est.n_resamples == 0:
        res = est.estimate(proba, w, random_state=seed, fold_proba=fold_proba,
                           repeat_design_effect=repeat_design_effect)
        interval = res.interval
    else:
        import copy

        point = copy.copy(est)
        point.n_resamples = 0
        res = point.estimate(proba, w, random_state=seed,
                             repeat_design_effect=repeat_design_effect)
        interval = tally_prior_interval(
            est, source, proba, w, None, res.prior, n_replicates=est.n_resamples, seed=seed
        )
    if interval is None:
        interval = np.column_stack([res.prior, res.prior])
    from ..shift import class_shift_scores

    n_eff = float(w.sum() ** 2 / np.dot(w, w)) if w.size else 0.0  # Kish, as prior_by_batch
    # the rows alone and the pull toward the source prior used, as prior_by_batch gives them
    ml = res.prior if res.ml_prior is None else res.ml_prior
    pseudo = 0.0 if res.pseudo_rows is None else float(res.pseudo_rows)
    return (proba.shape[0], n_eff, res.prior, interval[:, 0], interval[:, 1],
            res.shift_statistic, res.shift_pvalue, res.converged,
            class_shift_scores(est, proba, w), ml, pseudo), unit


def monitor_dask(owner: Any, X: Any, batches: Any, batch_size: Any, sample_weight: Any):
    """Per-batch prior estimates of unlabelled Dask rows, one batch per Dask block.

    ``batch_size`` may be given if it equals the block length (every block but the last).
    Each block's estimate runs on the worker holding the block; only the k-vectors come back.
    The bootstrap seeds are drawn on the client in batch order exactly as
    :func:`probwrap.shift.prior_by_batch` draws them, so an in-memory model gives the table of
    ``prior_by_batch(..., batch_size=block length)`` on the same rows.
    """
    from sklearn.utils import check_random_state

    dask, _ = _import_dask()
    if batches is not None:
        raise ValueError(
            "`batches` (a label per row) is not supported for Dask input: each Dask block is a "
            "batch; rechunk the rows by batch, or give batch_size equal to the block length."
        )
    blocks, lengths = _row_blocks(X)
    if batch_size is not None:
        if lengths is None or any(c != batch_size for c in lengths[:-1]) or lengths[-1] > batch_size:
            raise ValueError(
                f"`batch_size`={plain(batch_size)!r} does not match the Dask blocks (lengths "
                f"{lengths if lengths is None else lengths[:5]}...); batches are the blocks, so "
                "rechunk X to batch_size rows or leave batch_size=None."
            )
    ws = _aligned_blocks(sample_weight, "sample_weight", X, blocks, lengths)
    est = owner.prior_estimator_
    rng = check_random_state(est.random_state)
    seeds = [rng.randint(2**31 - 1) for _ in blocks]
    source = getattr(owner, "_source_tally", None)
    # the models and the estimator as one object of the graph: sent to each worker once, not
    # with every block's task (a refit base model brings its fold models along)
    shared = dask.delayed(
        (owner.estimator_, est, source, owner._fold_scorer(),
         (owner._repeat_reference(by_rows=True), owner._repeat_reference(),
          getattr(owner, "_labelled_row_tally", None))),
        pure=True, traverse=False,
    )
    call = dask.delayed(_monitor_block, pure=True)
    rows = dask.compute(*[call(shared, s, b, wb) for s, b, wb in zip(seeds, blocks, ws,
                                                                      strict=True)])
    k = est.n_classes_
    dtype = [
        ("batch", np.int64),
        ("n_rows", np.int64),
        ("n_effective", float),
        ("prior", float, (k,)),
        ("lower", float, (k,)),
        ("upper", float, (k,)),
        ("shift_statistic", float),
        ("shift_pvalue", float),
        ("converged", bool),
        ("class_shift_score", float, (k,)),
        ("ml_prior", float, (k,)),
        ("pseudo_rows", float),
    ]
    empty = [i for i, r in enumerate(rows) if r is None]
    if empty:
        warnings.warn(
            f"PriorShiftWrapper.monitor: Dask block(s) {empty[:10]} of `X` have no rows; they "
            "are left out of the table (its `batch` field keeps the block numbers).",
            UserWarning,
            stacklevel=4,
        )
    kept = [(i, r) for i, r in enumerate(rows) if r is not None]
    if not kept:
        raise ValueError("`X` has no rows; monitor needs at least one row.")
    table = np.zeros(len(kept), dtype=dtype)
    for j, (i, (r, _, _, _)) in enumerate(kept):
        table[j] = (i, *r)
    warn_monitor_units([u for _, (_, u, _, _) in kept])
    warn_monitor_batches([(i, caught) for i, (_, _, caught, _) in kept], len(kept))
    warn_batch_repeats([(i, found) for i, (_, _, _, found) in kept], len(kept),
                       by_features=owner._repeat_reference(by_rows=True) is not None)
    return table


def warn_batch_repeats(per_batch: list, n_batches: int, *, stacklevel: int = 5,
                       by_features: bool = False) -> None:
    """``monitor``'s one :class:`~probwrap.shift.RepeatedRowsWarning` for the batches whose
    rows repeat one another beyond chance; ``per_batch``: ``[(batch label,
    repeats_of_rows(...) or None), ...]`` in table order (the same words in memory, on Dask
    and on Spark: :func:`probwrap.shift._repeats.batch_repeats_message`; ``by_features``:
    rows in memory grouped by their features as well as their posteriors)."""
    from ..shift._repeats import RepeatedRowsWarning, batch_repeats_message

    found = [(plain(b), f) for b, f in per_batch if f is not None]
    if found:
        warnings.warn(batch_repeats_message(found, n_batches, by_features=by_features),
                      RepeatedRowsWarning,
                      stacklevel=stacklevel)


def warn_monitor_units(units: list) -> None:
    """The wrappers' WeightScaleWarning, once, when some batch's weights were rescaled."""
    from ._tally import warn_weight_unit

    extreme = [u for u in units if u != 1.0]
    if extreme:
        warn_weight_unit(max(extreme), "PriorShiftWrapper.monitor", None, stacklevel=6)
