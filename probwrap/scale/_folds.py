"""The fold models of a base model refit on the labelled rows, scoring Dask or Spark rows where
they live.

A :class:`~probwrap.PriorShiftWrapper` fitted in memory on an unfitted base model keeps the
cross-fitting's fold models, and its shift test and default interval compare the unlabelled rows'
scores averaged over the fold models with the labelled rows' held-out scores from the same models
(see :func:`probwrap.shift.score_interval`, ``fold_proba``). On Dask or Spark rows the fold models
go to the workers (executors) with the refit model, once — one object in the task graph, or one
broadcast variable — and every block of rows is scored there by all of them in one pass, so the
refit model's and the fold models' posteriors of a row always come from the same pass over the
same rows.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ._blocks import block_weights, n_block_rows, predict_block

__all__ = ["FoldScorer"]


class FoldScorer:
    """The refit model and the fold models of a cross-fitting, with the column of each fold
    model's classes among all classes.

    Parameters
    ----------
    estimator : fitted classifier
        The model refit on all labelled rows (``estimator_``).
    folds : sequence of (fitted classifier, array of int)
        Each fold model with the columns (in the wrapper's ``classes_``) of its own
        ``classes_``; a class absent from a fold's training rows gets probability 0 there, as
        in memory (``probwrap._heldout.fold_columns``).
    n_classes : int
        Number of classes of the wrapper.
    """

    def __init__(self, estimator: Any, folds: Any, n_classes: int) -> None:
        self.estimator = estimator
        self.folds = [(model, np.asarray(cols, dtype=np.intp)) for model, cols in folds]
        self.n_classes = int(n_classes)

    @property
    def n_folds(self) -> int:
        return len(self.folds)

    def fold_proba(self, Xb: Any) -> np.ndarray:
        """Posteriors of the rows ``Xb`` from each fold model, shape (n_folds, n, n_classes)."""
        k = self.n_classes
        n = n_block_rows(Xb)
        out = np.zeros((len(self.folds), n, k))
        for i, (model, cols) in enumerate(self.folds):
            out[i][:, cols] = predict_block(model, "predict_proba", Xb, cols.shape[0])
        return out

    def proba(self, Xb: Any) -> np.ndarray:
        """The refit model's posteriors of ``Xb``, shape (n, n_classes)."""
        return predict_block(self.estimator, "predict_proba", Xb, self.n_classes)


class KeptScored:
    """Rows scored by the refit and the fold models, with their weights, concatenated in block
    order by ``+`` (the reduction of :mod:`probwrap.scale._rows`): ``proba`` (n, k),
    ``folds`` (n, n_folds, k) and ``weights`` (n,)."""

    def __init__(self, proba: np.ndarray, folds: np.ndarray, weights: np.ndarray) -> None:
        self.proba = proba
        self.folds = folds
        self.weights = weights

    def __add__(self, other: KeptScored) -> KeptScored:
        return KeptScored(np.concatenate([self.proba, other.proba]),
                          np.concatenate([self.folds, other.folds]),
                          np.concatenate([self.weights, other.weights]))

    def fold_list(self) -> list[np.ndarray]:
        """The fold models' posteriors as one (n, k) array per fold, in fold order."""
        return [np.ascontiguousarray(self.folds[:, i]) for i in range(self.folds.shape[1])]


def kept_scored_block(scorer: FoldScorer, Xb: Any, wb: Any) -> KeptScored:
    """One block of unlabelled rows scored by the refit and every fold model (see
    :class:`KeptScored`)."""
    p = scorer.proba(Xb)
    w = block_weights(wb, p.shape[0])
    return KeptScored(p, np.moveaxis(scorer.fold_proba(Xb), 0, 1), w)


class KeptCells:
    """Unlabelled rows with their cells, concatenated in block order by ``+``: the model's
    posteriors ``proba`` (n, k), the fold models' ``folds`` (n, n_folds, k; None for a model
    without them), ``weights`` (n,) and ``cells`` (n,)."""

    def __init__(self, proba: np.ndarray, folds: np.ndarray | None, weights: np.ndarray,
                 cells: np.ndarray) -> None:
        self.proba = proba
        self.folds = folds
        self.weights = weights
        self.cells = cells

    def __add__(self, other: KeptCells) -> KeptCells:
        return KeptCells(np.concatenate([self.proba, other.proba]),
                         None if self.folds is None
                         else np.concatenate([self.folds, other.folds]),
                         np.concatenate([self.weights, other.weights]),
                         np.concatenate([self.cells, other.cells]))


def kept_cells_block(estimator: Any, scorer: FoldScorer | None, n_classes: int, Xb: Any,
                     cb: Any, wb: Any) -> KeptCells:
    """One block of unlabelled rows with their cells ``cb``: the model's posteriors (the
    refit model's and every fold model's when ``scorer`` is given), weights and cells."""
    if scorer is None:
        p = predict_block(estimator, "predict_proba", Xb, n_classes)
        folds = None
    else:
        p = scorer.proba(Xb)
        folds = np.moveaxis(scorer.fold_proba(Xb), 0, 1)
    return KeptCells(p, folds, block_weights(wb, p.shape[0]), np.asarray(cb))


def cells_rows(rows: Any, estimator: Any, scorer: FoldScorer | None, n_classes: int) -> tuple:
    """``(proba, [fold posteriors, ...] or None, weights, cells)`` of a small set of unlabelled
    rows whose cells are the label column of ``rows`` (a Spark frame's cells column), all from
    one pass, so that every row's posteriors, weight and cell line up."""
    kept = rows.map_reduce(kept_cells_block, estimator, rows.shared(scorer), int(n_classes))
    folds = (None if kept.folds is None
             else [np.ascontiguousarray(kept.folds[:, i]) for i in range(kept.folds.shape[1])])
    return kept.proba, folds, kept.weights, kept.cells


def scored_rows(rows: Any, scorer: FoldScorer, unit: float = 1.0) -> tuple:
    """``(proba, [fold posteriors, ...], weights)`` of a small set of unlabelled rows (Dask or
    Spark rows, see :func:`probwrap.scale._rows.rows_of`) in block order, from one pass that
    scores every block with the refit and the fold models where it lives; the weights divided
    by ``unit`` (the power of two of weights beyond about 1e+-77, as in memory)."""
    kept = rows.map_reduce(kept_scored_block, rows.shared(scorer))
    w = kept.weights / unit if unit != 1.0 else kept.weights
    return kept.proba, kept.fold_list(), w


def _fold_moments_block(scorer: FoldScorer, calibrator: Any, src: np.ndarray, share: np.ndarray,
                        grid: np.ndarray, unit: float, resolution: float, averaged: bool,
                        n_replicates: int, seed: int, key: list, Xb: Any, wb: Any) -> tuple:
    """Sums of the fold-averaged score of one block of unlabelled two-class rows on the grid of
    priors (:func:`probwrap.shift._fold_moments.fold_score_block`), the fold models' posteriors
    calibrated by the wrapper's map as in memory (``PriorEstimator.calibrate``); and, from the
    same predictions, a tally of the log-odds of every row once per fold model, weighted by the
    row's weight times the fold's share (the rows the point estimate reads in memory,
    ``PriorEstimator._estimating_rows``), in bins of ``resolution``; with ``averaged`` (the
    wrapper predicts with the fold models' average posterior) the weighted sums of that
    average, of the outer products of its shift-test scores and of its entropy (the harm
    scale's inputs, as ``null_harm_scale`` reads them in memory). With ``n_replicates`` the
    tally carries that many Poisson-bootstrap replicates, drawn from
    ``default_rng([seed, 4, *key])`` (``key`` the block's index), one draw per row shared by
    its copies (a resampled row enters with every fold model, as the in-memory bootstrap after
    a refit draws it, ``PriorEstimator._bootstrap`` with ``copies``)."""
    from ..shift._fold_moments import fold_score_block
    from ._dask import _binary_scores
    from ._tally import _tally_block

    raw = scorer.fold_proba(Xb)
    cal = raw if calibrator is None else np.stack([calibrator.predict(f) for f in raw])
    w = block_weights(wb, raw.shape[1])
    if unit != 1.0:
        w = w / unit
    n = raw.shape[1]
    scores = (np.concatenate([_binary_scores(f, "predict_proba") for f in raw]) if n
              else np.empty(0))
    stacked = np.concatenate([s_k * w for s_k in share]) if n else np.empty(0)
    # (a row of weight 0 stays out of every sum, as in memory)
    n_folds = raw.shape[0]
    tally = _tally_block(scores, None, stacked, 1, resolution, int(n_replicates),
                         [int(seed), 4, *key] if n_replicates else None,
                         replicate_rows=np.tile(np.arange(n), n_folds) if n_replicates and n
                         else None)
    harm: tuple = ()  # (sums combine entry by entry: none here)
    if averaged:
        avg = np.tensordot(share, cal, axes=1)
        q = avg / src
        u = q[:, 1:] - q[:, :1]
        with np.errstate(divide="ignore", invalid="ignore"):
            entropy = -np.where(avg > 0, avg * np.log(avg), 0.0).sum(axis=1)
        harm = (w @ avg, (u * w[:, None]).T @ u, np.array([w @ entropy]))
    return fold_score_block(cal, share, src, w, grid), tally, harm


def fold_moments(rows: Any, scorer: FoldScorer, est: Any, unit: float = 1.0,
                 resolution: float | None = None, n_replicates: int = 0, seed: int = 0) -> Any:
    """The sums of the fold-averaged score of many unlabelled two-class rows (Dask or Spark
    rows, see :func:`probwrap.scale._rows.rows_of`), for the shift test and the score interval
    of ``est`` (a fitted :class:`probwrap.shift.PriorEstimator` whose labelled rows are kept
    with their folds), in one more pass that scores every block with the fold models where it
    lives; None where ``est`` would not read them (see ``PriorEstimator._fold_moments``).

    The same pass tallies every row's log-odds once per fold model, weighted by the fold's
    share (bins of ``resolution`` on the log-odds scale, the tally's default if None), and the
    returned sums carry that tally's rows (``FoldScoreMoments.rows``): the rows the in-memory
    point estimate reads after a refit, each row once per fold model (since 4 December 2026;
    before, the point estimate of these rows read the refit model's tally). With
    ``n_replicates`` that tally also carries Poisson-bootstrap replicates (one draw per row,
    shared by its fold copies), returned as ``FoldScoreMoments.row_replicates``: the bootstrap
    interval then redraws the rows the estimate reads, as in memory (since 4 December 2026;
    before, it drew from the refit model's tally)."""
    from ..shift._fold_moments import score_grid
    from ..shift._interval import fold_shares
    from ._tally import DEFAULT_RESOLUTION

    fold = getattr(est, "_src_fold", None)
    source = est._source_rows()
    if (fold is None or source is None or est._source_row_counts() is not None
            or est.n_classes_ != 2 or scorer.n_folds != int(fold.max()) + 1):
        return None
    share = fold_shares(fold, source[1], source[2], scorer.n_folds)[0]
    src = np.asarray(est.source_prior_, dtype=float)
    r = DEFAULT_RESOLUTION if resolution is None else float(resolution)
    averaged = bool(getattr(est, "_fold_point", False))
    sums, tally, harm = rows.map_reduce(_fold_moments_block, rows.shared(scorer),
                                        est.calibrator_, src, share, score_grid(float(src[1])),
                                        float(unit), r, averaged, int(n_replicates), int(seed),
                                        indexed=True)
    harm = None if not harm else (harm[0] / sums.total, harm[1] / sums.total,
                                  float(harm[2][0]) / sums.total)
    return sums.with_rows(*tally.to_scores(proba=True), harm=harm,
                          replicates=tally.replicate_bin_weights() if n_replicates else None)
