"""scikit-learn's estimator checks over CalibrationWrapper with every method: no expected failures."""

from sklearn.linear_model import LogisticRegression
from sklearn.utils.estimator_checks import parametrize_with_checks

from probwrap import CalibrationWrapper
from probwrap._calibration_wrapper import CALIBRATION_METHODS

# A tight tolerance makes the inner model's fit reproducible enough for the checks that compare
# weighted rows with repeated rows.
_base = LogisticRegression(tol=1e-10, max_iter=5000)

ESTIMATORS = [
    CalibrationWrapper(_base, method=m, cv=3) for m in [*CALIBRATION_METHODS, "auto"]
]


@parametrize_with_checks(ESTIMATORS)
def test_sklearn_estimator_checks(estimator, check):
    check(estimator)
