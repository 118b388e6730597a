"""The two Venn-Abers constructions (compiled walk, NumPy binary lifting): consistency tests.

The compiled path needs the ``compiled`` extra (Numba), which the test extra installs, so both
CI environments run these tests. The values themselves are checked against scikit-learn's
isotonic regression refitted per test point in tests/test_maps_reference.py and
tests/test_performance_paths.py (those run the compiled path when Numba is installed).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import expit
from sklearn.isotonic import IsotonicRegression

from probwrap.calibration import VennAbersMap
from probwrap.calibration import _venn_abers as va
from probwrap.calibration._isotonic import _pool_ties

pytest.importorskip("numba")  # the test extra installs it: CI never skips this file


def _diagram(s, y, w):
    _, weight, label_sum = _pool_ties(s, y, w)
    return (np.concatenate([[0.0], np.cumsum(weight)]),
            np.concatenate([[0.0], np.cumsum(label_sum)]))


def _draw(rng, kind):
    n = int(rng.integers(1, 4)) if kind == 0 else int(rng.integers(1, 60))
    s = rng.integers(0, 6, n).astype(float) if kind in (0, 1, 3) else rng.normal(size=n)
    y = (rng.random(n) < rng.choice([0.05, 0.5, 0.95])).astype(float)
    if kind == 3:
        w = rng.integers(1, 5, n).astype(float)  # integer frequencies
    elif kind == 4:
        w = 10.0 ** rng.integers(-3, 4, n)  # weights over six orders of magnitude
    elif kind == 5:
        w = 2.0 ** rng.integers(-6, 6, n)  # dyadic weights
    else:
        w = np.ones(n)
    return s, y, w


def test_compiled_and_numpy_constructions_agree_bit_for_bit():
    rng = np.random.default_rng(20261203)
    for trial in range(400):
        s, y, w = _draw(rng, trial % 6)
        test_weight = 1.0 if trial % 4 else float(2.0 ** rng.integers(-3, 3))
        cx, cy = _diagram(s, y, w)
        fast = va._insertion_table(cx, cy, test_weight, compiled=True)
        numpy = va._insertion_table(cx, cy, test_weight, compiled=False)
        for a, b in zip(fast, numpy, strict=True):
            np.testing.assert_array_equal(a, b)


def test_compiled_and_numpy_constructions_agree_to_the_last_bits_under_real_weights():
    # With non-integer weights a stretch of the hull that is straight in exact arithmetic (a run
    # of rows of one class) has slopes that wobble by an ulp; the walk (first stop along the
    # hull) and binary lifting can then stop at different vertices of that stretch. Measured:
    # 3 of 20,000 such draws differ, by at most 2 ulp; 4 ulp is the bound asserted.
    rng = np.random.default_rng(7)
    for _ in range(200):
        n = int(rng.integers(1, 60))
        s = rng.normal(size=n)
        y = (rng.random(n) < rng.choice([0.05, 0.5, 0.95])).astype(float)
        cx, cy = _diagram(s, y, rng.random(n) * 3)
        fast = va._insertion_table(cx, cy, 1.0, compiled=True)
        numpy = va._insertion_table(cx, cy, 1.0, compiled=False)
        for a, b in zip(fast, numpy, strict=True):
            np.testing.assert_array_max_ulp(a, b, maxulp=4)


def _long_walk_data(k):
    # Group means rising along a convex cumulative sum diagram, then one heavy group of negatives
    # with the highest score: every insertion's bridge reaches far to the left, so the walks grow
    # with the number of groups (quadratic in all) and the compiled path must hand over.
    i = np.arange(k, dtype=float)
    q = (i + 1) / (k + 1)
    s = np.concatenate([i, i, [k + 1.0]])
    y = np.concatenate([np.zeros(k), np.ones(k), [0.0]])
    w = np.concatenate([1 - q, q, [10.0 * k]])
    return s, y, w


def test_long_walks_hand_over_to_the_numpy_construction():
    s, y, w = _long_walk_data(300)
    cx, cy = _diagram(s, y, w)
    hull_links, walk = va._venn_abers_loops.compiled()
    m = cx.shape[0] - 1
    succ = np.empty(m + 1, dtype=np.int64)
    hull_links(cx, cy, np.empty(0, dtype=np.int64), succ)
    out = np.empty((4, m + 1))
    budget = va._WALK_BUDGET * 4 * (m + 1) + 4096
    assert walk(cx, cy, succ, 1.0, budget, out) == -1  # the budget is what stops it here
    handed = va._insertion_table(cx, cy, 1.0)
    for a, b, c in zip(handed, va._insertion_table(cx, cy, 1.0, compiled=False),
                       va._insertion_table(cx, cy, 1.0, compiled=True), strict=True):
        np.testing.assert_array_equal(a, b)
        np.testing.assert_array_equal(a, c)
    # and the fitted map on these rows against scikit-learn refitted with each test point
    # (Vovk, Petej & Fedorova 2015, the definition); 1e-12: summation order inside the two PAVs
    fitted = VennAbersMap().fit(s, y, sample_weight=w)
    for t in (-1.0, 0.0, 37.5, 150.0, 299.0, 299.5, 301.0, 302.0):
        pair = [
            IsotonicRegression(y_min=0, y_max=1).fit(
                np.append(s, t), np.append(y, label), sample_weight=np.append(w, 1.0)
            ).predict([t])[0]
            for label in (0.0, 1.0)
        ]
        np.testing.assert_allclose(fitted.predict_interval([t])[0], pair, atol=1e-12)


def test_fit_without_numba_gives_the_same_map(monkeypatch):
    rng = np.random.default_rng(3)
    s = np.round(rng.normal(size=2000) * 2, 2)
    y = (rng.random(2000) < expit(s)).astype(float)
    fast = VennAbersMap().fit(s, y)
    monkeypatch.setattr(va._venn_abers_loops, "_COMPILED", [None])  # as if Numba were absent
    slow = VennAbersMap().fit(s, y)
    for name in ("thresholds_", "p0_at_", "p1_at_", "p0_between_", "p1_between_"):
        np.testing.assert_array_equal(getattr(fast, name), getattr(slow, name))
    with pytest.raises(ImportError, match="needs Numba"):
        va._insertion_table(np.zeros(2), np.zeros(2), 1.0, compiled=True)
