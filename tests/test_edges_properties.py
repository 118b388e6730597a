"""Property tests at numeric edges (hypothesis): maps, decision functions, prior shift.

Inputs mix ordinary values with ties, all-equal scores, values near the largest double, denormal
values, huge weight ratios and huge costs. Whatever comes in, each function either returns
finite probabilities in [0, 1] (monotone where the map is monotone) or raises a ``ValueError``
whose message names the offending argument in backticks. The number of examples is bounded so
the module runs in seconds.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from probwrap.calibration import (
    BetaMap,
    BinningMap,
    IsotonicMap,
    PlattMap,
    TemperatureMap,
    VennAbersMap,
    log_odds_to_proba,
    proba_to_log_odds,
)
from probwrap.decision import (
    apply_class_offsets,
    bayes_actions,
    budget_actions,
    expected_costs,
    fit_action_budget,
    search_cutoff,
)
from probwrap.shift import adjust_to_prior, em_prior, shift_cutoff

# floating-point trouble must be handled, not leaked: an overflow or 0 / 0 warning fails the test
pytestmark = pytest.mark.filterwarnings("error::RuntimeWarning")

SETTINGS = settings(
    max_examples=60,
    deadline=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
    derandomize=True,  # the same examples on every run: CI stays reproducible
)

#: the largest double, a large value whose square overflows, the smallest normal and denormal
EDGE_VALUES = [0.0, 1.0, -1.0, 1e-310, 5e-324, -5e-324, 1e154, -1e154, 1e308, -1e308,
               1.7976931348623157e308, -1.7976931348623157e308, 2.2250738585072014e-308]
ORDINARY = st.floats(-30, 30, allow_nan=False, allow_infinity=False)
ANY_FINITE = st.floats(allow_nan=False, allow_infinity=False)
SCORE = st.one_of(ORDINARY, st.sampled_from(EDGE_VALUES), ANY_FINITE)
WEIGHT = st.one_of(
    st.floats(0.0, 10.0, allow_nan=False),
    st.sampled_from([0.0, 5e-324, 1e-300, 1.0, 1e16, 1e17, 1e300, 1e306, 1e308]),
)
PROBA = st.one_of(
    st.floats(0.0, 1.0, allow_nan=False),
    st.sampled_from([0.0, 1.0, 5e-324, 1e-300, 1.0 - 2.0**-53, 0.5]),
)
COST = st.one_of(
    st.floats(-1e308, 1e308, allow_nan=False),
    st.sampled_from([0.0, 1.0, 1e308, -1e308, 5e-324, 1e200, 1.7976931348623157e308]),
)


def _names_an_argument(exc: ValueError) -> bool:
    return re.search(r"`[A-Za-z_][A-Za-z_0-9\[\]'\"]*`", str(exc)) is not None


@st.composite
def binary_problems(draw, min_size=2, max_size=40):
    n = draw(st.integers(min_size, max_size))
    kind = draw(st.sampled_from(["mixed", "ties", "equal"]))
    if kind == "equal":
        s = np.full(n, draw(SCORE))
    elif kind == "ties":
        pool = draw(st.lists(SCORE, min_size=1, max_size=4))
        s = np.array([draw(st.sampled_from(pool)) for _ in range(n)])
    else:
        s = draw(arrays(float, n, elements=SCORE))
    y = draw(arrays(np.int64, n, elements=st.integers(0, 1)))
    y[0], y[1] = 0, 1  # both classes present; their weights may still be zero
    w = draw(st.one_of(st.none(), arrays(float, n, elements=WEIGHT)))
    return s, y, w


MAPS = [PlattMap, lambda: PlattMap(smooth_targets=False), BetaMap, TemperatureMap, IsotonicMap,
        lambda: BinningMap(n_bins=4), VennAbersMap]
MAP_IDS = ["platt", "platt-raw", "beta", "temperature", "isotonic", "binning", "venn-abers"]


@pytest.mark.parametrize("make", MAPS, ids=MAP_IDS)
@SETTINGS
@given(problem=binary_problems(), probe=arrays(float, 12, elements=SCORE))
def test_maps_give_finite_probabilities_or_name_the_argument(make, problem, probe):
    s, y, w = problem
    cal_map = make()
    with warnings.catch_warnings():
        # separation and end-of-range warnings are expected on such data; they are tested
        # elsewhere. Floating-point RuntimeWarnings are not filtered: they must not occur.
        warnings.filterwarnings("ignore", category=UserWarning)
        warnings.filterwarnings("ignore", message=".*did not reach full precision")
        try:
            cal_map.fit(s, y, sample_weight=w)
        except ValueError as exc:
            assert _names_an_argument(exc), str(exc)
            return
    grid = np.sort(np.concatenate([s, probe, [-1.7976931348623157e308, 0.0,
                                              1.7976931348623157e308]]))
    out = cal_map.predict(grid)
    assert np.all(np.isfinite(out)), out
    assert np.all((out >= 0.0) & (out <= 1.0)), out
    # Venn-Abers: a calibration row whose positive weight is below ~1e-12 of the test point's
    # unit weight can tie slopes through rounding and leave the merged output slightly
    # non-monotone (known limitation of the hull search, values stay valid probabilities)
    tiny = w is not None and np.any((w > 0) & (w < 1e-12))
    monotone = (BetaMap, TemperatureMap, IsotonicMap) + (() if tiny else (VennAbersMap,))
    if isinstance(cal_map, monotone):
        assert np.all(np.diff(out) >= -1e-12), out
    if isinstance(cal_map, PlattMap):
        step = np.diff(out) * np.sign(cal_map.slope_)
        assert np.all(step >= -1e-12), out
    if isinstance(cal_map, VennAbersMap):
        pair = cal_map.predict_interval(grid)
        assert np.all(np.isfinite(pair)) and np.all(pair[:, 0] <= pair[:, 1] + 1e-12)


@SETTINGS
@given(p=arrays(float, st.integers(1, 30), elements=PROBA),
       clip=st.sampled_from([1e-12, 1e-17, 1e-300, 5e-324, 0.25]))
def test_log_odds_round_trip_is_finite_and_ordered(p, clip):
    z = proba_to_log_odds(p, clip=clip)
    assert np.all(np.isfinite(z))
    order = np.argsort(p, kind="stable")
    assert np.all(np.diff(z[order]) >= 0)
    back = log_odds_to_proba(z)
    assert np.all((back >= 0) & (back <= 1))


@st.composite
def cost_problems(draw):
    n = draw(st.integers(2, 40))
    scores = draw(arrays(float, n, elements=st.one_of(PROBA, st.sampled_from([0.3, 0.7]))))
    y = draw(arrays(np.int64, n, elements=st.integers(0, 1)))
    costs = draw(arrays(float, (2, 2), elements=COST))
    w = draw(st.one_of(st.none(), arrays(float, n, elements=WEIGHT)))
    return scores, y, costs, w


@SETTINGS
@given(problem=cost_problems(), capacity=st.one_of(st.none(), st.floats(0.05, 1.0)))
def test_cutoff_search_is_finite_and_scale_free(problem, capacity):
    scores, y, costs, w = problem
    try:
        res = search_cutoff(scores, y, costs, sample_weight=w, capacity=capacity,
                            score_bounds=(0, 1))
    except ValueError as exc:
        assert _names_an_argument(exc), str(exc)
        return
    assert np.isfinite(res.cutoff) and np.all(np.isfinite(res.costs))
    assert np.all((res.flagged_share >= 0) & (res.flagged_share <= 1 + 1e-12))
    # least cost among the admissible decisions, up to the search's tie tolerance (1e-9 of the
    # largest mean cost), within which it takes the widest flat interval
    best = np.min(res.costs[res.admissible])
    assert res.cost - best <= 1e-9 * np.max(np.abs(res.costs[res.admissible]))
    # the rule does not change when all costs are scaled by a power of two
    half = search_cutoff(scores, y, costs / 2.0**600, sample_weight=w, capacity=capacity,
                         score_bounds=(0, 1))
    if np.all(np.abs(costs[costs != 0]) >= 2.0**-400):  # no entry lost to underflow
        assert half.cutoff == res.cutoff


@SETTINGS
@given(p=arrays(float, (8, 3),
                elements=st.floats(0, 1, allow_nan=False)),
       costs=arrays(float, (3, 4), elements=COST),
       offsets=arrays(float, 3, elements=st.one_of(st.floats(-800, 800),
                                                    st.sampled_from([0.0, 800.0, -800.0]))))
def test_expected_costs_actions_and_offsets(p, costs, offsets):
    p = p + 1e-300  # rows must carry some mass
    p = p / p.sum(axis=1, keepdims=True)
    ec = expected_costs(p, costs)
    assert np.all(np.isfinite(ec))
    actions = bayes_actions(p, costs)
    assert np.all((actions >= 0) & (actions < 4))
    q = apply_class_offsets(p, offsets)
    assert np.all(np.isfinite(q)) and np.all((q >= 0) & (q <= 1))
    np.testing.assert_allclose(q.sum(axis=1), 1.0, rtol=1e-12)
    assert np.all(q[p == 0] == 0)  # exact zeros stay zero


@SETTINGS
@given(E=arrays(float, (12, 3), elements=COST),
       w=st.one_of(st.none(), arrays(float, 12, elements=WEIGHT)),
       capacity=st.floats(0.05, 1.0))
def test_action_budget_never_exceeds_its_share(E, w, capacity):
    try:
        budget = fit_action_budget(E, 1, capacity, sample_weight=w)
    except ValueError as exc:
        assert _names_an_argument(exc), str(exc)
        return
    assert not np.isnan(budget.saving_threshold)  # +inf: no row keeps the action
    taken = budget_actions(E, 1, budget.saving_threshold) == 1
    ww = np.ones(12) if w is None else w
    ww = ww / ww.max()
    assert ww[taken].sum() / ww.sum() <= capacity * (1 + 1e-9)


PRIOR = st.one_of(st.floats(0.0, 1.0, allow_nan=False),
                  st.sampled_from([5e-324, 1e-300, 0.5, 1.0 - 2.0**-53, 1e-17]))


@SETTINGS
@given(p=arrays(float, st.integers(1, 20), elements=PROBA), source=PRIOR, target=PRIOR,
       cutoff=PROBA)
def test_prior_shift_is_finite_or_names_the_argument(p, source, target, cutoff):
    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", message=".*target_prior. is zero")
            adjusted = adjust_to_prior(p, source, target)
        moved = shift_cutoff(cutoff, source, target)
    except ValueError as exc:
        assert _names_an_argument(exc), str(exc)
        return
    assert np.all(np.isfinite(adjusted)) and np.all((adjusted >= 0) & (adjusted <= 1))
    assert np.isfinite(moved) and 0.0 <= moved <= 1.0


@SETTINGS
@given(p=arrays(float, st.integers(2, 30), elements=PROBA), source=PRIOR,
       w=st.one_of(st.none(), st.just("huge")))
def test_em_prior_is_a_distribution_or_names_the_argument(p, source, w):
    weights = None if w is None else np.full(p.shape[0], 1e307)
    try:
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", category=UserWarning)
            est = em_prior(p, source, sample_weight=weights)
    except ValueError as exc:
        assert _names_an_argument(exc), str(exc)
        return
    prior = np.asarray(est.prior)
    assert np.all(np.isfinite(prior)) and np.all(prior >= 0)
    assert abs(prior.sum() - 1.0) < 1e-9
