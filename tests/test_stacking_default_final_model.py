"""An unfitted ``StackingClassifier`` with its default ``final_estimator=None``.

scikit-learn's stacking model asks its final model whether it has ``predict_proba``; before fit
that model is ``None`` (scikit-learn makes a ``LogisticRegression`` at fit, its documented
default), so ``hasattr`` says no and scikit-learn's own ``CalibratedClassifierCV`` refuses the
model. The wrappers read the default final model instead: they fit, and give exactly what the
same stack with ``final_estimator=LogisticRegression()`` written out gives. Before, every
wrapper refused it ("has neither predict_proba nor decision_function" / "has no
predict_proba").
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import StackingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GridSearchCV, StratifiedKFold
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


def _stack(final=None):
    return StackingClassifier(
        [("nb", GaussianNB()), ("lr", make_pipeline(StandardScaler(), LogisticRegression()))],
        final_estimator=final, cv=3)


def _shapes(stack):
    return {
        "alone": stack,
        "pipeline": make_pipeline(StandardScaler(), stack),
        "search": GridSearchCV(stack, {"passthrough": [False]}, cv=3),
    }


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:240], y[:240], X[240:300]


@pytest.mark.parametrize("shape", ["alone", "pipeline", "search"])
@pytest.mark.parametrize("wrapper", [CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper])
def test_default_final_model_is_read_as_scikit_learns_default(cancer, wrapper, shape):
    X, y, X_new = cancer
    default = _shapes(_stack())[shape]
    assert not hasattr(_stack(), "predict_proba")  # scikit-learn's answer before fit
    written = _shapes(_stack(LogisticRegression()))[shape]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # the same folds for both (the wrappers' default folds are shuffled, unseeded)
        got = wrapper(default, cv=StratifiedKFold(5)).fit(X, y).predict_proba(X_new)
        want = wrapper(written, cv=StratifiedKFold(5)).fit(X, y).predict_proba(X_new)
    np.testing.assert_allclose(got, want, rtol=0, atol=1e-12)
    assert np.all((got > 0) & (got < 1))


def test_a_stack_whose_final_model_has_no_probabilities_is_still_refused(cancer):
    from sklearn.svm import LinearSVC

    X, y, _ = cancer
    with pytest.raises(ValueError, match="has no predict_proba"):
        CostPolicyWrapper(_stack(LinearSVC())).fit(X, y)
