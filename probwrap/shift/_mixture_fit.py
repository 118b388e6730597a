"""Does an unlabelled batch's score distribution fit *some* mixture of the labelled classes?

With two classes the score test behind the prior interval has one equation for one unknown, so
some class share nearly always satisfies it, and "no class prior is consistent" cannot tell a
batch whose classes changed within (rows drawn from a feature subgroup) from one whose class
shares moved. The shape of the batch's scores can: under prior shift their distribution is
``pi * F1 + (1 - pi) * F0``, the labelled classes' score distributions mixed at the batch's
share ``pi``. :func:`class_mixture_misfit` counts the batch's and each labelled class's scores in
a few bins and asks whether any ``pi`` in [0, 1] brings the batch's bin shares within sampling
error of the mixture's, the error of the labelled classes' bin shares included.

The statistic is the minimum over ``pi`` of ``d(pi)' V(pi)^-1 d(pi)`` with ``d`` the batch's
bin shares minus the mixture's (one bin dropped: the shares sum to 1) and ``V`` their
covariance under the null: the batch's multinomial covariance at the mixture's shares over its
Kish count, plus ``pi^2`` and ``(1 - pi)^2`` times each labelled class's multinomial covariance
over its Kish count (the three samples independent). Minimising it over the one free share is
Neyman's (1949) minimum chi-square, here with the covariance re-evaluated at every ``pi`` (the
continuously updated form of Hansen's 1982 over-identification statistic): chi-square with
``bins - 2`` degrees of freedom under the null (one per free bin share, less one for ``pi``).
Measured in ``benchmarks/small_batch_switch.py --part broken`` (docs/evidence/prior_shift_log.md,
"A level-holding check of the batch's shape").
"""

from __future__ import annotations

import numpy as np
from scipy.stats import chi2

#: the level at which ``PriorEstimator.estimate`` warns (ClassMixtureMisfitWarning)
MIXTURE_MISFIT_LEVEL = 0.01

#: fewest effective rows of the batch and of each labelled class for the check to run
MIXTURE_MISFIT_MIN_ROWS = 15.0

#: the shares of the batch's class tried (a grid: the statistic is smooth in it)
_GRID = np.linspace(0.0, 1.0, 201)


class ClassMixtureMisfitWarning(UserWarning):
    """Two classes: the unlabelled rows' score distribution fits no mixture of the labelled
    classes (:func:`class_mixture_misfit` rejected at ``MIXTURE_MISFIT_LEVEL``, 1 %).

    Prior shift says the rows of each class look as they did in the labelled rows; only the
    class shares move. A batch drawn from a subgroup of the rows (a region, a product line, a
    range of some feature) breaks that: its scores within a class differ from the labelled
    class's, the estimate reads the difference as a change of share, and its interval is
    confidently wrong. ``PriorShiftWrapper.adapt`` warns when the batch's calibrated scores,
    counted in 3-6 bins, differ from every mixture of the labelled classes by more than the
    sampling error of both sides (the labelled rows' own included) allows. Measured in
    ``benchmarks/small_batch_switch.py --part broken`` (docs/evidence/prior_shift_log.md, "A level-holding
    check of the batch's shape").

    Its silence proves little for a batch selected on a feature the model reads: both classes'
    scores slide together, which some wrong mixture fits. On seven bundled sets it flagged 23 of
    68 such batches misread by more than 0.1 (the feature check, ``feature_check_rows=``, 61 of
    65; ``benchmarks/feature_selected_batches.py``, docs/evidence/prior_shift_log.md, "Batches
    selected on features, scores only").

    Rows that repeat one another beyond chance (``PriorShiftWrapper.adapt``, or ``monitor``
    for a batch, raises :class:`~probwrap.shift.RepeatedRowsWarning`; in memory, on Dask and
    on Spark alike) are counted as their effective number over
    the repeats' design effect (``PriorEstimator.estimate(repeat_design_effect=...)``; since
    5 December 2026): before, the check took every repeated row as an
    independent draw and flagged 90 of 1,359 prior-shift batches drawn with replacement from
    short pools on seven bundled sets at its 1 % level, after 6
    (``benchmarks/mixture_check_repeated_rows.py``).
    """


def _bin_count(n_min: float) -> int:
    """Bins for the smallest of the three Kish counts: about five rows a bin, 3 to 6 bins."""
    return int(np.clip(np.floor(n_min / 5.0), 3, 6))


def _kish(w: np.ndarray) -> float:
    """Kish's effective size from the weights over their largest, so that equal weights give
    exactly the number of rows at any scale: the bin count (``floor(n / 5)``) and the 15-row
    bound read it. Before, the 20 labelled rows of a class weighted 1/150 counted as
    19.999999999999993, the batch was counted in 3 bins instead of 4, and the scale of the
    labelled weights turned the warning on (R's carData Arrests, frozen forest, 150 labelled
    rows: p = 0.007 at weights 1/150, no warning at 1; benchmarks/shift_real_hunt27.py)."""
    total = float(w.sum())
    if not total > 0:
        return 0.0
    u = w / float(np.max(w))
    total = float(u.sum())
    return total * total / float(np.dot(u, u))


