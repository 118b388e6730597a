"""How the wrappers' calibration steps read ``sample_weight``, and the warnings that say so.

The calibration maps read weights by one rule (docs/weights.md): row counts when they sum to
at least the number of rows of positive weight, otherwise relative weights counted as Kish's
(1965) effective sample size ``(sum w)**2 / sum w**2``
(:func:`probwrap.calibration._base.count_weights`). The warnings here are shared by the
wrappers that apply that rule, so that each says the same thing in the same words.
"""

from __future__ import annotations

import warnings

import numpy as np

from ._validation import COUNT_TABLE_MAX_CASES, case_rows, counted_rows, shared_factor, whole_counts
from .calibration._base import WeightScaleWarning, count_weights

__all__ = ["COUNT_TABLE_MAX_CASES", "case_rows", "choice_weights", "count_scale_weights", "counted_rows",
           "natural_spline_basis", "shared_factor", "table_dispersion", "warn_count_reading", "warn_count_summary",
           "warn_overdispersed_table", "warn_shared_factor_table", "whole_counts"]


def count_scale_weights(w: np.ndarray, owner: str, what: str, *, stacklevel: int = 4) -> np.ndarray:
    """``w`` on the maps' count scale (:func:`~probwrap.calibration._base.count_weights`),
    with a :class:`~probwrap.calibration.WeightScaleWarning` naming ``owner`` when they were
    rescaled to Kish's effective size (they sum to less than the rows of positive weight);
    ``what`` says which step reads them ("for the calibration map").

    Examples
    --------
    >>> import warnings
    >>> import numpy as np
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     count_scale_weights(np.full(4, 0.25), "Demo", "for the map").tolist()
    [1.0, 1.0, 1.0, 1.0]
    >>> str(caught[0].message)[:47]
    'Demo: `sample_weight` sums to less than the num'
    """
    out, rescaled = count_weights(np.asarray(w, dtype=float))
    if rescaled:
        warnings.warn(
            f"{owner}: `sample_weight` sums to less than the number of rows, so the weights "
            f"cannot be row frequencies; {what} they are rescaled to sum to Kish's effective "
            f"sample size ({out.sum():.4g}).",
            WeightScaleWarning,
            stacklevel=stacklevel,
        )
    return out


def choice_weights(w: np.ndarray, ho: object = None) -> np.ndarray:
    """``w`` as the choices read it (``auto``'s candidate fits, the tuned rule's anchor map and
    settling test): a count table (:func:`whole_counts`) keeps its counts; any other weights
    are relative and are rescaled to sum to Kish's (1965) effective sample size
    ``(sum w)**2 / sum w**2`` of their positive rows, so that multiplying every weight by a
    constant changes no choice (docs/weights.md; until 5 December 2026 weights that summed to at
    least the rows were counted as they stood, so x1,000 chose another map on wine and iris).

    Unit weights (and 0/1 weights) are returned as they are. ``ho`` (held-out predictions) of a
    count table cross-fitted by its cases or of a Dask or Spark tally keeps its weights: they
    are cases or rows of bins, counted by the caller.

    Examples
    --------
    >>> import numpy as np
    >>> a = choice_weights(np.array([0.5, 1.5, 2.5]))
    >>> b = choice_weights(np.array([0.5, 1.5, 2.5]) * 1e3)
    >>> bool(np.allclose(a, b)), round(float(a.sum()), 4)  # Kish's size: 4.5**2 / 8.75
    (True, 2.3143)
    >>> choice_weights(np.array([3.0, 1.0, 2.0])).tolist()  # a count table keeps its counts
    [3.0, 1.0, 2.0]
    """
    if ho is not None and (getattr(ho, "table_row", None) is not None
                           or getattr(ho, "from_tally", False)
                           or getattr(ho, "tally_cases", False)):
        return w
    w = np.asarray(w, dtype=float)
    if w.size and float(w.min()) == float(w.max()):
        # equal weights (the unit weights of a fit without weights are one value repeated, a
        # read-only view): never a count table (whole_counts), and w / max is exactly 1, so
        # Kish's size is the rows and the rescaled weights are exactly 1. Decided without the
        # row-long temporaries below (they raised the tuned CostPolicyWrapper fit's peak memory
        # from 3.8x to 5.4x the scores at 1e6 rows: benchmarks/performance.py, docs/performance.md)
        c = float(w.flat[0])
        if not c > 0.0 or np.isclose(1.0, c, rtol=1e-12, atol=0.0):
            return w
        return np.ones(w.shape)
    if not np.any(w > 0) or whole_counts(w) is not None:
        return w
    out = w / float(w.max())  # scaled first: the sum of squares cannot overflow or underflow
    out *= out.sum() / (out @ out)  # (in place: the same values as a new product)
    if _close_to(out, w, rtol=1e-12):
        return w  # unit weights, or already on Kish's scale
    return out


