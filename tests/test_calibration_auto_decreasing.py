"""``method="auto"`` and a decreasing Platt map on a frozen model: the warning names what was
asked and what was chosen, and a decreasing map that scores within a standard error of a
non-decreasing one is passed over (docs/calibration.md, "A decreasing Platt map on a frozen
model")."""

import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper


def test_auto_warning_names_auto_and_the_map_it_chose():
    # breast cancer, a model fitted to the opposite label (1 - y): the folds show the reversal
    # far beyond their noise, so auto keeps the decreasing Platt map; the warning used to say
    # method='platt' although the user asked for method='auto'
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.01)).fit(X[:300], 1 - y[:300])
    with pytest.warns(UserWarning, match=r"method='auto', chose 'platt'\): the map decreases"):
        w = CalibrationWrapper(FrozenEstimator(model), method="auto", random_state=0).fit(
            X[300:420], y[300:420])
    assert w.method_ == "platt" and w.calibrator_.slope_ < 0
    assert log_loss(y[420:], w.predict_proba(X[420:])[:, 1]) < 0.2
