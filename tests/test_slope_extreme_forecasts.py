"""Calibration-in-the-large stays finite on forecasts piled at 0 and 1 (real data).

Gaussian naive Bayes on scikit-survival's bundled flchain data (death during follow-up) gives
probabilities within 1e-12 of 0 or 1 for several rows. On 5 positives and 95 negatives the Newton fit
of the intercept (offset ``logit p``) used to run off to ``-inf``: the curvature underflowed and
the step-halving accepted a step that lowered the likelihood. The intercept is the unique root
of a strictly falling score, so it is finite whenever both classes are present.
"""

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import minimize_scalar
from sklearn.naive_bayes import GaussianNB

from probwrap.calibration import proba_to_log_odds
from probwrap.metrics import calibration_slope_intercept

sksurv_datasets = pytest.importorskip("sksurv.datasets")


@pytest.fixture(scope="module")
def forecasts():
    X, y = sksurv_datasets.load_flchain()
    X = X.drop(columns="chapter")  # the cause of death: known only for the dead
    for c in X.columns:
        if X[c].dtype.kind == "f":
            X[c] = X[c].fillna(X[c].median())
    X = pd.get_dummies(X, drop_first=True, dtype=float).to_numpy(float)
    y = y["death"].astype(int)
    model = GaussianNB().fit(X[:600], y[:600])
    pos = np.flatnonzero(y[1000:] == 1)[:5] + 1000
    neg = np.flatnonzero(y[1000:] == 0)[:95] + 1000
    rows = np.concatenate([pos, neg])
    return y[rows], model.predict_proba(X[rows])[:, 1]


def _nll(c, x, y):
    return -np.sum(y * (c + x) - np.logaddexp(0.0, c + x))


def test_intercept_is_the_likelihood_maximum_not_minus_infinity(forecasts):
    y, p = forecasts
    assert np.sum((p < 1e-12) | (p > 1 - 1e-12)) >= 4  # the case: forecasts at 0 or 1
    with pytest.warns(UserWarning, match="clip"):
        res = calibration_slope_intercept(y, p)
    assert np.isfinite(res.intercept) and np.isfinite(res.slope)
    x = proba_to_log_odds(p, clip=1e-12)
    # reference: SciPy's bounded scalar minimiser of the same negative log-likelihood
    # (statsmodels' IRLS diverges on these offsets); 1e-6 covers its xatol-limited accuracy
    ref = minimize_scalar(_nll, bounds=(-100.0, 100.0), args=(x, y), method="bounded",
                          options={"xatol": 1e-10})
    assert res.intercept == pytest.approx(ref.x, abs=1e-6)
    assert _nll(res.intercept, x, y) <= ref.fun + 1e-9
    # the score equation holds: expected positives equal observed positives
    assert np.sum(1.0 / (1.0 + np.exp(-(res.intercept + x)))) == pytest.approx(y.sum(), rel=1e-9)


def test_slope_fit_matches_statsmodels_on_the_same_rows(forecasts):
    sm = pytest.importorskip("statsmodels.api")
    y, p = forecasts
    with pytest.warns(UserWarning, match="clip"):
        res = calibration_slope_intercept(y, p)
    x = proba_to_log_odds(p, clip=1e-12)
    ref = sm.GLM(y, sm.add_constant(x), family=sm.families.Binomial()).fit(tol=1e-12)
    # both solve the same two score equations to ~1e-12; 1e-7 leaves room for the stopping rules
    assert res.slope_fit_intercept == pytest.approx(ref.params[0], abs=1e-7)
    assert res.slope == pytest.approx(ref.params[1], abs=1e-7)
