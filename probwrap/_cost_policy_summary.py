"""What a fitted CostPolicyWrapper keeps of many held-out rows, and the interval drawn from it.

Up to ``SMALL_HELDOUT_ROWS`` held-out rows the wrapper keeps them all; beyond, it keeps the cost
curve at about ``CURVE_POINTS`` decisions and a tally of the held-out probabilities (at most
``SUMMARY_BINS`` bins) from which ``cutoff_interval_`` is bootstrapped when it is read.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .decision import search_cutoff

#: Up to this many held-out rows (of positive weight) a fitted wrapper keeps them: the curve at
#: every distinct probability and the row bootstrap of ``cutoff_interval_``, as written.
SMALL_HELDOUT_ROWS = 20_000
#: Beyond it, ``cost_curve_`` keeps about this many decisions (the optimum itself is exact) ...
CURVE_POINTS = 4097
#: ... and the interval resamples a tally of the held-out probabilities with at most this many
#: bins (log-odds bins of ``tally_resolution``, widened by powers of two while there are more).
SUMMARY_BINS = 1 << 13


def _heldout_summary(policy: Any, p: np.ndarray, ho: Any, matrix, share) -> dict:
    """What ``cutoff_interval_`` needs from many held-out rows, at a size independent of them.

    The fold cutoffs are searched now on every row (one search in all); the rows themselves are
    reduced to two tallies of their log-odds on the same bins: weighted label counts and row
    counts (for the Poisson bootstrap, drawn when the interval is read).
    """
    from .scale._entry import check_resolution, tally_scores

    w = ho.sample_weight
    fold_cutoffs = []
    for k in np.unique(ho.fold[ho.fold >= 0]):
        rows = np.flatnonzero((ho.fold == k) & (w > 0))
        if rows.size:
            fold_cutoffs.append(search_cutoff(
                p[rows], ho.y_index[rows], matrix, sample_weight=w[rows], capacity=share,
                score_bounds=(0.0, 1.0),
            ).cutoff)
    # (written for memory: at most one temporary as long as the rows besides the log-odds)
    present = None if np.all(w > 0) else np.flatnonzero(w > 0)
    pp = p if present is None else p[present]
    pp_rows = pp.shape[0]
    with np.errstate(divide="ignore"):
        s = np.log(pp)
        # minus log1p(-p), a block at a time (no second array as long as the rows)
        for i in range(0, pp_rows, 1 << 14):
            s[i : i + (1 << 14)] -= np.log1p(np.negative(pp[i : i + (1 << 14)]))
    del pp
    # probabilities of exactly 0 or 1 go to the outermost finite bins' neighbours
    finite = np.isfinite(s)
    lo_f = float(np.min(s, where=finite, initial=np.inf))
    hi_f = float(np.max(s, where=finite, initial=-np.inf))
    del finite
    if lo_f > hi_f:  # no finite log-odds at all
        lo_f = hi_f = 0.0
        span = 1.0
    else:
        span = hi_f - lo_f
    np.clip(s, lo_f - 1.0, hi_f + 1.0, out=s)
    resolution = check_resolution(policy.tally_resolution)
    while (span + 2.0) / resolution > SUMMARY_BINS:
        resolution *= 2.0
    y = ho.y_index if present is None else ho.y_index[present]
    wp = w if present is None else w[present]
    # chunks of an eighth of the rows, 16,384 to 65,536: the tally's temporaries (about six
    # arrays of a chunk) stay a small share of the rows, and so do the per-chunk tallies kept
    # until they are merged (one per chunk, up to the bins' size each). Unit weights tally to
    # the same exact counts whatever the chunks.
    chunk = min(max(pp_rows // 8, 1 << 14), 1 << 16)
    rows = tally_scores(s, y, resolution=resolution, chunk_size=chunk)
    # unit weights: the weighted tally is the row tally (the same counts; no copy of the weights)
    unit = bool(np.all(wp == 1.0))
    weighted = rows if unit else tally_scores(
        s, y, sample_weight=wp, resolution=resolution, chunk_size=chunk
    )
    return {"weighted": weighted, "rows": rows.counts, "folds": np.asarray(fold_cutoffs, float)}


def _summary_interval(summary: dict, matrix, share, policy: Any) -> Any:
    """Percentile bootstrap of the cutoff from the held-out tally (Poisson bin counts)."""
    from sklearn.utils import check_random_state

    from .decision import CutoffInterval
    from .scale._entry import tally_exact_interval

    tally = summary["weighted"]
    counts, row_counts = tally.counts, summary["rows"]
    rep = 1.0 / (1.0 + np.exp(-tally.bin_scores))
    bin_idx, label = np.nonzero(counts > 0)
    p = rep[bin_idx]
    mean_weight = counts[bin_idx, label] / row_counts[bin_idx, label]
    rng = check_random_state(policy.random_state)
    found = np.full(int(policy.n_resamples), np.nan)
    for b in range(found.shape[0]):
        # a cell of c rows drawn Poisson(1) times each holds Poisson(c) rows of the resample
        wb = rng.poisson(row_counts[bin_idx, label]) * mean_weight
        if wb.sum() > 0:
            found[b] = search_cutoff(
                p, label, matrix, sample_weight=wb, capacity=share, score_bounds=(0.0, 1.0)
            ).cutoff
    found = found[np.isfinite(found)]
    alpha = (1.0 - float(policy.confidence_level)) / 2.0
    low, high = (float(v) for v in np.quantile(found, [alpha, 1.0 - alpha]))
    # the exact range of few rows of equal weight, from the rows behind each (bin, label)
    exact_low, exact_high = tally_exact_interval(
        tally, p, label, counts[bin_idx, label], matrix, share, policy.confidence_level,
        low, high, rows=row_counts[bin_idx, label], stacklevel=3,
    )
    folds = summary["folds"]
    return CutoffInterval(
        low=low,
        high=high,
        confidence_level=float(policy.confidence_level),
        bootstrap_cutoffs=found,
        fold_cutoffs=folds,
        fold_low=float(folds.min()) if folds.size else low,
        fold_high=float(folds.max()) if folds.size else high,
        exact_low=exact_low,
        exact_high=exact_high,
    )
