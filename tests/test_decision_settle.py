"""settle_cutoff: the plug-in cutoff unless held-out rows show that another cutoff costs less."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import binomtest
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.decision import plugin_cutoff, realised_cost, search_cutoff, settle_cutoff

C = np.array([[0.0, 1.0], [3.0, 0.0]])  # fp 1, fn 3: plug-in cutoff 1/4 (Elkan 2001)
P = np.array([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8])
Y = np.array([0, 0, 0, 0, 0, 1, 1, 1])


def _paired(p, y, cutoff_a, cutoff_b, w=None):
    """Direct per-row paired difference of two cutoffs' costs: mean and its standard error."""
    w = np.ones(len(y)) if w is None else w
    d = C[y, (p > cutoff_a).astype(int)] - C[y, (p > cutoff_b).astype(int)]
    mean = np.average(d, weights=w)
    var = np.average((d - mean) ** 2, weights=w)
    return mean, np.sqrt(var / w.sum())


def test_hand_worked_example_one_sided_rule():
    # Worked by hand: the plug-in cutoff 0.25 flags 3 negatives the least-cost cutoff (0.55,
    # middle of 0.5..0.6) does not. Given those 3 rows, the plug-in cutoff costs more exactly
    # when their share of positives is below 1/4 (fp 1, fn 3); 0 positives of 3 has the exact
    # binomial probability (3/4)^3 = 27/64 = 0.42 under a share of 1/4 (SciPy's binomtest
    # beside it): no evidence, the plug-in cutoff is kept. The normal approximation used before
    # (excess 3/8 > z_0.95 * 0.1712) rejected it on these three rows.
    res = settle_cutoff(P, Y, C)
    assert res.plugin == 0.25 and res.least_cost == pytest.approx(0.55)
    assert res.excess == pytest.approx(3 / 8)
    assert res.excess_se == pytest.approx(np.sqrt((3 / 8 - 9 / 64) / 8), rel=1e-12)
    assert res.kept_plugin and res.cutoff == 0.25
    assert res.p_value == pytest.approx(27 / 64, rel=1e-12)
    assert res.p_value == pytest.approx(binomtest(0, 3, 0.25, alternative="less").pvalue)
    # every row counted 4 times (frequency weights): 0 positives of 12, (3/4)^12 = 0.032 < 0.05,
    # rejected; the cutoff 0.35 (8 such rows, (3/4)^8 = 0.100) is the nearest not rejected
    w4 = settle_cutoff(P, Y, C, sample_weight=np.full(8, 4.0))
    assert not w4.kept_plugin and w4.cutoff == pytest.approx(0.35)
    assert w4.p_value == pytest.approx(0.75 ** 12, rel=1e-12)
    assert settle_cutoff(np.repeat(P, 4), np.repeat(Y, 4), C).cutoff == pytest.approx(0.35)
    # at level 0.2 the cutoff 0.35 is passed over too (0.100 <= 0.2); 0.45 ((3/4)^4 = 0.32) not
    assert settle_cutoff(P, Y, C, sample_weight=np.full(8, 4.0), level=0.2).cutoff == (
        pytest.approx(0.45))


def test_exact_p_value_matches_scipy_binomtest_both_directions():
    # The anchor flags fewer rows than the least-cost cutoff (anchor above it): it costs more
    # when the rows between hold a positive share above the plug-in cutoff; the upper tail.
    rng = np.random.default_rng(2)
    p = rng.uniform(size=90)
    y = (rng.uniform(size=90) < p).astype(int)
    least = search_cutoff(p, y, C, score_bounds=(0, 1)).cutoff
    for anchor in (0.05, 0.15, least + 0.1, least + 0.25, 0.9):
        res = settle_cutoff(p, y, C, anchor=anchor)
        lo, hi = sorted((anchor, least))
        between = (p > lo) & (p <= hi)
        k, m = int(y[between].sum()), int(between.sum())
        side = "less" if anchor < least else "greater"
        if m:
            assert res.p_value == pytest.approx(binomtest(k, m, 0.25, alternative=side).pvalue,
                                                rel=1e-9), anchor
        assert res.kept_plugin == (res.p_value > 0.05 or res.excess <= 0)


