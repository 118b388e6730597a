"""Bad input to the decision core and to CostPolicyWrapper: clear errors naming the argument."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import make_classification
from sklearn.exceptions import NotFittedError
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper
from probwrap.decision import (
    add_reject_action,
    bayes_actions,
    check_cost_matrix,
    check_row_costs,
    expected_costs,
    fit_action_budget,
    plugin_cutoff,
    realised_cost,
    search_cutoff,
    tune_class_offsets,
)

X, Y = make_classification(120, random_state=0)
X3, Y3 = make_classification(150, n_classes=3, n_informative=4, random_state=0)


@pytest.mark.parametrize(
    "costs, match",
    [
        ([1.0, 2.0], r"`costs` must be a 2-d"),
        ([[0.0, 1.0, 2.0]], r"`costs` must have at least two classes"),
        ([[0.0], [1.0]], r"`costs` must have at least two actions"),
        ([[0.0, np.nan], [1.0, 0.0]], r"`costs` contains NaN or infinite"),
        ([[0.0, np.inf], [1.0, 0.0]], r"`costs` contains NaN or infinite"),
        ({"fp": 1.0, "false_neg": 3.0}, r"`costs` has unknown key\(s\) \['false_neg'\]"),
        ({"fp": float("nan")}, r"`costs\['fp'\]` must be finite"),
        ({"fp": "a lot"}, r"`costs\['fp'\]` must be a number"),
        ([["a", "b"], ["c", "d"]], r"`costs` must be a dict"),
    ],
)
def test_bad_cost_specifications(costs, match):
    with pytest.raises(ValueError, match=match):
        check_cost_matrix(costs)


def test_cost_matrix_rows_must_match_classes():
    with pytest.raises(ValueError, match=r"`costs` has 2 rows but there are 3 classes"):
        check_cost_matrix(np.zeros((2, 2)), n_classes=3)
    with pytest.raises(ValueError, match=r"`costs` has 2 rows but there are 3 classes"):
        bayes_actions(np.full((4, 3), 1 / 3), np.zeros((2, 2)))
    with pytest.raises(ValueError, match=r"binary shorthand"):
        check_cost_matrix({"fp": 1.0}, n_classes=3)


def test_bad_row_costs():
    with pytest.raises(ValueError, match=r"`row_costs` must have shape \(5, 2, 2\)"):
        check_row_costs(np.zeros((4, 2, 2)), 5, n_classes=2, n_actions=2)
    with pytest.raises(ValueError, match=r"`row_costs` must have shape"):
        check_row_costs(np.zeros((5, 2)), 5)
    bad = np.zeros((5, 2, 2))
    bad[2, 1, 0] = np.nan
    with pytest.raises(ValueError, match=r"`row_costs` contains NaN"):
        check_row_costs(bad, 5)
    with pytest.raises(ValueError, match=r"`costs` must have shape \(3, 2, 'n_actions'\)"):
        expected_costs(np.full((3, 2), 0.5), np.zeros((4, 2, 2)))


def test_bad_probabilities_scores_and_labels():
    with pytest.raises(ValueError, match=r"`proba`"):
        expected_costs([[0.2, 0.9]], {"fp": 1.0})
    with pytest.raises(ValueError, match=r"`scores` contains 1 NaN"):
        search_cutoff([0.1, np.nan], [0, 1], {"fp": 1.0})
    with pytest.raises(ValueError, match=r"`y` must hold binary targets"):
        search_cutoff([0.1, 0.2], [0, 2], {"fp": 1.0})
    with pytest.raises(ValueError, match=r"`y` has 3 rows but `scores` has 2"):
        search_cutoff([0.1, 0.2], [0, 1, 1], {"fp": 1.0})
    with pytest.raises(ValueError, match=r"`sample_weight` must be non-negative"):
        search_cutoff([0.1, 0.2], [0, 1], {"fp": 1.0}, sample_weight=[1.0, -1.0])
    with pytest.raises(ValueError, match=r"`costs` must have two actions"):
        search_cutoff([0.1, 0.2], [0, 1], add_reject_action({"fp": 1.0, "fn": 1.0}, 0.2))
    with pytest.raises(ValueError, match=r"`y` must hold class indices"):
        tune_class_offsets(np.full((2, 2), 0.5), ["a", "b"], {"fp": 1.0})


@pytest.mark.parametrize("capacity", [0.0, -0.1, 1.5, np.nan, "half", True])
def test_capacity_outside_unit_interval(capacity):
    with pytest.raises(ValueError, match=r"`capacity` must be a share of rows in \(0, 1\]"):
        search_cutoff([0.1, 0.2], [0, 1], {"fp": 1.0}, capacity=capacity)
    with pytest.raises(ValueError, match=r"`capacity` must be a share of rows in \(0, 1\]"):
        CostPolicyWrapper(LogisticRegression(), costs={"fp": 1.0}, capacity=capacity).fit(X, Y)


def test_unreasonable_binary_costs_for_plugin_cutoff():
    with pytest.raises(ValueError, match=r"`costs` must make each error dearer"):
        plugin_cutoff({"fp": 0.0, "fn": 1.0})


def test_budget_action_index():
    with pytest.raises(ValueError, match=r"`action` must be a column index in \[0, 2\)"):
        fit_action_budget([[1.0, 2.0]], 3, 0.5)


def test_scorer_inputs():
    with pytest.raises(ValueError, match=r"`y_pred` contains labels \[7\]"):
        realised_cost([0, 1], [0, 7], costs={"fp": 1.0}, classes=[0, 1])
    with pytest.raises(ValueError, match=r"`actions` must name the 3 columns"):
        realised_cost([0, 1], [0, 1], costs=add_reject_action({"fp": 1.0}, 0.1))


# -- the wrapper ---------------------------------------------------------------------------------


def test_unknown_strategy():
    with pytest.raises(ValueError, match=r"`strategy` must be one of \('bayes', 'tuned', 'fixed'\)"):
        CostPolicyWrapper(LogisticRegression(), strategy="optimal").fit(X, Y)


def test_fixed_without_cutoff_and_cutoff_without_fixed():
    with pytest.raises(ValueError, match=r"`cutoff` must be given with strategy='fixed'"):
        CostPolicyWrapper(LogisticRegression(), strategy="fixed").fit(X, Y)
    with pytest.raises(ValueError, match=r"`cutoff` is only used with strategy='fixed'"):
        CostPolicyWrapper(LogisticRegression(), strategy="tuned", cutoff=0.3).fit(X, Y)
    with pytest.raises(ValueError, match=r"`cutoff` must be a probability in \[0, 1\]"):
        CostPolicyWrapper(LogisticRegression(), strategy="fixed", cutoff=1.5).fit(X, Y)


def test_wrapper_cost_shapes():
    with pytest.raises(ValueError, match=r"`costs` has 2 rows but there are 3 classes"):
        CostPolicyWrapper(LogisticRegression(), costs=np.ones((2, 2)) - np.eye(2)).fit(X3, Y3)
    with pytest.raises(ValueError, match=r"Only binary classification is supported"):
        CostPolicyWrapper(LogisticRegression(), costs={"fp": 1.0, "fn": 2.0}).fit(X3, Y3)
    with pytest.raises(ValueError, match=r"`costs` contains NaN or infinite"):
        CostPolicyWrapper(LogisticRegression(), costs=[[0, np.inf], [1, 0]]).fit(X, Y)
    with pytest.raises(ValueError, match=r"`actions` must name the 3 actions"):
        CostPolicyWrapper(LogisticRegression(), costs=add_reject_action({"fp": 1}, 0.1)).fit(X, Y)
    with pytest.raises(ValueError, match=r"`costs\(X\)` must have shape \(120, 2, 'n_actions'\)"):
        CostPolicyWrapper(LogisticRegression(), costs=lambda Z: np.zeros((3, 2, 2))).fit(X, Y)
    with pytest.raises(ValueError, match=r"`capacity` names action 'hold'"):
        CostPolicyWrapper(LogisticRegression(), costs={"fp": 1, "fn": 2},
                          capacity={"hold": 0.1}).fit(X, Y)
    with pytest.raises(ValueError, match=r"`capacity` as a number limits the second of two"):
        CostPolicyWrapper(LogisticRegression(), costs=add_reject_action({"fp": 1}, 0.1),
                          actions=["a", "b", "c"], capacity=0.1).fit(X, Y)


def test_predict_before_fit_and_inputs_untouched():
    policy = CostPolicyWrapper(LogisticRegression(), costs={"fp": 1.0, "fn": 5.0})
    with pytest.raises(NotFittedError):
        policy.predict(X)
    costs = np.array([[0.0, 1.0], [5.0, 0.0]])
    saved = costs.copy()
    Xc, yc = X.copy(), Y.copy()
    CostPolicyWrapper(LogisticRegression(), costs=costs, strategy="tuned", cv=3).fit(Xc, yc)
    np.testing.assert_array_equal(costs, saved)
    np.testing.assert_array_equal(Xc, X)
    np.testing.assert_array_equal(yc, Y)
