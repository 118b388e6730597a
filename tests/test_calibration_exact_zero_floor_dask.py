"""The exact-zero floor on the Dask path beyond the in-memory limit (multiclass).

With ``clip=None``, more than two classes, exact zeros among the held-out probabilities and
positive ones below 2e-12, the in-memory fit floors at half the Krichevsky-Trofimov floor of
the ``N`` held-out rows, ``1 / (4 (N + 1) (k - 1))``, and warns once
(tests/test_calibration_exact_zero_floor.py). Before session 29 a multiclass Dask fit of a set
larger than ``KEPT_ROWS`` (forced here with the ``tally_path`` fixture, which sets the limit to
0) kept the old floor 1e-12 and said nothing. The reference is the in-memory fit of the same
rows; the floor's value is the formula (Krichevsky and Trofimov 1981, add-one-half estimate)
computed here.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper
from probwrap.calibration import ExactZeroFloorWarning

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


@pytest.fixture(scope="module")
def digits_cell():
    """scikit-learn's digits: an isotonic-calibrated naive Bayes on 100 rows, 100 more held
    out (as in tests/test_calibration_exact_zero_floor.py), 200 to test on."""
    X, y = load_digits(return_X_y=True)
    Xtr, Xr, ytr, yr = train_test_split(X, y, train_size=100, stratify=y, random_state=2)
    Xc, Xt, yc, _ = train_test_split(Xr, yr, train_size=100, stratify=yr, random_state=2)
    model = CalibratedClassifierCV(GaussianNB(), method="isotonic", cv=3).fit(Xtr, ytr)
    p = model.predict_proba(Xc)
    assert (p == 0).any() and p[p > 0].min() < 2e-12  # the case: zeros, no resolution
    return FrozenEstimator(model), Xc, yc, Xt[:200]


def _fit(model, X, y, w=None, method="temperature"):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        cw = CalibrationWrapper(model, method=method, random_state=0).fit(X, y, sample_weight=w)
    return cw, [c for c in caught if "exactly 0" in str(c.message)]


@pytest.mark.parametrize("method", ["temperature", "platt"])
def test_dask_beyond_the_limit_floors_exact_zeros_as_in_memory(tally_path, digits_cell, method):
    model, Xc, yc, Xt = digits_cell
    mem, mem_caught = _fit(model, Xc, yc, method=method)
    dsk, dsk_caught = _fit(model, da.from_array(Xc, chunks=(30, -1)),
                           da.from_array(yc, chunks=30), method=method)
    assert getattr(dsk, "tally_", None) is not None or method == "temperature"
    # half the Krichevsky-Trofimov floor of N = 100 rows, k = 10 classes: 1 / (4 * 101 * 9)
    assert mem.clip_ == pytest.approx(0.25 / (101 * 9), rel=1e-12)
    assert dsk.clip_ == mem.clip_  # before: 1e-12
    assert len(dsk_caught) == 1 and len(mem_caught) == 1  # before: none on Dask
    assert dsk_caught[0].category is ExactZeroFloorWarning
    assert str(dsk_caught[0].message) == str(mem_caught[0].message)
    if method == "temperature":  # the same map on the same rows: the same probabilities
        np.testing.assert_allclose(dsk.predict_proba(Xt), mem.predict_proba(Xt), atol=1e-6)


def test_dask_floor_reads_weights_as_the_in_memory_fit(tally_path, digits_cell):
    """Weights summing to fewer than the rows count Kish's effective size, in memory and on
    Dask alike (weights scaled by 1/1000 give the same floor as the unscaled)."""
    model, Xc, yc, _ = digits_cell
    w = np.random.default_rng(0).uniform(0.5, 2.0, yc.shape[0])
    kish = w.sum() ** 2 / (w @ w)
    for scale in (1.0, 1e-3):
        mem, _ = _fit(model, Xc, yc, w * scale)
        dsk, caught = _fit(model, da.from_array(Xc, chunks=(30, -1)),
                           da.from_array(yc, chunks=30), da.from_array(w * scale, chunks=30))
        expected = 0.25 / ((kish + 1) * 9) if scale < 1 else 0.25 / ((w.sum() + 1) * 9)
        assert mem.clip_ == pytest.approx(expected, rel=1e-12)
        assert dsk.clip_ == pytest.approx(mem.clip_, rel=1e-12)
        assert len(caught) == 1


def test_named_warning_is_a_user_warning(digits_cell):
    """Filters on UserWarning still catch it; an error filter on the class stops the fit."""
    model, Xc, yc, _ = digits_cell
    assert issubclass(ExactZeroFloorWarning, UserWarning)
    with warnings.catch_warnings():
        warnings.simplefilter("error", ExactZeroFloorWarning)
        with pytest.raises(ExactZeroFloorWarning, match="probabilities of exactly 0"):
            CalibrationWrapper(model, method="temperature").fit(Xc, yc)
