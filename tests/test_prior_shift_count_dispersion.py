"""PriorShiftWrapper.fit on a two-class count table whose groups vary more than binomial warns
once (session 27).

Since session 27 ``fit`` and ``adapt`` read a count table's whole-number weights as its cases,
so statsmodels' star98 (school districts, pupils above the median of those tested) without
``cells=`` counts independent pupils, and adapt's interval is about 0.075 times the districts'
clustered width (docs/evidence/prior_shift_log.md, "Count tables in adapt (session 27)"). The check is the
one CalibrationWrapper(method="auto") and the tuned cutoff run (``table_dispersion``: Pearson's
chi-square over its residual degrees of freedom around a binomial GLM of the groups on the
held-out log-odds, McCullagh & Nelder 1989, sec. 4.5; checked against statsmodels'
``GLM(Binomial).pearson_chi2 / df_resid`` in tests/test_count_table_dispersion.py and here).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.special import logit
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper

sm = pytest.importorskip("statsmodels.api")

SAID = "vary more than binomial"


def _said(X, y, w, model, **fit_kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        PriorShiftWrapper(FrozenEstimator(model), random_state=0).fit(
            X, y, sample_weight=w, **fit_kw)
    return [c for c in caught if SAID in str(c.message)]


def test_star98_districts_warn_once(star98_districts):
    model, (Xt, yt, wt), k, n = star98_districts
    said = _said(Xt, yt, wt, model)
    assert len(said) == 1
    text = str(said[0].message)
    assert text.startswith("PriorShiftWrapper: the count table's 40 groups")
    assert "`adapt`'s interval and shift test" in text
    assert "`cells=`" in text and "divided by their sum" in text
    assert said[0].category is UserWarning
    assert said[0].filename == __file__  # (points at the caller's fit)
    # the dispersion it names is statsmodels' Pearson chi2 / df_resid of the districts on the
    # held-out log-odds (McCullagh & Nelder 1989, sec. 4.5)
    p = model.predict_proba(Xt)[::2, 1]
    glm = sm.GLM(np.column_stack([k, n - k]), sm.add_constant(logit(p)),
                 family=sm.families.Binomial()).fit()
    assert f"Pearson dispersion {glm.pearson_chi2 / glm.df_resid:.3g}" in text
    assert f"Pearson dispersion {glm.pearson_chi2 / glm.df_resid:.3g}" in text

def test_star98_with_cells_does_not_warn(star98_districts):
    """With the districts as ``cells`` the interval and shift test count districts (the
    clustered reading): nothing counted as independent pupils, no warning."""
    model, (Xt, yt, wt), _, _ = star98_districts
    said = _said(Xt, yt, wt, model, cells=np.repeat(np.arange(40), 2))
    assert not said


def test_binomial_redraw_relative_weights_and_unit_weights_do_not_warn(star98_districts):
    """The same districts with their pupils redrawn binomially around the model's probabilities
    (the check's null), the star98 table divided by its sum (relative weights: Kish's reading,
    no case counted), and the rows without weights."""
    model, (Xt, yt, wt), _, n = star98_districts
    p = model.predict_proba(Xt)[::2, 1]
    redrawn = np.random.default_rng(5).binomial(n.astype(int), p)
    w_null = np.column_stack([redrawn, n - redrawn]).ravel().astype(float)
    for w in (w_null, wt / wt.sum(), None):
        said = _said(Xt, yt, w, model)
        assert not said
