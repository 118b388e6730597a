"""Guaranteed cutoffs (Learn-then-Test and conformal risk control).

Reference checks: p-values against scipy.stats.binomtest; the conformal-risk-control cutoff
against the published split-conformal quantile; the fixed-sequence rule re-done by hand with
scipy. The violation-rate simulation lives in benchmarks/guarantee.py; a small version of it is
here (slow) with its Monte Carlo tolerance.
"""

import math
import warnings

import numpy as np
import pytest
from scipy import stats

from probwrap.calibration import WeightScaleWarning
from probwrap.decision import (
    GuaranteeUnreachableError,
    binomial_tail_pvalue,
    guaranteed_cutoff,
    search_cutoff,
)


def gaussian_rows(n, mu=1.5, pi=0.3, seed=0):
    rng = np.random.default_rng(seed)
    y = (rng.uniform(size=n) < pi).astype(int)
    return rng.normal(mu * y, 1.0), y


@pytest.mark.parametrize("k,n,alpha", [(0, 30, 0.1), (3, 50, 0.1), (12, 40, 0.2), (7, 7, 0.5),
                                       (0, 1, 0.05), (199, 1000, 0.2)])
def test_pvalue_equals_scipy_binomtest(k, n, alpha):
    # reference: scipy.stats.binomtest, one-sided "less" (Angelopoulos et al. 2025, binomial tail)
    expected = stats.binomtest(k, n, alpha, alternative="less").pvalue
    assert float(binomial_tail_pvalue(k, n, alpha)) == pytest.approx(expected, rel=1e-10)


def test_pvalue_weighted_counts_lie_between_neighbouring_integers():
    # the continuous extension of P(Bin(n, a) <= k) is monotone in k between integer values
    lo = binomial_tail_pvalue(3, 40, 0.1)
    mid = binomial_tail_pvalue(3.5, 40, 0.1)
    hi = binomial_tail_pvalue(4, 40, 0.1)
    assert lo < mid < hi


def test_fixed_sequence_matches_hand_computation():
    s, y = gaussian_rows(400, seed=1)
    g = guaranteed_cutoff(s, y, {"fp": 1.0, "fn": 0.2}, requirement="recall", target=0.9,
                          confidence=0.9)
    # by hand: test cutoffs from the lowest up; stop at the first p > delta (scipy binomtest)
    npos = int(y.sum())
    cert = []
    for c in g.cutoffs:
        misses = int(np.sum((y == 1) & (s <= c)))
        p = stats.binomtest(misses, npos, 0.1, alternative="less").pvalue
        if p > 0.1:
            break
        cert.append(c)
    np.testing.assert_array_equal(g.cutoffs[g.certified], np.array(cert))
    # the chosen cutoff is the cheapest certified one (mean cost computed by hand)
    def cost(c):
        flag = s > c
        return (1.0 * np.sum(flag & (y == 0)) + 0.2 * np.sum(~flag & (y == 1))) / len(y)

    assert g.cutoff in cert
    assert g.cost == pytest.approx(min(cost(c) for c in cert), rel=1e-12)
    assert g.achieved >= 0.9
    assert g.p_value <= 0.1
    # Clopper-Pearson floor on recall at confidence 0.9 (scipy's exact binomial interval)
    misses = int(np.sum((y == 1) & (s <= g.cutoff)))
    ci = stats.binomtest(misses, npos, 0.1).proportion_ci(confidence_level=0.8, method="exact")
    assert g.bound == pytest.approx(1 - ci.high, rel=1e-9)


def test_expectation_cutoff_is_the_split_conformal_quantile():
    # Conformal risk control with a 0/1 miss loss is split conformal prediction: at least
    # ceil((n + 1)(1 - alpha)) of the n positives are flagged (Angelopoulos & Bates 2021,
    # "A gentle introduction to conformal prediction", sec. 1; CRC paper eq. (4) with B = 1).
    s, y = gaussian_rows(600, seed=2)
    g = guaranteed_cutoff(s, y, {"fp": 1.0, "fn": 0.1}, requirement="recall", target=0.9,
                          method="expectation")
    npos = int(y.sum())
    flagged_pos = int(np.sum((y == 1) & (s > g.cutoff)))
    assert flagged_pos == math.ceil((npos + 1) * 0.9)
    assert g.p_value != g.p_value  # nan: no test in this method
    assert g.confidence is None


