"""Tests of the decision array core: reference tests name their outside source (a published
formula, scikit-learn, brute-force enumeration); consistency tests say so."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.metrics import confusion_matrix

from probwrap.decision import (
    action_savings,
    add_reject_action,
    apply_class_offsets,
    bayes_actions,
    budget_actions,
    capacity_cutoff,
    class_offset_curve,
    cutoff_interval,
    expected_costs,
    fit_action_budget,
    plugin_cutoff,
    realised_cost,
    search_cutoff,
    tune_class_offsets,
    zero_one_costs,
)


def _direct_cost(scores, y, c0, c1, w, cutoff):
    """Brute force: act on each row separately, in Python."""
    total = 0.0
    for s_i, c0_i, c1_i, w_i in zip(scores, c0, c1, w, strict=True):
        total += w_i * (c1_i if s_i > cutoff else c0_i)
    return total / sum(w)


# -- Elkan (2001) ------------------------------------------------------------------------------


def test_plugin_cutoff_matches_elkan_formula():
    # Elkan (2001), "The foundations of cost-sensitive learning", IJCAI, section 2 (the optimal
    # threshold; his Theorem 1 is the re-weighting rule, not this formula):
    # p* = (c10 - c00) / (c10 - c00 + c01 - c11), c(i, j) = cost of predicting i when j is true.
    c00, c10, c01, c11 = 0.5, 2.5, 35.0, 1.0  # tn, fp, fn, tp
    expected = (c10 - c00) / (c10 - c00 + c01 - c11)
    got = plugin_cutoff({"tn": c00, "fp": c10, "fn": c01, "tp": c11})
    assert got == pytest.approx(expected, rel=1e-15)
    assert got == pytest.approx(2.0 / 36.0, rel=1e-15)


def test_bayes_actions_switch_exactly_at_elkan_cutoff():
    # Elkan (2001) section 2: predicting positive is optimal iff p >= p*; at p = p* both
    # actions cost the same, and the lower column index (negative action) is kept.
    costs = {"fp": 2.0, "fn": 35.0}
    cut = plugin_cutoff(costs)
    p = np.array([cut - 1e-9, cut + 1e-9, 0.0, 1.0])
    np.testing.assert_array_equal(bayes_actions(p, costs), [0, 1, 0, 1])
    grid = np.linspace(0, 1, 1001)
    np.testing.assert_array_equal(bayes_actions(grid, costs), (grid > cut).astype(int))


# -- multiclass Bayes rule against brute force -----------------------------------------------------


def test_multiclass_bayes_rule_against_brute_force():
    # Reference: direct enumeration of sum_k p_k C[k, a] over every action, in Python
    # (the Bayes decision rule, e.g. Duda, Hart & Stork 2001, section 2.2, eq. 8).
    rng = np.random.default_rng(3)
    p = rng.dirichlet(np.ones(4), size=60)
    C = rng.normal(size=(4, 5)) * 3.0  # negative entries are gains
    got = bayes_actions(p, C)
    E = expected_costs(p, C)
    for i in range(p.shape[0]):
        risks = [sum(p[i, k] * C[k, a] for k in range(4)) for a in range(5)]
        np.testing.assert_allclose(E[i], risks, rtol=1e-12, atol=1e-12)
        assert got[i] == int(np.argmin(risks))


def test_per_row_costs_bayes_against_brute_force():
    # Reference: the same enumeration with one cost matrix per row.
    rng = np.random.default_rng(4)
    p = rng.dirichlet(np.ones(3), size=40)
    C = rng.uniform(-1, 5, size=(40, 3, 3))
    got = bayes_actions(p, C)
    for i in range(40):
        risks = [sum(p[i, k] * C[i, k, a] for k in range(3)) for a in range(3)]
        assert got[i] == int(np.argmin(risks))


# -- Chow (1970) -------------------------------------------------------------------------------------


def test_chow_reject_rule_hand_worked():
    # Chow (1970), "On optimum recognition error and reject tradeoff", IEEE Trans. Inf. Theory
    # 16(1): with 0-1 costs and reject cost d, reject iff max_k p_k < 1 - d.
    # Hand-worked with d = 0.25 (reject when the top probability is below 0.75):
    #   [0.80, 0.10, 0.10]: costs 0.20 / 0.90 / 0.90 / 0.25 -> class 0
    #   [0.50, 0.30, 0.20]: costs 0.50 / 0.70 / 0.80 / 0.25 -> reject
    #   [0.10, 0.74, 0.16]: costs 0.90 / 0.26 / 0.84 / 0.25 -> reject
    #   [0.05, 0.15, 0.80]: costs 0.95 / 0.85 / 0.20 / 0.25 -> class 2
    costs = add_reject_action(zero_one_costs(3), 0.25)
    p = np.array([[0.8, 0.1, 0.1], [0.5, 0.3, 0.2], [0.1, 0.74, 0.16], [0.05, 0.15, 0.8]])
    np.testing.assert_allclose(
        expected_costs(p, costs)[1], [0.5, 0.7, 0.8, 0.25], rtol=1e-12
    )
    got = bayes_actions(p, costs, actions=["a", "b", "c", "refer"])
    np.testing.assert_array_equal(got, ["a", "refer", "refer", "c"])
    # and the general statement on random rows
    rng = np.random.default_rng(0)
    q = rng.dirichlet(np.ones(3), size=500)
    chow = np.where(q.max(axis=1) < 0.75, 3, q.argmax(axis=1))
    np.testing.assert_array_equal(bayes_actions(q, costs), chow)


# -- cost tallies against scikit-learn's confusion_matrix ---------------------------------------------


def test_realised_cost_matches_confusion_matrix_tally():
    # Reference: scikit-learn's confusion_matrix; total cost = sum(confusion * C).
    rng = np.random.default_rng(1)
    y = rng.integers(0, 3, 200)
    pred = rng.integers(0, 3, 200)
    w = rng.uniform(0.1, 2.0, 200)
    C = rng.uniform(-2, 10, size=(3, 3))
    cm = confusion_matrix(y, pred, labels=[0, 1, 2], sample_weight=w)
    expected = float((cm * C).sum() / w.sum())
    got = realised_cost(y, pred, costs=C, classes=[0, 1, 2], sample_weight=w)
    assert got == pytest.approx(expected, rel=1e-12)


# -- exact cutoff search against brute force ------------------------------------------------------


def _brute_force_best(scores, y, c0, c1, w):
    distinct = np.unique(scores)
    candidates = np.concatenate([[distinct[0] - 1.0], distinct])  # cutoffs below/at each score
    costs = [_direct_cost(scores, y, c0, c1, w, t) for t in candidates]
    return min(costs), candidates, costs


@pytest.mark.parametrize("seed", range(4))
def test_search_cutoff_against_enumeration_with_ties(seed):
    # Reference: brute-force enumeration of every cutoff on small data with many ties.
    rng = np.random.default_rng(seed)
    n = 40
    scores = rng.integers(0, 8, n) / 8.0  # heavy ties
    y = (rng.uniform(size=n) < scores).astype(int)
    w = rng.uniform(0.2, 3.0, n)
    C = np.array([[0.0, 2.0], [35.0, -1.0]])
    res = search_cutoff(scores, y, C, sample_weight=w, score_bounds=(0, 1))
    c0, c1 = C[y, 0], C[y, 1]
    best, _, _ = _brute_force_best(scores, y, c0, c1, w)
    assert res.cost == pytest.approx(best, rel=1e-12, abs=1e-12)
    # the reported cost is what the chosen cutoff really costs, row by row
    assert _direct_cost(scores, y, c0, c1, w, res.cutoff) == pytest.approx(res.cost, rel=1e-12)
    # every point of the curve is exact
    for t, c in zip(res.cutoffs, res.costs, strict=True):
        assert _direct_cost(scores, y, c0, c1, w, t) == pytest.approx(c, rel=1e-12, abs=1e-12)
    # the curve has one point per distinct decision: m distinct scores -> m + 1 points
    assert res.cutoffs.shape == (np.unique(scores).shape[0] + 1,)
    lo, hi = res.interval
    assert lo <= res.cutoff < hi


def test_search_cutoff_per_row_costs_against_enumeration():
    # Reference: brute-force enumeration, with a cost matrix per row (amount at stake).
    rng = np.random.default_rng(7)
    n = 50
    scores = np.round(rng.uniform(size=n), 1)
    y = (rng.uniform(size=n) < scores).astype(int)
    amount = rng.uniform(1, 100, n)
    C = np.zeros((n, 2, 2))
    C[:, 0, 1] = 3.0  # inspect an intact row
    C[:, 1, 0] = amount  # miss a damaged one
    C[:, 1, 1] = 3.0
    res = search_cutoff(scores, y, C)
    c0, c1 = C[np.arange(n), y, 0], C[np.arange(n), y, 1]
    best, _, _ = _brute_force_best(scores, y, c0, c1, np.ones(n))
    assert res.cost == pytest.approx(best, rel=1e-12)


def test_flat_optimum_reports_interval_and_middle():
    # Hand-worked: scores 0.1 (neg), 0.3 (neg), 0.6 (pos), 0.9 (pos) with 0-1 costs: every
    # cutoff in [0.3, 0.6) separates the classes perfectly; the middle is 0.45. Any cutoff in
    # [0.3, 0.6) is one decision; adding an uninformative tie-free row keeps it unique.
    res = search_cutoff([0.1, 0.3, 0.6, 0.9], [0, 0, 1, 1], {"fp": 1, "fn": 1})
    assert res.cost == 0.0
    assert res.interval == (0.3, 0.6)
    assert res.cutoff == pytest.approx(0.45)
    assert not res.flat
    # Neighbouring decisions with equal cost: scores 0.1 (neg), 0.5 (pos), 0.5 (neg),
    # 0.9 (pos), fp = fn = 1. Flag all: 2/4; cutoff in [0.1, 0.5): one false positive, 1/4;
    # in [0.5, 0.9): one miss, 1/4; flag none: 2/4 -> flat optimum [0.1, 0.9), middle 0.5.
    res = search_cutoff([0.1, 0.5, 0.5, 0.9], [0, 1, 0, 1], {"fp": 1, "fn": 1})
    assert res.flat
    assert res.interval == (0.1, 0.9)
    assert res.cutoff == pytest.approx(0.5)
    assert res.cost == pytest.approx(0.25)
    # Two separate optimal decisions (not neighbours): scores 0.2 (pos), 0.5 (neg), 0.8 (pos).
    # Flag all costs 1/3 (one false positive), [0.2, 0.5) 2/3, [0.5, 0.8) 1/3 (one miss),
    # none 2/3. Neither optimum is flat; one of them is returned with its own interval.
    res = search_cutoff([0.2, 0.5, 0.8], [1, 0, 1], {"fp": 1, "fn": 1})
    assert not res.flat
    assert res.cost == pytest.approx(1.0 / 3.0)
    lo, hi = res.interval
    assert (lo, hi) == pytest.approx((0.5, 0.8)) or (lo, hi) == pytest.approx((-0.1, 0.2))


def test_ties_get_one_action():
    scores = np.array([0.5] * 10 + [0.9] * 2)
    y = np.array([1] * 6 + [0] * 4 + [1, 1])
    res = search_cutoff(scores, y, {"fp": 1.0, "fn": 1.0})
    flagged = scores > res.cutoff
    # all ten tied rows get one action
    assert len(set(flagged[:10])) == 1


@settings(max_examples=40, deadline=None)
@given(
    st.lists(st.integers(0, 12), min_size=2, max_size=30),
    st.lists(st.booleans(), min_size=30, max_size=30),
    st.floats(0.1, 50.0),
    st.floats(0.1, 50.0),
    st.floats(-5.0, 5.0),
)
def test_property_tuned_cutoff_never_worse_than_any_cutoff(raw, labels, fp, fn, any_cutoff):
    # Property: the cost at the tuned cutoff <= the cost of any other cutoff on the same rows.
    scores = np.array(raw, dtype=float) / 4.0
    y = np.array(labels[: len(raw)], dtype=int)
    costs = {"fp": fp, "fn": fn}
    res = search_cutoff(scores, y, costs)
    C = np.array([[0.0, fp], [fn, 0.0]])
    other = _direct_cost(scores, y, C[y, 0], C[y, 1], np.ones(len(y)), any_cutoff)
    assert res.cost <= other + 1e-12
    assert np.all(res.costs >= res.cost - 1e-12)


def test_search_cutoff_agrees_with_plugin_on_true_probabilities():
    # With calibrated probabilities and many rows, the empirical optimum approaches Elkan's
    # plug-in cutoff (Elkan 2001): simulated p ~ U(0,1), y ~ Bernoulli(p).
    rng = np.random.default_rng(11)
    p = rng.uniform(size=200_000)
    y = (rng.uniform(size=p.shape[0]) < p).astype(int)
    costs = {"fp": 2.0, "fn": 8.0}
    res = search_cutoff(p, y, costs, score_bounds=(0, 1))
    assert res.cutoff == pytest.approx(plugin_cutoff(costs), abs=0.02)


# -- capacity ------------------------------------------------------------------------------------


def test_capacity_never_exceeded_on_heldout_and_close_on_fresh_rows():
    rng = np.random.default_rng(5)

    def draw(n):
        p = rng.beta(1, 9, n)
        return np.round(p, 3), (rng.uniform(size=n) < p).astype(int)

    p, y = draw(20_000)
    costs = {"fp": 2.0, "fn": 35.0}
    free = search_cutoff(p, y, costs, score_bounds=(0, 1))
    assert np.mean(p > free.cutoff) > 0.3  # the capacity binds
    res = search_cutoff(p, y, costs, capacity=0.1, score_bounds=(0, 1))
    assert np.mean(p > res.cutoff) <= 0.1
    assert res.flagged_share[res.admissible].max() <= 0.1
    # the constrained optimum is the best admissible decision (brute force on the curve)
    direct = [
        np.mean(np.where(p > t, np.where(y == 1, 0.0, 2.0), np.where(y == 1, 35.0, 0.0)))
        for t in np.unique(p)
        if np.mean(p > t) <= 0.1
    ]
    assert res.cost == pytest.approx(min(direct), rel=1e-10)
    p_new, _ = draw(20_000)
    assert np.mean(p_new > res.cutoff) == pytest.approx(0.1, abs=0.01)
    cut = capacity_cutoff(p, 0.1, score_bounds=(0, 1))
    assert np.mean(p > cut) <= 0.1
    assert np.mean(p_new > cut) == pytest.approx(0.1, abs=0.01)


def test_action_budget_fills_with_largest_savings():
    # Brute force: the kept rows are exactly the top ones by saving among those whose best
    # action is the budgeted one, and the share never exceeds the capacity.
    rng = np.random.default_rng(2)
    p = rng.dirichlet([1, 1, 1], size=300)
    C = np.array([[0.0, 3.0, 5.0], [10.0, 1.0, 4.0], [30.0, 12.0, 2.0]])
    E = expected_costs(p, C)
    budget = fit_action_budget(E, 2, 0.1)
    got = budget_actions(E, 2, budget.saving_threshold)
    assert budget.binding
    assert np.mean(got == 2) <= 0.1
    saving = action_savings(E, 2)
    best = E.argmin(axis=1)
    ranked = np.sort(saving[best == 2])[::-1]
    n_keep = int(np.floor(0.1 * 300))
    np.testing.assert_array_equal(np.sort(saving[got == 2])[::-1], ranked[:n_keep])
    # rows moved off the budgeted action take their best other action
    moved = (best == 2) & (got != 2)
    np.testing.assert_array_equal(got[moved], np.argmin(E[moved][:, :2], axis=1))
    # rows not wanting the action are untouched
    np.testing.assert_array_equal(got[best != 2], best[best != 2])


# -- class offsets -----------------------------------------------------------------------------------


def test_offset_curve_is_exact_against_direct_evaluation():
    # Reference: direct evaluation of argmin_a sum_k q_k C[k, a] at the middle of every
    # interval of the sweep, with q = p exp(b) renormalised.
    rng = np.random.default_rng(8)
    p = rng.dirichlet([1, 1, 1], size=80)
    y = np.array([rng.choice(3, p=row) for row in p])
    C = add_reject_action(np.array([[0, 4, 9], [2, 0, 3], [7, 1, 0]], dtype=float), 1.5)
    b = np.array([0.0, 0.3, -0.2])
    curve = class_offset_curve(p, y, C, b, 2)
    for lo, hi, cost in zip(curve.lower, curve.upper, curve.costs, strict=True):
        if hi <= lo:
            continue
        trial = b.copy()
        trial[2] = 0.5 * (lo + hi)
        acts = bayes_actions(apply_class_offsets(p, trial), C)
        assert np.mean(C[y, acts]) == pytest.approx(cost, abs=1e-12)


def test_binary_offset_tuning_equals_exact_cutoff_search():
    # One offset on the log-odds is a cutoff on the probability, so the exact sweep must reach
    # the same least cost as the exact cutoff search (two independent computations).
    rng = np.random.default_rng(9)
    p = rng.beta(2, 5, 3000)
    y = (rng.uniform(size=p.shape[0]) < np.clip(p * 1.4, 0, 1)).astype(int)  # miscalibrated
    costs = {"fp": 1.0, "fn": 6.0}
    res_cut = search_cutoff(p, y, costs, score_bounds=(0, 1))
    res_off = tune_class_offsets(np.column_stack([1 - p, p]), y, costs)
    assert res_off.cost == pytest.approx(res_cut.cost, rel=1e-12)
    assert res_off.cost < res_off.initial_cost


def test_multiclass_offsets_never_worse_than_bayes_and_brute_force_small():
    # Reference: brute force over a grid of offset pairs on small data; coordinate descent of
    # exact sweeps must be at least as good as every grid point it could reach in one move,
    # and never worse than zero offsets.
    rng = np.random.default_rng(10)
    p = rng.dirichlet([2, 1, 1], size=120)
    y = np.array([rng.choice(3, p=np.roll(row, 1)) for row in p])  # badly calibrated
    C = np.array([[0, 2, 6], [5, 0, 2], [9, 3, 0]], dtype=float)
    res = tune_class_offsets(p, y, C)
    assert res.cost <= res.initial_cost
    direct = np.mean(C[y, bayes_actions(apply_class_offsets(p, res.offsets), C)])
    assert direct == pytest.approx(res.cost, abs=1e-12)
    assert res.converged
    grid = np.linspace(-4, 4, 41)
    for j, v in itertools.product([1, 2], grid):
        trial = res.offsets.copy()
        trial[j] = v
        c = np.mean(C[y, bayes_actions(apply_class_offsets(p, trial), C)])
        assert res.cost <= c + 1e-12


# -- bootstrap ---------------------------------------------------------------------------------------


def test_cutoff_interval_reweighting_equals_explicit_resampling():
    # Consistency test: search_cutoff on rows explicitly repeated by the bootstrap counts.
    rng = np.random.default_rng(12)
    p = np.round(rng.uniform(size=300), 2)
    y = (rng.uniform(size=300) < p).astype(int)
    costs = {"fp": 1.0, "fn": 3.0}
    ci = cutoff_interval(p, y, costs, n_resamples=5, random_state=0, score_bounds=(0, 1))
    draws = np.random.RandomState(0)
    for b in range(5):
        counts = np.bincount(draws.randint(0, 300, size=300), minlength=300)
        res = search_cutoff(np.repeat(p, counts), np.repeat(y, counts), costs,
                            score_bounds=(0, 1))
        # same least cost and same decision on the resampled rows
        flagged_ref = np.repeat(p, counts) > res.cutoff
        flagged_got = np.repeat(p, counts) > ci.bootstrap_cutoffs[b]
        np.testing.assert_array_equal(flagged_ref, flagged_got)
        assert res.cost == pytest.approx(
            np.mean(np.where(flagged_got, np.where(y[np.repeat(np.arange(300), counts)] == 1,
                                                   0.0, 1.0),
                             np.where(y[np.repeat(np.arange(300), counts)] == 1, 3.0, 0.0))),
            rel=1e-12)
    # the interval is the percentile interval of the resampled cutoffs (consistency)
    assert (ci.low, ci.high) == pytest.approx(np.quantile(ci.bootstrap_cutoffs, [0.025, 0.975]),
                                             rel=1e-12)


def test_cutoff_interval_ignores_zero_weight_rows():
    # Weights are frequencies: rows of weight zero are absent. Regression: a resample that drew
    # only zero-weight rows raised IndexError in the optimum search.
    rng = np.random.default_rng(21)
    p = np.round(rng.uniform(size=400), 3)
    y = (rng.uniform(size=400) < p).astype(int)
    costs = {"fp": 1.0, "fn": 3.0}
    w = np.zeros(400)
    w[:5] = 1.0  # five rows present: (395/400)^400 ~ 1e-2 chance per resample of none of them
    ci = cutoff_interval(p, y, costs, sample_weight=w, n_resamples=300, random_state=0,
                         score_bounds=(0, 1))
    same = cutoff_interval(p[:5], y[:5], costs, n_resamples=300, random_state=0,
                           score_bounds=(0, 1))
    np.testing.assert_array_equal(ci.bootstrap_cutoffs, same.bootstrap_cutoffs)
    assert (ci.low, ci.high) == (same.low, same.high)
    # zero weights scattered among many present rows change nothing either
    w = np.ones(400)
    w[::3] = 0.0
    ci = cutoff_interval(p, y, costs, sample_weight=w, n_resamples=40, random_state=1,
                         score_bounds=(0, 1))
    same = cutoff_interval(p[w > 0], y[w > 0], costs, n_resamples=40, random_state=1,
                           score_bounds=(0, 1))
    np.testing.assert_array_equal(ci.bootstrap_cutoffs, same.bootstrap_cutoffs)


def test_cutoff_interval_fold_spread():
    rng = np.random.default_rng(13)
    p = rng.uniform(size=2000)
    y = (rng.uniform(size=2000) < p).astype(int)
    fold = np.arange(2000) % 4
    ci = cutoff_interval(p, y, {"fp": 1.0, "fn": 1.0}, fold=fold, n_resamples=30,
                         random_state=1, score_bounds=(0, 1))
    assert ci.fold_cutoffs.shape == (4,)
    for k in range(4):
        ref = search_cutoff(p[fold == k], y[fold == k], {"fp": 1.0, "fn": 1.0},
                            score_bounds=(0, 1))
        assert ci.fold_cutoffs[k] == pytest.approx(ref.cutoff)
    assert (ci.fold_low, ci.fold_high) == (ci.fold_cutoffs.min(), ci.fold_cutoffs.max())
