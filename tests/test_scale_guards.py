"""Dask input to PriorShiftWrapper.monitor and CostPolicyWrapper.expected_costs, and costs as a
function of X on Dask rows, against the in-memory methods on the same rows."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper, PriorShiftWrapper

da = pytest.importorskip("dask.array")
distributed = pytest.importorskip("distributed")


def _data(n, seed, shift=0.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3)) + shift
    logit = X @ np.array([1.0, -0.7, 0.4]) - 1.0
    y = (rng.random(n) < expit(1.4 * logit)).astype(int)
    return X, y


@pytest.fixture(scope="module")
def model():
    X, y = _data(2000, seed=0)
    return FrozenEstimator(LogisticRegression(C=0.05).fit(X, y))


def test_monitor_on_dask_blocks_equals_in_memory_batches(client, model):
    X, y = _data(6000, seed=1)
    X_new = np.vstack([_data(2000, seed=s, shift=sh)[0] for s, sh in ((2, 0.0), (3, 0.5), (4, 1.0))])
    wrapper = PriorShiftWrapper(model, n_resamples=30, random_state=0).fit(X, y)
    remote = wrapper.monitor(da.from_array(X_new, chunks=(2000, 3)))
    # consistency test: the in-memory monitor (probwrap.shift.prior_by_batch), batches = blocks
    local = wrapper.monitor(X_new, batch_size=2000)
    for field in ("n_rows", "prior", "lower", "upper", "shift_statistic"):
        np.testing.assert_allclose(remote[field], local[field], rtol=1e-10, atol=1e-12)
    assert np.all(np.diff(remote["prior"][:, 1]) > 0)  # the base rate rises with the shift
    again = wrapper.monitor(da.from_array(X_new, chunks=(2000, 3)), batch_size=2000)
    np.testing.assert_allclose(again["prior"], remote["prior"])
    with pytest.raises(ValueError, match="batch_size"):
        wrapper.monitor(da.from_array(X_new, chunks=(2000, 3)), batch_size=1500)


def test_monitor_after_a_dask_fit_uses_tally_replicates(client, model):
    X, y = _data(6000, seed=1)
    X_new = _data(4000, seed=5, shift=0.5)[0]
    wrapper = PriorShiftWrapper(model, n_resamples=40, random_state=0).fit(
        da.from_array(X, chunks=(2000, 3)), da.from_array(y, chunks=2000)
    )
    remote = wrapper.monitor(da.from_array(X_new, chunks=(2000, 3)))
    local = wrapper.monitor(X_new, batch_size=2000)
    # same point estimates as the in-memory monitor; intervals from the same replicate draws
    np.testing.assert_allclose(remote["prior"], local["prior"], rtol=1e-10)
    np.testing.assert_allclose(remote["lower"], local["lower"], rtol=1e-10)
    assert np.all(remote["lower"][:, 1] < remote["prior"][:, 1])
    assert np.all(remote["prior"][:, 1] < remote["upper"][:, 1])


def test_expected_costs_and_row_costs_on_dask(client, model):
    X, y = _data(6000, seed=6)
    Xd = da.from_array(X, chunks=(1500, 3))

    def costs(rows):  # row-wise: missing a damaged parcel costs its (invented) value column
        value = 5.0 + np.abs(np.asarray(rows)[:, 0]) * 10.0
        out = np.zeros((len(value), 2, 2))
        out[:, 0, 1] = 1.0
        out[:, 1, 0] = value
        return out

    remote = CostPolicyWrapper(model, costs=costs).fit(Xd, da.from_array(y, chunks=1500))
    local = CostPolicyWrapper(model, costs=costs).fit(X, y)  # consistency: in memory
    assert remote.heldout_cost_ == pytest.approx(local.heldout_cost_, rel=1e-12)
    E = remote.expected_costs(Xd)
    assert isinstance(E, da.Array)
    np.testing.assert_allclose(E.compute(), local.expected_costs(X), rtol=1e-12)
    # direct check of the plug-in rule: act when p * value > (1 - p) * 1
    p = model.predict_proba(X)[:, 1]
    value = 5.0 + np.abs(X[:, 0]) * 10.0
    np.testing.assert_array_equal(remote.predict(Xd).compute(), (p * value > 1 - p).astype(int))
    fixed = CostPolicyWrapper(model, costs={"fp": 1.0, "fn": 4.0}).fit(Xd, da.from_array(y, chunks=1500))
    np.testing.assert_allclose(fixed.expected_costs(Xd).compute(), fixed.expected_costs(X))


def test_tally_resolution_is_used_and_checked(client, model):
    from sklearn.base import clone

    from probwrap import CalibrationWrapper

    X, y = _data(8000, seed=7)
    Xd, yd = da.from_array(X, chunks=(2000, 3)), da.from_array(y, chunks=2000)
    coarse = CalibrationWrapper(model, method="isotonic", tally_resolution=0.25).fit(Xd, yd)
    fine = CalibrationWrapper(model, method="isotonic").fit(Xd, yd)
    assert coarse.tally_.resolution == 0.25 and fine.tally_.resolution == 1e-3
    # bins of width 0.25 on the log-odds scale: every occupied bin index is round(s / 0.25)
    s = np.log(model.predict_proba(X)[:, 1]) - np.log(model.predict_proba(X)[:, 0])
    np.testing.assert_array_equal(coarse.tally_.bins, np.unique(np.floor(s / 0.25 + 0.5)))
    assert clone(coarse).get_params()["tally_resolution"] == 0.25
    with pytest.raises(ValueError, match="tally_resolution"):
        CalibrationWrapper(model, method="platt", tally_resolution=0).fit(Xd, yd)
    policy = CostPolicyWrapper(model, costs={"fp": 1.0, "fn": 6.0}, strategy="tuned",
                               n_resamples=0, tally_resolution=0.5).fit(Xd, yd)
    assert policy.tally_.resolution == 0.5
