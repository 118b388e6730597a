"""Per-group bootstrap intervals: none for a group holding one class, and marked as not supported
for a group too small to judge.

Resampling within a group that holds only negatives never draws a positive, so its "95 %"
interval only shows how the negatives' forecasts vary: on ISLR Default (3.3 % defaults), groups
of 20 random rows got intervals covering the population's Brier score in 43 % of draws, and the
one-class groups among them almost never. Data here: scikit-learn's bundled breast-cancer set,
where every tumour with a worst radius above 22 is malignant (86 rows), and iris.
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.linear_model import LogisticRegression

from probwrap.metrics import brier_score, calibration_by_group
from probwrap.report import build_report


def _cancer():
    d = load_breast_cancer()
    X = (d.data - d.data.mean(0)) / d.data.std(0)
    y = d.target  # 1 = benign
    idx = np.random.default_rng(0).permutation(len(y))
    tr, te = idx[:150], idx[150:]
    p = LogisticRegression(C=0.05, max_iter=2000).fit(X[tr], y[tr]).predict_proba(X[te])[:, 1]
    size = np.where(d.data[te, 20] > 22, "large", np.where(d.data[te, 20] > 17, "mid", "small"))
    return y[te], p, size


def test_one_class_group_has_no_interval_and_says_why():
    y, p, size = _cancer()
    large = size == "large"
    assert large.sum() > 50 and y[large].sum() == 0  # the precondition: one class only
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(y, p, size, min_rows=50, n_resamples=200)
    by = {c.group: c for c in res.groups}
    g = by["large"]
    assert np.isnan(g.brier_interval).all() and np.isnan(g.log_loss_interval).all()
    assert g.brier == pytest.approx(brier_score(y[large], p[large], labels=[0, 1]), rel=1e-12)
    assert np.isnan(g.calibration_slope) and np.isnan(g.calibration_intercept)
    assert any(n.startswith("group 'large': one class only (no positives") for n in res.notes)
    # groups with both classes keep their intervals, and contain their Brier score
    for name in ("mid", "small"):
        lo, hi = by[name].brier_interval
        assert lo <= by[name].brier <= hi
    assert np.isfinite(res.overall.brier_interval).all()


def test_unjudged_intervals_are_marked_not_supported():
    y, p, size = _cancer()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = calibration_by_group(y, p, size, n_resamples=50)  # default bar: 100 rows
        _, page = build_report(y_true=y, y_prob=p, groups=size, n_resamples=50)
    small = [c for c in res.groups if not c.judged and np.isfinite(c.brier_interval[0])]
    assert small  # a two-class group below the bar keeps an interval ...
    assert any("intervals of the groups not judged are not supported" in n for n in res.notes)
    for c in small:  # ... marked in the report's table
        row = page.split(f'<tr data-group="{c.group}">')[1].split("</tr>")[0]
        assert "(not supported)" in row
    row = page.split('<tr data-group="large">')[1].split("</tr>")[0]
    assert "not supported" not in row and row.count("&ndash;") >= 4  # no interval at all


def test_multiclass_report_group_missing_a_class_has_no_interval():
    d = load_iris()
    p = LogisticRegression(max_iter=2000).fit(d.data[::2], d.target[::2]).predict_proba(d.data)
    groups = np.where(d.data[:, 2] > 5.0, "long petals", "short petals")
    assert set(d.target[groups == "long petals"]) == {1, 2}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        content, page = build_report(y_true=d.target, y_prob=p, groups=groups, n_resamples=50)
    by = {c.group: c for c in content.group_checks.groups}
    assert np.isnan(by["long petals"].brier_interval).all()
    assert np.isfinite(by["short petals"].brier_interval).all()
    assert any("no bootstrap interval" in n and "long petals" in n
               for n in content.group_checks.notes)