def _close_to(a: np.ndarray, b: np.ndarray, *, rtol: float, block: int = 65_536) -> bool:
    """``np.allclose(a, b, rtol=rtol, atol=0.0)`` for finite 1-d arrays of one length, block by
    block (``np.allclose`` makes several temporaries as long as the arrays)."""
    for start in range(0, a.shape[0], block):
        x, y = a[start:start + block], b[start:start + block]
        if not np.all(np.abs(x - y) <= rtol * np.abs(y)):
            return False
    return True


def warn_count_reading(
    w: np.ndarray, owner: str, what: str, effect: str, *, stacklevel: int = 4
) -> None:
    """Warn once when ``w`` is read as row counts (it sums to at least the rows of positive
    weight) but does not look like counts, so that its scale moves a result.

    Weights that sum to less than the rows are relative ones (Kish's size; the scale then
    changes nothing, and :func:`count_scale_weights` says so). Weights that sum to more are
    row counts under the maps' rule, and multiplying them by 1,000 means a thousand copies of
    every row. That reading is the intended one for whole numbers without a common factor (a
    frequency table); it is doubtful for whole numbers that all share a factor above 1 (every
    row seen at least that many times: more often a scaled weight than a count) and for
    weights that are not whole numbers (a row cannot be seen 1.5 times). Those draw a
    :class:`~probwrap.calibration.WeightScaleWarning` naming ``owner``: ``"{what} N rows,
    so multiplying every weight by a constant changes {effect}"`` (``what`` the step that
    counts, ending in a verb; ``effect`` what moves with the scale).
    """
    w = np.asarray(w, dtype=float)
    n_rows = int(np.count_nonzero(w))
    with np.errstate(over="ignore"):
        total = float(w.sum())
    if not (n_rows and total >= n_rows and np.isfinite(total)):
        return
    factor = shared_factor(w)
    if factor == 1:
        return
    u = w[w > 0] / float(w.max())  # scaled first: the sum of squares cannot overflow
    kish = float(u.sum() ** 2 / (u @ u))
    warn_count_summary(n_rows, total, factor, kish, owner, what, effect,
                       stacklevel=stacklevel + 1)


def warn_count_summary(
    n_rows: int, total: float, factor: int | None, kish: float, owner: str, what: str,
    effect: str, *, remedy: str | None = None, stacklevel: int = 4
) -> None:
    """:func:`warn_count_reading` from a summary of the weights (rows of positive weight, their
    sum, their shared whole factor or None when some is not a whole number, Kish's effective
    size), for weights that are not at hand (a tally of Dask or Spark rows); ``remedy``
    replaces the last sentence (what to pass instead)."""
    if not (n_rows and total >= n_rows and np.isfinite(total)) or factor == 1:
        return
    if factor is None:
        why = "they are not all whole numbers, yet sum to at least the number of rows"
    else:
        why = f"every weight is a multiple of {factor}"
    warnings.warn(
        f"{owner}: `sample_weight` is read as row counts ({why}): {what} {total:.4g} rows, so "
        f"multiplying every weight by a constant changes {effect}. "
        + (remedy if remedy is not None else
           "If the weights are relative (survey, importance or scaled weights), pass them "
           "divided by their sum: they then count as Kish's effective sample size "
           f"({kish:.4g} rows) whatever their scale."),
        WeightScaleWarning,
        stacklevel=stacklevel,
    )


#: A count table's groups vary more than binomial when Pearson's dispersion around a Platt
#: map of the held-out scores exceeds this (the quasi-binomial scale of McCullagh & Nelder
#: 1989, sec. 4.5; 2 is common practice for "clearly overdispersed") and the chi-square test of
#: that statistic rejects at :data:`OVERDISPERSION_PVALUE`.
OVERDISPERSION_LIMIT = 2.0
OVERDISPERSION_PVALUE = 1e-3
#: Fewest groups (rows of identical features, both labels counted) for the check.
OVERDISPERSION_MIN_GROUPS = 10
#: Knots of the flexible map that tells overdispersion from lack of fit of the map
#: (docs/evidence/prior_shift_log.md, the section on the count-table warning): a natural
#: cubic spline of the held-out log-odds with this many knots, i.e. this many
#: parameters (intercept and slope included). 5 was chosen on
#: ``benchmarks/count_table_dispersion28.py``'s draws: of 30 binomial tables around a
#: non-logistic map that a Platt map flagged it flagged none (4 knots: 1), and it kept 12 of
#: the 14 flags on beta-binomial tables (7 knots: 10; an isotonic fit: 8).
FLEXIBLE_MAP_KNOTS = 5
#: Fewest residual degrees of freedom for the check with the table's features added.
FEATURE_MIN_DOF = 5


