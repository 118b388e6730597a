"""Decision functions at numeric edges: huge costs, huge savings, offsets that underflow.

Most checks rest on a mathematical identity: the least-expected-cost rule is unchanged when the
whole cost matrix is multiplied by a positive constant (and the mean cost is multiplied by it),
so a search with costs near the largest double must agree with the same search on small costs.
"""

from __future__ import annotations

import numpy as np
import pytest

from probwrap.decision import (
    apply_class_offsets,
    budget_actions,
    capacity_cutoff,
    cutoff_interval,
    fit_action_budget,
    plugin_cutoff,
    search_cutoff,
    tune_class_offsets,
)


def _held_out(n=400, seed=0):
    rng = np.random.default_rng(seed)
    p = rng.uniform(size=n)
    y = (rng.uniform(size=n) < p).astype(int)
    return p, y


@pytest.mark.parametrize("unit", [1e308, 2.0**1023, 1e-300, 5e-324])
def test_cutoff_search_is_invariant_to_scaling_the_costs(unit):
    p, y = _held_out()
    small = search_cutoff(p, y, {"fp": 1.0, "fn": 4.0}, score_bounds=(0, 1))
    # fp : fn = 1 : 4 as for `small`; 5e-324 * 4 is still exact (a multiple of the smallest
    # denormal), 1e308 / 4 is exact in binary up to rounding of the one entry
    huge = search_cutoff(p, y, {"fp": unit / 4 if unit > 1 else unit, "fn": unit if unit > 1
                                else 4 * unit}, score_bounds=(0, 1))
    assert huge.cutoff == small.cutoff
    assert huge.interval == small.interval
    assert np.isfinite(huge.costs).all()
    scale = unit / 4 if unit > 1 else unit
    np.testing.assert_allclose(huge.costs, small.costs * scale, rtol=1e-12)


def test_huge_cost_gives_the_plug_in_cutoff_on_calibrated_scores():
    # Elkan (2001): on calibrated probabilities the least-cost cutoff is fp / (fp + fn) = 0.2.
    # With many rows of calibrated scores the empirical search lands near it; with 1e308 the
    # old cumulative sums overflowed and the search returned 0.5.
    p, y = _held_out(n=20_000, seed=3)
    assert plugin_cutoff({"fp": 2.5e307, "fn": 1e308}) == pytest.approx(0.2)
    res = search_cutoff(p, y, {"fp": 2.5e307, "fn": 1e308}, score_bounds=(0, 1))
    assert abs(res.cutoff - 0.2) < 0.05


def test_huge_per_row_costs_and_weights():
    p, y = _held_out(seed=1)
    rng = np.random.default_rng(5)
    amounts = rng.uniform(1, 10, size=p.shape[0])
    row_costs = np.zeros((p.shape[0], 2, 2))
    row_costs[:, 0, 1] = 1.0
    row_costs[:, 1, 0] = amounts
    w = rng.uniform(0.5, 2.0, size=p.shape[0])
    small = search_cutoff(p, y, row_costs, sample_weight=w, score_bounds=(0, 1))
    big = search_cutoff(p, y, row_costs * 2.0**1000, sample_weight=w * 2.0**1000,
                        score_bounds=(0, 1))
    assert big.cutoff == small.cutoff
    np.testing.assert_allclose(big.costs, small.costs * 2.0**1000, rtol=1e-12)
    np.testing.assert_array_equal(big.flagged_share, small.flagged_share)


def test_capacity_cutoff_and_interval_with_overflowing_weights():
    p, y = _held_out(seed=2)
    w = np.full(p.shape[0], 1e307)
    assert capacity_cutoff(p, 0.3, sample_weight=w) == capacity_cutoff(p, 0.3)
    ci = cutoff_interval(p, y, {"fp": 1.0, "fn": 3.0}, sample_weight=w, score_bounds=(0, 1),
                         n_resamples=20, random_state=0)
    ref = cutoff_interval(p, y, {"fp": 1.0, "fn": 3.0}, score_bounds=(0, 1), n_resamples=20,
                          random_state=0)
    assert (ci.low, ci.high) == (ref.low, ref.high)


