"""Aggregated outcomes: groups with ``k`` successes out of ``n`` trials.

Data often arrive as counts per group (parcels damaged out of parcels shipped per route and
week) rather than one outcome per row. Each group becomes two weighted rows — the successes with
label 1 and weight ``k``, the failures with label 0 and weight ``n - k`` — and every estimator,
map and metric that accepts ``sample_weight`` as row frequencies then sees exactly the binomial
likelihood ``sum_g k_g log p_g + (n_g - k_g) log(1 - p_g)`` (up to the constant
``sum_g log C(n_g, k_g)``, which :func:`binomial_log_likelihood` adds back).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats
from scipy.special import gammaln

from ._validation import check_proba
from .scale import DEFAULT_RESOLUTION, ScoreTally, tally_scores

__all__ = [
    "CountCalibrationTest",
    "binomial_dispersion",
    "binomial_log_likelihood",
    "count_calibration_test",
    "expand_counts",
    "keep_as_counts",
    "rates_to_counts",
    "tally_counts",
]


def _as_counts(values: Any, name: str) -> np.ndarray:
    try:
        arr = np.asarray(values, dtype=float)
    except TypeError:
        # a nullable pandas column (Float64, Int64) holding pd.NA: older pandas (2.1) refuse
        # float() on it, so read its missing entries as NaN and refuse them by name below
        local = values.compute() if hasattr(values, "compute") else values
        if not hasattr(local, "to_numpy"):
            raise
        arr = local.to_numpy(dtype=float, na_value=np.nan)
    if arr.ndim != 1:
        raise ValueError(f"`{name}` must be 1-d of shape (n_groups,); got shape {arr.shape}.")
    bad = int(np.count_nonzero(~np.isfinite(arr)))
    if bad:
        # a named column (pandas or Dask Series, not an array's graph key) is named too
        column = getattr(values, "name", None) if hasattr(values, "index") else None
        where = f" (column {column!r})" if isinstance(column, str) else ""
        raise ValueError(
            f"`{name}`{where} contains NaN or infinite values: {bad} of {arr.shape[0]} "
            "group(s); every group needs finite counts (filter or fill them first)."
        )
    return arr


def _check_counts(
    successes: Any, trials: Any, *, from_rates: bool = False
) -> tuple[np.ndarray, np.ndarray]:
    k = _as_counts(successes, "successes")
    n = _as_counts(trials, "trials")
    if k.shape[0] != n.shape[0]:
        raise ValueError(
            f"`successes` has {k.shape[0]} entries but `trials` has {n.shape[0]}; give one of "
            "each per group."
        )
    if k.shape[0] == 0:
        raise ValueError("`trials` is empty; give at least one group.")
    if np.any(n <= 0):
        raise ValueError(
            f"`trials` must be positive for every group; got a minimum of {n.min():.6g}. Drop "
            "groups without trials."
        )
    if np.any(k < 0):
        raise ValueError(f"`successes` must be non-negative; got a minimum of {k.min():.6g}.")
    if np.any(k > n * (1 + 1e-12)):
        bad = int(np.flatnonzero(k > n * (1 + 1e-12))[0])
        raise ValueError(
            f"`successes` exceeds `trials` in group {bad} ({k[bad]:.6g} > {n[bad]:.6g}); k must "
            "be at most n."
        )
    if not from_rates and np.all(k <= 1.0) and np.any(k != np.round(k)) and np.any(n > 1.0):
        warnings.warn(
            f"`successes` are all at most 1 and some are fractions (e.g. {k[k != np.round(k)][0]:.6g}) "
            f"while `trials` reach {n.max():.6g}: they look like rates, not counts of successes. "
            "Pass rates_to_counts(rates, trials) as `successes`.",
            UserWarning,
            stacklevel=3,
        )
    return np.minimum(k, n), n


def rates_to_counts(rates: Any, trials: Any) -> np.ndarray:
    """Successes from observed rates and known trial counts: ``rates * trials``.

    The result need not be whole numbers (a rounded rate gives fractional successes); weights
    accept fractions, so nothing is rounded.

    Examples
    --------
    >>> from probwrap.aggregated import rates_to_counts
    >>> rates_to_counts([0.25, 0.0], [40, 10]).tolist()
    [10.0, 0.0]
    """
    r = _as_counts(rates, "rates")
    n = _as_counts(trials, "trials")
    if r.shape[0] != n.shape[0]:
        raise ValueError(f"`rates` has {r.shape[0]} entries but `trials` has {n.shape[0]}.")
    if np.any((r < 0) | (r > 1)):
        hint = (" They look like percentages: divide them by 100."
                if np.all((r >= 0) & (r <= 100)) and r.max() > 1 else "")
        raise ValueError(
            f"`rates` must lie in [0, 1]; got values in [{r.min():.6g}, {r.max():.6g}].{hint}"
        )
    _check_counts(r * n, n, from_rates=True)
    return r * n


def _take_rows(X: Any, index: np.ndarray) -> Any:
    if hasattr(X, "iloc"):
        return X.iloc[index].reset_index(drop=True)
    if hasattr(X, "tocsr"):
        return X.tocsr()[index]
    if isinstance(X, list):
        return [X[i] for i in index]
    return np.asarray(X)[index]


def _n_rows(X: Any) -> int:
    shape = getattr(X, "shape", None)
    return int(shape[0]) if shape is not None else len(X)


def expand_counts(
    X: Any, successes: Any, trials: Any, *, drop_empty: bool = True
) -> tuple[Any, np.ndarray, np.ndarray]:
    """Two weighted rows per group: successes (label 1, weight k) and failures (0, n - k).

    Parameters
    ----------
    X : array-like, DataFrame, sparse matrix or list of shape (n_groups, ...)
        One row of features (or one score) per group.
    successes : array-like of shape (n_groups,)
        Successes ``k`` per group (need not be whole numbers; see :func:`rates_to_counts`).
    trials : array-like of shape (n_groups,)
        Trials ``n > 0`` per group, ``k <= n``.
    drop_empty : bool, default=True
        Leave out rows of weight zero (groups with no successes or no failures).

    Returns
    -------
    X_rows : same kind as ``X``
        The group rows, each group's row at most twice (success row first).
    y_rows : ndarray of int of shape (r,)
    weights : ndarray of shape (r,)

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.aggregated import expand_counts
    >>> X_rows, y_rows, w = expand_counts(np.array([[0.5], [2.0]]), [3, 0], [10, 4])
    >>> X_rows.ravel().tolist(), y_rows.tolist(), w.tolist()
    ([0.5, 0.5, 2.0], [1, 0, 0], [3.0, 7.0, 4.0])
    """
    k, n = _check_counts(successes, trials)
    if _n_rows(X) != k.shape[0]:
        raise ValueError(
            f"`X` has {_n_rows(X)} rows but `successes` has {k.shape[0]} groups; give one row "
            "per group."
        )
    groups = np.repeat(np.arange(k.shape[0]), 2)
    y_rows = np.tile([1, 0], k.shape[0])
    weights = np.column_stack([k, n - k]).ravel()
    if drop_empty:
        keep = weights > 0
        groups, y_rows, weights = groups[keep], y_rows[keep], weights[keep]
    return _take_rows(X, groups), y_rows, weights


def tally_counts(
    scores: Any, successes: Any, trials: Any, *, resolution: float = DEFAULT_RESOLUTION
) -> ScoreTally:
    """A :class:`~probwrap.scale.ScoreTally` straight from per-group scores and counts.

    Calibrate and evaluate grouped outcomes without expanding them: the tally's rows feed the
    maps, the cutoff search and the metrics as usual.

    ``scores`` may also be a Spark DataFrame with one row per group: then ``successes`` and
    ``trials`` name two of its columns, its one other column holds the scores, and each
    partition is tallied on the executors (only the tallies reach the driver).

    Examples
    --------
    >>> from probwrap.aggregated import tally_counts
    >>> t = tally_counts([-1.0, 0.5], [2, 9], [10, 12])
    >>> t.counts.tolist()
    [[8.0, 2.0], [3.0, 9.0]]
    """
    if type(scores).__module__.startswith("pyspark.sql"):
        # a Spark DataFrame of (score, successes, trials) columns, tallied per partition
        from .scale._spark import is_spark_frame, spark_tally_counts

        if is_spark_frame(scores):
            return spark_tally_counts(scores, successes, trials, resolution, _check_counts)
    k, n = _check_counts(successes, trials)
    s = np.asarray(scores, dtype=float)
    if s.ndim != 1 or s.shape[0] != k.shape[0]:
        raise ValueError(
            f"`scores` must be 1-d with one score per group ({k.shape[0]}); got shape {s.shape}."
        )
    y = np.tile([1, 0], k.shape[0])
    w = np.column_stack([k, n - k]).ravel()
    return tally_scores(np.repeat(s, 2), y, sample_weight=w, resolution=resolution)


def binomial_log_likelihood(
    successes: Any, trials: Any, proba: Any, *, include_constant: bool = True
) -> float:
    """Binomial log-likelihood ``sum_g log C(n_g, k_g) + k_g log p_g + (n_g - k_g) log(1 - p_g)``.

    ``include_constant=False`` leaves out ``log C(n, k)``, giving the weighted Bernoulli
    log-likelihood of the expanded rows. Binomial coefficients of fractional counts use the
    gamma function.

    Examples
    --------
    >>> from probwrap.aggregated import binomial_log_likelihood
    >>> round(binomial_log_likelihood([3], [10], [0.3]), 4)
    -1.3211
    """
    k, n = _check_counts(successes, trials)
    p = check_proba(proba, name="proba", ndim=1)
    if p.shape[0] != k.shape[0]:
        raise ValueError(f"`proba` has {p.shape[0]} entries but there are {k.shape[0]} groups.")
    with np.errstate(divide="ignore", invalid="ignore"):
        ll = np.where(k > 0, k * np.log(p), 0.0) + np.where(n - k > 0, (n - k) * np.log1p(-p), 0.0)
    total = float(ll.sum())
    if include_constant:
        total += float(np.sum(gammaln(n + 1) - gammaln(k + 1) - gammaln(n - k + 1)))
    return total


def _check_group_proba(proba: Any, k: np.ndarray) -> np.ndarray:
    p = check_proba(proba, name="proba", ndim=1)
    if p.shape[0] != k.shape[0]:
        raise ValueError(f"`proba` has {p.shape[0]} entries but there are {k.shape[0]} groups.")
    if np.any((p <= 0.0) | (p >= 1.0)):
        raise ValueError(
            "`proba` must lie strictly between 0 and 1 for the binomial variance n p (1 - p) of "
            f"every group; got values in [{p.min():.6g}, {p.max():.6g}]."
        )
    return p


def binomial_dispersion(
    successes: Any, trials: Any, proba: Any, *, n_params: int = 0
) -> float:
    """Pearson's dispersion of grouped counts: ``sum_g (k_g - n_g p_g)^2 / (n_g p_g (1 - p_g))``
    divided by ``n_groups - n_params``.

    About 1 when each group's ``n`` trials are independent with probability ``p_g``; well above
    1 (overdispersion) when groups vary more than binomial (pupils of one school, parcels of one
    route and week share causes). It is the quasi-binomial scale of McCullagh & Nelder (1989,
    sec. 4.5). With ``proba`` fitted on these groups, pass the number of fitted parameters as
    ``n_params`` (statsmodels' ``pearson_chi2 / df_resid``); with held-out forecasts, 0.

    Anything that reads the expanded rows' weights as independent trials (the calibration
    tests, the intervals of the metrics and diagrams, the wrappers' tests and intervals) is too
    sure by about this factor in variance: see :func:`count_calibration_test`.

    Examples
    --------
    >>> from probwrap.aggregated import binomial_dispersion
    >>> round(binomial_dispersion([2, 8], [10, 10], [0.5, 0.5]), 3)
    3.6
    """
    k, n = _check_counts(successes, trials)
    p = _check_group_proba(proba, k)
    if isinstance(n_params, bool) or not isinstance(n_params, (int, np.integer)) or n_params < 0:
        raise ValueError(f"`n_params` must be a whole number >= 0; got {n_params!r}.")
    if n_params >= k.shape[0]:
        raise ValueError(
            f"`n_params` ({n_params}) must be smaller than the number of groups ({k.shape[0]})."
        )
    pearson = np.sum((k - n * p) ** 2 / (n * p * (1.0 - p)))
    return float(pearson / (k.shape[0] - n_params))


#: Fewest groups per bin of :func:`count_calibration_test`: each bin's variance is estimated
#: from its groups' residuals, referred to Student's t with (groups - 1) degrees of freedom.
COUNT_TEST_MIN_GROUPS_PER_BIN = 5


@dataclass(frozen=True)
class CountCalibrationTest:
    """Outcome of :func:`count_calibration_test`.

    Attributes
    ----------
    statistic : float
        Sum over bins of the chi-square(1) quantile of each bin's two-sided t p-value.
    pvalue : float
        Upper tail of the chi-square distribution with ``dof`` degrees of freedom.
    dof : int
        Number of bins.
    dispersion : float
        Pearson's dispersion of the groups (:func:`binomial_dispersion` with ``n_params=0``).
    binomial_pvalue : float
        The same bins tested with binomial variances ``sum n p (1 - p)``, i.e. reading every
        trial as an independent row (what the row-level tests do with the expanded rows); far
        too small when ``dispersion`` is well above 1.
    groups : ndarray of int
        Groups in each bin.
    trials, observed, expected : ndarray
        Trials, successes and expected successes ``sum n p`` of each bin.
    """

    statistic: float
    pvalue: float
    dof: int
    dispersion: float
    binomial_pvalue: float
    groups: np.ndarray
    trials: np.ndarray
    observed: np.ndarray
    expected: np.ndarray


def count_calibration_test(
    successes: Any, trials: Any, proba: Any, *, n_bins: int = 10
) -> CountCalibrationTest:
    """Calibration test of held-out forecasts on grouped counts that may vary more than binomial.

    The groups are sorted by forecast and cut into ``n_bins`` bins of (nearly) equal numbers of
    groups (at least ``COUNT_TEST_MIN_GROUPS_PER_BIN`` each; fewer bins otherwise). In bin ``d``
    the observed minus expected successes ``O_d - E_d = sum_g r_g`` with ``r_g = k_g - n_g p_g``
    get the variance ``V_d = sum_g r_g^2``, the groups' own squared residuals (the robust,
    cluster-level variance of a sum of independent group totals; Liang & Zeger 1986), so no
    binomial or beta-binomial form is assumed: each group is one unit. ``T_d = (O_d - E_d) /
    sqrt(V_d)`` is the one-sample t statistic of the bin's residuals in another form; as that
    t it is referred to Student's t with ``m_d - 1`` degrees of freedom (``m_d`` groups), its
    two-sided p-value turned into a chi-square(1) quantile, and the sum over bins referred to
    chi-square with ``n_bins`` degrees of freedom (our construction; the forecasts must not
    have been fitted on these groups). With groups of very different sizes the test is
    conservative (a few large groups carry a bin's variance).

    On statsmodels' star98 (303 districts, Pearson dispersion 14.4) with outcomes drawn from a
    beta-binomial fitted to the real counts and the true means as forecasts, the row-level
    Hosmer-Lemeshow test on the expanded rows rejected at 5 % in all of 200 draws and
    Spiegelhalter's in 93 %; this test in 2.3 % of 300 draws (3.7 % of binomial draws), and it
    rejected forecasts whose log-odds were off by 0.1 in 63 % and by a factor 1.5 in all
    (tests/test_aggregated_dispersion.py repeats this on fewer draws).

    Parameters
    ----------
    successes, trials : array-like of shape (n_groups,)
        Successes ``k`` and trials ``n > 0`` per group.
    proba : array-like of shape (n_groups,)
        Forecast probability of a success per group, strictly between 0 and 1.
    n_bins : int, default=10
        Bins of groups.

    Returns
    -------
    CountCalibrationTest

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.aggregated import count_calibration_test
    >>> rng = np.random.default_rng(0)
    >>> p = rng.uniform(0.2, 0.8, size=200)
    >>> n = rng.integers(50, 500, size=200)
    >>> k = rng.binomial(n, rng.beta(20 * p, 20 * (1 - p)))  # groups vary more than binomial
    >>> res = count_calibration_test(k, n, p)
    >>> bool(res.dispersion > 3), bool(res.pvalue > 0.05), bool(res.binomial_pvalue < 0.05)
    (True, True, True)
    """
    k, n = _check_counts(successes, trials)
    p = _check_group_proba(proba, k)
    if isinstance(n_bins, bool) or not isinstance(n_bins, (int, np.integer)) or n_bins < 1:
        raise ValueError(f"`n_bins` must be a whole number >= 1; got {n_bins!r}.")
    n_groups = k.shape[0]
    bins = min(int(n_bins), n_groups // COUNT_TEST_MIN_GROUPS_PER_BIN)
    if bins < 1:
        raise ValueError(
            f"count_calibration_test needs at least {COUNT_TEST_MIN_GROUPS_PER_BIN} groups (the "
            f"variance of a bin comes from its groups); got {n_groups}."
        )
    if bins < n_bins:
        warnings.warn(
            f"count_calibration_test: {n_groups} groups give {bins} bin(s) of at least "
            f"{COUNT_TEST_MIN_GROUPS_PER_BIN} groups, not the {int(n_bins)} asked for.",
            UserWarning,
            stacklevel=2,
        )
    order = np.argsort(p, kind="stable")
    parts = np.array_split(order, bins)
    r = k - n * p
    stat = 0.0
    binomial_stat = 0.0
    size = np.array([part.shape[0] for part in parts])
    for part in parts:
        diff = r[part].sum()
        var = np.sum(r[part] ** 2)
        m = part.shape[0]
        if var > 0:
            # T = sum r / sqrt(sum r^2) is the one-sample t of the residuals written otherwise:
            # t = T sqrt((m - 1) / (m - T^2)), exact for normal residuals of equal variance
            t_sq = diff**2 / var
            t = np.sqrt(t_sq * (m - 1) / max(m - t_sq, 1e-12 * m))
            p_bin = 2.0 * stats.t.sf(t, m - 1)
            stat += float(stats.chi2.isf(p_bin, 1)) if p_bin < 1 else 0.0
        binomial_stat += diff**2 / np.sum(n[part] * p[part] * (1 - p[part]))
    return CountCalibrationTest(
        statistic=float(stat),
        pvalue=float(stats.chi2.sf(stat, bins)),
        dof=bins,
        dispersion=float(np.sum(r**2 / (n * p * (1 - p))) / n_groups),
        binomial_pvalue=float(stats.chi2.sf(binomial_stat, bins)),
        groups=size,
        trials=np.array([n[part].sum() for part in parts]),
        observed=np.array([k[part].sum() for part in parts]),
        expected=np.array([(n[part] * p[part]).sum() for part in parts]),
    )


def keep_as_counts(X: Any, y: Any, sample_weight: Any) -> tuple[Any, np.ndarray, np.ndarray]:
    """A count table whose counts all share a factor, with one row split in two so that they
    do not: ``(X, y, sample_weight)`` read as the table's cases.

    The steps that count rows (``CalibrationWrapper(method="auto")``'s choice, the tuned
    cutoff's anchor, the exact cutoff range, the cross-fitting folds) read whole-number weights
    as counts of cases only when they share no factor above 1: weights that are all multiples
    of some ``f`` cannot be told from relative weights scaled by ``f``, and scaling every
    weight must not change a choice (docs/weights.md). A genuine table whose counts are all
    even is then read as relative weights (with a ``WeightScaleWarning``). This splits the
    first row of the largest count ``c`` into a row of ``c - 1`` (in place of it) and a copy of
    that row of count 1 (appended), which stands for the same cases, so the table is read as
    its cases. Weights without a shared factor above 1, or not all whole numbers, come back
    unchanged (as arrays; ``X`` as given). The inputs are not modified.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, d)
        The table's features, one row per cell.
    y : array-like of shape (n,)
        The label of each row.
    sample_weight : array-like of shape (n,)
        Whole-number counts, not all 0.

    Returns
    -------
    X, y, sample_weight
        With one more row when the counts shared a factor (a DataFrame stays a DataFrame).

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.aggregated import keep_as_counts
    >>> X2, y2, w2 = keep_as_counts(np.array([[0.0], [1.0]]), [1, 0], [4, 6])
    >>> X2.ravel().tolist(), y2.tolist(), w2.tolist()
    ([0.0, 1.0, 1.0], [1, 0, 0], [4.0, 5.0, 1.0])
    """
    from ._validation import check_sample_weight, shared_factor

    y_arr = np.asarray(y)
    if y_arr.ndim != 1:
        raise ValueError(f"`y` must be 1-d of shape (n,); got shape {y_arr.shape}.")
    n = y_arr.shape[0]
    if _n_rows(X) != n:
        raise ValueError(f"`X` has {_n_rows(X)} rows but `y` has {n}; give one label per row.")
    w = check_sample_weight(sample_weight, n)
    factor = shared_factor(w)
    if factor is None or factor == 1:
        return X, y_arr, w
    i = int(np.argmax(w))
    w_out = np.append(w, 1.0)
    w_out[i] -= 1.0
    y_out = np.append(y_arr, y_arr[i])
    if hasattr(X, "iloc"):
        import pandas as pd

        X_out = pd.concat([X, X.iloc[[i]]], ignore_index=True)
    else:
        X_arr = np.asarray(X)
        X_out = np.concatenate([X_arr, X_arr[i:i + 1]], axis=0)
    return X_out, y_out, w_out