def _table_arrays(p, y, w, groups):
    """Held-out log-odds, labels, counts and group codes of the rows of positive weight."""
    p = np.clip(np.asarray(p, dtype=float), 1e-12, 1 - 1e-12)
    y = np.asarray(y, dtype=float)
    w = np.asarray(w, dtype=float)
    groups = np.asarray(groups, dtype=np.intp)
    keep = w > 0
    p, y, w, groups = p[keep], y[keep], w[keep], groups[keep]
    _, groups = np.unique(groups, return_inverse=True)
    n_groups = int(groups.max()) + 1 if groups.size else 0
    return np.log(p) - np.log1p(-p), y, w, groups, n_groups


def _binomial_fit(design: np.ndarray, y: np.ndarray, w: np.ndarray,
                  ridge: float = 0.0, *, collinear: bool = False) -> np.ndarray | None:
    """Fitted probabilities of a binomial GLM (logit link) of ``y`` on ``design`` with case
    counts ``w``, by Newton's method with step halving (a step that raises the penalised
    deviance is halved, up to 30 times); ``ridge`` (times the total count) on all but the
    first column keeps it defined where part of the scores has one label only; ``collinear``:
    the steps by least squares, for a design whose columns may be collinear (the fitted
    probabilities are then still the maximum-likelihood ones). None if it fails."""
    from scipy.special import expit, log_expit

    beta = np.zeros(design.shape[1])
    penalty = np.full(design.shape[1], ridge * float(w.sum()))
    penalty[0] = 0.0

    def loss(b: np.ndarray) -> float:
        eta = design @ b
        return float(-(w @ (y * log_expit(eta) + (1 - y) * log_expit(-eta)))
                     + 0.5 * penalty @ (b * b))

    current = loss(beta)
    for _ in range(100):
        q = expit(design @ beta)
        grad = design.T @ (w * (y - q)) - penalty * beta
        hess = design.T @ (design * (w * q * (1 - q))[:, None]) + np.diag(penalty)
        try:
            step = (np.linalg.lstsq(hess, grad, rcond=None)[0] if collinear
                    else np.linalg.solve(hess, grad))
        except np.linalg.LinAlgError:
            return None
        if not np.all(np.isfinite(step)):
            return None
        for _ in range(30):
            trial = loss(beta + step)
            if trial <= current + 1e-12 * abs(current):
                break
            step = step / 2
        beta, current = beta + step, trial
        if not np.all(np.isfinite(beta)):
            return None
        if np.max(np.abs(step)) < 1e-10:
            break
    return expit(design @ beta)


def natural_spline_basis(s: np.ndarray, knots: np.ndarray) -> np.ndarray:
    """Natural cubic spline basis of ``s`` with ``knots`` (sorted, at least 3): intercept,
    ``s`` and ``len(knots) - 2`` truncated-power terms (Hastie, Tibshirani & Friedman 2009,
    eqs. 5.4-5.5, from memory; the space is checked against SciPy's natural cubic spline), on
    ``s`` rescaled to the knots' range; linear beyond the outer knots.

    Examples
    --------
    >>> import numpy as np
    >>> natural_spline_basis(np.linspace(0, 1, 4), np.array([0.0, 0.5, 1.0])).shape
    (4, 3)
    """
    lo, hi = float(knots[0]), float(knots[-1])
    x = (np.asarray(s, dtype=float) - lo) / (hi - lo)
    k = (np.asarray(knots, dtype=float) - lo) / (hi - lo)
    last = k.shape[0] - 1

    def d(j: int) -> np.ndarray:
        return (np.maximum(x - k[j], 0.0) ** 3 - np.maximum(x - k[last], 0.0) ** 3) / (
            k[last] - k[j])

    return np.column_stack([np.ones_like(x), x] + [d(j) - d(last - 1) for j in range(last - 1)])


