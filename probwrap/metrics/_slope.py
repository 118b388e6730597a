"""Calibration slope and calibration-in-the-large (Cox 1958): two weighted logistic
regressions on the forecasts' log-odds, fitted by damped Newton steps."""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.special import expit
from sklearn.exceptions import ConvergenceWarning

from .._validation import plain, power_of_two_unit
from ..calibration._logodds import DEFAULT_CLIP, proba_to_log_odds
from ._inputs import prepare_binary, warn_floored

__all__ = ["CalibrationSlopeIntercept", "calibration_slope_intercept", "slope_intercept_fit",
           "slope_intercept_fit_log_odds"]


@dataclass(frozen=True)
class CalibrationSlopeIntercept:
    """Logistic recalibration summaries after Cox (1958).

    Attributes
    ----------
    slope : float
        ``b`` in the logistic regression ``logit P(y=1) = a + b logit(p)``. 1 is ideal; below 1
        means the forecasts are too extreme (over-confident), above 1 too timid.
    intercept : float
        Calibration-in-the-large: ``c`` in ``logit P(y=1) = c + logit(p)`` (``logit p`` as an
        offset, slope fixed at 1). 0 is ideal; positive means the forecasts are too low overall.
    slope_fit_intercept : float
        ``a``, the intercept of the model that estimates ``slope``; ``a + b logit(p)`` is the
        logistic recalibration of the forecasts.
    n_iter : int
        Newton iterations used by the two fits together.
    notes : tuple of str
        Why ``slope`` (and ``slope_fit_intercept``) is NaN when the forecasts do not vary or
        rank the two classes perfectly; empty otherwise. ``intercept`` is computed in both cases.
    """

    slope: float
    intercept: float
    slope_fit_intercept: float
    n_iter: int
    notes: tuple[str, ...] = ()


def _loglik(eta: np.ndarray, y: np.ndarray, w: np.ndarray) -> float:
    return float(np.dot(w, y * eta - np.logaddexp(0.0, eta)))


def _newton_logistic(
    x: np.ndarray, y: np.ndarray, w: np.ndarray, fit_slope: bool, tol: float = 1e-12,
    max_iter: int = 100,
) -> tuple[np.ndarray, int]:
    """Weighted logistic regression of y on [1, x] (or on 1 with offset x) by damped Newton.

    The slope fit works on ``x`` centred and scaled by its weighted mean and standard deviation
    and starts at the intercept-only fit (slope 0, every row at the weighted event rate), where
    the curvature is that of the event rate on every row; the result is mapped back to ``x``.
    (Started at the forecasts themselves, ``a = 0, b = 1``, forecasts piled at 0 and 1 have a
    curvature of about 1e-12: the first steps overshoot until the curvature underflows, and the
    fit stopped at a wrong slope or on a singular matrix.) A step that does not raise the
    likelihood even when halved to 1e-10 of its length (or is not finite) is not taken; the fit
    stops where it is. The offset-only fit is one-dimensional and solved by bracketing.
    """
    if not fit_slope:
        return _intercept_with_offset(x, y, w)
    centre = float(np.dot(w, x) / w.sum())
    spread = float(np.sqrt(np.dot(w, (x - centre) ** 2) / w.sum()))
    spread = spread if spread > 0.0 else 1.0
    u = (x - centre) / spread
    rate = float(np.dot(w, y) / w.sum())
    beta = np.array([np.log(rate) - np.log1p(-rate), 0.0])
    design = np.column_stack((np.ones_like(u), u))
    eta = design @ beta
    ll = _loglik(eta, y, w)

    def on_x(b: np.ndarray) -> np.ndarray:
        return np.array([b[0] - b[1] * centre / spread, b[1] / spread])

    for it in range(1, max_iter + 1):
        mu = expit(eta)
        resid = w * (y - mu)
        curv = w * mu * (1.0 - mu)
        grad = design.T @ resid
        hess = (design * curv[:, None]).T @ design
        try:
            step = np.linalg.solve(hess, grad)
        except np.linalg.LinAlgError:  # curvature underflowed on every row: no Newton step
            return on_x(beta), it
        if not np.all(np.isfinite(step)):
            return on_x(beta), it
        scale = 1.0
        while True:
            cand = beta + scale * step
            eta_c = design @ cand
            ll_c = _loglik(eta_c, y, w)
            if ll_c >= ll - 1e-12 * (1.0 + abs(ll)):
                break
            if scale < 1e-10:  # no step raises the likelihood: at the optimum to rounding
                return on_x(beta), it
            scale *= 0.5
        beta, eta, ll = cand, eta_c, ll_c
        if np.max(np.abs(scale * step)) <= tol * (1.0 + np.max(np.abs(beta))):
            return on_x(beta), it
    warnings.warn(
        f"Newton's method did not reach tolerance {tol:g} within {max_iter} iterations; the "
        "calibration slope/intercept may be inaccurate.",
        ConvergenceWarning,
        stacklevel=3,
    )
    return on_x(beta), max_iter


