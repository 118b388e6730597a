"""The cutoff search's one-sort ordering (class packed into the lowest bit of an integer key).

Consistency tests: the packed ordering against the per-class sort-and-merge it replaces (same
cutoffs, costs, shares, bit for bit), on the awkward values (ties across classes, -0.0 beside
0.0, subnormals, exactly 0 and 1, huge margins); and the scores it cannot key exactly (a power
of two scaling that would round a tiny score) must fall back to the merge. One direct
evaluation of every cutoff checks the costs themselves.
"""

from __future__ import annotations

import numpy as np
import pytest

import probwrap.decision._cutoff as cutoff_module
from probwrap.decision import search_cutoff

TINY = np.finfo(float).tiny  # smallest normal double
SUB = 5e-324  # smallest subnormal double

SCORE_SETS = {
    "probabilities": lambda rng, n: rng.random(n),
    "probabilities, ties and both ends": lambda rng, n: rng.choice([0.0, 0.25, 0.5, 1.0], n),
    "-0.0, 0.0, subnormals, 0 and 1": lambda rng, n: rng.choice(
        [-0.0, 0.0, SUB, 2 * SUB, TINY, 0.3, 1.0], n),
    "margins": lambda rng, n: rng.normal(size=n) * 10,
    "margins with -0.0 and ties": lambda rng, n: rng.choice([-3.5, -1.0, -0.0, 0.0, 2.0, 7.0], n),
    "subnormals of both signs": lambda rng, n: rng.choice([-0.0, 0.0, -SUB, SUB, -3 * SUB], n),
    "huge": lambda rng, n: rng.choice([-1e308, -1e200, 0.0, 3e160, 1.7976931348623157e308], n),
    "all negative": lambda rng, n: -rng.random(n) * 1e300,
}


def _both(monkeypatch, s, y, costs, **kw):
    packed = search_cutoff(s, y, costs, **kw)
    with monkeypatch.context() as m:
        m.setattr(cutoff_module, "_packed_order", lambda *args: None)
        merged = search_cutoff(s, y, costs, **kw)
    return packed, merged


def _assert_identical(a, b):
    assert (a.cutoff, a.cost, a.interval, a.flat) == (b.cutoff, b.cost, b.interval, b.flat)
    for field in ("cutoffs", "costs", "flagged_share", "admissible"):
        x, z = getattr(a, field), getattr(b, field)
        assert x.shape == z.shape
        np.testing.assert_array_equal(x, z)  # exact (-0.0 and 0.0 count as equal)


@pytest.mark.parametrize("name", sorted(SCORE_SETS))
def test_packed_order_identical_to_per_class_merge(monkeypatch, name):
    rng = np.random.default_rng(len(name))
    for n in (1, 2, 7, 300):
        s = SCORE_SETS[name](rng, n)
        # the packed ordering is used (not silently the merge) for these sets
        assert cutoff_module._packed_order(s, np.zeros(n, dtype=np.intp)) is not None
        for prevalence in (0.1, 0.5, 0.9):
            y = (rng.random(n) < prevalence).astype(int)
            # non-dyadic costs: a different order of the tied rows would change the last bits
            for costs in ({"fp": 1.0, "fn": 6.0}, {"fp": 0.1, "fn": 0.7, "tp": 0.03, "tn": -0.2}):
                _assert_identical(*_both(monkeypatch, s, y, costs))
                _assert_identical(*_both(monkeypatch, s, y, costs, capacity=0.3))
            if s.min() >= 0 and s.max() <= 1:
                _assert_identical(*_both(monkeypatch, s, y, {"fp": 1.0, "fn": 3.0},
                                         score_bounds=(0, 1)))


def test_packed_order_sorts_scores_and_keeps_classes():
    rng = np.random.default_rng(3)
    for make in SCORE_SETS.values():
        s = make(rng, 500)
        y = (rng.random(500) < 0.4).astype(np.intp)
        ss, label = cutoff_module._packed_order(s, y)
        np.testing.assert_array_equal(ss, np.sort(s))
        # each distinct score keeps its count of each class, negatives first among ties
        for v in np.unique(s):
            at = ss == v
            assert np.array_equal(label[at], np.sort(y[s == v]))


@pytest.mark.parametrize("scores", [
    [SUB, 3.0, -1.0, 1e-310, 0.0],  # scaling below 2**-512 would round the subnormals
    [2.5e-308, 3.0, -1.0],  # a normal score that would become subnormal
    [-1e308, -1.0, 0.0, 3.0],  # more than 510 binary orders of magnitude apart
    [1e-323, 8.0, -1.0, 0.0],  # a subnormal that would become 0.0
])
def test_scores_that_cannot_be_keyed_exactly_fall_back_to_the_merge(scores):
    s = np.array(scores)
    y = np.arange(s.shape[0]) % 2
    assert cutoff_module._packed_order(s, y.astype(np.intp)) is None
    res = search_cutoff(s, y, {"fp": 1.0, "fn": 2.0})
    # the tiny scores stay distinct decisions: one per distinct score, plus one
    assert res.cutoffs.shape == (np.unique(s).shape[0] + 1,)