def table_dispersion(
    p: np.ndarray, y: np.ndarray, w: np.ndarray, groups: np.ndarray, *, flexible: bool = False,
    features: np.ndarray | None = None,
) -> tuple[float, float, int] | None:
    """Pearson's dispersion of a count table's groups around a Platt map of held-out
    probabilities (or, with ``flexible``, around a flexible map of them):
    ``(dispersion, p-value, groups)``, or None when it cannot be judged.

    ``p`` is each held-out row's probability of the second class, ``y`` its 0/1 label, ``w``
    its whole-number count, ``groups`` the group of each row (rows of identical features: a
    cell's success and failure rows; the (row, fold) pieces of a cross-fitted table keep their
    row's group). A two-parameter logistic map of the log-odds is fitted by weighted maximum
    likelihood (Newton's method: a binomial GLM with one covariate), then, over the groups,
    ``X2 = sum_g (O_g - E_g)**2 / V_g`` with ``O_g`` the group's counted successes and
    ``E_g``, ``V_g`` the sums of ``w q`` and ``w q (1 - q)`` over its rows (``q`` the mapped
    probability); the dispersion is ``X2 / (G - 2)`` and the p-value the chi-square upper
    tail with ``G - 2`` degrees of freedom. With one row probability per group this is
    statsmodels' ``GLM(Binomial).pearson_chi2 / df_resid`` on the groups (tested).

    ``flexible=True`` (since 5 December 2026) replaces the Platt map by a binomial GLM on a natural
    cubic spline of the log-odds with :data:`FLEXIBLE_MAP_KNOTS` knots at quantiles of the distinct
    log-odds (one rate per distinct probability when there are no more of them than knots),
    and divides by ``G`` minus its parameters. A Platt map's dispersion is large both when the
    groups vary more than binomial (overdispersion) and when the map's shape is wrong (lack
    of fit); the flexible map's stays large only when groups of like probabilities differ
    (overdispersion, or a model that misses what sets them apart). Fitting a richer mean model
    before reading the residual scale as overdispersion is the usual GLM practice (McCullagh &
    Nelder 1989, sec. 4.5; Williams 1982, "Extra-binomial variation in logistic linear
    models", Applied Statistics 31; both from memory). A ridge of ``1e-9`` times the total
    count on the spline terms keeps the fit defined where part of the scores has one label
    only, where the unpenalised fit fails (statsmodels' binomial GLM on the same spline space
    is the reference, tested).

    ``features`` (with ``flexible``; one row per row of ``p``, numbers): the table's own
    features enter the flexible map's GLM as linear terms (standardised; constant columns
    dropped), and the dispersion is divided by ``G`` minus the design's rank (at least
    :data:`FEATURE_MIN_DOF` left, else None). Groups that are binomial then differed because
    the model misses what sets them apart (lack of fit of the model), not because their cases
    share causes: the "most complete reasonable model" before overdispersion is read
    (Williams 1982; McCullagh & Nelder 1989, sec. 4.5; from memory).

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> p = np.repeat(rng.uniform(0.2, 0.8, 40), 2)
    >>> y = np.tile([1, 0], 40)
    >>> k = rng.binomial(50, p[::2])  # binomial groups of 50 cases
    >>> w = np.column_stack([k, 50 - k]).ravel().astype(float)
    >>> d, pv, g = table_dispersion(p, y, w, np.repeat(np.arange(40), 2))
    >>> g, bool(0.5 < d < 2)
    (40, True)
    >>> d, pv, g = table_dispersion(p, y, w, np.repeat(np.arange(40), 2), flexible=True)
    >>> g, bool(0.5 < d < 2)
    (40, True)
    """
    from scipy import stats

    w_all = w
    s, y, w, groups, n_groups = _table_arrays(p, y, w, groups)
    if n_groups < OVERDISPERSION_MIN_GROUPS:
        return None
    if features is not None:
        if not flexible:
            raise ValueError("`features` is read with `flexible=True` only.")
        f = np.asarray(features, dtype=float)
        f = f.reshape(f.shape[0], -1)[np.asarray(w_all) > 0]
        spread = f.std(axis=0)
        f = (f[:, spread > 0] - f[:, spread > 0].mean(axis=0)) / spread[spread > 0]
        distinct = np.unique(s)
        if distinct.shape[0] <= FLEXIBLE_MAP_KNOTS:
            score = (np.searchsorted(distinct, s)[:, None] == np.arange(distinct.shape[0])
                     ).astype(float)
        else:
            score = natural_spline_basis(
                s, np.quantile(distinct, np.linspace(0.0, 1.0, FLEXIBLE_MAP_KNOTS)))
        design = np.column_stack([score, f])
        n_params = int(np.linalg.matrix_rank(design))
        if n_groups - n_params < FEATURE_MIN_DOF:
            return None
        q = _binomial_fit(design, y, w, collinear=True)
        if q is None:
            q = _binomial_fit(design, y, w, ridge=1e-9, collinear=True)
    elif not flexible:
        n_params = 2
        q = _binomial_fit(np.column_stack([np.ones_like(s), s]), y, w)
    else:
        distinct = np.unique(s)
        if distinct.shape[0] <= FLEXIBLE_MAP_KNOTS:
            # one rate per distinct probability: the saturated map of the scores
            n_params = int(distinct.shape[0])
            code = np.searchsorted(distinct, s)
            q = (np.bincount(code, weights=w * y, minlength=n_params)
                 / np.bincount(code, weights=w, minlength=n_params))[code]
        else:
            knots = np.quantile(distinct, np.linspace(0.0, 1.0, FLEXIBLE_MAP_KNOTS))
            n_params = FLEXIBLE_MAP_KNOTS
            basis = natural_spline_basis(s, knots)
            q = _binomial_fit(basis, y, w)
            if q is None:
                q = _binomial_fit(basis, y, w, ridge=1e-9)
    if q is None:
        return None
    observed = np.bincount(groups, weights=w * y, minlength=n_groups)
    expected = np.bincount(groups, weights=w * q, minlength=n_groups)
    variance = np.bincount(groups, weights=w * q * (1 - q), minlength=n_groups)
    ok = variance > 1e-12
    dof = int(ok.sum()) - n_params
    if dof < (FEATURE_MIN_DOF if features is not None
              else OVERDISPERSION_MIN_GROUPS - n_params):
        return None
    x2 = float(np.sum((observed[ok] - expected[ok]) ** 2 / variance[ok]))
    return x2 / dof, float(stats.chi2.sf(x2, dof)), int(ok.sum())


