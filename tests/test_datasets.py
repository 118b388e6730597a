"""The invented demo generator behaves as documented (demo data; no reference values here:
the checks are of the claims its docstring makes, with SciPy's two-sample tests)."""

import numpy as np
import pytest
from scipy.stats import ks_2samp

from probwrap.datasets import make_parcels, parcel_routing_costs, parcel_source_prior
from probwrap.datasets._parcels import _summer_proba
from probwrap.shift import adjust_to_prior


def test_winter_doubles_the_damage_share():
    winter = make_parcels(3000, season="winter", random_state=0)
    summer_prior = parcel_source_prior()
    np.testing.assert_allclose(winter.prior[1], 2 * summer_prior[1])
    # the drawn labels follow the season's prior: within 4 binomial standard errors
    assert abs(winter.target.mean() - winter.prior[1]) < 4 * np.sqrt(
        winter.prior[1] * (1 - winter.prior[1]) / 3000
    )


@pytest.mark.parametrize("n_outcomes", [2, 3])
def test_winter_keeps_the_class_conditional_feature_distributions(n_outcomes):
    # The "pure prior shift" claim: p(x | y) is the same in both seasons. Two-sample
    # Kolmogorov-Smirnov tests (scipy.stats.ks_2samp) per feature and class, Bonferroni-corrected
    # at 0.1 % overall; seeded, so the outcome is fixed. Power check: the same test separates the
    # classes within summer (p(x | damaged) != p(x | intact)), so it would notice a shift.
    summer = make_parcels(20_000, n_outcomes=n_outcomes, random_state=3)
    winter = make_parcels(20_000, n_outcomes=n_outcomes, season="winter", random_state=4)
    n_tests = summer.data.shape[1] * n_outcomes
    for k in range(n_outcomes):
        a, b = summer.data[summer.target == k], winter.data[winter.target == k]
        for j in range(summer.data.shape[1]):
            assert ks_2samp(a[:, j], b[:, j]).pvalue > 1e-3 / n_tests, (k, j)
    intact, damaged = summer.data[summer.target == 0], summer.data[summer.target == 1]
    assert min(ks_2samp(intact[:, j], damaged[:, j]).pvalue
               for j in range(summer.data.shape[1])) < 1e-6
    # and the true winter probabilities are the summer ones of the same parcels re-weighted by
    # Bayes' rule (Saerens et al. 2002, eq. 2.4)
    np.testing.assert_allclose(
        adjust_to_prior(winter.true_proba, winter.prior, summer.source_prior),
        _summer_proba(winter.data, n_outcomes), rtol=1e-10, atol=1e-14)


def test_reproducible_and_three_outcomes():
    a = make_parcels(500, n_outcomes=3, random_state=1)
    b = make_parcels(500, n_outcomes=3, random_state=1)
    np.testing.assert_array_equal(a.data, b.data)
    assert a.true_proba.shape == (500, 3) and set(np.unique(a.target)) <= {0, 1, 2}


def test_routing_costs_and_bad_input():
    costs = parcel_routing_costs(np.array([0.0, 50.0]))
    assert costs.shape == (2, 3, 3)
    assert costs[1, 2, 0] == 58.0  # broken and shipped: value plus 8
    with pytest.raises(ValueError, match="`parcel_value`"):
        parcel_routing_costs([-1.0])
    with pytest.raises(ValueError, match="`season`"):
        make_parcels(10, season="spring")
    with pytest.raises(ValueError, match="`n_outcomes`"):
        make_parcels(10, n_outcomes=4)
    with pytest.raises(ValueError, match="`prevalence`"):
        make_parcels(10, prevalence=1.5)
