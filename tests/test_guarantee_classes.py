"""Per-class recall floors with a guarantee (multiclass Learn-then-Test).

Reference checks: p-values against scipy.stats.binomtest (one-sided, "less") and bounds against
scipy.stats.binomtest's exact (Clopper–Pearson) interval; with two classes the certified rules
are those of the binary cutoff search (consistency test); every rule on the curve is checked by
evaluating it directly (consistency test); validity by simulation (Angelopoulos et al. 2025,
Theorem 1: violation probability at most delta).
"""

import numpy as np
import pytest
from scipy import stats

from probwrap.decision import (
    GuaranteeUnreachableError,
    apply_class_offsets,
    expected_costs,
    guaranteed_class_offsets,
    guaranteed_cutoff,
    zero_one_costs,
)


def _three_classes(n, seed, strength=1.5):
    rng = np.random.default_rng(seed)
    y = rng.integers(0, 3, n)
    logits = rng.normal(0.0, 1.0, (n, 3)) + strength * np.eye(3)[y]
    p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)
    return p, y


def _actions(p, offsets, costs):
    return np.argmin(expected_costs(apply_class_offsets(p, offsets), costs), axis=1)


def test_two_classes_certify_exactly_the_binary_cutoffs():
    # consistency: with two classes the boost family is the cutoff family, tested in the same
    # order (recall from the most flagging rule), so costs, certified sets and p-values agree.
    rng = np.random.default_rng(3)
    y = rng.integers(0, 2, 1500)
    s = 1 / (1 + np.exp(-rng.normal(1.5 * y - 0.75, 1.0)))
    costs = np.array([[0.0, 1.0], [5.0, 0.0]])
    gb = guaranteed_cutoff(s, y, costs, requirement="recall", target=0.9, confidence=0.9)
    gm = guaranteed_class_offsets(np.column_stack([1 - s, s]), y, costs,
                                  recall_floors={1: 0.9}, confidence=0.9)
    assert gm.cost == pytest.approx(gb.cost, rel=1e-12)
    assert gm.certified.sum() == gb.certified.sum()
    assert np.sort(gm.p_values[~np.isnan(gm.p_values)]) == pytest.approx(
        np.sort(gb.p_values[~np.isnan(gb.p_values)]), rel=1e-12)


def test_pvalue_and_bound_equal_scipy_binomtest():
    p, y = _three_classes(2000, 0)
    g = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={1: 0.8, 2: 0.8},
                                 confidence=0.9)
    a = _actions(p, g.offsets, zero_one_costs(3))
    pvals, lows = [], {}
    for j, floor in ((1, 0.8), (2, 0.8)):
        n_j = int(np.sum(y == j))
        misses = int(np.sum((y == j) & (a != j)))
        assert g.achieved[j] == pytest.approx(1 - misses / n_j, rel=1e-12)
        pvals.append(stats.binomtest(misses, n_j, 1 - floor, alternative="less").pvalue)
        ci = stats.binomtest(misses, n_j, 1 - floor).proportion_ci(
            confidence_level=0.8, method="exact")  # two-sided 80 % = one-sided 90 % upper end
        lows[j] = 1 - ci.high
        assert g.achieved[j] >= floor
    # the union null's p-value is the largest of the per-class binomial-tail p-values
    assert g.p_value == pytest.approx(max(pvals), rel=1e-9)
    assert g.p_value <= 0.1
    for j in (1, 2):
        assert g.bounds[j] == pytest.approx(lows[j], rel=1e-9)
        assert g.bounds[j] >= 0.8


