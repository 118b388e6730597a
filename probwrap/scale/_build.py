"""Building a tally from scores: NumPy input chunk by chunk, Dask input block by block.

:func:`tally_scores` is the one entry that chooses between the two; the tally itself
(:mod:`probwrap.scale._tally`) and the Dask machinery (:mod:`probwrap.scale._dask`) do not
import each other's callers.
"""

from __future__ import annotations

import numbers
from typing import Any

import numpy as np

from .._validation import check_same_length, check_sample_weight, check_scores, plain
from ._tally import (
    DEFAULT_RESOLUTION,
    ScoreTally,
    _check_n_labels,
    _check_n_replicates,
    _check_resolution,
    _tally_block,
    merge_tallies,
    replicate_seed,
    warn_weight_unit,
)

__all__ = ["tally_scores"]


def _is_dask(obj: Any) -> bool:
    return hasattr(obj, "__dask_graph__")


def tally_scores(
    scores: Any,
    y: Any = None,
    *,
    sample_weight: Any = None,
    n_labels: int | None = None,
    resolution: float = DEFAULT_RESOLUTION,
    chunk_size: int = 1_000_000,
    n_replicates: int = 0,
    random_state: Any = None,
) -> ScoreTally:
    """Tally scores (and labels) into bins of width ``resolution``, chunk by chunk.

    Parameters
    ----------
    scores : array-like, dask array of shape (n,), or Spark DataFrame
        Scores on the log-odds scale (binary log-odds, or one class's one-vs-rest log-odds).
        A Spark DataFrame holds the scores in its one column not named by ``y`` or
        ``sample_weight``; it is tallied partition by partition on the executors.
    y : array-like or dask array of shape (n,), or str, default=None
        Integer label indices ``0..n_labels-1`` (booleans count as 0/1); with a Spark DataFrame,
        the name of its label column. Without ``y`` the tally is unlabelled (one column of
        weights), as for unlabelled deployment data.
    sample_weight : array-like or dask array of shape (n,), or str, default=None
        Non-negative row weights (frequencies); with a Spark DataFrame, a column name. Weights
        whose largest lies outside about [1e-77, 1e77] are tallied divided by a power of two
        (exact; ``weight_unit`` of the result), with a ``WeightScaleWarning``.
    n_labels : int, default=None
        Number of label columns (default 2 with ``y``; multiclass labels need it).
    resolution : float, default=1e-3
        Bin width on the score scale.
    chunk_size : int, default=1_000_000
        Rows per chunk for in-memory input (the memory of the intermediate arrays). Dask input
        is tallied block by block on the cluster, Spark input partition by partition on the
        executors, and only the per-block (per-partition) tallies travel.
    n_replicates : int, default=0
        Also tally this many Poisson-bootstrap replicates (``replicates``, memory
        ``n_replicates * n_bins * n_labels`` floats, whatever the number of rows): in replicate
        ``b`` every row counts with its weight times an independent Poisson(1) draw, which
        approximates resampling the rows with replacement (Hanley & MacGibbon 2006; Chamandy
        et al. 2012). Fits repeated on the replicates give bootstrap intervals.
    random_state : int, RandomState or None, default=None
        Seed of the replicate draws; chunk (or Dask block) ``i`` draws from its own generator
        seeded by this seed and ``i``, so the result does not depend on scheduling (on Spark:
        chunk ``j`` of partition ``p``, so it depends on the frame's partitioning only).

    Returns
    -------
    ScoreTally

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.scale import tally_scores
    >>> rng = np.random.default_rng(0)
    >>> s = rng.normal(size=10_000)
    >>> y = (rng.random(10_000) < 1 / (1 + np.exp(-s))).astype(int)
    >>> t = tally_scores(s, y)
    >>> t.n_rows, int(t.total_weight), t.n_labels
    (10000, 10000, 2)
    """
    r = _check_resolution(resolution)
    if n_labels is None:
        n_labels = 2 if y is not None else 1
    n_labels = _check_n_labels(n_labels)
    if y is None and n_labels != 1:
        raise ValueError(f"`n_labels` must be 1 without `y`; got {n_labels}.")
    if not (isinstance(chunk_size, numbers.Integral) and chunk_size >= 1):
        raise ValueError(f"`chunk_size` must be a positive integer; got {plain(chunk_size)!r}.")
    n_rep = _check_n_replicates(n_replicates)
    seed = replicate_seed(random_state) if n_rep else 0
    tally = _distributed_tally(scores, y, sample_weight, n_labels, r, n_rep, seed)
    if tally is None:
        tally = _in_memory_tally(scores, y, sample_weight, n_labels, r, n_rep, seed, chunk_size)
    # weights beyond about 1e+-77 are tallied divided by a power of two (weight_unit)
    warn_weight_unit(tally.weight_unit, "tally_scores", tally.total_weight, stacklevel=3)
    return tally


def _distributed_tally(scores, y, sample_weight, n_labels, r, n_rep, seed) -> ScoreTally | None:
    if type(scores).__module__.startswith("pyspark.sql"):
        from ._spark import is_spark_frame, spark_tally_scores

        if is_spark_frame(scores):
            return spark_tally_scores(scores, y, sample_weight, n_labels, r, n_rep, seed)
    if any(_is_dask(v) for v in (scores, y, sample_weight)):
        from ._dask import tally_dask_scores

        return tally_dask_scores(scores, y, sample_weight, n_labels, r, n_rep, seed)
    return None


def _in_memory_tally(scores, y, sample_weight, n_labels, r, n_rep, seed, chunk_size) -> ScoreTally:
    s = check_scores(scores, name="scores")
    n = s.shape[0]
    if n == 0:
        raise ValueError("`scores` is empty; a tally needs at least one row.")
    if y is not None:
        check_same_length(("scores", s), ("y", y))
        y = np.asarray(y)
    w = None if sample_weight is None else check_sample_weight(sample_weight, n)
    parts = [
        _tally_block(
            s[i : i + chunk_size],
            None if y is None else y[i : i + chunk_size],
            None if w is None else w[i : i + chunk_size],
            n_labels,
            r,
            n_rep,
            [seed, 0, i // chunk_size],
        )
        for i in range(0, n, chunk_size)
    ]
    return merge_tallies(parts)
