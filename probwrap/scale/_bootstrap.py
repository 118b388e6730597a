"""Bootstrap intervals from the Poisson replicates carried by a tally (no rows needed).

Each replicate of a :class:`~probwrap.scale.ScoreTally` is the tally of a Poisson bootstrap
resample of the original rows (every row counted with its weight times a Poisson(1) draw).
Repeating a fit on every replicate's weighted tally rows therefore gives the same kind of
percentile interval as resampling the rows in memory, with memory ``n_replicates * n_bins``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .._validation import costs_by_position, plain
from ._tally import ScoreTally

__all__ = ["tally_cutoff_interval", "tally_prior_interval"]


def tally_cutoff_interval(
    tally: ScoreTally,
    costs: Any,
    *,
    capacity: float | None = None,
    confidence_level: float = 0.95,
):
    """Percentile bootstrap interval of the least-cost probability cutoff, from replicates.

    The cutoff is searched, as by :func:`probwrap.decision.search_cutoff` on the probability
    scale ``expit(score)``, on the tally's rows with each replicate's weights.

    Parameters
    ----------
    tally : ScoreTally
        A labelled binary tally with ``n_replicates > 0`` (``tally_scores(..., n_replicates=B)``).
    costs : mapping or array-like of shape (2, 2)
        As for :func:`~probwrap.decision.search_cutoff`.
    capacity : float, default=None
        Largest share of (weighted) rows given the positive action.
    confidence_level : float, default=0.95

    Returns
    -------
    probwrap.decision.CutoffInterval
        ``fold_cutoffs`` is empty (the rows of a tally have no folds). Below 100 effective
        rows it warns as :func:`~probwrap.decision.cutoff_interval` does, and when the tally
        shows equal row weights (no ``capacity``) ``exact_low`` / ``exact_high`` are computed
        from its rows per bin, with unequal weights from its weights and squared weights per
        bin (Kish's effective rows between two cutoffs, as on rows); NaN with a capacity.
        ``tie_low`` / ``tie_high`` are NaN.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.scale import tally_scores
    >>> from probwrap.scale._bootstrap import tally_cutoff_interval
    >>> rng = np.random.default_rng(0)
    >>> s = rng.normal(scale=2.0, size=5000)
    >>> y = (rng.random(5000) < 1 / (1 + np.exp(-s))).astype(int)
    >>> t = tally_scores(s, y, n_replicates=100, random_state=0)
    >>> ci = tally_cutoff_interval(t, {"fp": 1.0, "fn": 3.0})
    >>> bool(ci.low < 0.25 < ci.high)
    True
    """
    from ..decision import CutoffInterval, search_cutoff

    if tally.n_replicates < 1:
        raise ValueError("`tally` carries no bootstrap replicates; tally with n_replicates > 0.")
    if not 0.0 < float(confidence_level) < 1.0:
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    proba, y, _ = tally.to_rows(proba=True)
    p = proba[:, 1]
    # a cost DataFrame read once (rows 0/1 put in order, or one warning), not per replicate
    costs = costs_by_position(costs, 2)
    reps = tally.replicate_row_weights()
    found = np.full(reps.shape[0], np.nan)
    for b in range(reps.shape[0]):
        wb = reps[b]
        if wb.sum() <= 0:  # pragma: no cover - needs every Poisson draw to be zero
            continue
        found[b] = search_cutoff(
            p, y, costs, sample_weight=wb, capacity=capacity, score_bounds=(0.0, 1.0)
        ).cutoff
    found = found[np.isfinite(found)]
    alpha = (1.0 - float(confidence_level)) / 2.0
    low, high = (float(v) for v in np.quantile(found, [alpha, 1.0 - alpha]))
    exact_low, exact_high = tally_exact_interval(
        tally, p, y, tally.to_rows()[2], costs, capacity, confidence_level, low, high
    )
    return CutoffInterval(
        low=low,
        high=high,
        confidence_level=float(confidence_level),
        bootstrap_cutoffs=found,
        fold_cutoffs=np.empty(0),
        fold_low=low,
        fold_high=high,
        exact_low=exact_low,
        exact_high=exact_high,
    )


def tally_exact_interval(tally: ScoreTally, p: np.ndarray, y: np.ndarray, weights: np.ndarray,
                         costs: Any, capacity: float | None, confidence_level: float,
                         low: float, high: float, rows: np.ndarray | None = None,
                         *, stacklevel: int = 2) -> tuple[float, float]:
    """``exact_low``, ``exact_high`` of a cutoff interval drawn from a tally, and its warning.

    ``p``, ``y``, ``weights``: the tally's rows (one per (bin, label)) at probability ``p``;
    ``rows``: the rows behind each (None: read from the tally when its totals show equal
    weights, :func:`~probwrap.decision._cutoff_interval.tally_row_counts`). Below
    ``FEW_INTERVAL_ROWS`` effective rows a ``CutoffIntervalCoverageWarning`` says what
    :func:`probwrap.decision.cutoff_interval` says on rows, quoting the exact range, which is
    computed as there from the rows' counts per bin (equal weights) or from the weights and
    squared weights per bin (unequal weights: Kish's effective rows between two cutoffs), with
    one cost matrix and no capacity; NaN where it is not.
    """
    from ..decision._cutoff import _prepare
    from ..decision._cutoff_interval import (
        FEW_INTERVAL_ROWS,
        tally_exact_range,
        tally_row_counts,
        warn_few_interval_rows,
    )

    _, _, _, matrix, _ = _prepare(p, y, costs, None)
    if rows is None:
        rows = tally_row_counts(tally, weights)
    # the squared weights behind each (bin, label), in the order of to_rows(): unequal weights
    # count as Kish's effective rows between two cutoffs, as on rows
    squares = tally.squared_row_weights() if tally.labelled else None
    if squares is not None and squares.shape != np.shape(weights):
        squares = None
    exact_low, exact_high, _ = tally_exact_range(p, y, weights, rows, matrix, capacity,
                                                 float(confidence_level), squares)
    effective = tally.effective_rows
    if not np.isfinite(effective) and rows is not None:
        keep = rows > 0
        ratio = weights[keep] / rows[keep]
        if ratio.size and np.allclose(ratio, ratio[0], rtol=1e-9, atol=0.0):
            effective = float(rows.sum())  # equal weights: every row counts once
    if np.isfinite(effective) and effective < FEW_INTERVAL_ROWS:
        warn_few_interval_rows(effective, "(effective) rows, tallied", low, high, False,
                               exact_low, exact_high, stacklevel=stacklevel + 1)
    return exact_low, exact_high


def _row_replicates(w: np.ndarray, n_replicates: int, seed: Any, rows: Any = None):
    """Poisson(1) replicate weights of in-memory rows, one replicate per call (memory O(n)).

    ``rows``: the number of rows behind each entry when the entries are bins (a bin of ``c``
    rows holds Poisson(``c``) rows of a replicate); None for one row each.
    """
    rng = np.random.default_rng(seed)
    if rows is not None:
        unit = w / rows

        def draw_bins(b: int) -> np.ndarray:
            return unit * rng.poisson(rows)

        return draw_bins

    def draw(b: int) -> np.ndarray:
        return w * rng.poisson(1.0, size=w.shape[0])

    return draw


def tally_prior_interval(
    estimator: Any,
    source: ScoreTally | None,
    target_proba: np.ndarray,
    target_weight: np.ndarray,
    target: ScoreTally | None,
    prior: np.ndarray,
    *,
    n_replicates: int,
    seed: int,
    target_replicates: np.ndarray | None = None,
) -> np.ndarray:
    """Poisson-bootstrap interval of a target prior, with tally replicates where rows are binned.

    ``estimator`` is a fitted :class:`probwrap.shift.PriorEstimator` (fitted on ``source``'s
    rows when ``source`` is given, on in-memory rows otherwise). ``target_proba`` and
    ``target_weight`` are the unlabelled rows the point estimate used (``target``'s bins when
    ``target`` is given); ``prior`` is the unpenalised estimate the interval is built around.
    In replicate ``b`` every original row — labelled and unlabelled — counts with its weight
    times a Poisson(1) draw: from the tallies' replicates for tallied rows, drawn here (from
    ``default_rng([seed, 2 or 3])``) for in-memory rows. With ``resample_source`` the
    calibration (one Newton step from the fitted one), source prior and confusion matrices
    are re-estimated per replicate, as in memory (:meth:`PriorEstimator.estimate`). The
    interval is the bias-corrected percentile interval (BCa without acceleration: a tally's
    bins are not rows, so there is no row jackknife). Replicates in which a class vanished
    from the labelled rows are dropped, counted in ``estimator._last_dropped`` and reported
    by a warning. ``target_replicates`` (shape (B', m), instead of ``target``): the replicate
    weights of the unlabelled rows ``target_proba`` drawn elsewhere (the rows once per fold
    model of a base model refit on the labelled rows, ``FoldScoreMoments.row_replicates``).
    Returns shape (k, 2).
    """
    from ..shift._estimator import _interval_from_draws

    sp, sy, sw_rows = estimator._src
    k = estimator.n_classes_
    B = int(n_replicates)
    if source is not None:
        B = min(B, source.n_replicates)
        src_reps = source.replicate_row_weights()
        src_draw = src_reps.__getitem__
    else:
        src_draw = _row_replicates(sw_rows, B, [seed, 2], estimator._source_row_counts())
    if target_replicates is not None:
        B = min(B, int(np.shape(target_replicates)[0]))
        tgt_draw = np.asarray(target_replicates, dtype=float).__getitem__
    elif target is not None:
        B = min(B, target.n_replicates)
        tgt_draw = target.replicate_bin_weights().__getitem__
    else:
        tgt_draw = _row_replicates(target_weight, B, [seed, 3])
    if B < 1:
        raise ValueError("The bootstrap needs replicates (n_replicates > 0).")
    if not estimator.resample_source:
        def src_draw(b: int) -> None:
            return None
    draws, dropped = estimator.replicate_draws(
        np.asarray(target_proba, dtype=float), src_draw, tgt_draw, B, np.asarray(prior, float)
    )
    estimator._last_dropped = dropped
    # "percentile": the draws' quantiles, as in memory; "bca": bias-corrected (a tally's bins
    # are not rows, so no jackknife for the acceleration)
    percentile = getattr(estimator, "interval", "bca") == "percentile"
    return _interval_from_draws(
        np.asarray(prior, dtype=float), draws, None if percentile else [],
        estimator.confidence_level, dropped, B, k
    )
