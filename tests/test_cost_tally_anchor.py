"""The tuned cutoff's recalibrated anchor on a Dask tally fitted from its bins (session 28).

A tuned ``CostPolicyWrapper`` settles its cutoff toward an anchor: the plug-in cutoff carried
back through a calibration map chosen on the held-out rows (``recalibrated_plugin_cutoff``).
Until session 28 a fit through a Dask or Spark tally's bins (a set whose rows do not reach the
client) used the plug-in cutoff itself as the anchor, while the in-memory fit of the same rows
used the map's. Now a tally of whole-number rows fits the anchor on its (bin, class) rows, each
counting its rows as cases. The reference is the in-memory fit of the same rows (its anchor is
checked against outside references in tests/test_cost_crossfit_anchor.py and the files named
there); the bins are 1e-3 wide on the log-odds scale, so the anchor agrees to about that.

Data: scikit-learn's bundled breast cancer set, a random forest fitted on 100 rows, frozen, and
120 labelled rows (a miss costing 5, a false alarm 1: plug-in cutoff 1/6). Measured on three
sets and 81 cells by ``benchmarks/tuned_cost_anchor28.py --tally`` (docs/decisions.md).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator

from probwrap import CostPolicyWrapper

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

COSTS = {"fp": 1.0, "fn": 5.0}


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def _cell(seed: int):
    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    fit, lab = idx[:100], idx[100:220]
    model = FrozenEstimator(RandomForestClassifier(n_estimators=30, random_state=0).fit(X[fit], y[fit]))
    return model, X[lab], y[lab]


def _fits(seed: int, w=None):
    model, X, y = _cell(seed)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mem = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y, sample_weight=w)
        tal = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(
            da.from_array(X, chunks=(20, -1)), da.from_array(y, chunks=20),
            sample_weight=None if w is None else da.from_array(w, chunks=20))
    return mem, tal, model.predict_proba(X)[:, 1]


@pytest.mark.parametrize("seed, anchor", [(0, 0.301), (1, 0.2917)])
def test_tally_anchor_is_the_in_memory_anchor(tally_path, seed, anchor):
    mem, tal, p = _fits(seed)
    assert tal.tally_ is not None and mem.cutoff_anchor_map_ == "platt"
    assert mem.cutoff_anchor_ == pytest.approx(anchor, abs=1e-3)
    # before session 28: map None and the anchor the plug-in 1/6, cutoff 0.133
    assert tal.cutoff_anchor_map_ == mem.cutoff_anchor_map_
    assert tal.cutoff_anchor_ == pytest.approx(mem.cutoff_anchor_, abs=1e-3)
    # the rule acts on the held-out rows as the in-memory rule does (the tally keeps its
    # cutoff unless it splits a bin's rows: tests/test_cost_tally_cutoff_in_gap.py)
    np.testing.assert_array_equal(p > tal.cutoff_, p > mem.cutoff_)


def test_tally_anchor_keeps_plugin_for_fractional_weights(tally_path):
    """Weights that are not whole numbers are pooled per bin (a bin would count as one row where
    its rows count as many), so the tally keeps the plug-in anchor; scaling them changes nothing."""
    _, X, _ = _cell(0)
    w = np.random.default_rng(3).uniform(0.5, 2.0, X.shape[0])
    for scale in (1.0, 1.0 / w.sum()):
        _, tal, _ = _fits(0, w * scale)
        assert tal.cutoff_anchor_map_ is None
        assert tal.cutoff_anchor_ == pytest.approx(1 / 6)


def test_tally_anchor_switch_restores_the_old_rule(tally_path, monkeypatch):
    import probwrap._cost_policy_rules as R

    monkeypatch.setattr(R, "_TALLY_ANCHOR", False)
    _, tal, _ = _fits(0)
    assert tal.cutoff_anchor_map_ is None and tal.cutoff_anchor_ == pytest.approx(1 / 6)
    # the plug-in cutoff kept as it is (session 29); the bin-edge move made it 0.1334 before
    assert tal.cutoff_ == pytest.approx(1 / 6, abs=1e-12)
