"""A model that cannot be fitted on a fold's training part: the error counts the user's rows.

QuadraticDiscriminantAnalysis needs more rows per class than features. Inside a wrapper on
small data it failed on a fold's training part and its own message ("class 0 has 2 samples
and 4 features") counted that part, which the user never sees, and no advice followed. The
message now gives the class counts in all rows and in the training parts, says whether all
rows fit, and names fixes that work -- checked here by following them. Data: scikit-learn's
bundled iris (12 rows: 3, 3, 6 per class) and breast cancer (6 malignant, 30 benign rows,
four features).
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.linalg import LinAlgWarning
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis

from probwrap import CalibrationWrapper, PriorShiftWrapper


@pytest.fixture(autouse=True)
def _quiet():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


class _RefusingQDA(QuadraticDiscriminantAnalysis):
    """QuadraticDiscriminantAnalysis that refuses a class whose covariance is not of full rank,
    as scikit-learn's own does from release 1.7 on (it raises); release 1.6 only warned and
    fitted the singular covariance, so the same test data run on both releases."""

    def fit(self, X, y):
        with warnings.catch_warnings():
            warnings.filterwarnings("error", message="The covariance matrix of class",
                                    category=LinAlgWarning)
            try:
                return super().fit(X, y)
            except LinAlgWarning as exc:  # scikit-learn 1.6: the warning, now an error
                raise ValueError(str(exc)) from None


def _iris():
    X, y = load_iris(return_X_y=True)
    idx = np.r_[0:3, 50:53, 100:106]
    return X[idx], y[idx]


def _cancer():
    X, y = load_breast_cancer(return_X_y=True)
    idx = np.r_[np.flatnonzero(y == 0)[:6], np.flatnonzero(y == 1)[:30]]
    return X[idx][:, :4], y[idx]


@pytest.mark.parametrize("wrapper", [CalibrationWrapper, PriorShiftWrapper])
def test_all_rows_too_few_says_so_and_regularising_fits(wrapper):
    X, y = _iris()
    with pytest.raises(ValueError) as info:
        wrapper(_RefusingQDA(), cv=5).fit(X, y)
    text = str(info.value)
    assert "Rows per class in all 12 rows: 0: 3, 1: 3, 2: 6" in text
    assert "training parts of the 5 folds (`cv`): 0: 2 to 3, 1: 2 to 3, 2: 4 to 5" in text
    assert "fails on all the rows too, so more folds cannot help" in text
    # the estimator's own words follow, labelled (scikit-learn 1.9 adds "class 0 has 2 samples")
    assert "The estimator said (counting the rows of the training part it was given): The " \
           "covariance matrix of class 0" in text
    # the advice works: a regularised model (the parameter differs between scikit-learn
    # releases: `shrinkage` with solver="eigen" in recent ones, `reg_param` in older ones)
    params = QuadraticDiscriminantAnalysis().get_params()
    shrunk = (QuadraticDiscriminantAnalysis(solver="eigen", shrinkage=0.5)
              if "shrinkage" in params else QuadraticDiscriminantAnalysis(reg_param=0.5))
    wrapper(shrunk, cv=5).fit(X, y)


def test_all_rows_fit_so_more_folds_is_offered_and_works():
    X, y = _cancer()
    with pytest.raises(ValueError) as info:
        CalibrationWrapper(_RefusingQDA(), cv=5).fit(X, y)
    text = str(info.value)
    assert "Rows per class in all 36 rows: 0: 6, 1: 30" in text
    assert "0: 4 to 5, 1: 24" in text and "It fits on all the rows: use more folds" in text
    CalibrationWrapper(_RefusingQDA(), cv=12).fit(X, y)


@pytest.mark.parametrize("wrapper", [CalibrationWrapper, PriorShiftWrapper])
def test_more_folds_than_rows_of_any_class_names_cv_and_counts(wrapper):
    # 8 rows, 4 of each class, cv=5: scikit-learn's splitter said only "n_splits=5 cannot be
    # greater than the number of members in each class"
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    idx = np.r_[np.flatnonzero(y == 0)[:4], np.flatnonzero(y == 1)[:4]]
    with pytest.raises(ValueError) as info:
        wrapper(LogisticRegression(max_iter=5000), cv=5).fit(X[idx][:, :3], y[idx])
    text = str(info.value)
    assert "`cv=5` stratified folds" in text and "0: 4, 1: 4" in text
    assert "use `cv=4` or fewer" in text
    wrapper(LogisticRegression(max_iter=5000), cv=4).fit(X[idx][:, :3], y[idx])