def _intercept_with_offset(x: np.ndarray, y: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, int]:
    """``c`` solving the score equation ``sum w (y - expit(c + x)) = 0`` by Brent's method.

    The score falls strictly from ``sum w y > 0`` to ``sum w y - sum w < 0`` (both classes have
    positive weight), so the root is unique and finite; Newton's method from ``c = 0`` can run
    off when the forecasts are all near 0 or 1 (their curvature underflows).
    """
    from scipy.optimize import brentq

    target = float(np.dot(w, y))

    def score(c: float) -> float:
        return target - float(np.dot(w, expit(c + x)))

    lo, hi = -1.0, 1.0
    while score(lo) <= 0.0:
        lo *= 2.0
    while score(hi) >= 0.0:
        hi *= 2.0
    c, info = brentq(score, lo, hi, xtol=1e-13, rtol=4 * np.finfo(float).eps, full_output=True)
    return np.array([c, 0.0]), int(info.iterations)


def calibration_slope_intercept(
    y_true: Any,
    y_prob: Any,
    *,
    sample_weight: Any = None,
    labels: Any = None,
    clip: float = DEFAULT_CLIP,
) -> CalibrationSlopeIntercept:
    """Calibration slope and calibration-in-the-large of binary forecasts (Cox 1958).

    Two weighted logistic regressions on ``x = logit(y_prob)``:

    - **slope**: ``logit P(y=1) = a + b x``; the slope is ``b``.
    - **intercept**: ``logit P(y=1) = c + x`` (``x`` as a fixed offset, no slope); the intercept is
      ``c``, the calibration-in-the-large.

    The slope is a maximum-likelihood fit by Newton's method with step halving, stopped when a
    step changes no coefficient by more than ``1e-12`` (relative); the intercept solves its
    one-dimensional score equation by Brent's method (finite whenever both classes are present). Exact 0 and 1 probabilities have no
    finite log-odds: they are moved to ``clip`` and ``1 - clip`` by
    :func:`probwrap.calibration.proba_to_log_odds` (log-odds about -27.6 and 27.6 for the default)
    and a ``UserWarning`` says how many rows were moved; such rows can dominate the fits.

    Parameters
    ----------
    y_true : array-like of shape (n,)
        Binary labels (the second sorted, or ``labels[1]``, is positive), both classes present.
    y_prob : array-like of shape (n,)
        Positive-class probabilities (two-column input uses the second column).
    sample_weight : array-like of shape (n,), optional
        Non-negative row weights (frequency weights: weight 2 counts a row twice).
    labels : array-like of shape (2,), optional
        ``[negative, positive]``.
    clip : float, default=1e-12
        Distance from 0 and 1 to which exact 0/1 probabilities are moved.

    Returns
    -------
    CalibrationSlopeIntercept

    Raises
    ------
    ValueError
        When one class is missing (with positive weight).

    Warns
    -----
    UserWarning
        When every forecast is the same, or the classes do not overlap in ``logit(y_prob)``
        (every positive at or above every negative, or the reverse): the slope cannot be
        estimated (it is unbounded in the second case) and is NaN, with the reason in ``notes``.
        The intercept, an intercept-only fit with ``logit(p)`` as offset, exists whenever both
        classes are present and is computed.

    Examples
    --------
    >>> from probwrap.metrics import calibration_slope_intercept
    >>> y = [0, 0, 1, 0, 1, 1, 0, 1]
    >>> p = [0.1, 0.3, 0.35, 0.4, 0.6, 0.7, 0.8, 0.9]
    >>> res = calibration_slope_intercept(y, p)
    >>> round(res.slope, 3), round(res.intercept, 3)
    (0.872, -0.102)

    Forecasts that rank the rows perfectly leave the slope unbounded, but not the intercept:

    >>> import warnings
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     res = calibration_slope_intercept([0, 0, 1, 1], [0.1, 0.2, 0.6, 0.7])
    >>> res.slope, round(res.intercept, 3)
    (nan, 0.567)
    """
    res = slope_intercept_fit(y_true, y_prob, sample_weight=sample_weight, labels=labels,
                              clip=clip)
    for note in res.notes:
        warnings.warn(note, UserWarning, stacklevel=2)
    return res


