"""Aggregated outcomes: groups with ``k`` successes out of ``n`` trials.

Data often arrive as counts per group (parcels damaged out of parcels shipped per route and
week) rather than one outcome per row. Each group becomes two weighted rows — the successes with
label 1 and weight ``k``, the failures with label 0 and weight ``n - k`` — and every estimator,
map and metric that accepts ``sample_weight`` as row frequencies then sees exactly the binomial
likelihood ``sum_g k_g log p_g + (n_g - k_g) log(1 - p_g)`` (up to the constant
``sum_g log C(n_g, k_g)``, which :func:`binomial_log_likelihood` adds back).
"""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.special import gammaln

from ._validation import check_proba
from .scale import DEFAULT_RESOLUTION, ScoreTally, tally_scores

__all__ = ["binomial_log_likelihood", "expand_counts", "rates_to_counts", "tally_counts"]


def _as_counts(values: Any, name: str) -> np.ndarray:
    arr = np.asarray(values, dtype=float)
    if arr.ndim != 1:
        raise ValueError(f"`{name}` must be 1-d of shape (n_groups,); got shape {arr.shape}.")
    if not np.all(np.isfinite(arr)):
        raise ValueError(f"`{name}` contains NaN or infinite values.")
    return arr


def _check_counts(successes: Any, trials: Any) -> tuple[np.ndarray, np.ndarray]:
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
        raise ValueError("`rates` must lie in [0, 1].")
    _check_counts(r * n, n)
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