def class_mixture_misfit(
    scores: np.ndarray,
    source_scores: np.ndarray,
    source_labels: np.ndarray,
    *,
    sample_weight: np.ndarray | None = None,
    source_sample_weight: np.ndarray | None = None,
    effective_rows: float | None = None,
    source_cases: np.ndarray | None = None,
    bins: int | None = None,
) -> tuple[float, float, float, int] | None:
    """Test whether unlabelled scores follow some mixture of the two labelled classes' scores.

    Parameters
    ----------
    scores : ndarray of shape (n,)
        The unlabelled rows' scores (any monotone reading of the positive class's posterior).
    source_scores : ndarray of shape (m,)
        The labelled rows' scores, on the same scale.
    source_labels : ndarray of shape (m,)
        Their classes, 0 or 1.
    sample_weight, source_sample_weight : ndarray, default=None
        Relative weights of either side (their Kish counts are the sample sizes).
    effective_rows : float, default=None
        Overrides the unlabelled side's Kish count (rows repeated once per fold model, or a
        count table's cases).
    source_cases : ndarray of shape (m,), default=None
        The labelled side is a count table (since 5 December 2026): every row's whole-number count
        of cases, ``source_sample_weight`` proportional to it. Each class then counts its
        cases (not Kish's count) and the bin edges are the cases' quantiles, exactly as for
        the cases passed one row each.
    bins : int, default=None
        Number of bins (at least 3); None: about five effective rows a bin on the smallest of
        the three samples, 3 to 6 bins.

    Returns
    -------
    tuple or None
        ``(statistic, pvalue, share, bins)``: the minimum chi-square, its p-value against
        chi-square with ``bins - 2`` degrees of freedom, the share of class 1 where the
        minimum lies, the bins used. None where the batch or a labelled class has fewer than
        ``MIXTURE_MISFIT_MIN_ROWS`` (15) effective rows.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift._mixture_fit import class_mixture_misfit
    >>> rng = np.random.default_rng(0)
    >>> y = rng.integers(0, 2, 400)
    >>> s = rng.normal(2.0 * y, 1.0)
    >>> t = rng.normal(2.0 * (rng.uniform(size=200) < 0.3), 1.0)  # prior shift only
    >>> class_mixture_misfit(t, s, y)[1] > 0.01
    True
    >>> bent = rng.normal(1.0, 0.3, 200)  # every row near the middle: no mixture fits
    >>> class_mixture_misfit(bent, s, y)[1] < 0.01
    True
    """
    t = np.asarray(scores, dtype=float)
    s = np.asarray(source_scores, dtype=float)
    y = np.asarray(source_labels)
    w_t = np.ones(t.shape[0]) if sample_weight is None else np.asarray(sample_weight, float)
    w_s = np.ones(s.shape[0]) if source_sample_weight is None else np.asarray(
        source_sample_weight, float)
    n_t = float(effective_rows) if effective_rows else _kish(w_t)
    cases = None if source_cases is None else np.asarray(source_cases, dtype=np.int64)
    n_c = ([float(cases[y == c].sum()) for c in (0, 1)] if cases is not None
           else [_kish(w_s[y == c]) for c in (0, 1)])
    if min(n_t, *n_c) < MIXTURE_MISFIT_MIN_ROWS:
        return None
    k = _bin_count(min(n_t, *n_c)) if bins is None else int(bins)
    if k < 3:
        raise ValueError(f"`bins` must be at least 3; got {bins!r}.")
    # edges: the labelled rows' weighted quantiles (equal shares of the pooled labelled rows)
    order = np.argsort(s, kind="stable")
    # the cumulative shares from weights over their largest (equal weights at any scale are
    # then exactly 1), rounded to 12 digits with the quantiles: a quantile landing on a knot
    # picks that knot's score at every scale of the weights. Before, weights 1/n summed to a
    # knot a last bit off, the edge fell on the other side of a score many rows share, and
    # the scale of the labelled weights moved the p-value across the 1 % level (R's
    # mosaicData Galton, naive Bayes, 150 labelled rows: 0.0089 at weights 1, 0.0103 at 1/150)
    if cases is None:
        u = w_s[order] / w_s.max()
        cum = np.round(np.cumsum(u) / u.sum(), 12)
        knots = s[order]
    else:
        # a count table: the knots of its cases one row each (the first and the last case
        # of every row; the cases between share its score and add no knot), so the edges
        # are those of the cases as rows
        c_o = cases[order]
        pos = c_o > 0
        after = np.cumsum(c_o)[pos]
        total = float(after[-1])
        first = after - c_o[pos] + 1
        cum = np.round(np.column_stack([first, after]).ravel() / total, 12)
        knots = np.repeat(s[order][pos], 2)
    edges = np.interp(np.round(np.arange(1, k) / k, 12), cum, knots)
    h = np.bincount(np.searchsorted(edges, t), weights=w_t, minlength=k) / w_t.sum()
    b_s = np.searchsorted(edges, s)
    a, cov = [], []
    for c in (0, 1):
        m = y == c
        ac = np.bincount(b_s[m], weights=w_s[m], minlength=k) / w_s[m].sum()
        a.append(ac[:-1])
        cov.append((np.diag(ac[:-1]) - np.outer(ac[:-1], ac[:-1])) / n_c[c])
    g = _GRID[:, None] * a[1] + (1.0 - _GRID[:, None]) * a[0]
    d = h[:-1] - g
    eye = np.eye(k - 1)
    v = (g[:, :, None] * eye - g[:, :, None] * g[:, None, :]) / n_t
    v += _GRID[:, None, None] ** 2 * cov[1] + (1.0 - _GRID[:, None, None]) ** 2 * cov[0]
    v += 1e-12 * eye  # a bin empty in both the mixture and the classes
    q = np.einsum("gi,gi->g", d, np.linalg.solve(v, d[..., None])[..., 0])
    i = int(np.argmin(q))
    stat = float(q[i])
    return stat, float(chi2.sf(stat, k - 2)), float(_GRID[i]), k
