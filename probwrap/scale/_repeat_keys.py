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
5 December 2026, sets beyond 20,000 rows were not judged).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._blocks import block_weights, n_block_rows, predict_block

__all__ = ["dask_key_tallies", "key_block"]

#: Distinct keys one Dask task of the shuffle holds, about (16 bytes of key and 8 of weight each).
KEYS_PER_SHARE = 250_000


def key_block(estimator: Any, scorer: Any, n_classes: int, by_features: bool,
              tally: Any, Xb: Any, wb: Any) -> tuple:
    """``(keys (n, 2) uint64, weights (n,), labelled rows at each row or None)`` of one block
    of unlabelled rows. ``by_features``: keys of the rows' features
    (:func:`probwrap.shift._repeats.row_key_pairs`); otherwise of the posteriors of
    ``estimator`` (of ``scorer``'s refit model and each of its fold models where it is
    given), in which identical rows agree. ``tally``: the labelled rows' distinct feature
    hashes and rows of each (``PriorShiftWrapper._labelled_row_tally``; with
    ``by_features``): the third entry counts the labelled rows with each row's features
    (:func:`probwrap.shift._repeats.labelled_rows_at`), the rule for rows selected on a
    feature (since 5 December 2026); None without it."""
    from ..shift._repeats import identity_row_keys, labelled_rows_at, row_key_pairs

    n = n_block_rows(Xb)
    w = block_weights(wb, n)
    if by_features:
        keys = row_key_pairs(Xb)
        if keys is None:
            raise ValueError(f"rows of type {type(Xb).__name__} cannot be keyed by their "
                             "features")
        hashes = None if tally is None else identity_row_keys(Xb)
        return keys, w, (None if hashes is None else labelled_rows_at(tally, hashes))
    if scorer is None:
        p = predict_block(estimator, "predict_proba", Xb, n_classes)
        parts = [p]
    else:
        parts = [scorer.proba(Xb), *scorer.fold_proba(Xb)]
    m = np.concatenate([np.asarray(q, dtype=float).reshape(n, -1) for q in parts], axis=1)
    return row_key_pairs(m), w, None


def _split_block(fn: Any, args: tuple, shares: int, *piece: Any) -> tuple:
    """One Dask block's totals ``(rows, sum w, sum w^2, sum w a, sum of w^2 where a > 0)``
    (``a`` the labelled rows at a row's features, 0 without them) and its keys summed within
    the block, split into ``shares`` parts by the first word of the key (with, per key,
    whether labelled rows have its features)."""
    from ..shift._repeats import _pair_groups

    keys, w, at = fn(*args, *piece)
    seen = np.zeros(w.shape[0], dtype=bool) if at is None else np.asarray(at) > 0
    totals = (int(w.shape[0]), float(w.sum()), float(np.dot(w, w)),
              0.0 if at is None else float(np.dot(w, at)), float(np.dot(w[seen], w[seen])))
    k, weight = _pair_groups(keys, w)
    _, seen_weight = _pair_groups(keys, seen.astype(float))
    flag = seen_weight > 0
    part = (k[:, 0] % np.uint64(shares)).astype(np.intp) if k.shape[0] else np.zeros(0, np.intp)
    return totals, [(k[part == j], weight[part == j], flag[part == j]) for j in range(shares)]


def _share_tallies(*pieces: tuple) -> tuple[int, float, float]:
    """``(groups, sum_g W_g^2, sum of W_g^2 over groups labelled rows have)`` of one share of
    the keys from every block."""
    from ..shift._repeats import _pair_groups

    keys = np.concatenate([p[0] for p in pieces]) if pieces else np.zeros((0, 2), np.uint64)
    weight = np.concatenate([p[1] for p in pieces]) if pieces else np.zeros(0)
    flag = np.concatenate([p[2] for p in pieces]) if pieces else np.zeros(0, dtype=bool)
    k, w = _pair_groups(keys, weight)
    _, seen = _pair_groups(keys, flag.astype(float))
    return int(k.shape[0]), float(np.dot(w, w)), float(np.dot(w[seen > 0], w[seen > 0]))


def dask_key_tallies(dask: Any, pieces: list, fn: Any, args: tuple, n_rows: int | None
                     ) -> tuple[int, int, float, float, float, float, float, float]:
    """:func:`probwrap.shift._repeats.repeat_tallies` of Dask rows (``pieces``: each block's
    ``(Xb, wb)``), keyed by ``fn(*args, Xb, wb)`` and added up by a shuffle of the keys into
    shares (see the module docstring); ``n_rows`` (if known) sets how many. Three more sums
    follow the five, for :func:`probwrap.shift._repeats.selection_from_sums`: ``sum_i w_i
    a_i``, ``sum_{g seen} W_g^2`` and ``sum_{i seen} w_i^2`` (``a_i`` the labelled rows at
    row ``i``'s features, the third entry of ``fn``; "seen" where it is positive)."""
    rows = max(int(n_rows or 0), 1)
    shares = int(min(max(len(pieces), 1), max(1, -(-rows // KEYS_PER_SHARE))))
    split = dask.delayed(_split_block, pure=True, nout=2)
    blocks = [split(fn, args, shares, *piece) for piece in pieces]
    share = dask.delayed(_share_tallies, pure=True)
    parts = [share(*[b[1][j] for b in blocks]) for j in range(shares)]
    totals, tallied = dask.compute([b[0] for b in blocks], parts)
    return (int(sum(t[0] for t in totals)), int(sum(t[0] for t in tallied)),
            float(sum(t[1] for t in tallied)), float(sum(t[1] for t in totals)),
            float(sum(t[2] for t in totals)), float(sum(t[3] for t in totals)),
            float(sum(t[2] for t in tallied)), float(sum(t[4] for t in totals)))
