"""scikit-learn's estimator checks over PriorShiftWrapper: no expected failures."""

from sklearn.naive_bayes import GaussianNB
from sklearn.utils.estimator_checks import parametrize_with_checks

from probwrap import PriorShiftWrapper

# Gaussian naive Bayes is fast, deterministic and exact under sample weights (weight 2 equals a
# repeated row), which the weighted-versus-repeated checks need.
ESTIMATORS = [
    PriorShiftWrapper(GaussianNB(), cv=3),
    PriorShiftWrapper(GaussianNB(), method="bbse", calibration=None, cv=3),
]


@parametrize_with_checks(ESTIMATORS)
def test_sklearn_estimator_checks(estimator, check):
    check(estimator)
