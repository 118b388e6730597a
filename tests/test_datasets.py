"""The invented demo generator behaves as documented (demo data; no reference values here)."""

import numpy as np
import pytest

from probwrap.datasets import make_parcels, parcel_routing_costs, parcel_source_prior
from probwrap.shift import adjust_to_prior


def test_winter_is_a_pure_prior_shift_of_summer():
    winter = make_parcels(3000, season="winter", random_state=0)
    summer_prior = parcel_source_prior()
    np.testing.assert_allclose(winter.prior[1], 2 * summer_prior[1])
    # true winter probabilities are the summer posteriors re-weighted by Bayes' rule
    # (Saerens et al. 2002, eq. 2.4): mapping them back gives rows that sum to one and a mean
    # near the summer prior
    back = adjust_to_prior(winter.true_proba, winter.prior, summer_prior)
    np.testing.assert_allclose(back.sum(axis=1), 1.0)
    assert abs(winter.target.mean() - winter.prior[1]) < 4 * np.sqrt(
        winter.prior[1] * (1 - winter.prior[1]) / 3000
    )


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
