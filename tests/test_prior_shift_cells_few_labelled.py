"""FewLabelledRowsWarning with cells counts the labelled rows' design-effective count.

With cells the warning reads ``n_source_design_rows_``: Kish's effective count divided by the
cells' design effect on the mean score (:func:`probwrap.shift._cells.cell_design_rows`), the
count the unlabelled side's pull toward the source prior weighs too. It used to read the larger
of Kish's count and the number of labelled cells, so many rows in a few alike cells never drew
it. Outside references: statsmodels' bundled star98 (303 school districts' pupils above / below
the median in maths) and statsmodels' ``WLS(...).fit(cov_type="cluster",
use_correction=False)``, whose cluster-robust variance of a weighted mean (Liang & Zeger 1986)
is the design effect's numerator.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm

from probwrap.aggregated import expand_counts
from probwrap.shift import FewLabelledRowsWarning, PriorEstimator
from probwrap.shift._shift_tests import _score_rows


def _few(est, q):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        est.estimate(q)
    return [str(c.message) for c in caught if issubclass(c.category, FewLabelledRowsWarning)]


def _cluster_sample(seed=0, n_cells=20, size=30):
    """``n_cells`` cells of ``size`` rows whose scores share the cell's effect (intra-cell
    correlation about 0.9): 600 rows but little more evidence about the mean than 20."""
    rng = np.random.default_rng(seed)
    cell = np.repeat(np.arange(n_cells), size)
    x = rng.normal(0, 1.5, n_cells)[cell] + rng.normal(0, 0.5, cell.shape[0])
    p = 1.0 / (1.0 + np.exp(-x))
    y = (rng.random(cell.shape[0]) < p).astype(int)
    return np.column_stack([1 - p, p]), y, cell


def test_many_rows_in_few_alike_cells_warn_with_the_design_count():
    post, y, cell = _cluster_sample()
    q = _cluster_sample(seed=1)[0]
    est = PriorEstimator(n_resamples=50, random_state=0).fit(post, y, cells=cell)
    assert est.n_source_effective_ == pytest.approx(600.0)  # Kish's count of unit weights
    assert est.n_source_cells_ == 20
    # the design count is near the number of cells, far below the rows (the old count,
    # max(600, 20) = 600, drew no warning: this test failed before)
    assert 10.0 < est.n_source_design_rows_ < 40.0
    msgs = _few(est, q)
    assert len(msgs) == 1
    assert f"rests on {est.n_source_design_rows_:.3g} effective labelled rows" in msgs[0]
    assert "design effect" in msgs[0]


def test_rows_that_are_their_own_cells_do_not_warn():
    post, y, _ = _cluster_sample()
    q = _cluster_sample(seed=1)[0]
    est = PriorEstimator(n_resamples=50, random_state=0).fit(post, y, cells=np.arange(600))
    assert est.n_source_design_rows_ == pytest.approx(600.0, rel=1e-9)
    assert _few(est, q) == []
    # and without cells Kish's count, as before
    assert _few(PriorEstimator(n_resamples=50, random_state=0).fit(post, y), q) == []


def test_star98_districts_warn_with_statsmodels_design_count():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X = d.exog.to_numpy(float)[:, :4]
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    Xr, yr, w = expand_counts(X, k, n)
    cell = np.repeat(np.arange(k.shape[0]), 2)
    lab = np.zeros(k.shape[0], bool)
    lab[np.random.default_rng(0).permutation(k.shape[0])[:151]] = True
    L = lab[cell]
    eta = Xr @ np.array([-0.4, 0.3, -0.2, 0.1])  # a fixed linear score of the covariates
    p = 1.0 / (1.0 + np.exp(-eta))
    est = PriorEstimator(n_resamples=50, random_state=0).fit(
        np.column_stack([1 - p[L], p[L]]), yr[L], w[L], cells=cell[L])
    # the design count: the weighted variance of the rows' score over statsmodels'
    # cluster-robust variance of its weighted mean (no small-sample factor), at most Kish's
    v = _score_rows(est.calibrate(np.column_stack([1 - p[L], p[L]])), est.source_prior_)[:, 0]
    fit = sm.WLS(v, np.ones(v.shape[0]), weights=w[L]).fit(
        cov_type="cluster", cov_kwds={"groups": cell[L], "use_correction": False})
    s_rows = np.average((v - np.average(v, weights=w[L])) ** 2, weights=w[L])
    expected = min(est.n_source_effective_, s_rows / float(fit.bse[0] ** 2))
    assert est.n_source_design_rows_ == pytest.approx(expected, rel=1e-8)
    assert est.n_source_cells_ == 151 and est.n_source_design_rows_ < 100
    q = np.column_stack([1 - p[~L][::2], p[~L][::2]])
    msgs = _few(est, q)  # before: max(Kish 23.5, 151 cells) = 151, no warning
    assert len(msgs) == 1
    assert f"rests on {est.n_source_design_rows_:.3g} effective labelled rows" in msgs[0]
