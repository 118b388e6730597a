"""Compiled construction of the Venn-Abers values (optional: needs the ``compiled`` extra).

The two functions below are plain Python loops written for Numba's ``njit``; they are compiled on
first use when Numba is installed (``pip install "probwrap[compiled]"``) and never run as Python
loops by the library (``VennAbersMap`` then uses the vectorised NumPy construction in
``_venn_abers.py``). Both constructions evaluate the same comparisons and the same final slope
formula on the same vertices, so their outputs are bit-identical (a consistency test checks this
on many inputs with ties, weights and one to three rows).

The compiled kernel is cached on disk by Numba (``cache=True``): next to this file when that
folder is writable, otherwise in the user's cache folder (Numba's own rule; ``NUMBA_CACHE_DIR``
overrides it), so a read-only installation is never written to.
"""

from __future__ import annotations

import numpy as np


def hull_links(cx: np.ndarray, cy: np.ndarray, prev: np.ndarray, succ: np.ndarray) -> None:
    """Fill ``prev`` and ``succ``: the prefix and suffix lower-hull links (see _venn_abers).

    An empty ``prev`` is left empty (the compiled walk keeps the prefix hull as a stack).
    """
    n = cx.shape[0]
    stack = np.empty(n, dtype=succ.dtype)
    top = 0  # number of entries on the stack
    for i in range(n if prev.shape[0] > 0 else 0):
        xi, yi = cx[i], cy[i]
        while top >= 2:
            o, a = stack[top - 2], stack[top - 1]
            # drop a unless o -> a -> i turns counter-clockwise (strictly convex from below)
            if (cx[a] - cx[o]) * (yi - cy[o]) - (cy[a] - cy[o]) * (xi - cx[o]) <= 0:
                top -= 1
            else:
                break
        prev[i] = stack[top - 1] if top > 0 else i
        stack[top] = i
        top += 1
    top = 0
    for k in range(n - 1, -1, -1):
        xk, yk = cx[k], cy[k]
        while top >= 2:
            b, a = stack[top - 2], stack[top - 1]
            # keep a only if k -> a -> b turns counter-clockwise
            if (cx[a] - xk) * (cy[b] - yk) - (cy[a] - yk) * (cx[b] - xk) <= 0:
                top -= 1
            else:
                break
        succ[k] = stack[top - 1] if top > 0 else k
        stack[top] = k
        top += 1


def insertion_values(
    cx: np.ndarray,
    cy: np.ndarray,
    succ: np.ndarray,
    test_weight: float,
    budget: int,
    out: np.ndarray,
) -> int:
    """All four insertion values by walking the hulls; the number of steps, or -1 past ``budget``.

    ``out[0]``, ``out[1]``: p0 and p1 in each gap (``m + 1`` entries, left end = right start =
    gap); ``out[2]``, ``out[3]``: p0 and p1 at each distinct score (``m`` entries, left end =
    score, right start = score + 1; the last entry of those rows is unused). One pass from left
    to right keeps the prefix hull as a stack (the same scan and test as ``hull_links``; its
    entries are the ``prev`` chain), so no ``prev`` array is stored; ``succ`` comes from
    ``hull_links``. For each insertion the bridge between the prefix hull and the shifted suffix
    hull (followed by ``succ`` from the right start) is found by the same two tests as the NumPy
    construction: the touching vertex on the right is the first along the hull where the slope
    from the left vertex stops falling; the left vertex is the first, walking left, whose
    incoming edge is not steeper than its tangent. Each walk step counts against ``budget``: data whose hulls make
    the walks long return -1 and the caller uses the NumPy construction (O(log^2 m) per insertion).
    """
    m = cx.shape[0] - 1
    steps = 0
    # the prefix hull is short on ordinary data: a stack that doubles when full
    stack = np.empty(min(m + 1, 1024), dtype=succ.dtype)
    top = 0
    for j in range(m + 1):
        xj, yj = cx[j], cy[j]
        while top >= 2:
            o, a = stack[top - 2], stack[top - 1]
            if (cx[a] - cx[o]) * (yj - cy[o]) - (cy[a] - cy[o]) * (xj - cx[o]) <= 0:
                top -= 1
            else:
                break
        if top == stack.shape[0]:
            grown = np.empty(2 * top, dtype=stack.dtype)
            grown[:top] = stack
            stack = grown
        stack[top] = j
        top += 1
        for kind in range(4):
            tie = 1 if kind >= 2 else 0
            if tie == 1 and j == m:
                break
            shift = test_weight if kind % 2 == 1 else 0.0  # label 1 or 0 times the weight
            ia = top - 1  # the left vertex: stack[ia], the one before it stack[ia - 1]
            a = j
            while True:
                # the right hull's vertex touched by the tangent from a: the first, from the
                # right start, where the slope stops falling (restarted for each a, as the NumPy
                # construction does: where rounding makes the slopes along a straight stretch of
                # the hull wobble, resuming from the last touch could stop elsewhere)
                b = j + tie
                while True:
                    nb = succ[b]
                    here = ((cy[b] - cy[a]) + shift) / ((cx[b] - cx[a]) + test_weight)
                    there = ((cy[nb] - cy[a]) + shift) / ((cx[nb] - cx[a]) + test_weight)
                    if there < here:
                        b = nb
                        steps += 1
                    else:
                        break
                slope = ((cy[b] - cy[a]) + shift) / ((cx[b] - cx[a]) + test_weight)
                if a == 0:
                    break
                p = stack[ia - 1]
                dx = cx[a] - cx[p]
                # two vertices can share one rounded cx next to a huge weight: a vertical edge
                edge = (cy[a] - cy[p]) / dx if dx > 0 else np.inf
                if edge > slope:
                    ia -= 1
                    a = p
                    steps += 1
                else:
                    break
            out[kind, j] = min(max(slope, 0.0), 1.0)
        if steps > budget:
            return -1
    return steps


_COMPILED: list = []


def compiled():
    """The two functions compiled by Numba, or None when Numba is not installed."""
    if not _COMPILED:
        try:
            import numba
        except ImportError:
            _COMPILED.append(None)
        else:
            jit = numba.njit(cache=True, nogil=True)
            _COMPILED.append((jit(hull_links), jit(insertion_values)))
    return _COMPILED[0]