def _flagged(res: tuple[float, float, int] | None) -> bool:
    return res is not None and res[0] > OVERDISPERSION_LIMIT and res[1] < OVERDISPERSION_PVALUE


def warn_overdispersed_table(
    p: np.ndarray, y: np.ndarray, w: np.ndarray, groups: np.ndarray | None, owner: str,
    what: str, *, stacklevel: int = 4, remedy: str | None = None,
    fit_remedy: str | None = None, features: np.ndarray | None = None,
) -> float | None:
    """Warn (``UserWarning`` naming ``owner``) when a count table read as cases has groups
    that do not follow the held-out probabilities binomially (:func:`table_dispersion` above
    :data:`OVERDISPERSION_LIMIT`, p below :data:`OVERDISPERSION_PVALUE`), saying which of
    three things it is:

    - lack of fit of the map, when the groups are binomial around a flexible map of the
      probabilities (``table_dispersion(..., flexible=True)``): the case reading is right and
      the map's shape is what is wrong; ``fit_remedy`` is that warning's last sentence (None:
      a more flexible map or a better model);
    - lack of fit of the model, when they are not, but are binomial once the table's own
      ``features`` (numbers, one row per row of ``p``; None: not tried) enter beside the
      flexible map as linear terms: the case reading is right and the model misses what sets
      the groups apart;
    - overdispersion otherwise: ``what`` (the steps that count its cases) is then too sure;
      ``remedy`` is that warning's last sentence (None: pass the weights divided by their
      sum).

    Returns the Platt map's dispersion (None when not judged)."""
    if groups is None:
        return None
    res = table_dispersion(p, y, w, groups)
    if res is None:
        return None
    dispersion, pvalue, n_groups = res
    if not _flagged(res):
        return dispersion
    head = (f"{owner}: the count table's {n_groups} groups (rows with identical features) "
            f"are not binomial around a Platt map of the held-out probabilities (Pearson "
            f"dispersion {dispersion:.3g}, p = {pvalue:.2g})")
    flex = table_dispersion(p, y, w, groups, flexible=True)
    if flex is not None and not _flagged(flex):
        warnings.warn(
            f"{head} but are around a flexible map of them (a natural cubic spline of their "
            f"log-odds: dispersion {flex[0]:.3g}, p = {flex[1]:.2g}). That is lack of fit of "
            "the map's shape, not groups whose cases share causes: counting the cases one by "
            f"one in {what} is right. "
            + (fit_remedy if fit_remedy is not None else
               "A map more flexible than Platt's (isotonic, binning or beta) or a better-fitting "
               "model is the remedy; the weights need no change (docs/aggregated_outcomes.md, "
               "\"Overdispersion or lack of fit\")."),
            UserWarning,
            stacklevel=stacklevel,
        )
        return dispersion
    feat = None
    if flex is not None and features is not None:
        try:
            feat = table_dispersion(p, y, w, groups, flexible=True, features=features)
        except (TypeError, ValueError, IndexError):  # features not numbers or not aligned
            feat = None
    if feat is not None and not _flagged(feat):
        warnings.warn(
            f"{head}, nor around a flexible map of them (a natural cubic spline of their "
            f"log-odds: dispersion {flex[0]:.3g}), but are once the table's own features "
            f"enter beside it as linear terms (dispersion {feat[0]:.3g}, p = {feat[1]:.2g}). "
            "That is lack of fit of the model: it misses what sets the groups apart, which "
            "the features still tell; not groups whose cases share causes, so counting the "
            f"cases one by one in {what} is right. A model that uses these features better "
            "is the remedy; the weights need no change (docs/aggregated_outcomes.md, "
            "\"Overdispersion or lack of fit\").",
            UserWarning,
            stacklevel=stacklevel,
        )
        return dispersion
    if flex is not None:
        scale = flex[0] if feat is None else feat[0]
        measured = (f"Pearson dispersion {dispersion:.3g} around a Platt map of them, "
                    f"{flex[0]:.3g} around a flexible one, a natural cubic spline of their "
                    "log-odds" + ("" if feat is None else
                                  f", {feat[0]:.3g} with the table's features added") +
                    f"; p = {(flex if feat is None else feat)[1]:.2g}")
        why = ("or the model misses what sets the groups apart in a way no linear term in "
               "the table's features catches" if feat is not None else
               "or the model misses what sets the groups apart (with one count per group the "
               "two look alike)")
    else:
        scale = dispersion
        measured = (f"Pearson dispersion {dispersion:.3g}, p = {pvalue:.2g}; too few "
                    "distinct probabilities for a flexible map, so lack of fit of the map is "
                    "not ruled out")
        why = "or the model misses what sets the groups apart"
    warnings.warn(
        f"{owner}: the count table's {n_groups} groups (rows with identical features) vary "
        f"more than binomial around the held-out probabilities, even around a flexible map of "
        f"them: overdispersion ({measured}). The cases of a group share causes (pupils of "
        f"one school, parcels of one route), {why}; either way every case counts as "
        f"independent evidence in {what}, about {scale:.3g} times too much. "
        + (remedy if remedy is not None else
           "If the cases share causes, pass the weights divided by their sum, so that the "
           "table's rows count by Kish's effective size (docs/aggregated_outcomes.md, \"When "
           "groups vary more than binomial\")."),
        UserWarning,
        stacklevel=stacklevel,
    )
    return dispersion