def test_ceiling_requirements_tested_from_the_top():
    s, y = gaussian_rows(1000, seed=3)
    for req in ("false_positive_rate", "flagged_share"):
        g = guaranteed_cutoff(s, y, {"fp": 0.2, "fn": 1.0}, requirement=req, target=0.1)
        cert = g.cutoffs[g.certified]
        # certified cutoffs form one run ending at the top
        assert g.certified[-1]
        assert np.all(np.diff(np.flatnonzero(g.certified)) == 1)
        flag = s > g.cutoff
        value = flag[y == 0].mean() if req == "false_positive_rate" else flag.mean()
        assert value == pytest.approx(g.achieved)
        assert g.achieved <= 0.1 and g.bound <= 0.1 + 1e-12
        assert g.cutoff in cert


def test_precision_floor_certifies_from_enough_flagged_rows():
    s, y = gaussian_rows(2000, mu=2.0, seed=4)
    g = guaranteed_cutoff(s, y, {"fp": 0.2, "fn": 1.0}, requirement="precision", target=0.7)
    flag = s > g.cutoff
    assert y[flag].mean() == pytest.approx(g.achieved)
    assert g.achieved >= 0.7
    # the first cutoff tested flags at least log(delta)/log(1 - alpha) rows
    tested = np.flatnonzero(~np.isnan(g.p_values))
    first = tested.max()
    assert np.sum(s > g.cutoffs[first]) >= math.log(0.1) / math.log(0.7)
    assert np.sum(s > g.cutoffs[first + 1]) < math.log(0.1) / math.log(0.7)


def test_unreachable_raises_never_returns_unconstrained_rule():
    s, y = gaussian_rows(20, seed=5)
    with pytest.raises(GuaranteeUnreachableError, match="judged positive rows.*there are"):
        guaranteed_cutoff(s, y, {"fp": 1, "fn": 1}, requirement="recall", target=0.99,
                          confidence=0.95)


def test_capacity_conflict_raises():
    s, y = gaussian_rows(1000, seed=6)
    with pytest.raises(GuaranteeUnreachableError, match="capacity"):
        guaranteed_cutoff(s, y, {"fp": 1, "fn": 1}, requirement="recall", target=0.95,
                          capacity=0.05)


def test_capacity_respected_when_possible():
    s, y = gaussian_rows(1000, seed=6)
    g = guaranteed_cutoff(s, y, {"fp": 1, "fn": 5}, requirement="false_positive_rate",
                          target=0.2, capacity=0.25)
    assert np.mean(s > g.cutoff) <= 0.25


def test_weights_are_frequencies():
    s, y = gaussian_rows(300, seed=7)
    w = np.random.default_rng(0).integers(1, 4, s.shape[0])
    g_w = guaranteed_cutoff(s, y, {"fp": 1, "fn": 0.2}, requirement="recall", target=0.9,
                            sample_weight=w)
    g_rep = guaranteed_cutoff(np.repeat(s, w), np.repeat(y, w), {"fp": 1, "fn": 0.2},
                              requirement="recall", target=0.9)
    assert g_w.cutoff == pytest.approx(g_rep.cutoff)
    assert g_w.p_value == pytest.approx(g_rep.p_value, rel=1e-10)
    assert g_w.bound == pytest.approx(g_rep.bound, rel=1e-10)


