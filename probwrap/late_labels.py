"""Labels that arrive late: outcomes "by horizon h" from rows that are still being observed.

Damage claims, chargebacks and defaults become known only after a delay. For the outcome
"the event happened within ``horizon`` of the row's start", a row is

- **positive** when its event was seen at a time ``T <= horizon``;
- **negative** when it has been observed for longer than ``horizon`` without the event;
- **open** when it has been observed for less than ``horizon`` and nothing has happened yet:
  its outcome is unknown. Counting it as negative biases every estimate toward "no event";
  dropping it biases toward older rows.

:func:`labels_at_horizon` gives every row a 0/1 label and an inverse-probability-of-censoring
weight (IPCW; Graf, Schmoor, Sauerbrei & Schumacher 1999, Statistics in Medicine 18:2529–2545,
eq. 6; the left limit ``G(T-)`` as in Gerds & Schumacher 2006): ``1 / G(T-)`` for a positive,
``1 / G(horizon)`` for a negative and 0 for an open row, where ``G`` is the Kaplan–Meier
estimate of the probability of still being observed (the censoring distribution). Those weights
go through the ``sample_weight`` of every map, cutoff search, metric, prior-shift estimate and
report unchanged. Because ``G`` is the Kaplan–Meier estimate, the weights sum to the number of
rows exactly and the weighted share of positives *is* the Kaplan–Meier estimate of
``P(T <= horizon)`` (Satten & Datta 2001, The American Statistician 55:207–210).

Assumption: whether a row is still open does not depend on its outcome or its features (for
example, open rows are simply the most recent ones, in a stable population). Weights are then
importance weights, not frequencies: they sum to the number of rows, but their Kish effective
size is smaller.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from ._validation import check_sample_weight, plain

__all__ = ["HorizonLabels", "censoring_survival", "labels_at_horizon"]


@dataclass(frozen=True)
class HorizonLabels:
    """Outcome "event within ``horizon``" with inverse-probability-of-censoring weights.

    Attributes
    ----------
    y : ndarray of int of shape (n,)
        1 when the event was seen within ``horizon``; 0 otherwise (open rows too, which carry
        weight 0).
    sample_weight : ndarray of shape (n,)
        IPCW weights (times any weights given); 0 for open rows.
    is_open : ndarray of bool of shape (n,)
        Rows observed for less than ``horizon`` without the event: outcome not known yet.
    open_share : float
        (Weighted) share of open rows.
    horizon : float
        The horizon.
    times, still_observed : ndarray
        The Kaplan–Meier estimate of the censoring distribution: ``G(t) = still_observed[i]``
        for ``times[i] <= t < times[i + 1]`` (1 before the first time).
    """

    y: np.ndarray
    sample_weight: np.ndarray
    is_open: np.ndarray
    open_share: float
    horizon: float
    times: np.ndarray
    still_observed: np.ndarray

    def still_observed_at(self, t: Any, *, left: bool = False) -> np.ndarray:
        """``G(t)`` (or its left limit ``G(t-)`` with ``left=True``) at the times ``t``."""
        idx = np.searchsorted(self.times, np.asarray(t, dtype=float),
                              side="left" if left else "right")
        return np.concatenate([[1.0], self.still_observed])[idx]


def _check_time_event(time: Any, event: Any) -> tuple[np.ndarray, np.ndarray]:
    t = np.asarray(time, dtype=float)
    if t.ndim != 1:
        raise ValueError(f"`time` must be 1-d of shape (n,); got shape {t.shape}.")
    if t.shape[0] == 0:
        raise ValueError("`time` is empty; give at least one row.")
    if not np.all(np.isfinite(t)):
        raise ValueError("`time` contains NaN or infinite values; give each row's observed time.")
    if np.any(t < 0):
        raise ValueError(f"`time` must be non-negative; got a minimum of {float(t.min()):.6g}.")
    e = np.asarray(event)
    if e.shape != t.shape:
        raise ValueError(f"`event` must have the shape of `time` {t.shape}; got {e.shape}.")
    if e.dtype.kind == "b":
        e = e.astype(np.int8)
    if e.dtype.kind not in "iuf" or not np.all((e == 0) | (e == 1)):
        seen = sorted({repr(plain(v)) for v in e.tolist()})[:5]
        raise ValueError(
            "`event` must be 1 (the event happened at `time`) or 0 (still event-free at "
            f"`time`, observation ends there); got values {', '.join(seen)}."
        )
    return t, e.astype(bool)


def censoring_survival(
    time: Any, event: Any, *, sample_weight: Any = None
) -> tuple[np.ndarray, np.ndarray]:
    """Kaplan–Meier estimate of the probability of still being observed, ``G(t)``.

    The "failures" here are the ends of observation without the event (``event == 0``). At a
    time shared by events and ends of observation, the events are taken to come first (the
    usual convention, which makes the IPCW weights of :func:`labels_at_horizon` reproduce the
    Kaplan–Meier estimate of the event distribution exactly).

    Parameters
    ----------
    time : array-like of shape (n,)
        Time each row has been observed: until its event, or until now.
    event : array-like of shape (n,)
        1 when the event happened at ``time``, 0 when the row was still event-free then.
    sample_weight : array-like of shape (n,), default=None
        Row frequencies.

    Returns
    -------
    times : ndarray
        The distinct times at which observation ended without an event, ascending.
    still_observed : ndarray
        ``G`` just after each of ``times``.

    Examples
    --------
    >>> from probwrap.late_labels import censoring_survival
    >>> times, g = censoring_survival([1, 2, 2, 3, 4], [1, 0, 1, 0, 1])
    >>> times.tolist(), g.round(4).tolist()
    ([2.0, 3.0], [0.6667, 0.3333])
    """
    t, e = _check_time_event(time, event)
    w = np.ones(t.shape[0]) if sample_weight is None else check_sample_weight(
        sample_weight, t.shape[0])
    uniq, inv = np.unique(t, return_inverse=True)
    ends = np.bincount(inv, weights=w * ~e, minlength=uniq.shape[0])
    events = np.bincount(inv, weights=w * e, minlength=uniq.shape[0])
    leaving = ends + events
    at_risk = np.cumsum(leaving[::-1])[::-1]  # weight with time >= u
    # events first at tied times: they are no longer at risk of an end of observation
    risk_for_end = at_risk - events
    keep = ends > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        factor = np.where(risk_for_end[keep] > 0, 1.0 - ends[keep] / risk_for_end[keep], 0.0)
    return uniq[keep], np.cumprod(factor)


def labels_at_horizon(
    time: Any, event: Any, horizon: float, *, sample_weight: Any = None
) -> HorizonLabels:
    """Labels "event within ``horizon``" and the weights that correct for rows still open.

    Parameters
    ----------
    time : array-like of shape (n,)
        How long each row has been observed: until its event, or until now.
    event : array-like of shape (n,)
        1 when the event happened at ``time``, 0 when the row was still event-free at ``time``.
    horizon : float
        The outcome is "the event happened within ``horizon``" (same unit as ``time``).
    sample_weight : array-like of shape (n,), default=None
        Row frequencies; the IPCW weights multiply them.

    Returns
    -------
    HorizonLabels
        Pass ``y`` and ``sample_weight`` to any probwrap fit, metric or report in place of the
        labels and weights.

    Raises
    ------
    ValueError
        When every row is still open, or ``G(horizon) = 0`` (nobody observed for ``horizon``
        that long without the event, for instance a horizon at or beyond the longest time
        observed): the outcome cannot be estimated.

    Examples
    --------
    >>> from probwrap.late_labels import labels_at_horizon
    >>> hl = labels_at_horizon([5, 40, 12, 31, 3], [1, 0, 0, 0, 0], horizon=30)
    >>> hl.y.tolist(), hl.sample_weight.round(4).tolist(), hl.is_open.tolist()
    ([1, 0, 0, 0, 0], [1.25, 1.875, 0.0, 1.875, 0.0], [False, False, True, False, True])
    """
    t, e = _check_time_event(time, event)
    try:
        h = float(horizon)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"`horizon` must be a positive number; got {plain(horizon)!r}.") from exc
    if not (np.isfinite(h) and h > 0):
        raise ValueError(f"`horizon` must be a positive number; got {plain(horizon)!r}.")
    w = np.ones(t.shape[0]) if sample_weight is None else check_sample_weight(
        sample_weight, t.shape[0])
    times, g = censoring_survival(t, e, sample_weight=w)
    g_ext = np.concatenate([[1.0], g])
    positive = e & (t <= h)
    negative = t > h
    is_open = ~positive & ~negative
    g_minus = g_ext[np.searchsorted(times, t, side="left")]   # G(T-)
    g_h = float(g_ext[np.searchsorted(times, h, side="right")])  # G(h)
    if not np.any((positive | negative) & (w > 0)):
        raise ValueError(
            f"Every row is still open at `horizon`={h:g} (observed for less than that without "
            "the event); no outcome can be estimated yet."
        )
    if np.any(negative & (w > 0)) and g_h <= 0:
        raise ValueError(
            f"No row was observed for `horizon`={h:g} without the event while others were; "
            "the probability of still being observed is 0 there. Choose a shorter horizon."
        )
    if g_h <= 0:
        # nobody is known to be event-free at the horizon: every known outcome would be an
        # event, and the share of rows still observed there is 0
        raise ValueError(
            f"No row was observed beyond `horizon`={h:g} without the event (the longest time "
            f"observed is {float(t[w > 0].max()):g}); the outcome 'event within the horizon' "
            "cannot be estimated there. Choose a shorter horizon."
        )
    ipcw = np.zeros(t.shape[0])
    ipcw[positive] = 1.0 / g_minus[positive]
    ipcw[negative] = 1.0 / g_h
    return HorizonLabels(
        y=positive.astype(np.intp),
        sample_weight=w * ipcw,
        is_open=is_open,
        open_share=float(w[is_open].sum() / w.sum()),
        horizon=h,
        times=times,
        still_observed=g,
    )