def test_packed_costs_against_direct_evaluation_of_every_cutoff():
    # Direct evaluation: the mean cost of acting on the rows with score > t, for every
    # representative cutoff t of the curve (exact sums of few small dyadic numbers, so 1e-12
    # only absorbs the division).
    rng = np.random.default_rng(11)
    s = rng.choice([-0.0, 0.0, SUB, 0.125, 0.5, 1.0], 200)
    y = (rng.random(200) < 0.3).astype(int)
    C = np.array([[0.0, 1.0], [6.0, 0.5]])
    res = search_cutoff(s, y, C, score_bounds=(0, 1))
    assert res.cutoffs.shape == (5 + 1,)  # -0.0 and 0.0 are one score
    for t, c in zip(res.cutoffs, res.costs, strict=True):
        direct = np.where(s > t, C[y, 1], C[y, 0]).mean()
        assert c == pytest.approx(direct, rel=1e-12, abs=1e-15)


@pytest.mark.parametrize("make", [
    lambda rng, n: rng.random(n),
    lambda rng, n: rng.choice(np.linspace(0, 1, 9), n),  # ties: the decision ends are kept
    lambda rng, n: rng.normal(size=n) * 3,
])
@pytest.mark.parametrize("capacity", [None, 0.2])
@pytest.mark.parametrize("y_dtype", [int, np.int8, bool])
def test_thinned_search_equals_thinning_the_full_curve(make, capacity, y_dtype):
    # Consistency: the wrapper's thinned search (cutoffs and shares computed at the kept
    # decisions only) against thinning the full curve afterwards.
    rng = np.random.default_rng(5)
    s = make(rng, 3000)
    y = (rng.random(3000) < 0.3).astype(y_dtype)
    costs = {"fp": 0.3, "fn": 2.1}
    for bounds in (None, (s.min() - 1.0, s.max() + 1.0)):
        full = search_cutoff(s, y, costs, capacity=capacity, score_bounds=bounds)
        want = cutoff_module._thin_cost_curve(full, 50)
        got = cutoff_module._search_cutoff(s, y, costs, None, capacity, bounds, max_points=50)
        _assert_identical(got, want)
        if np.unique(s).shape[0] + 1 > 50:
            assert got.costs.shape[0] < 200


def test_cumulative_costs_from_class_counts_are_exact_sums():
    # the plain path turns an integer cumulative count of positives into cumulative costs; with
    # integer costs that is exactly the sequential sum, with fractional costs it is within two
    # roundings of the exact rational sum (Python's fractions), across block boundaries
    from fractions import Fraction

    rng = np.random.default_rng(3)
    n = cutoff_module._COST_BLOCK * 2 + 17
    y = (rng.random(n) < 0.3).astype(np.int64)
    for d_neg, d_pos in ((-1.0, 10.0), (-3.0, 0.0), (-0.1, 0.7)):
        label = y.copy()
        cutoff_module._counts_to_costs(label, d_neg, d_pos)
        got = label.view(np.float64)
        if float(d_neg).is_integer() and float(d_pos).is_integer():
            np.testing.assert_array_equal(got, np.cumsum(np.where(y == 1, d_pos, d_neg)))
        pos = np.cumsum(y)
        b = cutoff_module._block_rows(n)  # rows per block: the first boundary is checked
        for j in (0, 1, b - 1, b, n - 1):
            exact = Fraction(d_neg) * int(j + 1 - pos[j]) + Fraction(d_pos) * int(pos[j])
            assert abs(Fraction(float(got[j])) - exact) <= 2 * abs(exact) * Fraction(2) ** -52


@pytest.mark.parametrize("kind", ["distinct", "mostly distinct", "few levels", "wide", "adjacent"])
def test_middles_written_in_place_match_the_general_path(kind):
    # the plain path writes the distinct scores and then their middles over one buffer, in
    # blocks (from the top down); the general path builds them in fresh arrays. Same values, on
    # more rows than one block, with ties (moved down in place or not), gaps that overflow and
    # neighbours one ulp apart
    from probwrap.decision._cutoff import _prepare, _RowCosts, _search_rows
    from probwrap.decision._cutoff_rows import _MIDDLE_BLOCK

    rng = np.random.default_rng(11)
    n = 3 * _MIDDLE_BLOCK + cutoff_module._COST_BLOCK + 5
    s = {
        "distinct": lambda: rng.random(n),
        "mostly distinct": lambda: np.round(rng.random(n), 6),  # about 0.92 n distinct
        "few levels": lambda: np.round(rng.random(n), 2),
        "wide": lambda: rng.choice([-1.7e308, -1.0, 0.0, 2.0, 1.7e308], n) * rng.random(n),
        "adjacent": lambda: 1.0 + rng.integers(0, n, n) * np.finfo(float).eps,
    }[kind]()
    y = (rng.random(n) < 0.3).astype(int)
    costs = np.array([[0.0, 1.0], [7.0, 0.0]])
    got = search_cutoff(s, y, costs)
    s2, yi, _, matrix, unit = _prepare(s, y, costs, None)
    want = _search_rows(s2, _RowCosts(matrix, yi, None), None, None)
    np.testing.assert_array_equal(got.cutoffs, want.cutoffs)
    np.testing.assert_array_equal(got.flagged_share, want.flagged_share)
    # the costs are scaled by a power of two (exact): tied rows summed in another order, and
    # sums of the scaled integer costs are exact either way
    np.testing.assert_array_equal(got.costs, want.costs * unit)
    assert (got.cutoff, got.interval, got.flat) == (want.cutoff, want.interval, want.flat)
    assert got.cutoffs.shape == (np.unique(s).shape[0] + 1,)