def warn_shared_factor_table(w: np.ndarray, owner: str, what: str, *,
                             stacklevel: int = 4) -> None:
    """Warn (:class:`~probwrap.calibration.WeightScaleWarning` naming ``owner``) when unequal
    whole-number weights all share a factor above 1 (and their total over it is at most
    :data:`COUNT_TABLE_MAX_CASES`): ``what`` (the steps that count a count table's cases) read
    them as relative weights, since a shared factor cannot be told from a scale; a genuine
    table whose counts are all even is read that way too, and
    :func:`probwrap.aggregated.keep_as_counts` says that it is a table."""
    w = np.asarray(w, dtype=float)
    positive = w[w > 0]
    if not positive.size or float(positive.min()) == float(positive.max()):
        return
    factor = shared_factor(w)
    if factor is None or factor == 1 or float(w.sum()) / factor > COUNT_TABLE_MAX_CASES:
        return
    u = positive / float(positive.max())
    kish = float(u.sum() ** 2 / (u @ u))
    warnings.warn(
        f"{owner}: every `sample_weight` is a multiple of {factor}, so the weights are read as "
        f"relative ones, not as counts of cases: {what} count the rows by Kish's effective "
        f"size ({kish:.4g} rows), not as {float(w.sum()):.6g} cases (a factor shared by every "
        "weight cannot be told from a scale, and scaling the weights must not change a "
        "choice). If they are counts of a table whose counts happen to share a factor, pass "
        "X, y, sample_weight through probwrap.aggregated.keep_as_counts, which splits one "
        "row in two so that the table is read as its cases.",
        WeightScaleWarning,
        stacklevel=stacklevel,
    )
