"""A cost matrix given as a pandas DataFrame with labelled rows and columns is read by its
labels, not by position.

Found in the session-27 edge pass: ``CostPolicyWrapper`` read such a frame by position. On
scikit-learn's wine data with the labels barolo, grignolino, barbera, a frame with rows and
columns in that order gave other decisions than the same costs as an array in ``classes_``
order, without a word; on breast cancer with labels benign/malignant, a frame with rows
(malignant, benign) got the cutoff of the costs read the other way round.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))


@pytest.fixture(scope="module")
def wine():
    X, t = load_wine(return_X_y=True)
    return X, np.array(["barolo", "grignolino", "barbera"])[t]


# rows = true class, columns = action, both in sorted (classes_) order: barbera, barolo,
# grignolino
SORTED = ["barbera", "barolo", "grignolino"]
MATRIX = np.array([[0.0, 1.0, 40.0], [1.0, 0.0, 1.0], [2.0, 1.0, 0.0]])


def test_frame_in_another_order_gives_the_array_decisions(wine):
    X, y = wine
    ref = CostPolicyWrapper(_model(), costs=MATRIX).fit(X, y)
    order = ["barolo", "grignolino", "barbera"]
    frame = pd.DataFrame(MATRIX, index=SORTED, columns=SORTED).loc[order, order]
    got = CostPolicyWrapper(_model(), costs=frame).fit(X, y)
    np.testing.assert_array_equal(got.cost_matrix_, MATRIX)
    np.testing.assert_array_equal(got.predict(X), ref.predict(X))
    # the rule itself, by NumPy: least expected cost over the columns, in classes_ order
    P = ref.predict_proba(X)
    np.testing.assert_array_equal(got.predict(X), np.array(SORTED)[(P @ MATRIX).argmin(axis=1)])


def test_binary_frame_rows_in_reverse_order_give_the_cutoff_of_its_labels():
    X, t = load_breast_cancer(return_X_y=True)
    y = np.where(t == 1, "benign", "malignant")  # classes_: benign, malignant (positive)
    # a missed malignant costs 1, a false alarm on a benign case 5
    frame = pd.DataFrame([[0.0, 1.0], [5.0, 0.0]], index=["malignant", "benign"],
                         columns=["malignant", "benign"])
    m = CostPolicyWrapper(_model(), costs=frame).fit(X, y)
    # plug-in cutoff (Elkan 2001): (c_fp - c_tn) / ((c_fp - c_tn) + (c_fn - c_tp)) = 5 / 6
    assert m.cutoff_ == pytest.approx(5.0 / 6.0)
    same = CostPolicyWrapper(_model(), costs={"tp": 0, "fp": 5, "fn": 1, "tn": 0}).fit(X, y)
    np.testing.assert_array_equal(m.predict(X), same.predict(X))


def test_frame_with_default_index_is_read_by_position(wine):
    X, y = wine
    a = CostPolicyWrapper(_model(), costs=pd.DataFrame(MATRIX)).fit(X, y)
    np.testing.assert_array_equal(a.cost_matrix_, MATRIX)


def test_frame_columns_follow_named_actions(wine):
    X, y = wine
    actions = ["ship", "hold", "return"]
    frame = pd.DataFrame(MATRIX, index=SORTED, columns=actions)
    a = CostPolicyWrapper(_model(), costs=frame, actions=actions).fit(X, y)
    b = CostPolicyWrapper(_model(), costs=frame[["return", "ship", "hold"]],
                          actions=actions).fit(X, y)
    np.testing.assert_array_equal(a.cost_matrix_, MATRIX)
    np.testing.assert_array_equal(b.cost_matrix_, MATRIX)


@pytest.mark.parametrize("frame, kwargs, expected", [
    (pd.DataFrame(MATRIX, index=["a", "b", "c"], columns=SORTED), {},
     r"rows are labelled \['a', 'b', 'c'\], not the classes"),
    (pd.DataFrame(MATRIX, index=SORTED, columns=["ship", "hold", "return"]), {},
     r"`actions` is not given.*pass actions=\['ship', 'hold', 'return'\]"),
    (pd.DataFrame(MATRIX, index=SORTED, columns=["ship", "hold", "return"]),
     {"actions": ["x", "y", "z"]}, r"not the `actions` \['x', 'y', 'z'\]"),
])
def test_frames_that_do_not_name_the_classes_are_refused(wine, frame, kwargs, expected):
    X, y = wine
    with pytest.raises(ValueError, match=expected):
        CostPolicyWrapper(_model(), costs=frame, **kwargs).fit(X, y)
