"""Calibration tests on few rows: a warning when the chi-square/normal reference does not fit, and
a Monte-Carlo p-value from outcome sets drawn under calibration.

Found on 6 rows with one event: Hosmer-Lemeshow (held out) gave p = 2.5e-4 where the exact
p-value is 0.081, with no warning; on one row forecast 0.01 that turned out an event both tests
gave p = 2.5e-23 where the exact probability is 0.01. Reference: the exact p-value, summing the
probability of every one of the 2^n outcome sets whose statistic is at least the observed one
(each row an event with probability p, independently: the null hypothesis itself).
"""

import itertools
import warnings

import numpy as np
import pytest
from scipy import stats
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.metrics import (
    ApproximatePValueWarning,
    hosmer_lemeshow_test,
    spiegelhalter_z_test,
)


def _forecasts(n, seed):
    # forecasts of a real model: logistic regression on 60 rows of scikit-learn's bundled breast
    # cancer data, scored on n other rows (features scaled so the fit converges)
    data = load_breast_cancer()
    X = (data.data - data.data.mean(0)) / data.data.std(0)
    idx = np.random.default_rng(seed).permutation(len(data.target))
    model = LogisticRegression(C=0.01, max_iter=2000).fit(X[idx[:60]], data.target[idx[:60]])
    return data.target[idx[60:60 + n]], model.predict_proba(X[idx[60:60 + n]])[:, 1]


def _exact_pvalue(p, y, statistic):
    """Sum of P(y') over all 2^n outcome sets y' with statistic(y') >= statistic(y)."""
    observed = statistic(y)
    total = 0.0
    for bits in itertools.product((0, 1), repeat=len(p)):
        yy = np.array(bits)
        if statistic(yy) >= observed - 1e-10 * max(1.0, abs(observed)):
            total += float(np.prod(np.where(yy == 1, p, 1.0 - p)))
    return total


def _quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*args, **kwargs)


def _hl(p, n_groups):
    return lambda yy: _quiet(hosmer_lemeshow_test, yy, p, n_groups=n_groups,
                             setting="held_out").statistic


def _z(p):
    return lambda yy: abs(_quiet(spiegelhalter_z_test, yy, p).statistic)


@pytest.mark.parametrize("seed", [0, 3])
def test_null_draws_match_the_exact_pvalue(seed):
    y, p = _forecasts(9, seed)
    draws = 20_000
    for name, fn, exact_stat, kw in [
        ("hl", hosmer_lemeshow_test, _hl(p, 3), {"n_groups": 3, "setting": "held_out"}),
        ("z", spiegelhalter_z_test, _z(p), {}),
    ]:
        exact = _exact_pvalue(p, y, exact_stat)
        res = fn(y, p, n_null_draws=draws, random_state=seed, **kw)
        assert res.reference == "null draws"
        se = np.sqrt(exact * (1.0 - exact) / draws)
        assert res.pvalue_standard_error == pytest.approx(se, rel=0.2, abs=1e-4)
        # within 4 standard errors, plus the (1 + k) / (1 + B) correction
        assert abs(res.pvalue - exact) <= 4.0 * se + 1.0 / (draws + 1), (name, res.pvalue, exact)
        # the default keeps the large-sample reference, now with a warning on 9 rows
        with pytest.warns(ApproximatePValueWarning, match="n_null_draws"):
            plain = fn(y, p, **kw)
        assert plain.reference in ("chi-square", "normal")
        assert plain.statistic == res.statistic


def test_the_six_row_example_of_the_finding():
    # 6 rows, the event at the row forecast 0.04: chi-square p 2.5e-4, exact 0.081
    p = np.array([0.04, 0.1, 0.2, 0.3, 0.15, 0.25])
    y = np.array([1, 0, 0, 0, 0, 0])
    with pytest.warns(ApproximatePValueWarning, match="6 of 6 groups of risk"):
        asym = hosmer_lemeshow_test(y, p, setting="held_out")
    assert asym.pvalue == pytest.approx(stats.chi2.sf(asym.statistic, asym.dof), rel=1e-12)
    exact = _exact_pvalue(p, y, _hl(p, 10))
    res = hosmer_lemeshow_test(y, p, setting="held_out", n_null_draws=20_000, random_state=1)
    assert abs(res.pvalue - exact) <= 4.0 * res.pvalue_standard_error + 1e-4
    assert exact > 100 * asym.pvalue
    # one row forecast 0.01 that is an event: the exact p-value is 0.01 (the null draws have
    # ties at the observed C only when the row is an event)
    res1 = spiegelhalter_z_test([1], [0.01], n_null_draws=40_000, random_state=0)
    assert abs(res1.pvalue - 0.01) <= 4.0 * np.sqrt(0.01 * 0.99 / 40_000) + 1e-4


def test_whole_number_weights_draw_as_copied_rows():
    y, p = _forecasts(6, 1)
    w = np.array([1, 2, 1, 2, 1, 1])
    yr, pr = np.repeat(y, w), np.repeat(p, w)
    for fn, stat, kw in [
        (hosmer_lemeshow_test, _hl(pr, 3), {"n_groups": 3, "setting": "held_out"}),
        (spiegelhalter_z_test, _z(pr), {}),
    ]:
        exact = _exact_pvalue(pr, yr, stat)  # 2^8 outcome sets of the copied rows
        res = fn(y, p, sample_weight=w, n_null_draws=20_000, random_state=2, **kw)
        assert abs(res.pvalue - exact) <= 4.0 * np.sqrt(exact * (1 - exact) / 20_000) + 1e-4
        # normalised weights are rescaled to Kish's size (the documented contract) and still run
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            scaled = fn(y, p, sample_weight=w / w.sum(), n_null_draws=2_000, random_state=2, **kw)
        assert 0.0 < scaled.pvalue <= 1.0


def test_default_is_unchanged_and_quiet_on_enough_rows():
    rng = np.random.default_rng(0)
    p = rng.uniform(0.05, 0.95, size=2000)
    y = (rng.uniform(size=2000) < p).astype(int)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ApproximatePValueWarning)
        hl = hosmer_lemeshow_test(y, p, setting="held_out")
        z = spiegelhalter_z_test(y, p)
    assert hl.pvalue == stats.chi2.sf(hl.statistic, 10) and hl.reference == "chi-square"
    assert z.pvalue == 2.0 * stats.norm.sf(abs(z.statistic)) and z.reference == "normal"
    assert hl.pvalue_standard_error == 0.0 == z.pvalue_standard_error
    # same seed, same p-value
    a = spiegelhalter_z_test(y, p, n_null_draws=300, random_state=5)
    b = spiegelhalter_z_test(y, p, n_null_draws=300, random_state=5)
    assert a.pvalue == b.pvalue


def test_null_draws_are_checked():
    y, p = [0, 1, 0, 1], [0.2, 0.7, 0.4, 0.6]
    with pytest.raises(ValueError, match=r"`n_null_draws` needs setting='held_out'"):
        hosmer_lemeshow_test(y, p, n_groups=2, n_null_draws=100)
    for bad in (0, -3, 2.5, True):
        with pytest.raises(ValueError, match=r"`n_null_draws` must be None or a whole number"):
            spiegelhalter_z_test(y, p, n_null_draws=bad)