def test_relative_weights_count_as_kish_rows_and_their_scale_does_not_matter():
    s, y = gaussian_rows(400, seed=8)
    costs = {"fp": 1, "fn": 0.2}
    plain_fit = guaranteed_cutoff(s, y, costs, requirement="recall", target=0.9)
    # reference: scipy's exact binomial test on the unweighted miss count at the chosen cutoff
    misses = int(np.sum((s <= plain_fit.cutoff) & (y == 1)))
    ref = stats.binomtest(misses, int(y.sum()), 0.1, alternative="less").pvalue
    assert plain_fit.p_value == pytest.approx(ref, rel=1e-10)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for scale in (1 / 400, 0.7, 2.5):  # equal weights that are not whole numbers
            g = guaranteed_cutoff(s, y, costs, requirement="recall", target=0.9,
                                  sample_weight=np.full(400, scale))
            assert g.cutoff == plain_fit.cutoff
            assert g.p_value == pytest.approx(ref, rel=1e-9)
    # unequal relative weights (censoring-like: a few rows carry most of the weight) give the
    # same answer at every scale, and count fewer rows than their sum
    w = np.random.default_rng(3).exponential(size=400) + 0.05
    got = [guaranteed_cutoff(s, y, costs, requirement="recall", target=0.9,
                             sample_weight=w * c) for c in (0.5, 1.0, 3.0, 10.0)]
    assert len({g.cutoff for g in got}) == 1
    np.testing.assert_allclose([g.p_value for g in got], got[0].p_value, rtol=1e-9)
    pos = w[y == 1]
    kish = pos.sum() ** 2 / (pos @ pos)
    assert kish < pos.sum()
    # the bound is the one-sided Clopper-Pearson (1934) bound, scipy's beta quantile, on
    # Kish's count with the weighted miss share kept
    k_eff = float(np.sum(w[(s <= got[1].cutoff) & (y == 1)])) * kish / pos.sum()
    assert got[1].bound == pytest.approx(1 - stats.beta.ppf(0.9, k_eff + 1, kish - k_eff),
                                         rel=1e-9)


def test_whole_number_weights_with_a_common_factor_warn():
    s, y = gaussian_rows(300, seed=12)
    with pytest.warns(WeightScaleWarning, match="multiple of 3"):
        guaranteed_cutoff(s, y, {"fp": 1, "fn": 0.2}, requirement="recall", target=0.9,
                          sample_weight=np.full(300, 3))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        w = np.random.default_rng(0).integers(1, 4, 300)
        guaranteed_cutoff(s, y, {"fp": 1, "fn": 0.2}, requirement="recall", target=0.9,
                          sample_weight=w)


def test_unconstrained_result_kept_for_comparison():
    s, y = gaussian_rows(800, seed=9)
    costs = {"fp": 1, "fn": 0.2}
    g = guaranteed_cutoff(s, y, costs, requirement="recall", target=0.95)
    base = search_cutoff(s, y, costs)
    assert g.unconstrained.cutoff == base.cutoff
    assert g.binding  # a cheap miss pushes the free optimum far above the recall floor
    assert g.cost >= base.cost


@pytest.mark.parametrize(
    "kwargs,match",
    [
        ({"requirement": "accuracy", "target": 0.9}, "`requirement` must be one of"),
        ({"requirement": "recall", "target": 1.0}, r"`target` must be a number in \(0, 1\)"),
        ({"requirement": "recall", "target": 0.9, "confidence": 1.5}, "`confidence`"),
        ({"requirement": "precision", "target": 0.9, "method": "expectation"}, "precision"),
        ({"requirement": "recall", "target": 0.9, "method": "mean"}, "`method` must be one of"),
    ],
)
def test_bad_arguments_named(kwargs, match):
    s, y = gaussian_rows(100)
    with pytest.raises(ValueError, match=match):
        guaranteed_cutoff(s, y, {"fp": 1, "fn": 1}, **kwargs)


@pytest.mark.slow
def test_violation_rate_at_most_delta_by_simulation():
    # Learn-then-Test's promise (Angelopoulos et al. 2025, Theorem 1): P(violation) <= delta.
    # Gaussian classes, true recall of a cutoff c is the normal tail sf(c - mu). 400 held-out
    # sets: a true rate of 0.10 has sd 0.015; we allow delta + 3 sd = 0.145.
    from scipy.stats import norm

    rng = np.random.default_rng(12)
    viol = 0
    for _ in range(400):
        y = (rng.uniform(size=300) < 0.3).astype(int)
        s = rng.normal(1.5 * y, 1.0)
        g = guaranteed_cutoff(s, y, {"fp": 1.0, "fn": 0.2}, requirement="recall", target=0.9)
        viol += norm.sf(g.cutoff - 1.5) < 0.9
    assert viol / 400 <= 0.1 + 3 * np.sqrt(0.1 * 0.9 / 400)