def test_reconstruction_matches_direct_paired_computation():
    # Consistency test: the O(n) reconstruction from the search's curve against the per-row
    # paired difference computed directly, with integer weights, on random rows.
    rng = np.random.default_rng(3)
    p = rng.uniform(size=60)
    y = (rng.uniform(size=60) < p).astype(int)
    w = rng.integers(1, 4, 60).astype(float)
    res = settle_cutoff(p, y, C, sample_weight=w)
    least = search_cutoff(p, y, C, sample_weight=w, score_bounds=(0, 1)).cutoff
    mean, se = _paired(p, y, 0.25, least, w)
    assert res.excess == pytest.approx(mean, abs=1e-12)
    assert res.excess_se == pytest.approx(se, rel=1e-9)


def test_weights_frequencies_and_scale():
    rng = np.random.default_rng(5)
    p = rng.uniform(size=50)
    y = (rng.uniform(size=50) < p ** 2).astype(int)
    w = rng.integers(1, 4, 50).astype(float)
    dup = np.repeat(np.arange(50), w.astype(int))
    a = settle_cutoff(p, y, C, sample_weight=w)
    b = settle_cutoff(p[dup], y[dup], C)
    assert a.cutoff == pytest.approx(b.cutoff) and a.excess_se == pytest.approx(b.excess_se)
    # weights that cannot be frequencies count as Kish's effective size: scale-free choice
    u = rng.uniform(0.5, 2.0, 50)
    assert settle_cutoff(p, y, C, sample_weight=u / u.sum()).cutoff == pytest.approx(
        settle_cutoff(p, y, C, sample_weight=u * 1e-3).cutoff)
    # zero weight = an absent row
    z = np.ones(50)
    z[::4] = 0.0
    assert settle_cutoff(p, y, C, sample_weight=z).cutoff == pytest.approx(
        settle_cutoff(p[z > 0], y[z > 0], C).cutoff)


def test_many_rows_return_the_least_cost_decision():
    # with every row counted 10,000 times the standard errors vanish: the least-cost decision
    res = settle_cutoff(P, Y, C, sample_weight=np.full(8, 1e4))
    assert res.cutoff == pytest.approx(0.55)


def test_capacity_respected():
    search = search_cutoff(P, Y, C, capacity=0.25, score_bounds=(0, 1))
    res = settle_cutoff(P, Y, C, search)
    assert np.mean(P > res.cutoff) <= 0.25
    with pytest.raises(ValueError, match="`level`"):
        settle_cutoff(P, Y, C, level=0.7)


def test_small_heldout_sets_on_bundled_digits_cost_less_than_the_least_cost_cutoff():
    # Bundled digits, "8" against the rest, a logistic model on 600 rows; 20 held-out draws of
    # 40 rows, fn cost 10. The least-cost cutoff of 40 rows (about 4 positives) sits where a
    # handful of rows put it; measured on the remaining ~1,150 rows it costs clearly more than
    # the plug-in cutoff on average (1.5x in this set-up), the wrapper's settled cutoff not more
    # than 5 % more (1.0x measured; benchmarks/small_data_sweep.py --only cost has the sweep).
    X, d = load_digits(return_X_y=True)
    y = (d == 8).astype(int)
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    fit, rest = idx[:600], idx[600:]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[fit], y[fit])
    costs = {"fp": 1.0, "fn": 10.0}
    matrix = np.array([[0.0, 1.0], [10.0, 0.0]])
    totals = np.zeros(3)
    for _ in range(20):
        held = rng.choice(len(rest), 40, replace=False)
        h, t = rest[held], np.delete(rest, held)
        if y[h].sum() < 2:
            continue
        cp = CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned").fit(
            X[h], y[h])
        pt = model.predict_proba(X[t])[:, 1]
        for j, cut in enumerate([cp.cutoff_, cp.cost_curve_.cutoff, plugin_cutoff(costs)]):
            totals[j] += realised_cost(y[t], (pt > cut).astype(int), costs=matrix)
    settled, least, plug = totals
    assert least > 1.2 * plug
    assert settled <= 1.05 * plug