def test_every_rule_on_the_curve_is_what_the_offsets_do():
    # consistency: each interval's cost equals the realised cost of the rule evaluated directly,
    # including a reject action (actions differ from classes).
    p, y = _three_classes(400, 1, strength=1.0)
    costs = np.array([[0.0, 4.0, 4.0, 1.0], [3.0, 0.0, 3.0, 1.0], [8.0, 8.0, 0.0, 1.0]])
    g = guaranteed_class_offsets(p, y, costs, recall_floors={2: 0.8}, confidence=0.8)
    for i in range(0, g.lower.shape[0], max(1, g.lower.shape[0] // 40)):
        lo, hi = g.lower[i], g.upper[i]
        t = 0.5 * (lo + hi) if np.isfinite(lo) and np.isfinite(hi) else (
            hi - 1.0 if np.isfinite(hi) else lo + 1.0)
        a = _actions(p, np.array([0.0, 0.0, t]), costs)
        assert costs[y, a].mean() == pytest.approx(g.costs[i], rel=1e-9, abs=1e-12)
    a = _actions(p, g.offsets, costs)
    assert costs[y, a].mean() == pytest.approx(g.cost, rel=1e-12)
    # class 2 is caught by action 2 only (its cheapest column)
    assert np.mean(a[y == 2] == 2) == pytest.approx(g.achieved[2], rel=1e-12)


def test_plain_rule_kept_when_it_already_certifies():
    p, y = _three_classes(3000, 2, strength=3.0)
    g = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={0: 0.8})
    # the plain rule is certified, so the floor does not bind; the cheapest certified rule is
    # then at most as costly on these rows (the boost is tuned like a cutoff)
    assert not g.binding
    assert g.cost <= g.unconstrained_cost
    assert g.certified.mean() > 0.5


def test_weights_are_frequencies():
    p, y = _three_classes(300, 4)
    w = np.random.default_rng(5).integers(1, 4, 300)
    g_w = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={1: 0.8},
                                   sample_weight=w)
    rep = np.repeat(np.arange(300), w)
    g_r = guaranteed_class_offsets(p[rep], y[rep], zero_one_costs(3), recall_floors={1: 0.8})
    assert g_w.cost == pytest.approx(g_r.cost, rel=1e-12)
    assert g_w.p_value == pytest.approx(g_r.p_value, rel=1e-9)
    assert g_w.achieved[1] == pytest.approx(g_r.achieved[1], rel=1e-12)


def test_equal_relative_weights_give_the_unweighted_certificate():
    # weights that are not whole numbers count as Kish's effective rows: equal ones are the
    # unweighted rows at any scale (and sums far above the row count do not certify more)
    p, y = _three_classes(300, 4)
    g0 = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={1: 0.8})
    for scale in (0.01, 2.5, 7.3):
        g = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={1: 0.8},
                                     sample_weight=np.full(300, scale))
        assert g.boost == pytest.approx(g0.boost, rel=1e-12)
        assert g.p_value == pytest.approx(g0.p_value, rel=1e-9)
        assert g.bounds[1] == pytest.approx(g0.bounds[1], rel=1e-9)


def test_expectation_method_is_the_inflated_miss_rate():
    # conformal risk control (Angelopoulos et al., ICLR 2024, eq. 4): (misses + 1)/(n + 1) <= alpha
    p, y = _three_classes(600, 6)
    g = guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={2: 0.9},
                                 method="expectation")
    a = _actions(p, g.offsets, zero_one_costs(3))
    n2, miss = int(np.sum(y == 2)), int(np.sum((y == 2) & (a != 2)))
    assert (miss + 1) / (n2 + 1) <= 0.1 + 1e-12
    assert g.bounds[2] == pytest.approx(1 - (miss + 1) / (n2 + 1))
    assert np.isnan(g.p_value) and g.confidence is None


@pytest.mark.parametrize("kwargs, match", [
    ({"recall_floors": {0: 0.9, 1: 0.9, 2: 0.9}}, "every class"),
    ({"recall_floors": {3: 0.9}}, "class indices 0 .. 2"),
    ({"recall_floors": {1: 1.2}}, r"recall_floors\[1\]"),
    ({"recall_floors": {}}, "non-empty"),
    ({"recall_floors": {1: 0.9, 2: 0.9}, "method": "expectation"}, "exactly one"),
    ({"recall_floors": {1: 0.9}, "confidence": 1.0}, "confidence"),
])
def test_bad_arguments_named(kwargs, match):
    p, y = _three_classes(200, 7)
    with pytest.raises(ValueError, match=match):
        guaranteed_class_offsets(p, y, zero_one_costs(3), **kwargs)


