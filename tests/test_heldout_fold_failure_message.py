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

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


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


COSTS3 = np.ones((3, 3)) - np.eye(3)


def test_cost_policy_fitting_once_reports_a_failure_as_the_folds_do():
    # CostPolicyWrapper's default strategy ("bayes") fits the model once, on all rows: a QDA
    # refusing a rank-deficient class raised its bare message there ("The covariance matrix of
    # class 0 is not full rank...", no counts, no fixes) where CalibrationWrapper,
    # PriorShiftWrapper and the tuned strategy, which cross-fit, give the fold-failure message.
    # Now the same counts and advice, and the estimator's words.
    X, y = _iris()
    with pytest.raises(ValueError) as info:
        CostPolicyWrapper(_RefusingQDA(), costs=COSTS3).fit(X, y)
    text = str(info.value)
    assert text.startswith("Fitting `estimator` (_RefusingQDA) on all the rows failed. "
                           "Rows per class in all 12 rows: 0: 3, 1: 3, 2: 6.")
    assert "give the smallest class (0, 3 rows) more rows, or regularise it" in text
    assert "The estimator said: The covariance matrix of class 0" in text
    # the strategies that cross-fit: the fold message, with the same counts and advice
    for wrapper in (CalibrationWrapper(_RefusingQDA(), cv=5),
                    PriorShiftWrapper(_RefusingQDA(), cv=5),
                    CostPolicyWrapper(_RefusingQDA(), costs=COSTS3, strategy="tuned", cv=5)):
        with pytest.raises(ValueError) as info:
            wrapper.fit(X, y)
        fold = str(info.value)
        assert "Rows per class in all 12 rows: 0: 3, 1: 3, 2: 6" in fold
        assert "more folds cannot help" in fold
        assert "give the smallest class (0, 3 rows) more rows, or regularise it" in fold


def test_fitting_once_needs_no_folds_so_all_rows_are_enough():
    # 6 malignant rows and 4 features: QDA fits on all 36 rows but not on a fold's 4-5. The
    # "bayes" strategy fits once on all rows, so it fits (no fold is fitted); the tuned strategy
    # and the other wrappers cross-fit and say to use more folds, which then fits.
    from sklearn.metrics import log_loss

    X, y = _cancer()
    policy = CostPolicyWrapper(_RefusingQDA(), costs={"fp": 1.0, "fn": 5.0}).fit(X, y)
    direct = _RefusingQDA().fit(X, y)
    np.testing.assert_allclose(policy.predict_proba(X), direct.predict_proba(X))
    assert log_loss(y, policy.predict_proba(X)) < 0.5
    with pytest.raises(ValueError, match="It fits on all the rows: use more folds"):
        CostPolicyWrapper(_RefusingQDA(), costs={"fp": 1.0, "fn": 5.0}, strategy="tuned",
                          cv=5).fit(X, y)
    CostPolicyWrapper(_RefusingQDA(), costs={"fp": 1.0, "fn": 5.0}, strategy="tuned",
                      cv=12).fit(X, y)


def test_a_failure_that_is_not_about_rows_is_not_blamed_on_them():
    # NaN in X: the advice no longer says only "give the smallest class more rows"
    from sklearn.linear_model import LogisticRegression

    X, y = load_breast_cancer(return_X_y=True)
    X = X[:80, :3].copy()
    y = y[:80]
    X[3, 1] = np.nan
    # seeded folds: the NaN row must sit in the training part of the first fold fitted (with
    # random folds, one draw in five holds it out there, and the message is then the
    # fold-scoring one of tests/test_heldout_fold_scoring_message.py)
    for wrapper in (CalibrationWrapper(LogisticRegression(), random_state=0),
                    CostPolicyWrapper(LogisticRegression(), costs={"fp": 1.0, "fn": 5.0},
                                      random_state=0)):
        with pytest.raises(ValueError) as info:
            wrapper.fit(X, y)
        text = str(info.value)
        assert "otherwise fix what it names" in text and "Input X contains NaN" in text
