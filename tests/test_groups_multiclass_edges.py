"""Edge cases of the by-group checks with class probabilities (and a group named "all").

Tried as a user would (session 30) on scikit-learn's bundled digits and wine data:

* a group named "all" (a region, a plan): the binary and the multiclass report both listed two
  rows reading "all" (the group and the overall row; ``data-group="all"`` twice), and the
  multiclass checks skipped the group's own "no interval" note (they took it for the overall
  row); the overall row's notes read "group 'all'", as the group's do. Now the overall row reads
  "all rows (overall)" where a group is named "all", and its notes "all rows".
* a group that never holds a class (digits: every 0 moved to a group of its own): the
  multiclass report called a group of 1,748 weighted rows "too small to judge (1748 rows, 0 of
  its rarest class)"; it then said the class is missing, and (5 December 2026) judges the group
  on its overall scores and names the class it is not judged on
  (tests/test_groups_multiclass_judging.py).
* ``GroupReliabilityDisplay`` of class probabilities with more groups than colours sent the
  reader to ``calibration_by_group``'s table, which refuses class probabilities; it now names the
  multiclass report's by-group table.

Reference values: each group's log loss is ``sklearn.metrics.log_loss`` on its rows; the Brier
score is Brier's (1950) sum over classes, averaged over rows; the top-label error is Guo et al.
(2017, eq. 5: ten equal-width bins of the largest probability, the weighted mean of |accuracy -
confidence|) and the classwise error the mean over classes of the same on each class's column
(Kull et al. 2019, "classwise-ECE"), written out here in NumPy.
"""

from __future__ import annotations

import re
import warnings

import matplotlib.pyplot as plt
import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_digits, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import cross_val_predict

from probwrap.metrics import calibration_by_group
from probwrap.plot import GroupReliabilityDisplay
from probwrap.report import build_report


def _held_out(loader, C):
    X, y = loader(return_X_y=True)
    X = (X - X.mean(0)) / np.where(X.std(0) > 0, X.std(0), 1.0)
    p = cross_val_predict(LogisticRegression(C=C, max_iter=2000), X, y, cv=5,
                          method="predict_proba")
    return X, y, p


@pytest.fixture(scope="module")
def digits():
    return _held_out(load_digits, 0.001)


@pytest.fixture(scope="module")
def wine():
    return _held_out(load_wine, 0.05)


def _binned(conf, hit, w, n_bins=10):
    """Guo et al. (2017) eq. 5 with weights: bins [i/10, (i+1)/10), the last closed."""
    b = np.minimum((conf * n_bins).astype(int), n_bins - 1)
    total = 0.0
    for i in range(n_bins):
        m = b == i
        if w[m].sum() > 0:
            total += w[m].sum() * abs(np.average(hit[m], weights=w[m])
                                      - np.average(conf[m], weights=w[m]))
    return total / w.sum()


