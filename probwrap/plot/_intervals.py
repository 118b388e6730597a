"""Per-bin uncertainty for reliability diagrams: Wilson intervals and consistency bands."""

from __future__ import annotations

import numbers
import warnings
from typing import Any

import numpy as np
from scipy.stats import norm
from sklearn.utils import check_random_state

from .._validation import plain

__all__ = ["wilson_interval", "consistency_band", "bin_counts"]


def _check_level(confidence_level: Any) -> float:
    if (
        isinstance(confidence_level, bool)
        or not isinstance(confidence_level, numbers.Real)
        or not 0.0 < float(confidence_level) < 1.0
    ):
        raise ValueError(f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}.")
    return float(confidence_level)


def wilson_interval(
    successes: Any, n: Any, confidence_level: float = 0.95
) -> tuple[np.ndarray, np.ndarray]:
    """Wilson (1927) score interval for binomial proportions.

    ``(p + z^2/(2n) -+ z sqrt(p(1-p)/n + z^2/(4n^2))) / (1 + z^2/n)`` with ``p = successes / n``
    and ``z`` the two-sided normal quantile. ``successes`` and ``n`` may be non-integer (weighted
    counts); ``n`` is then the total weight of the bin.

    Parameters
    ----------
    successes : array-like
        Number (or weight) of positives per bin.
    n : array-like
        Number (or weight) of rows per bin, positive.
    confidence_level : float, default=0.95

    Returns
    -------
    low, high : ndarray
        Exactly 0 (``low``) where ``successes`` is 0 and exactly 1 (``high``) where it equals
        ``n``; always ``low <= successes / n <= high``.

    Examples
    --------
    >>> from probwrap.plot import wilson_interval
    >>> low, high = wilson_interval(3, 10)
    >>> round(float(low), 4), round(float(high), 4)
    (0.1078, 0.6032)
    """
    level = _check_level(confidence_level)
    k = np.asarray(successes, dtype=float)
    m = np.asarray(n, dtype=float)
    if not np.all(np.isfinite(m)) or np.any(m <= 0):
        raise ValueError("`n` must be positive and finite in every bin.")
    if not np.all(np.isfinite(k)) or np.any(k < 0) or np.any(k > m * (1 + 1e-12)):
        raise ValueError("`successes` must lie in [0, n] in every bin.")
    z = norm.ppf(0.5 + level / 2.0)
    p = np.clip(k / m, 0.0, 1.0)
    denom = 1.0 + z * z / m
    centre = (p + z * z / (2.0 * m)) / denom
    half = z * np.sqrt(p * (1.0 - p) / m + (z / (2.0 * m)) ** 2) / denom
    # The closed form is exactly 0 at k = 0 and exactly 1 at k = n, but in floating point
    # ``centre - half`` is then a few ulp off (e.g. 5.55e-17), which puts the bound on the
    # wrong side of the observed frequency and makes error bars negative. Use the exact ends
    # there, and keep p inside the interval (the score interval always contains p: the score
    # statistic is 0 at p), so rounding can never move a bound past it.
    low = np.where(p <= 0.0, 0.0, np.minimum(centre - half, p))
    high = np.where(p >= 1.0, 1.0, np.maximum(centre + half, p))
    return np.clip(low, 0.0, 1.0), np.clip(high, 0.0, 1.0)


