"""Expected cost per row on unlabelled batches and its interval."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from probwrap.calibration._base import WeightScaleWarning
from probwrap.decision import binary_cost_matrix
from probwrap.shift import adjust_to_prior, expected_cost_by_batch

COSTS = {"fp": 2.0, "fn": 35.0}


def test_single_row_variance_is_bernoulli():
    # One row, action "treat as negative": its cost is 35 * Bernoulli(p), whose variance is
    # 35^2 p (1 - p) (scipy.stats.bernoulli); action "positive": 2 * Bernoulli(1 - p).
    for p, cutoff in [(0.02, 0.5), (0.3, 0.05)]:
        t = expected_cost_by_batch([p], COSTS, batch_size=1, cutoff=cutoff)
        scale = 35.0 if p <= cutoff else 2.0
        success = p if p <= cutoff else 1.0 - p
        assert t["expected_cost"][0] == pytest.approx(scale * stats.bernoulli(success).mean())
        assert t["standard_error"][0] ** 2 == pytest.approx(
            scale**2 * stats.bernoulli(success).var(), rel=1e-12)


def test_single_row_multiclass_variance_matches_scipy_discrete():
    # A three-class row with a 3x3 cost matrix: the cost under the row's action is a discrete
    # variable taking C[k, a] with probability q_k (scipy.stats.rv_discrete).
    q = np.array([[0.2, 0.5, 0.3]])
    matrix = np.array([[0.0, 4.0, 9.0], [1.0, 0.0, 2.0], [7.0, 3.0, 0.0]])
    t = expected_cost_by_batch(q, matrix, batch_size=1, actions=np.array([2]))
    ref = stats.rv_discrete(values=([0, 1, 2], q[0]))
    values = matrix[:, 2]
    mean = float(np.sum(q[0] * values))
    var = float(ref.expect(lambda k: values[np.asarray(k, dtype=int)] ** 2)) - mean**2
    assert t["expected_cost"][0] == pytest.approx(mean)
    assert t["standard_error"][0] ** 2 == pytest.approx(var, rel=1e-10)


@pytest.mark.parametrize("n, p, level", [(200, 0.3, 0.95), (1000, 0.04, 0.9)])
def test_equal_probabilities_give_binomial_normal_interval(n, p, level):
    # n rows with the same p, all treated as positive: realised cost per row = 2 (n - Y) / n with
    # Y ~ Binomial(n, p). The normal interval from scipy.stats.binom's mean and variance and
    # scipy.stats.norm's quantile must be reproduced (to rounding).
    t = expected_cost_by_batch(np.full(n, p), COSTS, batch_size=n, cutoff=0.0, level=level,
                               interval="normal")
    y = stats.binom(n, p)
    mean = 2.0 * (n - y.mean()) / n
    se = 2.0 * np.sqrt(y.var()) / n
    z = stats.norm.ppf(0.5 + level / 2)
    np.testing.assert_allclose(
        [t["expected_cost"][0], t["standard_error"][0], t["lower"][0], t["upper"][0]],
        [mean, se, mean - z * se, mean + z * se], rtol=1e-12)


def test_batches_rules_and_weights():
    # consistency tests: batch labels in order of first appearance, the Bayes rule by default,
    # a weight of 2 equals a duplicated row, scaling weights up changes nothing but the count.
    rng = np.random.default_rng(0)
    p = rng.uniform(0.0, 0.3, size=90)
    labels = np.repeat(["w3", "w1", "w2"], 30)
    t = expected_cost_by_batch(p, COSTS, labels)
    assert t["batch"].tolist() == ["w3", "w1", "w2"]
    by_cut = expected_cost_by_batch(p, COSTS, labels, cutoff=2.0 / 37.0)
    np.testing.assert_allclose(t["expected_cost"], by_cut["expected_cost"])
    w = np.ones(90)
    w[0] = 2.0
    dup = expected_cost_by_batch(np.r_[p[:1], p], COSTS, np.r_[labels[:1], labels])
    weighted = expected_cost_by_batch(p, COSTS, labels, sample_weight=w)
    np.testing.assert_allclose(
        weighted[["expected_cost", "standard_error"]].tolist(),
        dup[["expected_cost", "standard_error"]].tolist(), rtol=1e-12)
    with pytest.warns(WeightScaleWarning):
        norm = expected_cost_by_batch(p, COSTS, labels, sample_weight=np.full(90, 1 / 90))
    np.testing.assert_allclose(norm["standard_error"], t["standard_error"], rtol=1e-12)
    assert np.all(t["lower"] >= 0.0)  # kept within the range the realised cost can take


def test_prior_adjustment_and_prior_band():
    rng = np.random.default_rng(1)
    p = rng.uniform(0.0, 0.2, size=400)
    t = expected_cost_by_batch(p, COSTS, batch_size=200, cutoff=0.1, source_prior=0.05,
                               target_prior=[[0.9, 0.1], [0.95, 0.05]],
                               target_interval=([0.07, 0.04], [0.13, 0.06]))
    q = adjust_to_prior(p[:200], 0.05, 0.1)
    act = (p[:200] > 0.1).astype(int)
    c = binary_cost_matrix(COSTS)
    direct = np.mean((1 - q) * c[0, act] + q * c[1, act])
    assert t["expected_cost"][0] == pytest.approx(direct)
    assert np.all(t["lower_with_prior"] <= t["lower"])
    assert np.all(t["upper_with_prior"] >= t["upper"])
    # prior 0.05 = source prior: the probabilities as given
    plain = expected_cost_by_batch(p[200:], COSTS, batch_size=200, cutoff=0.1)
    assert t["expected_cost"][1] == pytest.approx(plain["expected_cost"][0])


@pytest.mark.parametrize("kwargs, match", [
    ({"cutoff": 1.5}, "cutoff"),
    ({"cutoff": 0.1, "actions": np.zeros(4, dtype=int)}, "at most one"),
    ({"actions": np.full(4, 2)}, "column indices"),
    ({"level": 1.0}, "level"),
    ({"target_prior": 0.1}, "source_prior"),
    ({"source_prior": 0.05, "target_prior": [[0.9, 0.1]] * 3}, "one per batch"),
])
def test_bad_input_names_the_argument(kwargs, match):
    with pytest.raises(ValueError, match=match):
        expected_cost_by_batch([0.1, 0.2, 0.3, 0.4], COSTS, batch_size=2, **kwargs)


@pytest.mark.slow
def test_interval_covers_realised_cost_at_nominal_level():
    # Gaussian classes (x | y ~ N(+-1, 1), prevalence 0.3): the true posterior is logistic in x.
    # 1000 batches of 200 rows; the 95 % interval computed before the labels must cover the
    # realised cost per row in 95 % of batches. Monte Carlo standard error sqrt(.95 .05 / 1000)
    # = 0.0069; tolerance 3 standard errors plus 0.005 for the normal approximation at n = 200.
    rng = np.random.default_rng(7)
    n, reps, prev = 200, 1000, 0.3
    y_pop = rng.uniform(size=n * reps) < prev
    x = rng.normal(np.where(y_pop, 1.0, -1.0), 1.0)
    post = 1.0 / (1.0 + (1 - prev) / prev * np.exp(-2.0 * x))
    batch = np.repeat(np.arange(reps), n)
    t = expected_cost_by_batch(post, COSTS, batch, cutoff=2.0 / 37.0, interval="normal")
    first = batch < 300  # the exact interval on the first 300 batches (time)
    exact = expected_cost_by_batch(post[first], COSTS, batch[first], cutoff=2.0 / 37.0)
    assert set(exact["interval"]) == {"exact"}
    y = rng.uniform(size=n * reps) < post  # outcomes drawn after the interval
    act = post > 2.0 / 37.0
    cost = np.where(act, np.where(y, 0.0, 2.0), np.where(y, 35.0, 0.0))
    realised = np.bincount(batch, weights=cost) / n
    covered = np.mean((t["lower"] <= realised) & (realised <= t["upper"]))
    assert abs(covered - 0.95) < 3 * np.sqrt(0.95 * 0.05 / reps) + 0.005
    # the exact interval covers at least the nominal level (conservative by construction);
    # 300 batches: Monte Carlo standard error 0.0126
    covered = np.mean((exact["lower"] <= realised[:300]) & (realised[:300] <= exact["upper"]))
    assert covered >= 0.95 - 3 * np.sqrt(0.95 * 0.05 / 300)


def test_poisson_binomial_pmf_matches_binomial_and_enumeration():
    from itertools import product

    from probwrap.shift._batch_cost import poisson_binomial_pmf

    # reference: equal chances give scipy.stats.binom's pmf
    np.testing.assert_allclose(poisson_binomial_pmf(np.full(300, 0.04)),
                               stats.binom(300, 0.04).pmf(np.arange(301)), atol=1e-14)
    # the definition: enumerate every outcome of 10 unequal trials
    p = np.random.default_rng(3).uniform(0, 1, 10)
    brute = np.zeros(11)
    for ys in product((0, 1), repeat=10):
        ys = np.array(ys)
        brute[ys.sum()] += np.prod(np.where(ys == 1, p, 1 - p))
    np.testing.assert_allclose(poisson_binomial_pmf(p), brute, atol=1e-14)
    # counts repeat a trial
    np.testing.assert_allclose(poisson_binomial_pmf(p[:3], np.array([2, 1, 3])),
                               poisson_binomial_pmf(np.repeat(p[:3], [2, 1, 3])), atol=1e-14)
    # reference: the DFT of the characteristic function (Hong 2013, the DFT-CF method:
    # pmf = inverse DFT of prod_i (1 - p_i + p_i exp(2 pi i l / (N + 1)))), on 1,500 unequal
    # trials with repeats; 1e-13 allows for the rounding of N-term sums in both
    q = np.random.default_rng(4).beta(0.5, 5.0, 1000)
    counts = np.random.default_rng(5).integers(1, 3, 1000)
    trials = np.repeat(q, counts)
    size = trials.shape[0] + 1
    z = np.exp(2j * np.pi * np.arange(size) / size)
    chi = np.exp(np.log(1.0 - trials[:, None] + trials[:, None] * z[None, :]).sum(axis=0))
    hong = np.maximum(np.fft.fft(chi).real, 0.0)  # chi_l = sum_k pmf_k z_l^k
    np.testing.assert_allclose(poisson_binomial_pmf(q, counts), hong / hong.sum(), atol=1e-13)


def test_exact_interval_is_the_tightest_equal_tailed_one():
    # 12 rows, both actions: enumerate the 2^12 outcomes to get the realised cost's exact law
    from itertools import product

    p = np.random.default_rng(4).uniform(0.0, 0.3, 12)
    cutoff, level = 0.1, 0.9
    t = expected_cost_by_batch(p, COSTS, batch_size=12, cutoff=cutoff, level=level)
    assert t["interval"][0] == "exact"
    c = binary_cost_matrix(COSTS)
    act = (p > cutoff).astype(int)
    values, probs = [], []
    for ys in product((0, 1), repeat=12):
        ys = np.array(ys)
        values.append(c[ys, act].mean())
        probs.append(np.prod(np.where(ys == 1, p, 1 - p)))
    values, probs = np.array(values), np.array(probs)
    lo, hi = t["lower"][0], t["upper"][0]
    tail = (1 - level) / 2
    below_lo = probs[values < lo - 1e-12].sum()
    above_hi = probs[values > hi + 1e-12].sum()
    assert below_lo <= tail and above_hi <= tail
    assert 1 - below_lo - above_hi >= level
    # tightest: moving an end inwards past its support point would exceed the tail
    assert probs[values <= lo + 1e-12].sum() > tail
    assert probs[values >= hi - 1e-12].sum() > tail


def test_interval_choice_auto_exact_normal():
    rng = np.random.default_rng(5)
    p = rng.uniform(0.0, 0.2, 2600)
    t = expected_cost_by_batch(p, COSTS, batch_size=2500, cutoff=0.1)
    assert t["interval"].tolist() == ["normal", "exact"]  # 2500 rows, then 100
    w = np.ones(100)
    w[0] = 2.0
    dup = expected_cost_by_batch(np.r_[p[:1], p[:100]], COSTS, batch_size=101, cutoff=0.1)
    weighted = expected_cost_by_batch(p[:100], COSTS, batch_size=100, cutoff=0.1,
                                      sample_weight=w)
    np.testing.assert_allclose(weighted[["lower", "upper"]].tolist(),
                               dup[["lower", "upper"]].tolist(), rtol=1e-12)
    q = np.column_stack([1 - p[:30], 0.5 * p[:30], 0.5 * p[:30]])
    multi = expected_cost_by_batch(q, 1 - np.eye(3), batch_size=30)
    assert multi["interval"][0] == "normal"
    with pytest.raises(ValueError, match="interval='exact'"):
        expected_cost_by_batch(q, 1 - np.eye(3), batch_size=30, interval="exact")
    with pytest.raises(ValueError, match="`interval` must be one of"):
        expected_cost_by_batch(p[:10], COSTS, batch_size=10, interval="wide")