def test_action_budget_never_exceeds_its_share_with_a_huge_saving():
    # one row saves 1e200 by taking action 1; with a budget of 20% of 4 rows, no row fits
    E = np.array([[0.0, 0.1], [1.5, 3.5], [1.5, 2.1], [0.1, -1e200]])
    budget = fit_action_budget(E, 1, 0.2)
    taken = budget_actions(E, 1, budget.saving_threshold) == 1
    assert taken.mean() <= 0.2
    assert budget.share == taken.mean() == 0.0


def test_action_budget_threshold_between_adjacent_savings():
    # savings 1 and the next double above 1: the midpoint rounds onto 1, which would keep both
    nxt = np.nextafter(1.0, 2.0)
    E = np.array([[1.0, 0.0], [nxt, 0.0], [0.0, 1.0], [0.0, 1.0]])
    budget = fit_action_budget(E, 1, 0.25)
    taken = budget_actions(E, 1, budget.saving_threshold) == 1
    assert taken.tolist() == [False, True, False, False]
    assert budget.share == 0.25


def test_class_offsets_that_underflow_keep_the_row_a_distribution():
    # p * exp(b - max b) underflows to 0 for every class of this row: 0 / 0 before
    out = apply_class_offsets([[1.0, 0.0]], [0.0, 800.0])
    np.testing.assert_array_equal(out, [[1.0, 0.0]])  # exact zeros stay zero
    out = apply_class_offsets([[0.5, 0.5, 0.0], [0.2, 0.3, 0.5]], [0.0, 800.0, 1600.0])
    assert np.isfinite(out).all()
    np.testing.assert_array_equal(out, [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0]])


def test_tuned_offsets_are_invariant_to_scaling_the_costs():
    rng = np.random.default_rng(4)
    p = rng.dirichlet([1.0, 1.0, 1.0], size=300)
    y = np.array([rng.choice(3, p=row) for row in p])
    costs = np.array([[0.0, 1.0, 2.0], [3.0, 0.0, 1.0], [5.0, 2.0, 0.0]])
    small = tune_class_offsets(p, y, costs)
    big = tune_class_offsets(p, y, costs * 1e307)
    np.testing.assert_allclose(big.offsets, small.offsets, rtol=1e-12)
    assert np.isfinite(big.cost) and big.cost == pytest.approx(small.cost * 1e307, rel=1e-12)
    exact = tune_class_offsets(p, y, costs * 2.0**1020)  # power of two: exact scaling
    np.testing.assert_array_equal(exact.offsets, small.offsets)
    assert exact.cost == small.cost * 2.0**1020


def test_tiny_mean_costs_are_not_tied_by_an_absolute_tolerance():
    # only negatives: flagging the 0.75 row costs 1/23 of the fp cost, flagging nothing costs 0.
    # The fn cost (huge, or tiny when the matrix is scaled) never applies; the optimum is to flag
    # nothing whatever the units.
    s = np.array([0.75] + [0.0] * 22)
    y = np.zeros(23, dtype=int)
    for unit in (1.0, 2.0**-1000, 1e-300):
        res = search_cutoff(s, y, np.array([[0.0, 1.0], [4.5e307, 1.0]]) * unit,
                            score_bounds=(0, 1))
        assert abs(res.cost) <= 1e-12 * unit and res.interval == (0.75, 1.0)


def test_action_budget_with_a_huge_cost_elsewhere_and_a_tiny_saving():
    # row 0 has a huge cost beside the action; row 10 is the only row whose best action is 1,
    # saving 4e-95. Dividing all costs by ~1e301 to tame row 0 would underflow that saving
    # to 0 and lose the row; the budget (1 row of 12 exceeds 1/16) must still hold
    E = np.zeros((12, 3))
    E[0, 0] = -1.0715086071862673e301
    E[10, 1] = -4.16852619e-95
    budget = fit_action_budget(E, 1, 0.0625)
    taken = budget_actions(E, 1, budget.saving_threshold) == 1
    assert budget.binding and taken.sum() == 0


