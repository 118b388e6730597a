"""Repeated unlabelled rows counted where Dask or Spark rows live (``RepeatedRowsWarning``).

``PriorShiftWrapper.adapt`` judges whether its unlabelled rows repeat one another beyond chance
(:mod:`probwrap.shift._repeats`) from five numbers: the rows, the distinct rows, the sum of the
squared weights of the groups of identical rows, the sum of the weights and of their squares.
Every block of rows gets a 128-bit key per row where it lives (of its features, or of its
posteriors from the model and every fold model: :func:`key_block`), and the engine adds the
weights of each key over all blocks by a shuffle, never on the client:

- Dask: each block's keys, summed within the block, are split by their first word into
  ``shares`` parts; part ``j`` of every block goes to one task that adds them up and returns
  ``(groups, sum of squares)``. A task holds about ``1 / shares`` of the distinct keys
  (``shares`` is chosen so that this stays near 250,000 keys, at most one per block);
- Spark: one ``groupBy`` of the keys, then one aggregate row
  (:func:`probwrap.scale._spark.spark_key_tallies`).

Only those numbers reach the client, so the check reads every row of a set of any size (before
5 December 2026, session 25, sets beyond 20,000 rows were not judged).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._blocks import block_weights, n_block_rows, predict_block

__all__ = ["dask_key_tallies", "key_block"]

#: Distinct keys one Dask task of the shuffle holds, about (16 bytes of key and 8 of weight each).
KEYS_PER_SHARE = 250_000


def key_block(estimator: Any, scorer: Any, n_classes: int, by_features: bool,
              Xb: Any, wb: Any) -> tuple[np.ndarray, np.ndarray]:
    """``(keys (n, 2) uint64, weights (n,))`` of one block of unlabelled rows. ``by_features``:
    keys of the rows' features (:func:`probwrap.shift._repeats.row_key_pairs`); otherwise of
    the posteriors of ``estimator`` (of ``scorer``'s refit model and each of its fold models
    where it is given), in which identical rows agree."""
    from ..shift._repeats import row_key_pairs

    n = n_block_rows(Xb)
    w = block_weights(wb, n)
    if by_features:
        keys = row_key_pairs(Xb)
        if keys is None:
            raise ValueError(f"rows of type {type(Xb).__name__} cannot be keyed by their "
                             "features")
        return keys, w
    if scorer is None:
        p = predict_block(estimator, "predict_proba", Xb, n_classes)
        parts = [p]
    else:
        parts = [scorer.proba(Xb), *scorer.fold_proba(Xb)]
    m = np.concatenate([np.asarray(q, dtype=float).reshape(n, -1) for q in parts], axis=1)
    return row_key_pairs(m), w


def _split_block(fn: Any, args: tuple, shares: int, *piece: Any) -> tuple:
    """One Dask block's totals ``(rows, sum w, sum w^2)`` and its keys summed within the block,
    split into ``shares`` parts by the first word of the key."""
    from ..shift._repeats import _pair_groups

    keys, w = fn(*args, *piece)
    totals = (int(w.shape[0]), float(w.sum()), float(np.dot(w, w)))
    k, weight = _pair_groups(keys, w)
    part = (k[:, 0] % np.uint64(shares)).astype(np.intp) if k.shape[0] else np.zeros(0, np.intp)
    return totals, [(k[part == j], weight[part == j]) for j in range(shares)]


def _share_tallies(*pieces: tuple) -> tuple[int, float]:
    """``(groups, sum_g W_g^2)`` of one share of the keys from every block."""
    from ..shift._repeats import key_tallies

    keys = np.concatenate([p[0] for p in pieces]) if pieces else np.zeros((0, 2), np.uint64)
    weight = np.concatenate([p[1] for p in pieces]) if pieces else np.zeros(0)
    return key_tallies(keys, weight)


def dask_key_tallies(dask: Any, pieces: list, fn: Any, args: tuple, n_rows: int | None
                     ) -> tuple[int, int, float, float, float]:
    """:func:`probwrap.shift._repeats.repeat_tallies` of Dask rows (``pieces``: each block's
    ``(Xb, wb)``), keyed by ``fn(*args, Xb, wb)`` and added up by a shuffle of the keys into
    shares (see the module docstring); ``n_rows`` (if known) sets how many."""
    rows = max(int(n_rows or 0), 1)
    shares = int(min(max(len(pieces), 1), max(1, -(-rows // KEYS_PER_SHARE))))
    split = dask.delayed(_split_block, pure=True, nout=2)
    blocks = [split(fn, args, shares, *piece) for piece in pieces]
    share = dask.delayed(_share_tallies, pure=True)
    parts = [share(*[b[1][j] for b in blocks]) for j in range(shares)]
    totals, tallied = dask.compute([b[0] for b in blocks], parts)
    return (int(sum(t[0] for t in totals)), int(sum(g for g, _ in tallied)),
            float(sum(q for _, q in tallied)), float(sum(t[1] for t in totals)),
            float(sum(t[2] for t in totals)))
