"""The report's own prevalence (class shares) estimate counts the labelled cells as units.

When the report resamples whole cells for its calibration intervals (``cells`` given, or found
from the features), its prevalence section fits its :class:`probwrap.shift.PriorEstimator` with
the same cells, so the shift test and the interval cluster the labelled side's variance on them
instead of counting the rows as independent (before: the rows' interval whatever the cells).
Outside references: statsmodels' bundled star98 (303 school districts, pupils above / below the
median in maths; half the districts labelled) and scikit-learn's ``LogisticRegression``; the
estimator itself is checked against statsmodels' cluster-robust variance in
tests/test_prior_shift_cells.py.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.aggregated import expand_counts
from probwrap.report import build_report
from probwrap.shift import PriorEstimator

LEVEL = 0.9


@pytest.fixture(scope="module")
def star98():
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
    model = LogisticRegression(C=1e6, max_iter=2000).fit(Xr[L], yr[L], sample_weight=w[L])
    p = model.predict_proba(Xr[L])[:, 1]
    q = model.predict_proba(X[~lab])[:, 1]  # one unlabelled row per other district
    return dict(p=p, y=yr[L], w=w[L], cell=cell[L], q=q)


def _report(s, cells):
    with warnings.catch_warnings(record=True):
        warnings.simplefilter("always")
        return build_report(y_true=s["y"], y_prob=s["p"], sample_weight=s["w"],
                            unlabelled_prob=s["q"], cells=cells, n_resamples=100,
                            confidence_level=LEVEL, random_state=0)


def _estimator_interval(s, cells):
    est = PriorEstimator(n_resamples=100, confidence_level=LEVEL, random_state=1).fit(
        np.column_stack([1 - s["p"], s["p"]]), s["y"], s["w"], cells=cells)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(np.column_stack([1 - s["q"], s["q"]]))
    return np.asarray(res.interval[1], dtype=float), est


def test_star98_report_interval_counts_the_districts(star98):
    s = star98
    content, page = _report(s, s["cell"])
    by_cells, est = _estimator_interval(s, s["cell"])
    by_rows, _ = _estimator_interval(s, None)
    got = np.asarray(content.target_interval)
    # the report's interval is the estimator's with the districts as cells ...
    np.testing.assert_allclose(got, by_cells, rtol=1e-10, atol=1e-12)
    # ... and not the rows' one (which the report gave before: this test failed there)
    width_cells, width_rows = np.diff(by_cells)[0], np.diff(by_rows)[0]
    assert abs(width_cells - width_rows) > 0.05
    assert np.diff(got)[0] == pytest.approx(width_cells, rel=1e-10)
    assert content.prevalence_cells == 151 == est.n_source_cells_
    assert "count the labelled rows&#x27; 151 cells as the units" in page
    # the FewLabelledRowsWarning among the notes quotes the cells' design-effective count
    few = [n.message for n in content.notes if "rests on" in n.message]
    assert few and f"rests on {est.n_source_design_rows_:.3g} effective" in few[0]


def test_star98_report_without_cells_keeps_the_rows(star98):
    s = star98
    content, page = _report(s, False)
    by_rows, _ = _estimator_interval(s, None)
    np.testing.assert_allclose(np.asarray(content.target_interval), by_rows, rtol=1e-10,
                               atol=1e-12)
    assert content.prevalence_cells is None
    assert "cells as the units" not in page


def _three_class_cluster(seed, n_cells=40, size=15):
    """Cells of rows sharing a cell effect on the log-odds that the forecasts do not see."""
    rng = np.random.default_rng(seed)
    cell = np.repeat(np.arange(n_cells), size)
    x = rng.normal(size=(n_cells, 2))[cell] + 0.5 * rng.normal(size=(cell.shape[0], 2))
    eta = np.column_stack([np.zeros(cell.shape[0]), x])
    proba = np.exp(eta) / np.exp(eta).sum(axis=1, keepdims=True)
    effect = rng.normal(0, 1.0, size=(n_cells, 3))[cell]
    truth = np.exp(eta + effect) / np.exp(eta + effect).sum(axis=1, keepdims=True)
    y = (rng.random(cell.shape[0])[:, None] > np.cumsum(truth, axis=1)).sum(axis=1)
    return proba, y, cell


def test_multiclass_report_class_shares_count_the_cells():
    # beyond two classes the clustered interval is a bootstrap of the cells (its seed is the
    # report's own), so the report is compared with the rows' interval, which is fixed
    proba, y, cell = _three_class_cluster(0)
    q = _three_class_cluster(1)[0]
    pages = {}
    for cells in (cell, False):
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            pages[cells is False] = build_report(
                y_true=y, y_prob=proba, unlabelled_prob=q, cells=cells, n_resamples=100,
                confidence_level=LEVEL, random_state=0)
    est = PriorEstimator(n_resamples=100, confidence_level=LEVEL, random_state=1).fit(proba, y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rows = np.asarray(est.estimate(q).interval, dtype=float)
    (with_cells, page), (without, page_rows) = pages[False], pages[True]
    assert with_cells.n_classes == 3 and with_cells.prevalence_cells == 40
    assert without.prevalence_cells is None and "cells as the units" not in page_rows
    np.testing.assert_allclose(np.asarray(without.target_interval), rows, rtol=1e-10,
                               atol=1e-12)
    # 40 cells of 15 rows whose labels share a cell effect: the first class's interval is
    # about twice as wide as the rows' 0.295 (0.68-0.76 over seeds; before: the rows' one)
    width = np.diff(np.asarray(with_cells.target_interval), axis=1)[:, 0]
    assert width[0] > 1.5 * (rows[0, 1] - rows[0, 0])
    assert "40 cells as the units" in page


class _GivenScores(ClassifierMixin, BaseEstimator):
    """A fitted model whose positive-class probability is its one feature."""

    def fit(self, X, y):
        self.classes_ = np.array([0, 1])
        self.n_features_in_ = 1
        return self

    def predict_proba(self, X):
        x = np.asarray(X, dtype=float)[:, 0]
        return np.column_stack([1.0 - x, x])


def test_a_given_prior_shift_wrapper_is_read_with_or_without_its_cells():
    # the report shows a fitted PriorShiftWrapper's own numbers: it names the cells the
    # wrapper counted, and says when the wrapper counted the rows while the report has cells
    rng = np.random.default_rng(5)
    cell = np.repeat(np.arange(30), 20)
    p = 1.0 / (1.0 + np.exp(-(rng.normal(0, 1.5, 30)[cell] + 0.5 * rng.normal(size=600))))
    y = (rng.random(600) < p).astype(int)
    q = p[rng.permutation(600)[:300]]
    model = FrozenEstimator(_GivenScores().fit(p[:, None], y))
    out = {}
    for fitted_cells in (cell, None):
        with warnings.catch_warnings(record=True):
            warnings.simplefilter("always")
            wrapper = PriorShiftWrapper(model, n_resamples=50, random_state=0).fit(
                p[:, None], y, cells=fitted_cells).adapt(q[:, None])
            out[fitted_cells is None] = build_report(
                y_true=y, y_prob=p, unlabelled_prob=q, prior_shift=wrapper, cells=cell,
                n_resamples=20, random_state=0)
    (with_cells, page), (without, page_rows) = out[False], out[True]
    assert with_cells.prevalence_cells == 30 and "30 cells as the units" in page
    assert without.prevalence_cells is None
    assert "fitted without cells" in page_rows and "fitted without cells" not in page