def _frequencies(sample_weight: Any, n: int, what: str) -> tuple[np.ndarray, bool]:
    """Weights as row frequencies (see :func:`consistency_band`), and whether rescaled."""
    from ..calibration._base import WeightScaleWarning, count_weights

    w = np.asarray(sample_weight, dtype=float)
    if w.shape != (n,):
        raise ValueError(f"`sample_weight` must have shape ({n},); got {w.shape}.")
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise ValueError("`sample_weight` must be finite and non-negative.")
    counted, rescaled = count_weights(w)
    if rescaled:
        warnings.warn(
            "`sample_weight` sums to less than the number of rows it weights, so it cannot be "
            "row frequencies; it was rescaled to sum to Kish's effective sample size "
            f"(equal weights become 1 each) for {what}.",
            WeightScaleWarning, stacklevel=4,
        )
        return counted, rescaled
    # Since 5 December 2026, unequal weights follow the calibration tests' rule:
    # weights that are not all whole numbers, or whole numbers sharing a factor above 1, are
    # relative (Kish's size, with a WeightScaleWarning), so the intervals do not move with the
    # scale of the weights. Before, weights drawn from 0.2-3 times 1,000 narrowed the report's
    # Wilson intervals about 31-fold without a word (benchmarks/weight_scale_hunt.py). Equal
    # weights stay row frequencies (every row counted twice is twice the rows).
    positive = counted[counted > 0]
    if not positive.size or float(positive.min()) == float(positive.max()):
        return counted, False
    if float(positive.max()) >= _EXACT_COUNT and np.all(positive == np.round(positive)):
        return counted, False  # whole counts past 2**53 rows: the limits below draw them
    from ..metrics._inputs import count_scale_weights

    out = count_scale_weights(counted, what)
    return out, not np.array_equal(out, counted)


#: Largest weight that is still an exact whole number of rows in a double (2**53).
_EXACT_COUNT = 2.0**53
#: Expected count on the rarer side below which a huge row's draw uses the Poisson limit.
_LIMIT_COUNT = 1e4


def _sum_scale(w: np.ndarray) -> float:
    """A power of two that keeps the sum of ``w`` (and so every bin's sum) finite."""
    with np.errstate(over="ignore"):
        total = float(w.sum())
    if np.isfinite(total):
        return 1.0
    # sum below n * max(w): bring max(w) under 2**1000 / n
    exp = int(np.frexp(float(w.max()))[1]) - (1000 - int(np.ceil(np.log2(w.size + 1))))
    return float(np.ldexp(1.0, -max(exp, 0)))


def bin_counts(bin_weight: Any, sample_weight: Any) -> np.ndarray:
    """Per-bin totals on the row-count scale, the ``n`` of a Wilson interval.

    Weights are row frequencies and are used as given; weights that sum to less than the
    number of rows they weight cannot be frequencies and are rescaled, as the maps do, to sum to
    Kish's effective sample size (equal weights become 1 each), with a
    :class:`~probwrap.calibration.WeightScaleWarning`.
    """
    bin_weight = np.asarray(bin_weight, dtype=float)
    if sample_weight is None:
        return bin_weight
    w = np.asarray(sample_weight, dtype=float)
    counted, rescaled = _frequencies(w, w.shape[0], "the interval counts")
    return bin_weight * (counted.sum() / w.sum()) if rescaled else bin_weight