def test_unreachable_raises_never_returns_unconstrained_rule():
    # 0.999 recall at 90 % confidence needs ceil(log 0.1 / log 0.999) = 2302 rows of the class
    p, y = _three_classes(300, 8)
    with pytest.raises(GuaranteeUnreachableError, match="2302"):
        guaranteed_class_offsets(p, y, zero_one_costs(3), recall_floors={2: 0.999})


@pytest.mark.slow
def test_violation_rate_at_most_delta_by_simulation():
    # Learn-then-Test's promise (Angelopoulos et al. 2025, Theorem 1): P(violation) <= delta.
    # True recall of the certified rule measured on 40,000 fresh rows (Monte Carlo sd of a recall
    # near 0.75 on ~13,000 class rows is 0.004, so a 0.005 margin is left for it); 300 held-out
    # sets of 600 rows: a true violation rate of 0.2 has sd 0.023; we allow delta + 3 sd. The
    # floors (0.72, 0.74) lie between the plain rule's recall (0.69) and the most protective
    # rule's (0.80, measured on the same fresh rows), so they bind and can be certified.
    p_test, y_test = _three_classes(40000, 999, strength=1.2)
    viol = refused = 0
    for rep in range(300):
        p, y = _three_classes(600, rep, strength=1.2)
        try:
            g = guaranteed_class_offsets(p, y, zero_one_costs(3),
                                         recall_floors={0: 0.72, 2: 0.74}, confidence=0.8)
        except GuaranteeUnreachableError:
            refused += 1  # no rule is deployed: never a violation
            continue
        a = _actions(p_test, g.offsets, zero_one_costs(3))
        true0 = np.mean(a[y_test == 0] == 0)
        true2 = np.mean(a[y_test == 2] == 2)
        viol += (true0 < 0.72 - 0.005) or (true2 < 0.74 - 0.005)
    assert viol / 300 <= 0.2 + 3 * np.sqrt(0.2 * 0.8 / 300)
    assert refused < 100  # the test has power: most held-out sets certify a rule


def test_wrapper_recall_floors_on_bundled_wine():
    # scikit-learn's bundled wine data; a frozen weak model, floors by class label
    from sklearn.datasets import load_wine
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression

    from probwrap import CostPolicyWrapper

    X, y = load_wine(return_X_y=True)
    labels = np.array(["barolo", "grignolino", "barbera"])[y]
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    model = LogisticRegression(max_iter=5000, C=1e-4).fit(X[idx[:60]], labels[idx[:60]])
    X_h, y_h = X[idx[60:]], labels[idx[60:]]
    costs = zero_one_costs(3)
    spec = {"recall_floors": {"barbera": 0.8}, "confidence": 0.8}
    policy = CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned",
                               guarantee=spec).fit(X_h, y_h)
    g = policy.guarantee_
    j = int(np.flatnonzero(policy.classes_ == "barbera")[0])
    direct = guaranteed_class_offsets(model.predict_proba(X_h),
                                      np.searchsorted(policy.classes_, y_h), costs,
                                      recall_floors={j: 0.8}, confidence=0.8)
    assert g.cost == pytest.approx(direct.cost) and g.boost == direct.boost
    pred = policy.predict(X_h)
    assert np.mean(pred[y_h == "barbera"] == "barbera") == pytest.approx(g.achieved[j])
    assert g.achieved[j] >= 0.8
    with pytest.raises(ValueError, match="not among the classes"):
        CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned",
                          guarantee={"recall_floors": {"merlot": 0.8}}).fit(X_h, y_h)
    with pytest.raises(ValueError, match="recall floors"):
        CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned",
                          guarantee={"requirement": "recall", "target": 0.8}).fit(X_h, y_h)
    with pytest.raises(ValueError, match="no `capacity`"):
        CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned",
                          capacity={"barbera": 0.3}, guarantee=spec).fit(X_h, y_h)
