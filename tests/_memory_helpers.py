"""Traced peak memory of one call, robust to other threads.

``tracemalloc`` counts every Python-level allocation of the process, including those of the
threads pytest-xdist's worker runs beside the test (its channel to the controller). One such
burst (274 kB once in CI, while the call itself allocates under 1 kB) can land inside the
measured window, so the peak is taken as the smallest over a few repeats: a row-long
temporary of the call itself is in every repeat, a burst from another thread is not.
"""

from __future__ import annotations

import tracemalloc
from collections.abc import Callable
from typing import Any


def traced_peak(fn: Callable[[], Any], repeats: int = 3) -> tuple[int, Any]:
    """(smallest traced peak in bytes over ``repeats`` calls of ``fn``, the last result)."""
    peaks, out = [], None
    for _ in range(repeats):
        tracemalloc.start()
        try:
            out = fn()
            peaks.append(tracemalloc.get_traced_memory()[1])
        finally:
            tracemalloc.stop()
    return min(peaks), out