def test_realised_cost_of_huge_costs_and_weights_is_the_exact_weighted_mean():
    # Reference: the weighted mean computed exactly with Python's fractions (rational
    # arithmetic, no rounding), then rounded once to a float. The unscaled sum of these terms
    # is about 1e308 * 1e307 * 60, far beyond the largest double, and used to give inf / nan.
    from fractions import Fraction

    from probwrap.decision import realised_cost

    rng = np.random.default_rng(11)
    n = 60
    y = rng.integers(0, 2, size=n)
    a = rng.integers(0, 2, size=n)
    matrix = np.array([[-1e307, 1.5e308], [1.7e308, 2.0**-1074]])
    w = rng.uniform(0.5, 1.0, size=n) * 1e307
    got = realised_cost(y, a, costs=matrix, classes=[0, 1], sample_weight=w)
    values = matrix[y, a]
    exact = sum(Fraction(wi) * Fraction(vi) for wi, vi in zip(w, values, strict=True)) / sum(
        Fraction(wi) for wi in w)
    # n terms of a float dot product: relative error at most about n * eps ~ 1.3e-14
    assert np.isfinite(got)
    assert got == pytest.approx(float(exact), rel=n * np.finfo(float).eps)
    # weights are frequencies: scaling all of them changes nothing (bit-identical here,
    # since the scaling inside is by powers of two)
    assert realised_cost(y, a, costs=matrix, classes=[0, 1], sample_weight=w / 1e307 * 2.0**-20) \
        == pytest.approx(got, rel=n * np.finfo(float).eps)


def test_capacity_cutoff_with_ties_at_the_top_score_stays_within_the_bounds():
    """Worked by hand. Scores 0.1, 0.4, 1.0, 1.0 with capacity 0.25: acting on the rows above
    0.4 acts on the two rows at 1.0, 2/4 = 0.5 of the rows, over 0.25; no cutoff splits the tie,
    so no row can be acted on. Every cutoff c with c >= 1.0 does that ("act when score > c"),
    and within the bounds (0, 1) the only one is 1.0. The cutoff used to be the middle of
    [1.0, 1.0 + gap) with gap = (1.0 - 0.1) / 2 = 0.45 (the mean spacing of the 3 distinct
    scores): 1.225, outside the range of probabilities."""
    assert capacity_cutoff([0.1, 0.4, 1.0, 1.0], 0.25, score_bounds=(0, 1)) == 1.0
    # below the top score the bounds change nothing: the rows above 0.4 are 0.5 of the rows,
    # so with capacity 0.5 the cutoff is the middle of [0.4, 1.0), 0.7
    assert capacity_cutoff([0.1, 0.4, 1.0, 1.0], 0.5, score_bounds=(0, 1)) == pytest.approx(0.7)
    # without bounds the range [1.0, 1.45) has its middle 1.225
    assert capacity_cutoff([0.1, 0.4, 1.0, 1.0], 0.25) == pytest.approx(1.225)


def test_cutoff_search_with_ties_at_one_acts_on_none_at_the_cutoff_one():
    """Probabilities with a fifth of the rows at exactly 1.0 and a capacity of 0.1: no decision
    that flags the tied rows is allowed, so the rule acts on none, and for probabilities that
    is the cutoff 1 (p > 1 never holds), not the middle of a range beyond 1. By hand: scores
    0.1, 0.2, ..., 0.8 and two at 1.0 (10 rows), costs fp 1, fn 4; the admissible decisions are
    'act on none' only (flagging the two 1.0 rows is a share of 0.2 > 0.1)."""
    p = np.r_[np.arange(1, 9) / 10, 1.0, 1.0]
    y = np.array([0, 0, 0, 1, 0, 1, 0, 1, 1, 1])
    res = search_cutoff(p, y, {"fp": 1, "fn": 4}, capacity=0.1, score_bounds=(0.0, 1.0))
    assert res.cutoff == 1.0
    assert res.interval == (1.0, 1.0)
    assert res.cost == pytest.approx(4 * 5 / 10)  # five positives missed at 4 each, per row
    assert np.all(res.cutoffs <= 1.0)
    # without bounds the last range reaches beyond the top score, as for unbounded scores
    assert search_cutoff(p, y, {"fp": 1, "fn": 4}, capacity=0.1).cutoff > 1.0