def slope_intercept_fit(
    y_true: Any, y_prob: Any, *, sample_weight: Any = None, labels: Any = None,
    clip: float = DEFAULT_CLIP,
) -> CalibrationSlopeIntercept:
    """:func:`calibration_slope_intercept` without its warning: a slope that cannot be estimated
    is NaN with the reason in ``notes`` only (for callers that turn notes into their own)."""
    y, p, w = prepare_binary(y_true, y_prob, sample_weight, labels)
    if not (isinstance(clip, (int, float)) and 0.0 < clip < 0.5):
        raise ValueError(f"`clip` must be a number in (0, 0.5); got {plain(clip)!r}.")
    _check_both_classes(y, w)
    warn_floored(int(np.count_nonzero(((p < clip) | (p > 1.0 - clip)) & (w > 0))), clip,
                 "of `y_prob` lie closer than `clip` to 0 or 1")
    return _fit_on_log_odds(proba_to_log_odds(p, clip=clip), y, w, "`y_prob`", "logit(`y_prob`)",
                            p)


def slope_intercept_fit_log_odds(
    y_true: Any, log_odds: Any, *, sample_weight: Any = None, labels: Any = None,
) -> CalibrationSlopeIntercept:
    """:func:`slope_intercept_fit` on forecasts given as log-odds (e.g. ``decision_function``
    values): fitted on ``log_odds`` as they are, with no clip, so it equals a logistic
    regression of ``y_true`` on them (statsmodels' ``GLM(binomial)``) at any size of log-odds,
    where the probabilities ``expit(log_odds)`` are exactly 0 or 1 beyond about +-36.7 and
    ``logit`` of them is clipped at +-27.6."""
    try:
        x = np.asarray(log_odds, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`log_odds` must be numbers (one log-odds per row) ({exc}).") from None
    if x.ndim != 1 or not np.all(np.isfinite(x)):
        raise ValueError("`log_odds` must be 1-d finite numbers (one log-odds per row); got "
                         f"shape {x.shape}" + ("" if x.ndim != 1 else " with non-finite values")
                         + ".")
    y, _, w = prepare_binary(y_true, expit(x), sample_weight, labels)
    _check_both_classes(y, w)
    return _fit_on_log_odds(x, y, w, "`log_odds`", "`log_odds`", x)


def _check_both_classes(y: np.ndarray, w: np.ndarray) -> None:
    if not ((y == 1.0) & (w > 0)).any() or not ((y == 0.0) & (w > 0)).any():
        raise ValueError(
            "`y_true` must contain both classes (with positive weight) for a calibration slope "
            "and intercept."
        )


def _fit_on_log_odds(x: np.ndarray, y: np.ndarray, w: np.ndarray, name: str, scale: str,
                     shown: np.ndarray) -> CalibrationSlopeIntercept:
    """Both fits on the forecasts' log-odds ``x``; ``name``/``scale`` name the input in notes."""
    pos = (y == 1.0) & (w > 0)
    neg = (y == 0.0) & (w > 0)
    keep = w > 0
    xk, yk, wk = x[keep], y[keep], w[keep]
    # frequency weights enter the likelihood as a common factor: divided by a power of two
    # (exact) near their largest, denormal or huge weights give a well-conditioned Newton step
    wk = wk / power_of_two_unit(wk)
    beta_i, it_i = _newton_logistic(xk, yk, wk, fit_slope=False)
    # the intercept-only fit with offset logit(p) exists whenever both classes are present; the
    # slope needs forecasts that vary and classes that overlap in them
    reason = None
    if xk.min() == xk.max():
        reason = (
            f"Every forecast in {name} is the same ({plain(float(shown[keep][0]))!r}); a "
            "calibration slope needs forecasts that vary, so the slope is NaN (the "
            "calibration-in-the-large is computed)."
        )
    elif x[pos].min() >= x[neg].max() or x[neg].min() >= x[pos].max():
        reason = (
            f"The classes in `y_true` do not overlap in {scale} (every positive is at or "
            "above every negative, or the reverse); the calibration slope is unbounded, so it is "
            "NaN (the calibration-in-the-large is computed)."
        )
    if reason is not None:
        return CalibrationSlopeIntercept(slope=float("nan"), intercept=float(beta_i[0]),
                                         slope_fit_intercept=float("nan"), n_iter=it_i,
                                         notes=(reason,))
    beta_s, it_s = _newton_logistic(xk, yk, wk, fit_slope=True)
    return CalibrationSlopeIntercept(
        slope=float(beta_s[1]),
        intercept=float(beta_i[0]),
        slope_fit_intercept=float(beta_s[0]),
        n_iter=it_s + it_i,
    )
