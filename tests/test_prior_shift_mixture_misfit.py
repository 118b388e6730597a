"""The check that a two-class batch's scores fit some mixture of the labelled classes
(``class_mixture_misfit``, ``ClassMixtureMisfitWarning``; docs/evidence/prior_shift_log.md, "A level-holding
check of the batch's shape")."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import stats
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import ClassMixtureMisfitWarning, class_mixture_misfit


def _adapt(seed: int, batch: str):
    """Breast cancer (scikit-learn's bundled copy; mean radius and mean texture): 250 labelled
    rows, the batch from the other 319: every row whose mean radius lies between the set's
    40th and 80th percentiles (within each class the scores differ from the labelled class's:
    prior shift broken), or as many rows drawn by class without replacement at that band's
    share of benign (prior shift holds)."""
    data = load_breast_cancer()
    X, y = data.data[:, [0, 1]], data.target
    rng = np.random.default_rng(seed)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    band = pool[(X[pool, 0] > np.quantile(X[:, 0], 0.4)) & (X[pool, 0] < np.quantile(X[:, 0], 0.8))]
    rows = band
    if batch == "control":
        k1 = int(round(band.size * y[band].mean()))
        rows = np.r_[rng.choice(pool[y[pool] == 1], k1, replace=False),
                     rng.choice(pool[y[pool] == 0], band.size - k1, replace=False)]
    model = make_pipeline(StandardScaler(), LogisticRegression())
    wrapper = PriorShiftWrapper(model, random_state=0).fit(X[lab], y[lab])
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper.adapt(X[rows])
    return wrapper.prior_estimate_, [w.category for w in caught]


def test_a_subgroup_batch_draws_the_warning_where_nothing_fired_before():
    # seed 0: a 125-row batch of the radius band; before this check adapt raised no warning
    # at all on it (measured on the code of before: no warning class in the list)
    res, caught = _adapt(0, "band")
    assert ClassMixtureMisfitWarning in caught
    assert res.mixture_misfit_pvalue < 1e-6
    assert [c for c in caught if c is not ClassMixtureMisfitWarning] == []


@pytest.mark.parametrize("seed", range(5))
def test_batches_drawn_by_class_stay_quiet(seed):
    res, caught = _adapt(seed, "control")
    assert ClassMixtureMisfitWarning not in caught
    assert res.mixture_misfit_pvalue > 0.01


def test_null_distribution_is_chi_square_with_bins_minus_two_degrees():
    # Under prior shift (fresh Gaussian draws, the batch's share 0.2 against 0.5 labelled) the
    # statistic follows chi-square with bins - 2 degrees of freedom (Neyman 1949, minimum
    # chi-square; scipy.stats.chi2 as the reference), the labelled side's 100 rows included.
    rng = np.random.default_rng(5)
    stat = []
    for _ in range(300):
        y = rng.integers(0, 2, 100)
        s = rng.normal(1.5 * y, 1.0)
        t = rng.normal(1.5 * (rng.uniform(size=400) < 0.2), 1.0)
        stat.append(class_mixture_misfit(t, s, y, bins=5)[0])
    stat = np.array(stat)
    assert stats.kstest(stat, stats.chi2(3).cdf).pvalue > 0.01
    assert 0.02 < np.mean(stat > stats.chi2(3).ppf(0.95)) < 0.09
    assert abs(stat.mean() - 3.0) < 0.45


def test_labelled_error_is_in_the_variance():
    # the same batch and labelled shares, the labelled side 100 rows against 10,000 (the rows
    # repeated): the statistic is smaller with the labelled rows' error in its variance
    rng = np.random.default_rng(1)
    y = rng.integers(0, 2, 100)
    s = rng.normal(1.5 * y, 1.0)
    t = rng.normal(1.5 * (rng.uniform(size=400) < 0.2), 1.0) + 0.3
    few = class_mixture_misfit(t, s, y, bins=4)[0]
    many = class_mixture_misfit(t, np.repeat(s, 100), np.repeat(y, 100), bins=4)[0]
    assert many > 1.5 * few


def test_weight_scale_and_checks():
    rng = np.random.default_rng(2)
    y = rng.integers(0, 2, 300)
    s = rng.normal(2.0 * y, 1.0)
    t = rng.normal(1.0, 1.0, 200)
    w_s, w_t = rng.uniform(0.5, 2.0, 300), rng.uniform(0.5, 2.0, 200)
    a = class_mixture_misfit(t, s, y, sample_weight=w_t, source_sample_weight=w_s)
    b = class_mixture_misfit(t, s, y, sample_weight=1e4 * w_t, source_sample_weight=1e-3 * w_s)
    np.testing.assert_allclose(a, b, rtol=1e-9)
    assert class_mixture_misfit(t[:10], s, y) is None  # fewer than 15 unlabelled rows
    with pytest.raises(ValueError, match="`bins`"):
        class_mixture_misfit(t, s, y, bins=2)