def _frozen_model():
    from sklearn.datasets import load_breast_cancer
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)  # scikit-learn's bundled data
    y = 1 - y  # malignant = positive
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    fit_rows, held_rows = idx[:250], idx[250:]
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=2000))
    model.fit(X[fit_rows], y[fit_rows])
    return FrozenEstimator(model), X[held_rows], y[held_rows]


def test_wrapper_guarantee_equals_array_function():
    from probwrap import CostPolicyWrapper

    frozen, X, y = _frozen_model()
    costs = {"fp": 1.0, "fn": 0.3}
    spec = {"requirement": "recall", "target": 0.95, "confidence": 0.9}
    policy = CostPolicyWrapper(frozen, costs=costs, strategy="tuned", guarantee=spec).fit(X, y)
    g = guaranteed_cutoff(frozen.predict_proba(X)[:, 1], y, costs, score_bounds=(0, 1), **spec)
    assert policy.cutoff_ == g.cutoff
    assert policy.guarantee_.bound == pytest.approx(g.bound)
    flagged = policy.predict(X) == 1
    assert flagged[y == 1].mean() == pytest.approx(g.achieved)
    assert g.achieved >= 0.95


def test_wrapper_guarantee_refuses_what_it_cannot_certify_or_apply():
    from probwrap import CostPolicyWrapper

    frozen, X, y = _frozen_model()
    with pytest.raises(GuaranteeUnreachableError):
        CostPolicyWrapper(frozen, costs={"fp": 1, "fn": 1}, strategy="tuned",
                          guarantee={"requirement": "recall", "target": 0.999,
                                     "confidence": 0.99}).fit(X, y)
    with pytest.raises(ValueError, match="strategy='tuned'"):
        CostPolicyWrapper(frozen, costs={"fp": 1, "fn": 1},
                          guarantee={"requirement": "recall", "target": 0.9}).fit(X, y)
    with pytest.raises(ValueError, match="keys 'requirement' and 'target'"):
        CostPolicyWrapper(frozen, costs={"fp": 1, "fn": 1}, strategy="tuned",
                          guarantee={"recall": 0.9}).fit(X, y)


def test_command_line_guarantee_matches_the_array_function(tmp_path, capsys):
    import json

    import pandas as pd

    from probwrap.cli import main

    frozen, X, y = _frozen_model()
    p = frozen.predict_proba(X)[:, 1]
    path = tmp_path / "held.csv"
    pd.DataFrame({"risk": p, "malignant": y}).to_csv(path, index=False)
    argv = ["cutoff", "--scores", str(path), "--score-column", "risk", "--label-column",
            "malignant", "--cost-fp", "1", "--cost-fn", "0.3", "--resamples", "0",
            "--guarantee", "recall", "--guarantee-target", "0.95", "--format", "json"]
    assert main(argv) == 0
    out = json.loads(capsys.readouterr().out)["guarantee"]
    g = guaranteed_cutoff(p, y, {"fp": 1, "fn": 0.3}, requirement="recall", target=0.95,
                          score_bounds=(0, 1))
    assert out["cutoff"] == g.cutoff and out["bound"] == pytest.approx(g.bound)
    assert out["p_value"] == pytest.approx(g.p_value)
    # unreachable: a one-line error and a non-zero exit, no rule printed
    argv[-5:-2] = ["recall", "--guarantee-target", "0.999"]
    argv += ["--guarantee-confidence", "0.99"]
    assert main(argv) != 0
    err = capsys.readouterr().err
    assert "No cutoff can be certified" in err and "Traceback" not in err
