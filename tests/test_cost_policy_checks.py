"""scikit-learn's estimator checks for CostPolicyWrapper, one instance per strategy."""

from __future__ import annotations

from sklearn.linear_model import LogisticRegression
from sklearn.utils.estimator_checks import parametrize_with_checks

from probwrap import CostPolicyWrapper


def _base():
    return LogisticRegression(max_iter=200)


@parametrize_with_checks(
    [
        CostPolicyWrapper(_base()),
        CostPolicyWrapper(_base(), strategy="tuned", cv=3),
        CostPolicyWrapper(_base(), strategy="fixed", cutoff=0.5),
    ]
)
def test_sklearn_compatible(estimator, check):
    check(estimator)