def test_class_offsets_settle_toward_the_bayes_rule_on_small_bundled_sets():
    # Bundled wine, Gaussian naive Bayes on 50 rows, 40 held-out rows per draw, errors on class
    # j cost j + 1. Offsets tuned on 40 rows chase noise: summed over 10 draws their test cost
    # is 1.20x the plain Bayes rule's (measured); shrunk by settle_class_offsets (what
    # CostPolicyWrapper(strategy="tuned") does) 0.96x. Asserted with room: > 1.1x, <= 1.02x.
    from sklearn.datasets import load_wine
    from sklearn.naive_bayes import GaussianNB

    from probwrap.decision import settle_class_offsets, tune_class_offsets

    X, y = load_wine(return_X_y=True)
    C3 = (1 - np.eye(3)) * np.array([[1.0], [2.0], [3.0]])
    totals = np.zeros(3)
    for seed in range(10):
        rng = np.random.default_rng(seed)
        idx = rng.permutation(len(y))
        fit, held, test = idx[:50], idx[50:90], idx[90:]
        model = GaussianNB().fit(X[fit], y[fit])
        ph, pt = model.predict_proba(X[held]), model.predict_proba(X[test])
        tuned = tune_class_offsets(ph, y[held], C3).offsets
        settled = settle_class_offsets(ph, y[held], C3, tuned).offsets
        for j, b in enumerate([tuned, settled, np.zeros(3)]):
            q = pt * np.exp(b)
            totals[j] += C3[y[test], np.argmin(q @ C3, axis=1)].mean()
    tuned_cost, settled_cost, bayes_cost = totals
    assert tuned_cost > 1.1 * bayes_cost
    assert settled_cost <= 1.02 * bayes_cost


def test_class_offsets_kept_when_the_rows_support_them():
    # Consistency test: with every row counted 10,000 times the standard errors vanish and the
    # tuned offsets are kept whole; zero offsets stay zero.
    from probwrap.decision import settle_class_offsets, tune_class_offsets

    rng = np.random.default_rng(1)
    p = rng.dirichlet([1.0, 1.0, 1.0], size=60)
    y = np.array([rng.choice(3, p=row ** 2 / (row ** 2).sum()) for row in p])
    C3 = 1 - np.eye(3)
    tuned = tune_class_offsets(p, y, C3).offsets
    assert np.any(tuned != 0)
    big = settle_class_offsets(p, y, C3, tuned, sample_weight=np.full(60, 1e4))
    assert big.share == 1.0
    np.testing.assert_array_equal(big.offsets, tuned)
    assert settle_class_offsets(p, y, C3, np.zeros(3)).share == 0.0
    # scale of the weights does not matter (Kish's effective size)
    u = rng.uniform(0.5, 2.0, 60)
    a = settle_class_offsets(p, y, C3, tuned, sample_weight=u / u.sum())
    b = settle_class_offsets(p, y, C3, tuned, sample_weight=u * 1e-3)
    assert a.share == b.share


def test_costs_near_the_largest_float_settle_like_scaled_ones():
    # the rule depends on the costs only up to a common factor; squared costs of 1e308 used to
    # overflow (inf - inf in the standard error) and the report warned "overflow" for them
    rng = np.random.default_rng(11)
    t = rng.beta(1, 3, 100)
    y = (rng.uniform(size=100) < t).astype(int)
    p = np.clip(t ** rng.uniform(0.4, 2.5), 1e-6, 1 - 1e-6)
    small = settle_cutoff(p, y, {"fp": 1.0, "fn": 4.0})
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        big = settle_cutoff(p, y, {"fp": 2.5e307, "fn": 1e308})
    assert not small.kept_plugin and big.cutoff == small.cutoff
    assert np.isclose(big.excess, 2.5e307 * small.excess, rtol=1e-9)
    assert np.isclose(big.excess_se, 2.5e307 * small.excess_se, rtol=1e-9)
