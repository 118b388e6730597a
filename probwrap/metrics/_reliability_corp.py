"""CORP reliability: isotonic recalibration and the score decomposition it gives.

Dimitriadis, Gneiting & Jordan (2021, PNAS 118(8) e2016191118) replace the bins of a reliability
diagram by the pool-adjacent-violators (PAV) fit of the outcomes on the forecasts — consistent,
optimally binned, reproducible, and based on the PAV algorithm ("CORP"). The same fit splits any
proper score into miscalibration, discrimination and uncertainty.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.optimize import isotonic_regression
from scipy.special import xlogy
from sklearn.utils import check_random_state

from .._validation import plain
from ._inputs import prepare_binary, warn_floored
from ._scores import LOG_LOSS_CLIP

__all__ = [
    "CorpReliability",
    "ScoreDecomposition",
    "corp_reliability",
    "score_decomposition",
]

_SCORES = ("brier", "log_loss")


def _pav_by_value(p: np.ndarray, y: np.ndarray, w: np.ndarray):
    """Weighted PAV of ``y`` on ``p`` with tied forecasts pooled first.

    Returns the distinct forecast values (with positive weight), their total weight, the
    weighted mean outcome there, the fitted (non-decreasing) values, and for every row the index
    of its distinct value (rows of weight 0 included).
    """
    values, inverse = np.unique(p, return_inverse=True)
    inverse = inverse.reshape(-1)
    weight = np.bincount(inverse, weights=w, minlength=values.size)
    positives = np.bincount(inverse, weights=w * y, minlength=values.size)
    keep = weight > 0
    mean = np.zeros_like(weight)
    mean[keep] = positives[keep] / weight[keep]
    fitted = np.empty_like(weight)
    fitted[keep] = isotonic_regression(mean[keep], weights=weight[keep], increasing=True).x
    if not keep.all():
        # values carried only by weight-0 rows: the fit of the nearest kept value below (above)
        kept_idx = np.flatnonzero(keep)
        pos = np.clip(np.searchsorted(kept_idx, np.flatnonzero(~keep)), 0, kept_idx.size - 1)
        fitted[~keep] = fitted[kept_idx[pos]]
    return values, weight, mean, fitted, inverse, keep


@dataclass(frozen=True, eq=False)
class ScoreDecomposition:
    """Score = miscalibration - discrimination + uncertainty (CORP, Dimitriadis et al. 2021).

    Attributes
    ----------
    score : str
        ``"brier"`` or ``"log_loss"``.
    total : float
        ``S(x)``, the mean score of the forecasts.
    miscalibration : float
        ``MCB = S(x) - S(x_hat)``, with ``x_hat`` the PAV recalibration; >= 0.
    discrimination : float
        ``DSC = S(r) - S(x_hat)``, with ``r`` the overall rate of positives; >= 0.
    uncertainty : float
        ``UNC = S(r)``, the score of the constant climatological forecast.
    """

    score: str
    total: float
    miscalibration: float
    discrimination: float
    uncertainty: float


@dataclass(frozen=True, eq=False)
class CorpReliability:
    """The CORP reliability curve: isotonic recalibration of outcomes on forecasts.

    Attributes
    ----------
    forecast : ndarray
        Distinct forecast values (carrying positive weight), increasing.
    recalibrated : ndarray
        The PAV fit at each distinct forecast: the estimated probability of a positive given
        that forecast. Non-decreasing. A calibrated forecaster lies on the diagonal.
    weight : ndarray
        Total weight (row count) at each distinct forecast.
    band_low, band_high : ndarray or None
        Consistency band at each distinct forecast: where the recalibrated curve would lie in
        ``confidence_level`` of resamples if the forecasts were calibrated (outcomes drawn as
        Bernoulli(forecast), PAV refitted; Dimitriadis et al. 2021, resampling approach).
        ``None`` when ``n_resamples=0``.
    confidence_level : float
    brier, log_loss : ScoreDecomposition
        The CORP decompositions of the Brier score and the log loss.
    """

    forecast: np.ndarray
    recalibrated: np.ndarray
    weight: np.ndarray
    band_low: np.ndarray | None
    band_high: np.ndarray | None
    confidence_level: float
    brier: ScoreDecomposition
    log_loss: ScoreDecomposition


def _mean_brier(q: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    return float(np.dot(w, (q - y) ** 2) / w.sum())


def _mean_log_loss(q: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    # xlogy: 0 * log 0 = 0, so a recalibrated 0 or 1 costs nothing where it is right. Rows of
    # weight 0 are absent rows: left in, a recalibrated 0 or 1 against their label would give
    # 0 * inf = nan
    keep = w > 0
    q, y, w = q[keep], y[keep], w[keep]
    return float(-np.dot(w, xlogy(y, q) + xlogy(1.0 - y, 1.0 - q)) / w.sum())


def _decompose(score: str, p, y, w, recal) -> ScoreDecomposition:
    rate = float(np.dot(w, y) / w.sum())
    climate = np.full_like(p, rate)
    if score == "brier":
        s_x = _mean_brier(p, y, w)
        s_hat = _mean_brier(recal, y, w)
        s_r = _mean_brier(climate, y, w)
    else:
        # the forecasts' own log loss floors the probability of the observed class at float64
        # machine epsilon, as probwrap.metrics.log_loss does (with the same warning); the
        # recalibrated and climatological forecasts never give an observed class probability 0
        p_obs = np.where(y == 1.0, p, 1.0 - p)
        warn_floored(int(np.count_nonzero((p_obs < LOG_LOSS_CLIP) & (w > 0))), LOG_LOSS_CLIP,
                     "give the observed class a probability below float64 machine epsilon")
        s_x = float(-np.dot(w, np.log(np.maximum(p_obs, LOG_LOSS_CLIP))) / w.sum())
        s_hat = _mean_log_loss(recal, y, w)
        s_r = _mean_log_loss(climate, y, w)
    return ScoreDecomposition(
        score=score,
        total=s_x,
        miscalibration=s_x - s_hat,
        discrimination=s_r - s_hat,
        uncertainty=s_r,
    )


def score_decomposition(
    y_true: Any,
    y_prob: Any,
    *,
    score: str = "brier",
    sample_weight: Any = None,
    labels: Any = None,
) -> ScoreDecomposition:
    """CORP decomposition of a proper score: ``S = MCB - DSC + UNC`` (Dimitriadis et al. 2021).

    With ``x`` the forecasts, ``x_hat`` their PAV (isotonic) recalibration on the outcomes and
    ``r`` the overall rate of positives:

    - miscalibration ``MCB = S(x) - S(x_hat)``,
    - discrimination ``DSC = S(r) - S(x_hat)``,
    - uncertainty ``UNC = S(r)``,

    where ``S`` is the mean score. Because the PAV fit is the best non-decreasing recalibration
    under every proper score at once, ``MCB >= 0`` and ``DSC >= 0``, and ``MCB - DSC + UNC``
    equals ``S(x)`` up to rounding. Unlike Murphy's binned decomposition
    (:func:`brier_decomposition`) nothing depends on a choice of bins.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    score : {"brier", "log_loss"}, default="brier"
        The proper score decomposed. For ``"log_loss"`` the probability the forecast gives the
        observed class is floored at float64 machine epsilon, as in :func:`log_loss`.
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.

    Returns
    -------
    ScoreDecomposition

    Examples
    --------
    >>> from probwrap.metrics import score_decomposition
    >>> d = score_decomposition([0, 0, 1, 0, 1, 1], [0.1, 0.3, 0.4, 0.6, 0.7, 0.9])
    >>> round(d.miscalibration, 4), round(d.discrimination, 4), round(d.uncertainty, 4)
    (0.07, 0.1667, 0.25)
    """
    if score not in _SCORES:
        raise ValueError(f"`score` must be one of {list(_SCORES)}; got {plain(score)!r}.")
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    _, _, _, fitted, inverse, _ = _pav_by_value(p, y, w)
    return _decompose(score, p, y, w, fitted[inverse])


def corp_reliability(
    y_true: Any,
    y_prob: Any,
    *,
    n_resamples: int = 0,
    confidence_level: float = 0.9,
    sample_weight: Any = None,
    labels: Any = None,
    random_state: Any = None,
) -> CorpReliability:
    """CORP reliability curve with optional consistency band (Dimitriadis et al. 2021).

    The curve is the isotonic (pool-adjacent-violators) regression of the outcomes on the
    forecasts, weighted by ``sample_weight``, tied forecasts pooled first — the same fit as
    scikit-learn's ``IsotonicRegression``. It needs no bins: the PAV blocks are the bins, chosen
    by the data.

    The consistency band answers "could a calibrated forecaster have produced this curve?". For
    each of ``n_resamples`` draws, every row's outcome is redrawn as Bernoulli(its forecast)
    (each row with its weight is one resampling unit) and the PAV fit is recomputed; the band is
    the pointwise ``(1 - level)/2`` and ``(1 + level)/2`` quantile of the refitted curves at
    each distinct forecast. This is the paper's resampling construction of consistency bands;
    the asymptotic bands they give for large samples are not implemented.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive).
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    n_resamples : int, default=0
        Resamples for the consistency band; 0 gives no band. The paper uses 1000.
    confidence_level : float, default=0.9
        Pointwise coverage of the band (the paper shows 90 %).
    sample_weight : array-like of shape (n,), optional
        Row frequencies: weight 2 counts a row twice.
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.
    random_state : int, RandomState instance or None
        Seed for the band.

    Returns
    -------
    CorpReliability

    Examples
    --------
    >>> from probwrap.metrics import corp_reliability
    >>> res = corp_reliability([0, 1, 0, 1, 1], [0.1, 0.2, 0.3, 0.6, 0.8])
    >>> res.forecast.tolist(), res.recalibrated.tolist()
    ([0.1, 0.2, 0.3, 0.6, 0.8], [0.0, 0.5, 0.5, 1.0, 1.0])
    """
    if (isinstance(n_resamples, bool) or not isinstance(n_resamples, (int, np.integer))
            or n_resamples < 0 or n_resamples == 1):
        raise ValueError(
            f"`n_resamples` must be 0 (no band) or a whole number >= 2; got {plain(n_resamples)!r}."
        )
    if (isinstance(confidence_level, bool) or not isinstance(confidence_level, (int, float))
            or not 0.0 < confidence_level < 1.0):
        raise ValueError(
            f"`confidence_level` must be in (0, 1); got {plain(confidence_level)!r}."
        )
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    values, weight, _, fitted, inverse, keep = _pav_by_value(p, y, w)
    recal = fitted[inverse]
    low = high = None
    if n_resamples:
        rng = check_random_state(random_state)
        curves = np.empty((int(n_resamples), int(keep.sum())))
        for r in range(int(n_resamples)):
            y_star = (rng.uniform(size=p.shape[0]) < p).astype(float)
            curves[r] = _pav_by_value(p, y_star, w)[3][keep]
        alpha = (1.0 - float(confidence_level)) / 2.0
        low, high = np.quantile(curves, [alpha, 1.0 - alpha], axis=0)
    return CorpReliability(
        forecast=values[keep],
        recalibrated=fitted[keep],
        weight=weight[keep],
        band_low=low,
        band_high=high,
        confidence_level=float(confidence_level),
        brier=_decompose("brier", p, y, w, recal),
        log_loss=_decompose("log_loss", p, y, w, recal),
    )
