"""PriorShiftWrapper's intervals when some rows are tallied.

A fit on Dask input keeps the labelled rows as a tally (bins of the log-odds with Poisson
replicate counts), and ``adapt`` on Dask input tallies the unlabelled rows the same way. The
bootstrap intervals then cannot redraw rows; they come from one Poisson bootstrap over the
tallies' replicates and the in-memory rows alike (``tally_prior_interval`` of the scale layer).
The wrapper decides when this applies; the arithmetic is here.
"""

from __future__ import annotations

import copy
from dataclasses import replace
from typing import Any

import numpy as np
from sklearn.utils import check_random_state

from ._validation import check_sample_weight
from .shift import prior_by_batch
from .shift._resample import _widen

__all__ = ["tallied_adapt", "tallied_monitor"]


def _tally_rows(tally: Any) -> float:
    """Effective number of the rows behind a tally (its bins' weights are counts of rows).

    Kish's count when the tally knows the sum of squared weights, otherwise its total weight
    (exact for unit weights). The rows of a count table (whole-number weights without a common
    factor, :func:`probwrap.scale._dask.tally_is_count_table`) count their cases, the total
    weight, as the same table in memory does (since 5 December 2026; before, Kish's count).
    """
    from .scale._entry import tally_is_count_table

    if getattr(tally, "weighted_rows_by_label", None) is not None and tally_is_count_table(tally):
        return float(tally.total_weight)
    rows = tally.effective_rows
    return float(rows) if np.isfinite(rows) else float(tally.total_weight)


def tallied_adapt(
    est: Any, source: Any, target: Any, proba: Any, sample_weight: Any, rs: Any, k: int,
    folds: Any = None, repeat_design_effect: float | None = None,
) -> tuple:
    """``adapt``'s estimate and interval when the labelled (``source``) or unlabelled
    (``target``) rows are tallies; returns ``(PriorEstimate, interval)``.

    ``folds``: the fold-score sums of more than 20,000 two-class Dask or Spark rows after a
    base model was refit on the labelled rows
    (:class:`probwrap.shift._fold_moments.FoldScoreMoments` with ``row_replicates``). The
    estimate and the shift test then read them as with the score interval, and the bootstrap
    redraws the rows the estimate reads (every row once per fold model, one Poisson draw per
    row shared by its copies), as the in-memory bootstrap after a refit does
    (``PriorEstimator._refit_bootstrap``; since 4 December 2026, before the refit model's
    tally). ``repeat_design_effect``: the rows' design effect of their repeats beyond chance,
    which the mixture check reads (``PriorEstimator.estimate``; since 5 December
    2026)."""
    from .scale._entry import replicate_seed, tally_prior_interval

    rows = None if target is None else _tally_rows(target)
    fold_rows = None
    if folds is not None and getattr(folds, "row_replicates", None) is not None:
        fold_rows = folds.rows
    res = est.estimate(proba, sample_weight, random_state=rs, effective_rows=rows,
                       interval=False, fold_proba=None if fold_rows is None else folds,
                       repeat_design_effect=repeat_design_effect)
    w = check_sample_weight(sample_weight, np.asarray(proba).shape[0])
    centre = res.ml_prior if res.ml_prior is not None else res.prior
    if fold_rows is not None:
        # the rows the estimate read (each row once per fold model), for the interval and
        # the fade below, as in memory
        proba, sample_weight = fold_rows
        w = np.asarray(sample_weight, dtype=float)
    if res.identified:
        # the same shortfall with few labelled rows as the in-memory interval's
        est._warn_few_labelled(getattr(est, "n_source_effective_", None))
        interval = tally_prior_interval(
            est, source, np.asarray(proba, dtype=float), w, target, centre,
            n_replicates=est.n_resamples, seed=replicate_seed(rs),
            target_replicates=None if fold_rows is None else folds.row_replicates,
        )
        n_eff = rows if rows is not None else float(w.sum() ** 2 / np.dot(w, w))
        ml_interval = (None if res.ml_prior is None else
                       _widen(interval, res.ml_prior, res.ml_prior, n_eff, est.confidence_level))
        if ml_interval is not None:
            # as in memory: the shrunk estimate is kept inside the interval of the shares (the
            # pull fades where that interval rejects it)
            res = est._settle_in(res, proba, sample_weight, rows, ml_interval)
        interval = _widen(interval, res.prior, centre, n_eff, est.confidence_level)
    else:
        interval = np.column_stack([np.zeros(k), np.ones(k)])
        ml_interval = None
    dropped = getattr(est, "_last_dropped", 0)
    res = replace(res, interval=interval, n_dropped=dropped, ml_interval=ml_interval)
    return res, interval


def tallied_monitor(
    est: Any, source: Any, proba: Any, batches: Any, batch_size: Any, sample_weight: Any
) -> np.ndarray:
    """``monitor``'s table after a fit on Dask input: point estimates per batch, intervals from
    a Poisson bootstrap over the labelled tally's replicates and the batch's rows."""
    from .scale._entry import tally_prior_interval

    point = copy.copy(est)
    point.n_resamples = 0
    table = prior_by_batch(
        point, proba, batches, batch_size=batch_size, sample_weight=sample_weight
    )
    p = np.asarray(proba, dtype=float)
    n = p.shape[0]
    w = check_sample_weight(sample_weight, n)
    if batch_size is not None:
        labels = np.arange(n) // int(batch_size)
    else:
        labels = np.asarray(batches)
        labels = labels.astype(str) if labels.dtype == object else labels
    rng = check_random_state(est.random_state)
    for i in range(table.shape[0]):
        rows = labels == table["batch"][i]
        iv = tally_prior_interval(
            est, source, p[rows], w[rows], None, table["prior"][i],
            n_replicates=est.n_resamples, seed=rng.randint(2**31 - 1),
        )
        table["lower"][i], table["upper"][i] = iv[:, 0], iv[:, 1]
    return table
