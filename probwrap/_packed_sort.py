"""Score order with the classes, from one plain sort of packed 64-bit keys.

Shared by the cutoff search (``probwrap.decision``) and the isotonic fit
(``probwrap.calibration``): both need the scores in ascending order together with the class of
each row, and neither needs the rows' original positions, so no index sort is needed.
"""

from __future__ import annotations

import numpy as np

__all__ = ["packed_order"]

_MAGNITUDE = np.int64(0x7FFF_FFFF_FFFF_FFFF)
_HALF_RANGE = np.int64(511 << 52)  # bit pattern of 2.0**-512: scaled scores stay below it
_DECODE_BLOCK = 1 << 14  # entries per block when the sorted keys are turned back into scores


def _subnormals_compare() -> bool:
    """Whether the CPU compares subnormal doubles as themselves (no denormals-are-zero mode)."""
    return bool(np.array(5e-324) > np.array(0.0))


def packed_order(
    s: np.ndarray, y: np.ndarray, label_out: np.ndarray | None = None,
    key_out: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray] | None:
    """The scores in ascending order and their classes (0/1, intp), from ONE plain sort.

    Each row becomes one 64-bit key, order-preserving in the score, that carries the class in
    its lowest bit, so one ``np.sort`` of the keys (the fast sort: no index) orders the rows by
    score, with the negatives before the positives among tied scores (the order of the two-run
    merge, so the cumulative sums are the same). The keys are exact:

    * scores in [0, 1.5) (probabilities): the IEEE bit pattern of a non-negative double is
      order-preserving as an integer and below ``2**62``, so ``(bits << 1) | class`` fits 63 bits
      (the shift drops the sign bit of -0.0: it keys as 0.0, the score it equals);
    * any other scores are first scaled by a power of two into ``(-2**-512, 2**-512)`` (exact
      unless a nonzero score would fall below the smallest normal double, which happens only
      when the scores span more than about 510 binary orders of magnitude: then None is
      returned and the caller merges per class), -0.0 is made 0.0, the bit pattern is mapped to
      an order-preserving signed integer (magnitude bits flipped for negatives) and shifted to
      be non-negative; twice that plus the class is again below ``0x7FF0 << 48``.

    The classes ``y`` are intp or one-byte 0/1 codes; they are returned as int64 0/1, written
    into ``label_out`` (int64, shape (n,)) when it is given; the keys, and then the sorted
    scores, are written into ``key_out[:n]`` (int64, at least n entries) when it is given.
    Either way the keys, read as doubles, are finite and non-negative, whose order as doubles
    is their order as integers; NumPy sorts doubles faster than integers, so they are sorted as
    doubles (as integers if the CPU flushes subnormals to zero in comparisons). Returns None
    when the scores cannot be keyed exactly or the platform is not 64-bit IEEE.
    """
    small = y.dtype.itemsize == 1 and y.dtype.kind in "iu"
    if s.dtype != np.float64 or not (small or y.dtype == np.intp) or np.dtype(np.intp).itemsize != 8:
        return None
    lo, hi = float(s.min()), float(s.max())
    as_doubles = _subnormals_compare()
    n = s.shape[0]
    key = np.empty(n, dtype=np.int64) if key_out is None else key_out[:n]
    if lo >= 0.0 and hi < 1.5:
        np.left_shift(s.view(np.uint64), np.uint64(1), out=key.view(np.uint64))
        key |= y
        key.view(np.float64).sort() if as_doubles else key.sort()
        label = np.bitwise_and(key, np.int64(1), out=label_out)
        key >>= np.int64(1)
        return key.view(np.float64), label
    # big * 2**k < 2**-512; k in [-1536, 561], applied as two representable powers of two
    k = -512 - int(np.frexp(max(-lo, hi))[1])
    steps = [float(np.ldexp(1.0, p)) for p in (max(k, -1000), k - max(k, -1000))]
    v = np.multiply(s, steps[0], out=key.view(np.float64))
    if steps[1] != 1.0:
        v *= steps[1]
    v += 0.0  # -0.0 + 0.0 is 0.0; every other value is unchanged
    del v
    # (the labels' buffer, if given, is free until after the sort: no fresh temporary)
    flip = np.right_shift(key, np.int64(63), out=label_out)  # -1 for negative scores, else 0
    flip &= _MAGNITUDE
    key ^= flip  # order-preserving: negatives become -(magnitude) - 1
    del flip
    key += _HALF_RANGE  # now in [0, 2**62 - 2**53)
    key <<= np.int64(1)
    key |= y
    key.view(np.float64).sort() if as_doubles else key.sort()
    # a scaled score below the smallest normal double may have been rounded: any key of a
    # nonzero subnormal, or more zeros after scaling than before, leaves the order unproven,
    # and such scores are left to the exact merge
    zero = 2 * int(_HALF_RANGE)
    first, zeros, past_zeros, past = np.searchsorted(
        key, [zero - 2**53, zero, zero + 2, zero + 2**53 + 2], side="left"
    )
    n_zero = int(past_zeros - zeros)
    if int(past - first) > n_zero or (n_zero and n_zero != int(np.count_nonzero(s == 0.0))):
        return None
    label = np.bitwise_and(key, np.int64(1), out=label_out)
    ss = key.view(np.float64)
    # back to the scores block by block (the same operations on every entry; the blocks stay
    # in cache and need no temporary as long as the rows, whose page faults cost about half a
    # sort at 1e5 rows)
    block = max(1, min(n, _DECODE_BLOCK))
    flip = np.empty(block, dtype=np.int64)
    for i in range(0, n, block):
        part = key[i:i + block]
        f = flip[:part.shape[0]]
        part >>= np.int64(1)
        part -= _HALF_RANGE
        np.right_shift(part, np.int64(63), out=f)
        f &= _MAGNITUDE
        part ^= f
        values = ss[i:i + block]
        for step in reversed(steps):  # exact powers of two, back to the original finite values
            if step != 1.0:
                values *= 1.0 / step
    return ss, label
