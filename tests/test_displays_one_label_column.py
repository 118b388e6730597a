"""Labels given as one column (n, 1) are read as their values by the displays and the report,
as the wrappers and metrics read them; a cost curve takes two probability columns as the
metrics do.

Found in the session-27 edge pass: ``GroupReliabilityDisplay.from_predictions`` stopped with a
bare ``IndexError`` on ``y.reshape(-1, 1)``, ``CostCurveDisplay``, ``DecisionCurveDisplay`` and
``write_report`` refused it ("must be 1-d"), while ``probwrap.metrics`` and every wrapper read
it; ``CostCurveDisplay`` refused two probability columns with "`scores` must be 1-d", an
argument the user never passed.
"""

from __future__ import annotations

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402
from sklearn.datasets import load_breast_cancer  # noqa: E402
from sklearn.linear_model import LogisticRegression  # noqa: E402
from sklearn.metrics import brier_score_loss  # noqa: E402
from sklearn.model_selection import cross_val_predict  # noqa: E402
from sklearn.pipeline import make_pipeline  # noqa: E402
from sklearn.preprocessing import StandardScaler  # noqa: E402

from probwrap.plot import (  # noqa: E402
    CostCurveDisplay,
    DecisionCurveDisplay,
    GroupReliabilityDisplay,
)
from probwrap.report import write_report  # noqa: E402

COSTS = {"tp": 0.0, "fp": 1.0, "fn": 4.0, "tn": 0.0}


@pytest.fixture(scope="module")
def held_out():
    X, y = load_breast_cancer(return_X_y=True)
    X, y = X[:240], y[:240]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    p = cross_val_predict(model, X, y, cv=4, method="predict_proba")[:, 1]
    return y, p


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


@pytest.mark.parametrize("as_column", [lambda y: y.reshape(-1, 1),
                                       lambda y: pd.DataFrame({"malignant": y})])
def test_group_reliability_reads_one_label_column(held_out, as_column):
    y, p = held_out
    groups = np.arange(y.shape[0]) % 3
    flat = GroupReliabilityDisplay.from_predictions(y, p, groups, min_rows=20, min_events=5)
    col = GroupReliabilityDisplay.from_predictions(as_column(y), p, groups, min_rows=20,
                                                   min_events=5)
    assert col.calibration_errors == flat.calibration_errors
    assert col.judged == flat.judged and col.effective_rows == flat.effective_rows
    # the groups' sizes, counted by NumPy
    assert [col.effective_rows[g] for g in range(3)] == np.bincount(groups).tolist()


def test_decision_and_cost_curves_read_one_label_column(held_out):
    y, p = held_out
    a = DecisionCurveDisplay.from_predictions(y, p)
    b = DecisionCurveDisplay.from_predictions(y.reshape(-1, 1), p)
    np.testing.assert_array_equal(a.net_benefit, b.net_benefit)
    c = CostCurveDisplay.from_predictions(y, p, COSTS, n_resamples=0)
    d = CostCurveDisplay.from_predictions(y.reshape(-1, 1), p, COSTS, n_resamples=0)
    assert c.cutoff == d.cutoff


def test_cost_curve_reads_two_probability_columns(held_out):
    y, p = held_out
    one = CostCurveDisplay.from_predictions(y, p, COSTS, n_resamples=0)
    two = CostCurveDisplay.from_predictions(y, np.column_stack([1 - p, p]), COSTS,
                                            n_resamples=0)
    assert two.cutoff == one.cutoff
    np.testing.assert_array_equal(two.costs, one.costs)
    with pytest.raises(ValueError, match=r"`y_prob` must be 1-d positive-class probabilities "
                       r"\(or two columns\)"):
        CostCurveDisplay.from_predictions(y, np.column_stack([1 - p, p / 2, p / 2]), COSTS)
    with pytest.raises(ValueError, match=r"`y_prob` must contain probabilities in \[0, 1\]"):
        CostCurveDisplay.from_predictions(y, p + 0.5, COSTS)


def test_report_reads_one_label_column(held_out, tmp_path):
    y, p = held_out
    flat = write_report(tmp_path / "a.html", y_true=y, y_prob=p, costs=COSTS, n_resamples=20)
    col = write_report(tmp_path / "b.html", y_true=y.reshape(-1, 1), y_prob=p, costs=COSTS,
                       n_resamples=20)
    text_a = (tmp_path / "a.html").read_text()
    text_b = (tmp_path / "b.html").read_text()
    # the Brier score it shows is scikit-learn's on the flat labels
    shown = f"{brier_score_loss(y, p):.4f}"
    assert shown in text_a and shown in text_b
    assert type(flat) is type(col)


def test_labels_of_two_columns_are_refused_by_name(held_out):
    y, p = held_out
    with pytest.raises(ValueError, match=r"`y_true` must be 1-d of shape \(n,\) \(or one "
                       r"column, \(n, 1\)\); got shape \(240, 2\)"):
        GroupReliabilityDisplay.from_predictions(np.column_stack([y, y]), p,
                                                 np.arange(240) % 2)
