"""A count table whose groups vary more than binomial draws a warning where its cases are
counted one by one (session 27).

Since session 26 a count table's whole-number weights count cases in ``auto``'s choice and the
tuned cutoff, which is exactly as sure as the rows repeated and too sure when the cases of a
group share causes. statsmodels' star98 (school districts, pupils above the median of those
tested) has Pearson dispersion 14.4 around a binomial GLM on all districts
(tests/test_aggregated_dispersion.py). The dispersion here is taken around a Platt map of the
held-out probabilities: statsmodels' binomial GLM on the groups with the held-out log-odds as
its one covariate is the outside reference (McCullagh & Nelder 1989, sec. 4.5: Pearson's
chi-square over its residual degrees of freedom).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.special import logit
from sklearn.frozen import FrozenEstimator

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._weights import table_dispersion

sm = pytest.importorskip("statsmodels.api")


def test_dispersion_is_statsmodels_pearson_over_residual_dof(star98_districts):
    model, (Xt, yt, wt), k, n = star98_districts
    p = model.predict_proba(Xt)[:, 1]
    dispersion, pvalue, groups = table_dispersion(p, yt, wt, np.repeat(np.arange(40), 2))
    glm = sm.GLM(np.column_stack([k, n - k]), sm.add_constant(logit(p[::2])),
                 family=sm.families.Binomial()).fit()
    assert groups == 40
    assert dispersion == pytest.approx(glm.pearson_chi2 / glm.df_resid, rel=1e-8)
    assert dispersion > 10 and pvalue < 1e-50


def test_auto_and_tuned_cutoff_warn_on_star98(star98_districts):
    model, (Xt, yt, wt), _, _ = star98_districts
    for make in (lambda: CalibrationWrapper(FrozenEstimator(model), method="auto",
                                            random_state=0),
                 lambda: CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 3},
                                           strategy="tuned", random_state=0)):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            make().fit(Xt, yt, sample_weight=wt)
        said = [str(c.message) for c in caught if "vary more than binomial" in str(c.message)]
        assert len(said) == 1 and "40 groups" in said[0]


def test_no_warning_for_binomial_groups_or_relative_weights(star98_districts):
    """The same districts with their pupils redrawn binomially around the model's probabilities
    (the check's null: no warning), and the star98 table divided by its sum (relative weights:
    its rows count by Kish's size, no case is counted, no warning)."""
    model, (Xt, yt, wt), _, n = star98_districts
    p = model.predict_proba(Xt)[::2, 1]
    redrawn = np.random.default_rng(5).binomial(n.astype(int), p)
    w_null = np.column_stack([redrawn, n - redrawn]).ravel().astype(float)
    for w in (w_null, wt / wt.sum()):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            CalibrationWrapper(FrozenEstimator(model), method="auto", random_state=0).fit(
                Xt, yt, sample_weight=w)
        assert not any("vary more than binomial" in str(c.message) for c in caught)
