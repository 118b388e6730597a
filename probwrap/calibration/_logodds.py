"""Conversions between probabilities and the log-odds / log-probability scale."""

from __future__ import annotations

from typing import Any

import numpy as np
from scipy.special import expit, log_softmax

from .._validation import check_proba, check_scores, plain

__all__ = ["proba_to_log_odds", "proba_to_log_proba", "log_odds_to_proba", "DEFAULT_CLIP"]

#: Probabilities are kept at least this far from exact 0 and 1 before taking logarithms.
#: 1e-12 maps exact 0 and 1 to log-odds of about -27.6 and +27.6: finite, far beyond any
#: calibrated probability, and still ordered correctly against every other score.
DEFAULT_CLIP = 1e-12


def clip_from_smallest(smallest: float) -> float:
    """Data-chosen floor before logarithms: half the smallest non-zero held-out probability,
    within ``[DEFAULT_CLIP, 0.25]`` (``inf``: no non-zero probability, ``DEFAULT_CLIP``).

    A forest of ``n`` trees outputs multiples of ``1/n`` and gets ``1/(2n)``, so its exact 0
    and 1 sit just beyond its own resolution; used by CalibrationWrapper (``clip=None``) and the
    prior-shift calibration.

    Examples
    --------
    >>> from probwrap.calibration._logodds import clip_from_smallest
    >>> clip_from_smallest(0.02)
    0.01
    """
    if not np.isfinite(smallest):
        return DEFAULT_CLIP
    return float(min(max(0.5 * smallest, DEFAULT_CLIP), 0.25))


def proba_to_log_odds(proba: Any, *, clip: float = DEFAULT_CLIP) -> np.ndarray:
    """Turn positive-class probabilities into log-odds ``log(p / (1 - p))``.

    Parameters
    ----------
    proba : array-like of shape (n,) or (n, 2)
        Probabilities of the positive class, or two-column ``predict_proba`` output (the second
        column is used).
    clip : float, default=1e-12
        Exact 0 and 1 (which naive Bayes and forests produce) have no finite log-odds. Every
        probability is first moved into ``[clip, 1 - clip]``; with the default, exact 0 and 1
        become about -27.6 and +27.6. Only values closer than ``clip`` to 0 or 1 are affected, and
        the order of all scores is preserved, so order-based maps are unaffected.

    Returns
    -------
    ndarray of shape (n,)

    Examples
    --------
    >>> from probwrap.calibration import proba_to_log_odds
    >>> proba_to_log_odds([0.5, 0.75, 1.0]).round(3)
    array([ 0.   ,  1.099, 27.631])
    """
    p = check_proba(proba, name="proba")
    if p.ndim == 2:
        if p.shape[1] != 2:
            raise ValueError(
                f"`proba` must be 1-d or have two columns for log-odds; got shape {p.shape}. "
                "Use proba_to_log_proba for more than two classes."
            )
        p = p[:, 1]
    if not 0.0 < clip < 0.5:
        raise ValueError(f"`clip` must be in (0, 0.5); got {plain(clip)!r}.")
    p = np.clip(p, clip, 1.0 - clip)
    with np.errstate(divide="ignore"):
        out = np.log(p) - np.log1p(-p)
    if np.isinf(out).any():
        # 1 - clip rounds to 1 for clip below ~1.1e-16 (log1p(-1) = -inf): use the exact
        # log-odds of 1 - clip there, which keeps 1 finite, symmetric to 0 and above every p < 1
        out = np.where(np.isinf(out), float(np.log1p(-clip) - np.log(clip)), out)
    return out


def proba_to_log_proba(proba: Any, *, clip: float = DEFAULT_CLIP) -> np.ndarray:
    """Turn (n, k) class probabilities into log-probabilities, floored at ``log(clip)``.

    Examples
    --------
    >>> from probwrap.calibration import proba_to_log_proba
    >>> proba_to_log_proba([[0.5, 0.5, 0.0]]).round(2)
    array([[ -0.69,  -0.69, -27.63]])
    """
    p = check_proba(proba, name="proba", ndim=2)
    if not 0.0 < clip < 0.5:
        raise ValueError(f"`clip` must be in (0, 0.5); got {plain(clip)!r}.")
    return np.log(np.maximum(p, clip))


def log_odds_to_proba(scores: Any) -> np.ndarray:
    """Logistic function: positive-class probabilities from log-odds (1-d) or softmax (2-d).

    Examples
    --------
    >>> from probwrap.calibration import log_odds_to_proba
    >>> log_odds_to_proba([0.0, 2.0]).round(3)
    array([0.5  , 0.881])
    """
    s = check_scores(scores, name="scores", ndim=None)
    if s.ndim == 1:
        return expit(s)
    return np.exp(log_softmax(s, axis=1))
