"""Every entry point that takes a cost matrix reads a pandas DataFrame by its labels.

Found after the session-27 edge pass (which fixed ``CostPolicyWrapper``): ``write_report``,
``CostCurveDisplay``, ``calibration_by_group``, ``realised_cost`` and ``make_cost_scorer``
still read a cost DataFrame by position. On scikit-learn's breast cancer data, a frame with
rows (malignant, benign) -- a missed malignant costs 1, a false alarm on a benign case 5 --
was read the other way round: plug-in cutoff 1/6 instead of 5/6. Functions that know the
classes only as positions (``expected_costs``, ``plugin_cutoff``, ``search_cutoff``, ...) put
rows labelled 0..k-1 in order and warn when the rows carry other labels.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from sklearn.datasets import load_breast_cancer, load_wine  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.model_selection import cross_val_predict  # noqa: E402
from sklearn.pipeline import make_pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

from probwrap.decision import (  # noqa: E402
    expected_costs,
    make_cost_scorer,
    plugin_cutoff,
    realised_cost,
    search_cutoff,
)
from probwrap.metrics import calibration_by_group  # noqa: E402
from probwrap.plot import CostCurveDisplay  # noqa: E402
from probwrap.report._content import collect_content  # noqa: E402

# breast cancer, positive class malignant: c_fn = 1, c_fp = 5 -> plug-in cutoff (Elkan 2001,
# c_fp - c_tn over the sum of both differences) 5 / 6
FRAME = pd.DataFrame([[0.0, 1.0], [5.0, 0.0]], index=["malignant", "benign"],
                     columns=["malignant", "benign"])
ARRAY = np.array([[0.0, 5.0], [1.0, 0.0]])  # rows/columns (benign, malignant)


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))


@pytest.fixture(scope="module")
def cancer():
    X, t = load_breast_cancer(return_X_y=True)
    y = np.where(t == 1, "benign", "malignant")
    p = cross_val_predict(_model(), X, (y == "malignant").astype(int), cv=5,
                          method="predict_proba")[:, 1]
    return y, p


def test_report_reads_the_frame_by_its_labels(cancer):
    y, p = cancer
    c = collect_content(y_true=y, y_prob=p, costs=FRAME, class_names=("benign", "malignant"),
                        n_resamples=20)
    np.testing.assert_array_equal(c.cost_matrix, ARRAY)
    assert c.plugin == pytest.approx(5.0 / 6.0)  # 1/6 when read by position
    ref = collect_content(y_true=y, y_prob=p, costs=ARRAY, class_names=("benign", "malignant"),
                          n_resamples=20)
    assert c.chosen_cutoff == ref.chosen_cutoff


def test_report_frame_rows_named_by_class_names_on_zero_one_labels(cancer):
    y, p = cancer
    y01 = (y == "malignant").astype(int)
    c = collect_content(y_true=y01, y_prob=p, costs=FRAME, class_names=("benign", "malignant"),
                        n_resamples=20)
    assert c.plugin == pytest.approx(5.0 / 6.0)


def test_report_frame_of_other_labels_is_refused(cancer):
    y, p = cancer
    bad = FRAME.rename(index={"benign": "healthy"})
    with pytest.raises(ValueError, match="rows are labelled"):
        collect_content(y_true=y, y_prob=p, costs=bad, class_names=("benign", "malignant"),
                        n_resamples=20)


def test_multiclass_report_reads_the_frame_by_its_labels():
    X, t = load_wine(return_X_y=True)
    names = np.array(["barolo", "grignolino", "barbera"])
    y = names[t]
    P = cross_val_predict(_model(), X, y, cv=5, method="predict_proba")  # sorted classes
    sorted_names = ["barbera", "barolo", "grignolino"]
    M = np.array([[0.0, 1.0, 40.0], [1.0, 0.0, 1.0], [2.0, 1.0, 0.0]])
    order = ["barolo", "grignolino", "barbera"]
    frame = pd.DataFrame(M, index=sorted_names, columns=sorted_names).loc[order, order]
    c = collect_content(y_true=y, y_prob=P, costs=frame, class_names=sorted_names,
                        n_resamples=20)
    np.testing.assert_array_equal(c.cost_matrix, M)


def test_cost_curve_display_reads_the_frame_by_its_labels(cancer):
    y, p = cancer
    d = CostCurveDisplay.from_predictions(y, p, costs=FRAME, n_resamples=0)
    assert d.plugin_cutoff == pytest.approx(5.0 / 6.0)
    ref = CostCurveDisplay.from_predictions(y, p, costs=ARRAY, n_resamples=0)
    assert d.cutoff == ref.cutoff
    plt.close("all")


def test_group_metrics_read_the_frame_by_its_labels(cancer):
    y, p = cancer
    groups = np.arange(y.shape[0]) % 2
    got = calibration_by_group(y, p, groups, cutoff=0.5, costs=FRAME, n_resamples=0)
    ref = calibration_by_group(y, p, groups, cutoff=0.5, costs=ARRAY, n_resamples=0)
    a = [r.mean_cost for r in got.groups]
    b = [r.mean_cost for r in ref.groups]
    np.testing.assert_allclose(a, b)
    # by NumPy: the cost of "act when p > 0.5" on group 0
    yi = (y == "malignant").astype(int)
    act = (p > 0.5).astype(int)
    g0 = groups == 0
    assert a[0] == pytest.approx(ARRAY[yi[g0], act[g0]].mean())


def test_realised_cost_and_scorer_read_the_frame_by_its_labels(cancer):
    y, p = cancer
    pred = np.where(p > 0.5, "malignant", "benign")
    ref = realised_cost(y, pred, costs=ARRAY)
    assert realised_cost(y, pred, costs=FRAME) == pytest.approx(ref)
    assert realised_cost(y, pred, costs=FRAME, classes=["benign", "malignant"]) == (
        pytest.approx(ref))
    # by NumPy
    yi = (y == "malignant").astype(int)
    assert ref == pytest.approx(ARRAY[yi, (pred == "malignant").astype(int)].mean())
    X, _ = load_breast_cancer(return_X_y=True)
    m = _model().fit(X, y)
    assert make_cost_scorer(FRAME)(m, X, y) == pytest.approx(make_cost_scorer(ARRAY)(m, X, y))


def test_positional_functions_order_integer_rows_and_warn_on_names(cancer):
    _, p = cancer
    ints = pd.DataFrame([[1.0, 0.0], [0.0, 5.0]], index=[1, 0])  # row 0 is class 0
    np.testing.assert_allclose(expected_costs(p, ints), expected_costs(p, [[0, 5], [1, 0]]))
    assert plugin_cutoff(ints) == pytest.approx(5.0 / 6.0)
    with pytest.warns(UserWarning, match="read by position"):
        plugin_cutoff(FRAME)
    with pytest.warns(UserWarning, match="read by position"):
        search_cutoff(p, (p > 0.5).astype(int), FRAME)
    plain = pd.DataFrame(ARRAY)  # the default index: by position, silently
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert plugin_cutoff(plain) == pytest.approx(5.0 / 6.0)
