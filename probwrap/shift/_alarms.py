"""Prevalence alarms: a two-sided CUSUM on batch estimates and its average run length."""

from __future__ import annotations

import numbers
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.stats import norm

from .._validation import plain

__all__ = ["CusumResult", "cusum_alarms", "cusum_run_length"]


@dataclass(frozen=True)
class CusumResult:
    """Result of :func:`cusum_alarms`.

    Attributes
    ----------
    upper, lower : ndarray of shape (n_batches,)
        The upward and downward CUSUM statistics after each batch (in standard errors).
    standardized : ndarray of shape (n_batches,)
        ``(estimate - baseline) / standard_error`` per batch.
    alarms : ndarray of int
        Indices of the batches after which an alarm fired.
    direction : ndarray of int
        +1 (prevalence went up) or -1 (down) for each alarm.
    reference, decision_interval : float
        The reference value ``k`` and decision interval ``h`` used.
    """

    upper: np.ndarray
    lower: np.ndarray
    standardized: np.ndarray
    alarms: np.ndarray
    direction: np.ndarray
    reference: float
    decision_interval: float


def _positive(value: Any, name: str, allow_zero: bool = False) -> float:
    ok = isinstance(value, numbers.Real) and not isinstance(value, bool) and np.isfinite(value)
    if not ok or value < 0 or (value == 0 and not allow_zero):
        bound = ">= 0" if allow_zero else "> 0"
        raise ValueError(f"`{name}` must be a finite number {bound}; got {plain(value)!r}.")
    return float(value)


def cusum_alarms(
    estimates: Any,
    baseline: float,
    standard_error: Any,
    *,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    restart: bool = True,
) -> CusumResult:
    r"""Two-sided tabular CUSUM (Page 1954) on a series of batch estimates.

    Each batch estimate (for example the prevalence of one week from
    :func:`prior_by_batch`) is standardised against the in-control ``baseline``,
    :math:`z_i = (x_i - \mu_0) / \sigma_i`, and accumulated in two one-sided sums

    .. math::

        S^+_i = \max(0, S^+_{i-1} + z_i - k), \qquad S^-_i = \max(0, S^-_{i-1} - z_i - k),

    with :math:`S^\pm_0 = 0`. An alarm fires after batch :math:`i` when :math:`S^+_i > h`
    (the prevalence went up) or :math:`S^-_i > h` (down). The reference value :math:`k` is half
    the shift, in standard errors, that the chart is tuned to detect fastest (the usual choice,
    :math:`k = \delta / 2`, makes the CUSUM the sequential probability-ratio test between
    :math:`\mu_0` and :math:`\mu_0 \pm \delta\sigma`; Page 1954); the decision interval
    :math:`h` sets the false-alarm rate. The defaults ``k = 0.5, h = 5`` (tuned to a one-standard-
    error shift; common practice) give the two-sided chart an in-control average run length of
    about 465 batches and 10.4 batches for a one-standard-error shift (compute others with
    :func:`cusum_run_length`). The standardisation assumes the batch estimates are independent
    and roughly normal with the given standard errors.

    Parameters
    ----------
    estimates : array-like of shape (n_batches,)
        Batch estimates, in arrival order.
    baseline : float
        The in-control value (for a prevalence: the source prevalence).
    standard_error : float or array-like of shape (n_batches,)
        Standard error of each estimate (for example the width of its 95 % interval divided by
        ``2 * 1.96``); must be positive.
    reference : float, default=0.5
        ``k``, in standard errors.
    decision_interval : float, default=5.0
        ``h``, in standard errors.
    restart : bool, default=True
        Whether both sums restart from 0 after an alarm (otherwise they keep accumulating and
        every later batch above ``h`` is an alarm too).

    Returns
    -------
    CusumResult

    Examples
    --------
    >>> import numpy as np
    >>> from probwrap.shift import cusum_alarms
    >>> weekly = np.array([0.040, 0.043, 0.038, 0.041, 0.052, 0.055, 0.051, 0.054])
    >>> res = cusum_alarms(weekly, baseline=0.040, standard_error=0.004)
    >>> res.alarms.tolist(), res.direction.tolist()   # fires, restarts, fires again
    ([5, 7], [1, 1])
    """
    x = np.asarray(estimates, dtype=float)
    if x.ndim != 1 or x.shape[0] == 0 or not np.all(np.isfinite(x)):
        raise ValueError("`estimates` must be a non-empty 1-d array of finite numbers.")
    se = np.broadcast_to(np.asarray(standard_error, dtype=float), x.shape)
    if not np.all(np.isfinite(se)) or np.any(se <= 0):
        raise ValueError(
            "`standard_error` must be positive and finite (one number, or one per estimate)."
        )
    if not (isinstance(baseline, numbers.Real) and np.isfinite(baseline)):
        raise ValueError(f"`baseline` must be a finite number; got {plain(baseline)!r}.")
    k = _positive(reference, "reference", allow_zero=True)
    h = _positive(decision_interval, "decision_interval")
    z = (x - float(baseline)) / se
    upper, lower = np.empty_like(z), np.empty_like(z)
    alarms, direction = [], []
    s_up = s_down = 0.0
    for i, zi in enumerate(z):  # a recursion: each sum depends on the previous one
        s_up = max(0.0, s_up + zi - k)
        s_down = max(0.0, s_down - zi - k)
        upper[i], lower[i] = s_up, s_down
        if s_up > h or s_down > h:
            alarms.append(i)
            direction.append(1 if s_up > h else -1)
            if restart:
                s_up = s_down = 0.0
    return CusumResult(
        upper=upper, lower=lower, standardized=z, alarms=np.asarray(alarms, dtype=int),
        direction=np.asarray(direction, dtype=int), reference=k, decision_interval=h,
    )