def consistency_band(
    y_prob: Any,
    bin_index: Any,
    n_bins: int,
    *,
    sample_weight: Any = None,
    confidence_level: float = 0.95,
    n_draws: int = 1000,
    random_state: Any = 0,
) -> tuple[np.ndarray, np.ndarray]:
    """Consistency band of a reliability diagram by resampling (Bröcker & Smith 2007).

    If the forecasts were calibrated, each outcome would be a Bernoulli draw with its own
    forecast probability. The band is the central ``confidence_level`` range of the observed
    frequency in each bin over ``n_draws`` such simulated outcome vectors; an observed frequency
    outside the band is evidence of miscalibration in that bin.

    Parameters
    ----------
    y_prob : array-like of shape (n,)
        Forecast probabilities.
    bin_index : array-like of int of shape (n,)
        Bin of each forecast, in ``[0, n_bins)``.
    n_bins : int
        Number of bins.
    sample_weight : array-like of shape (n,), optional
        Row frequencies: a row of weight 2 counts as two identical rows, each with its own
        simulated outcome (weight ``m + f``, ``m`` whole and ``0 <= f < 1``: a binomial draw of
        ``m`` outcomes plus one outcome weighing ``f``; beyond ``2**53`` rows, where a double no
        longer holds whole counts, the count is drawn from the binomial's Poisson or normal
        limit). Weights that sum to less than the
        number of rows they weight cannot be frequencies: they are rescaled to sum to Kish's
        effective sample size (equal weights become 1 each), with a
        :class:`~probwrap.calibration.WeightScaleWarning`.
    confidence_level : float, default=0.95
    n_draws : int, default=1000
        Simulated outcome vectors.
    random_state : int, RandomState or None, default=0
        Seed.

    Returns
    -------
    low, high : ndarray of shape (n_bins,)
        NaN for bins without weight.

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.plot import consistency_band
    >>> low, high = consistency_band(np.full(50, 0.3), np.zeros(50, dtype=int), 1)
    >>> bool(low[0] < 0.3 < high[0])
    True
    """
    level = _check_level(confidence_level)
    p = np.asarray(y_prob, dtype=float).ravel()
    idx = np.asarray(bin_index).ravel()
    if idx.shape != p.shape:
        raise ValueError(
            f"`bin_index` must have one entry per forecast ({p.shape[0]}); got {idx.shape[0]}."
        )
    if not np.all((p >= 0) & (p <= 1)):
        raise ValueError("`y_prob` must hold probabilities in [0, 1].")
    if isinstance(n_draws, bool) or not isinstance(n_draws, numbers.Integral) or n_draws < 2:
        raise ValueError(f"`n_draws` must be a whole number >= 2; got {plain(n_draws)!r}.")
    idx = idx.astype(np.intp)
    if idx.size and (idx.min() < 0 or idx.max() >= n_bins):
        raise ValueError(f"`bin_index` must lie in [0, {n_bins}).")
    w = (np.ones_like(p) if sample_weight is None
         else _frequencies(sample_weight, p.shape[0], "the consistency band")[0])
    rng = check_random_state(random_state)
    # Totals are taken on a power-of-two scale that keeps every bin's sum finite (exact: only
    # the exponent changes); frequencies are ratios, so the scale cancels.
    scale = _sum_scale(w)
    weight = np.bincount(idx, weights=w * scale, minlength=n_bins)
    # A row of weight m + f: m outcomes of its own (one binomial draw) and one weighing f.
    # Beyond 2**53 a weight is no longer a whole number of rows in floating point, and NumPy's
    # binomial draw stops at 2**63 rows: such rows draw their count of positives from the
    # binomial's Poisson limit where fewer than _LIMIT_COUNT outcomes are expected on the rarer
    # side, and from its normal limit (de Moivre-Laplace) otherwise; the normal draw is
    # clipped to [0, m]. Their bin's band is then narrower than 1e-7 in any case.
    huge = w >= _EXACT_COUNT
    small_w = np.where(huge, 0.0, w)
    whole = np.floor(small_w)
    part = small_w - whole
    has_part = bool(np.any(part > 0))
    whole = whole.astype(np.int64)
    hw, hp = w[huge], p[huge]
    rare = np.minimum(hp, 1.0 - hp) * hw < _LIMIT_COUNT
    low_side = hp <= 0.5
    freq = np.empty((int(n_draws), n_bins))
    for d in range(int(n_draws)):
        hits = rng.binomial(whole, p).astype(float)
        if has_part:
            hits += part * (rng.uniform(size=p.shape[0]) < p)
        hits *= scale
        if hw.size:
            z = rng.standard_normal(hw.size)
            normal = np.clip(hw * hp + np.sqrt(hw * hp * (1.0 - hp)) * z, 0.0, hw)
            lam = np.where(low_side, hw * hp, hw * (1.0 - hp))
            k = rng.poisson(np.where(rare, lam, 0.0)).astype(float)
            poisson = np.where(low_side, k, hw - k)
            hits[huge] = np.where(rare, poisson, normal) * scale
        with np.errstate(invalid="ignore", divide="ignore"):
            freq[d] = np.bincount(idx, weights=hits, minlength=n_bins) / weight
    alpha = 1.0 - level
    low, high = np.quantile(freq, [alpha / 2.0, 1.0 - alpha / 2.0], axis=0)
    empty = weight <= 0
    low[empty] = np.nan
    high[empty] = np.nan
    return low, high
