"""Axis arithmetic of the report's SVG charts: "nice" tick values and their labels, and the
mapping between data values and pixel coordinates (both ways)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from .._validation import plain

__all__ = ["nice_ticks", "format_ticks", "data_to_pixel", "pixel_to_data"]


def nice_ticks(low: float, high: float, target: int = 5) -> np.ndarray:
    """Round tick values covering ``[low, high]``: steps of 1, 2, 2.5 or 5 times a power of 10.

    Parameters
    ----------
    low, high : float
        The axis limits (``low < high``).
    target : int, default=5
        Rough number of intervals wanted.

    Returns
    -------
    ndarray
        Ascending tick values inside ``[low, high]`` (ends included up to rounding).

    Examples
    --------
    >>> nice_ticks(0.0, 1.0).tolist()
    [0.0, 0.2, 0.4, 0.6, 0.8, 1.0]
    >>> nice_ticks(-0.013, 0.061).tolist()
    [0.0, 0.02, 0.04, 0.06]
    >>> nice_ticks(0, 1370).tolist()
    [0.0, 500.0, 1000.0]
    """
    low, high = float(low), float(high)
    if not (math.isfinite(low) and math.isfinite(high)) or high <= low:
        raise ValueError(f"nice_ticks needs finite low < high; got {plain(low)!r}, {plain(high)!r}.")
    raw = (high - low) / max(int(target), 1)
    power = 10.0 ** math.floor(math.log10(raw))
    step = next(m * power for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * power >= raw * (1 - 1e-9))
    first = math.ceil(low / step - 1e-9)
    last = math.floor(high / step + 1e-9)
    ticks = np.arange(first, last + 1) * step
    digits = max(0, -math.floor(math.log10(step)) + (1 if step / power == 2.5 else 0))
    # floats of magnitude 2**52 and above have no fraction to round (and rounding them to
    # decimals multiplies by a power of ten, which overflows for axes near the largest float)
    whole = np.abs(ticks) >= 2.0**52
    ticks = np.where(whole, ticks, np.round(np.where(whole, 0.0, ticks), digits + 2))
    return ticks + 0.0  # + 0.0 turns -0.0 into 0.0


def format_ticks(ticks: Any) -> list[str]:
    """Tick labels with just enough decimals to tell equally spaced ticks apart.

    Examples
    --------
    >>> format_ticks([0.0, 0.25, 0.5])
    ['0', '0.25', '0.5']
    >>> format_ticks([0, 500, 1000])
    ['0', '500', '1000']
    >>> format_ticks([0.0, 2e307, 4e307])
    ['0', '2e+307', '4e+307']
    """
    t = np.asarray(ticks, dtype=float)
    if t.size == 0:
        return []
    top = float(np.abs(t).max())
    if top >= 1e7:  # large values in exponent form: as few significant digits as tell them apart
        tol = 1e-9 * top
        for digits in range(1, 18):
            labels = [f"{v:.{digits}g}" for v in t]
            if np.allclose([float(s) for s in labels], t, rtol=0, atol=tol):
                return labels
    for digits in range(0, 7):
        labels = [f"{v:.{digits}f}" for v in t]
        tol = 1e-9 * max(1.0, float(np.abs(t).max()))
        if np.allclose([float(s) for s in labels], t, rtol=0, atol=tol):
            break
    out = []
    for s in labels:
        if "." in s:
            s = s.rstrip("0").rstrip(".")
        out.append("0" if s in ("-0", "") else s)
    return out


def data_to_pixel(values: Any, lim: tuple[float, float], start: float, length: float,
                  *, flip: bool = False) -> np.ndarray:
    """Map data values onto pixels along one axis (vectorised; NaN stays NaN).

    ``flip=True`` for a y axis, whose pixels grow downwards.

    Examples
    --------
    >>> data_to_pixel([0.0, 0.5, 1.0], (0.0, 1.0), 10.0, 100.0).tolist()
    [10.0, 60.0, 110.0]
    >>> data_to_pixel([0.0, 1.0], (0.0, 1.0), 10.0, 100.0, flip=True).tolist()
    [110.0, 10.0]
    """
    v = np.asarray(values, dtype=float)
    frac = (v - lim[0]) / (lim[1] - lim[0])
    if flip:
        frac = 1.0 - frac
    return start + frac * length


def pixel_to_data(pixels: Any, lim: tuple[float, float], start: float, length: float,
                  *, flip: bool = False) -> np.ndarray:
    """Inverse of :func:`data_to_pixel`.

    Examples
    --------
    >>> pixel_to_data([110.0, 10.0], (0.0, 1.0), 10.0, 100.0, flip=True).tolist()
    [0.0, 1.0]
    """
    frac = (np.asarray(pixels, dtype=float) - start) / length
    if flip:
        frac = 1.0 - frac
    return lim[0] + frac * (lim[1] - lim[0])