def cusum_run_length(
    shift: float = 0.0,
    *,
    reference: float = 0.5,
    decision_interval: float = 5.0,
    two_sided: bool = False,
    n_states: int = 200,
) -> float:
    r"""Average run length of a CUSUM on normal observations, by the Markov chain of Brook & Evans.

    The one-sided sum :math:`S_i = \max(0, S_{i-1} + z_i - k)` with :math:`z_i \sim N(\delta, 1)`
    is approximated by a Markov chain on ``n_states`` states: state 0 is :math:`S = 0`, state
    :math:`j` stands for :math:`S \in ((j - \tfrac12)w, (j + \tfrac12)w)` with
    :math:`w = 2h / (2m - 1)`, and every value beyond :math:`h` is absorbing (Brook & Evans
    1972, section 2). With :math:`R` the transition matrix among the transient states, the
    average run lengths from each state are :math:`(I - R)^{-1}\mathbf 1`; the value from state 0
    is returned. The discretisation error falls as ``n_states`` grows.

    ``two_sided=True`` combines the two one-sided charts by
    :math:`1/L = 1/L^+ + 1/L^-` (shift ``+delta`` for the upper chart, ``-delta`` for the lower;
    an approximation that is close when the two sums rarely are non-zero together, as for
    ``k >= 0.5``; Lucas & Crosier 1982).

    Parameters
    ----------
    shift : float, default=0.0
        Mean of the standardised estimates, ``delta`` (0: in control).
    reference, decision_interval : float
        ``k`` and ``h`` of :func:`cusum_alarms`.
    two_sided : bool, default=False
    n_states : int, default=200

    Returns
    -------
    float
        The average number of batches until an alarm.

    Examples
    --------
    >>> from probwrap.shift import cusum_run_length
    >>> round(cusum_run_length(0.0, decision_interval=4.0, two_sided=True))
    168
    """
    k = _positive(reference, "reference", allow_zero=True)
    h = _positive(decision_interval, "decision_interval")
    if not (isinstance(shift, numbers.Real) and np.isfinite(shift)):
        raise ValueError(f"`shift` must be a finite number; got {plain(shift)!r}.")
    if not (isinstance(n_states, numbers.Integral) and n_states >= 2):
        raise ValueError(f"`n_states` must be an integer >= 2; got {plain(n_states)!r}.")
    if two_sided:
        up = cusum_run_length(shift, reference=k, decision_interval=h, n_states=n_states)
        down = cusum_run_length(-shift, reference=k, decision_interval=h, n_states=n_states)
        return float(1.0 / (1.0 / up + 1.0 / down))
    m = int(n_states)
    w = 2.0 * h / (2.0 * m - 1.0)
    centre = np.arange(m) * w
    edges = (np.arange(1, m) - 0.5) * w  # lower edges of states 1..m-1
    # P(next state <= j | state i): next value centre_i + z - k below the upper edge of state j
    upper_edges = np.concatenate([edges, [h]])  # upper edges of states 0..m-1
    cdf = norm.cdf(upper_edges[None, :] - centre[:, None] + k - float(shift))
    r = np.diff(np.concatenate([np.zeros((m, 1)), cdf], axis=1), axis=1)
    arl = np.linalg.solve(np.eye(m) - r, np.ones(m))
    return float(arl[0])