def _report(**kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return build_report(n_resamples=20, **kw)


def test_group_without_a_class_is_said_so_and_every_number_matches_the_references(digits):
    X, y, p = digits
    n, k = p.shape
    rng = np.random.default_rng(1)
    groups = np.where(X[:, 20] > 0, "inky", "faint").astype(object)
    groups[y == 0] = "zeros"  # one class only (178 rows); the other groups lack class 0
    groups[int(rng.integers(n))] = "lone"  # one row
    w = rng.integers(1, 4, n).astype(float)
    content, page = _report(y_true=y, y_prob=p, groups=groups, sample_weight=w)
    checks = content.group_checks
    for c in [*checks.groups, checks.overall]:
        rows = np.ones(n, bool) if c is checks.overall else groups == c.group
        yy, pp, ww = y[rows], p[rows], w[rows]
        assert c.log_loss == pytest.approx(
            sk_log_loss(yy, pp, sample_weight=ww, labels=list(range(k))), rel=1e-10)
        assert c.brier == pytest.approx(
            np.average(np.sum((pp - np.eye(k)[yy]) ** 2, axis=1), weights=ww), rel=1e-10)
        assert c.top_label_error == pytest.approx(
            _binned(pp.max(1), (pp.argmax(1) == yy).astype(float), ww), rel=1e-10, abs=1e-12)
        assert c.classwise_error == pytest.approx(
            np.mean([_binned(pp[:, j], (yy == j).astype(float), ww) for j in range(k)]),
            rel=1e-10, abs=1e-12)
    by = {c.group: c for c in checks.groups}
    # a large group missing a class is judged on its overall scores, and not on the class it
    # lacks (before 5 December 2026: "faint: not judged: no row of class(es) 0 (1616 rows; a
    # group is judged with 10 rows of every class)"; earlier still "too small to judge")
    assert by["faint"].weight > 1000 and by["faint"].judged
    assert by["faint"].classes_not_judged == ("0: no row",)
    faint = next(x for x in checks.notes if x.startswith("faint:"))
    assert faint.startswith("faint: judged on its overall scores, but not on class(es) 0: no row")
    assert by["zeros"].judged and by["zeros"].classes_judged == ()
    assert by["zeros"].classes_not_judged[:2] == ("0: 0 rows of the other classes, below 10",
                                                  "1: no row")
    assert not by["lone"].judged
    assert any(x.startswith("lone: too small to judge (") for x in checks.notes)
    row = re.search(r'<tr data-group="faint">(.*?)</tr>', page).group(1)
    assert "overall scores only" in row and "0: no row" in row and "too small" not in row


def test_a_group_named_all_is_not_the_overall_row(wine):
    _, y, p = wine
    groups = np.where(np.arange(len(y)) % 2 == 1, "all", "some").astype(object)
    groups[(groups == "all") & (y == 2)] = "some"  # the group "all" lacks class 2
    content, page = _report(y_true=y, y_prob=p, groups=groups)
    checks = content.group_checks
    assert checks.overall.group == "all"  # the field keeps its value
    rows = dict(re.findall(r'<tr data-group="([^"]*)"><td>[^<]*</td><td>(\d+)</td>', page))
    # was two rows named "all" (the group's 59 rows and the overall 178)
    assert rows == {"all": str(int(np.sum(groups == "all"))), "some": str(int(np.sum(
        groups == "some"))), "all rows (overall)": str(len(y))}
    # the group's own note (before, skipped: taken for the overall row's)
    assert any(n.startswith("group all: no interval: no row of class(es) 2") for n in checks.notes)


def test_binary_report_and_notes_tell_a_group_named_all_from_all_rows():
    X, y = load_breast_cancer(return_X_y=True)
    p = cross_val_predict(LogisticRegression(max_iter=5000), X, y, cv=5,
                          method="predict_proba")[:, 1]
    groups = np.where(np.arange(len(y)) % 3 == 0, "all", "rest")
    groups[(groups == "all") & (y == 0)] = "rest"  # the group "all": positives only
    content, page = _report(y_true=y, y_prob=p, groups=groups)
    rows = re.findall(r'<tr data-group="([^"]*)">', page)
    assert sorted(rows) == ["all", "all rows (overall)", "rest"]
    res = calibration_by_group(y, p, groups, n_resamples=0)
    assert res.overall.group == "all"
    one_class = [n for n in res.notes if "one class only" in n]
    assert one_class and all(n.startswith("group 'all': one class only (no negatives") for n in
                             one_class)


def test_binary_overall_notes_say_all_rows():
    # every forecast the same: the overall row's slope note names all rows, not "group 'all'"
    y = load_breast_cancer().target
    p = np.full(y.shape[0], 0.6)
    res = calibration_by_group(y, p, np.where(np.arange(len(y)) % 2, "a", "b"), n_resamples=0)
    overall = [n for n in res.notes if n.startswith("all rows:")]
    assert overall and not any(n.startswith("group 'all'") for n in res.notes)


def test_groups_as_categories_numbers_and_one_row_give_the_same_numbers(wine):
    _, y, p = wine
    names = np.where(np.arange(len(y)) % 3 == 0, "north", "south")
    ref = _report(y_true=y, y_prob=p, groups=names)[0].group_checks
    want = {c.group: c.log_loss for c in ref.groups}
    as_category = pd.Categorical(names, categories=["south", "north", "unused"])
    as_codes = (names == "north").astype(int)
    got_cat = {c.group: c.log_loss for c in _report(y_true=y, y_prob=p,
                                                     groups=as_category)[0].group_checks.groups}
    got_int = {c.group: c.log_loss for c in _report(y_true=y, y_prob=p,
                                                     groups=as_codes)[0].group_checks.groups}
    assert got_cat == pytest.approx(want, rel=1e-12)  # an unused category: no row, no group
    assert got_int == pytest.approx({1: want["north"], 0: want["south"]}, rel=1e-12)
    one = names.astype(object)
    one[5] = "single"
    single = next(c for c in _report(y_true=y, y_prob=p, groups=one)[0].group_checks.groups
                  if c.group == "single")
    assert single.log_loss == pytest.approx(sk_log_loss(y[[5]], p[[5]], labels=[0, 1, 2]))
    assert not single.judged and np.isnan(single.log_loss_interval).all()
    for missing in (np.nan, None):
        bad = names.astype(object)
        bad[7] = missing
        with pytest.raises(ValueError, match=r"`groups` contains 1 missing label.*first at row 7"):
            _report(y_true=y, y_prob=p, groups=bad)


def test_many_groups_of_class_probabilities_point_to_the_multiclass_table(wine):
    _, y, p = wine
    with pytest.warns(UserWarning, match="12 groups drawn with 8 colours") as rec:
        GroupReliabilityDisplay.from_predictions(y, p, np.arange(len(y)) % 12)
    message = str(next(r.message for r in rec if "colours" in str(r.message)))
    # was "... read the others in probwrap.metrics.calibration_by_group's table", which
    # refuses class probabilities
    assert message.endswith("read the others in the by-group table of the multiclass report "
                            "(probwrap.report.write_report(..., groups=...)).")
    plt.close("all")
