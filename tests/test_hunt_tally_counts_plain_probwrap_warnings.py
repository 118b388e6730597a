"""The benchmark hunts count a warning as probwrap's (``*`` in their warning lists) by where it
was raised, not only by its class or file: a plain ``UserWarning`` raised by probwrap with a
``stacklevel`` carries the caller's file, and the hunts' old test (class module or a file path
containing ``probwrap``) missed it (``benchmarks/_hunt_loop.py``, ``fit_listing_warnings``)."""

from __future__ import annotations

import importlib.util
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper

BENCH = Path(__file__).resolve().parents[1] / "benchmarks"


def _loop():
    sys.path.insert(0, str(BENCH))
    try:
        spec = importlib.util.spec_from_file_location("_hunt_loop_under_test", BENCH / "_hunt_loop.py")
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
        return mod
    finally:
        sys.path.remove(str(BENCH))


class _Caller:
    """Fits a policy with a fit parameter a frozen model leaves unread: probwrap warns with a
    plain UserWarning whose stacklevel points here, outside probwrap's folder."""

    def __init__(self, X, y):
        self.pol = CostPolicyWrapper(FrozenEstimator(LogisticRegression().fit(X, y)), costs={"fp": 1, "fn": 4})

    def fit(self, X, y, sample_weight=None):
        self.pol.fit(X, y, groups=np.arange(len(y)))
        return self


def _rows():
    rng = np.random.default_rng(0)
    X = rng.normal(size=(80, 2))
    return X, (X[:, 0] + rng.normal(size=80) > 0).astype(int)


def test_plain_userwarning_from_probwrap_is_marked():
    L = _loop()
    X, y = _rows()
    with warnings.catch_warnings(record=True) as ws:  # the case: not findable by file or class
        warnings.simplefilter("always")
        _Caller(X, y).fit(X, y)
    said = [x for x in ws if "are not used" in str(x.message)]
    assert len(said) == 1 and said[0].category is UserWarning and "probwrap" not in Path(said[0].filename).parts
    caught: list = []
    L.fit_listing_warnings(_Caller(X, y), X, y, None, caught)
    assert caught == ["*UserWarning"] and L.warned(",".join(caught))
    assert warnings.warn.__module__ in ("warnings", "_warnings")  # the wrapper is gone after


def test_other_libraries_warnings_stay_unmarked_and_probwrap_classes_marked():
    L = _loop()
    X, y = _rows()
    caught: list = []
    L.fit_listing_warnings(LogisticRegression(max_iter=1), X, y, None, caught)
    assert caught == ["ConvergenceWarning"] and not L.warned(",".join(caught))
    # a named probwrap class raised through a frozen model's plug-in rule (all rows 0.9)
    from sklearn.dummy import DummyClassifier

    Xz, yz = np.zeros((50, 1)), np.r_[np.zeros(40), np.ones(10)].astype(int)
    dummy = DummyClassifier(strategy="prior").fit(np.zeros((10, 1)), np.r_[0, np.ones(9)].astype(int))
    caught = []
    L.fit_listing_warnings(CostPolicyWrapper(FrozenEstimator(dummy), costs={"fp": 1, "fn": 1}), Xz, yz, None, caught)
    assert caught == ["*PlugInCostAboveOneActionWarning"]
