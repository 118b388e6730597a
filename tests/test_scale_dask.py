"""Dask input on a two-worker LocalCluster (loopback only): tallies block by block and the
wrappers' Dask path, against the in-memory path on the same rows."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.scale import tally_model, tally_scores

# the tally / reduction path, also on few rows (conftest.py)
pytestmark = pytest.mark.usefixtures("tally_path")

da = pytest.importorskip("dask.array")
dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")

COSTS = {"fp": 1.0, "fn": 6.0}


def _data(n, seed, shift=0.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3)) + shift
    logit = X @ np.array([1.0, -0.7, 0.4]) - 1.0
    y = (rng.random(n) < expit(1.4 * logit)).astype(int)  # the model below is miscalibrated
    return X, y


@pytest.fixture(scope="module")
def model():
    X, y = _data(2000, seed=0)
    return FrozenEstimator(LogisticRegression(C=0.05).fit(X, y))


class _ChunkRecorder(LogisticRegression):
    """Records the number of rows of every prediction call (to check blockwise work)."""

    seen: list = []

    def predict_proba(self, X):
        _ChunkRecorder.seen.append(len(X))
        return super().predict_proba(X)


def test_dask_tally_equals_in_memory_tally(client):
    rng = np.random.default_rng(1)
    s = rng.normal(size=30_000)
    y = (rng.random(30_000) < expit(s)).astype(int)
    w = rng.uniform(0.5, 2.0, size=30_000)
    local = tally_scores(s, y, sample_weight=w)
    remote = tally_scores(da.from_array(s, chunks=4000), da.from_array(y, chunks=7000),
                          sample_weight=w)
    np.testing.assert_array_equal(remote.bins, local.bins)
    np.testing.assert_allclose(remote.counts, local.counts, rtol=1e-12)
    assert remote.n_rows == 30_000


def test_predictions_are_made_block_by_block(client):
    X, y = _data(12_000, seed=2)
    est = FrozenEstimator(_ChunkRecorder().fit(X[:1000], y[:1000]))
    _ChunkRecorder.seen = []
    t = tally_model(est, da.from_array(X, chunks=(3000, 3)), da.from_array(y, chunks=3000))
    assert t.n_rows == 12_000 and sorted(_ChunkRecorder.seen) == [3000] * 4


@pytest.mark.parametrize(("method", "tol"), [("platt", 1e-4), ("isotonic", 2e-3)])
def test_calibration_wrapper_on_dask_arrays(client, model, method, tol):
    X, y = _data(40_000, seed=3)
    Xd, yd = da.from_array(X, chunks=(10_000, 3)), da.from_array(y, chunks=10_000)
    remote = CalibrationWrapper(model, method=method).fit(Xd, yd)
    local = CalibrationWrapper(model, method=method).fit(X, y)
    out = remote.predict_proba(Xd)
    assert isinstance(out, da.Array)
    p_remote = out.compute()
    np.testing.assert_allclose(p_remote, remote.predict_proba(X))
    p_local = local.predict_proba(X)
    if method == "platt":
        # same rows, same loss: the log losses (scikit-learn's log_loss) agree within 1e-4
        assert abs(log_loss(y, p_remote) - log_loss(y, p_local)) < tol
        assert np.max(np.abs(p_remote - p_local)) < 1e-3
    else:
        assert np.mean(np.abs(p_remote[:, 1] - p_local[:, 1])) < tol
    labels = remote.predict(Xd)
    assert isinstance(labels, da.Array)
    np.testing.assert_array_equal(labels.compute(), remote.predict(X))


def test_calibration_wrapper_on_a_dask_dataframe(client):
    X, y = _data(20_000, seed=4)
    cols = ["weight", "route_km", "transfers"]
    df = pd.DataFrame(X, columns=cols).assign(damaged=y)
    est = FrozenEstimator(LogisticRegression().fit(df[cols].iloc[:2000], y[:2000]))
    ddf = dd.from_pandas(df, npartitions=4)
    remote = CalibrationWrapper(est, method="beta").fit(ddf[cols], ddf["damaged"])
    local = CalibrationWrapper(est, method="beta").fit(df[cols], y)
    p_remote = remote.predict_proba(ddf[cols]).compute()
    assert p_remote.shape == (20_000, 2)
    assert abs(log_loss(y, p_remote) - log_loss(y, local.predict_proba(df[cols]))) < 1e-4
    # labels as an in-memory array next to a Dask DataFrame are split by partition lengths
    again = CalibrationWrapper(est, method="beta").fit(ddf[cols], y)
    np.testing.assert_allclose(again.predict_proba(df[cols]), remote.predict_proba(df[cols]))


def test_features_and_labels_read_from_one_parquet_folder_line_up(client, tmp_path):
    # Regression: with the query optimiser of current Dask, reading fewer columns of a Parquet
    # folder gives fewer partitions, so `frame[features]` had 4 and `frame["damaged"]` 2; the
    # wrapper now takes the partitions as the frames define them.
    X, y = _data(40_000, seed=5)
    cols = ["weight", "route_km", "transfers"]
    df = pd.DataFrame(X, columns=cols).assign(damaged=y)
    for i in range(4):
        df.iloc[i * 10_000 : (i + 1) * 10_000].to_parquet(tmp_path / f"part-{i}.parquet")
    frame = dd.read_parquet(str(tmp_path / "*.parquet"))
    est = FrozenEstimator(LogisticRegression().fit(df[cols].iloc[:2000], y[:2000]))
    remote = CalibrationWrapper(est, method="isotonic").fit(frame[cols], frame["damaged"])
    assert remote.tally_.n_rows == 40_000
    np.testing.assert_allclose(remote.tally_.label_weight, [np.sum(y == 0), np.sum(y == 1)])


def test_tuned_cutoff_on_dask_within_a_tenth_of_a_percent(client, model):
    X, y = _data(40_000, seed=5)
    w = np.random.default_rng(6).uniform(0.5, 1.5, size=y.shape[0])
    Xd = da.from_array(X, chunks=(8000, 3))
    remote = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(
        Xd, da.from_array(y, chunks=8000), sample_weight=da.from_array(w, chunks=8000)
    )
    local = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y, sample_weight=w)

    def cost(cutoff):  # weighted mean cost on the full rows
        act = model.predict_proba(X)[:, 1] > cutoff
        return np.dot(w, COSTS["fp"] * (act & (y == 0)) + COSTS["fn"] * (~act & (y == 1))) / w.sum()

    assert cost(remote.cutoff_) == pytest.approx(cost(local.cutoff_), rel=1e-3)
    assert remote.heldout_cost_ == pytest.approx(local.heldout_cost_, rel=1e-3)
    # the reported held-out cost is that of the rule predict applies, on every row: the cutoff
    # lies between tally bins even where the settling step keeps the plug-in cutoff (which can
    # fall inside a bin)
    assert remote.heldout_cost_ == pytest.approx(cost(remote.cutoff_), rel=1e-12)
    # a Poisson-bootstrap interval from replicate tallies (checked in test_scale_bootstrap.py)
    ci = remote.cutoff_interval_
    # (the interval is that of the least-cost cutoff; the settled cutoff_ may be the plug-in one)
    least = remote.cost_curve_.cutoff
    assert ci.low <= least <= ci.high and ci.bootstrap_cutoffs.shape == (200,)
    actions = remote.predict(Xd)
    assert isinstance(actions, da.Array)
    np.testing.assert_array_equal(actions.compute(), remote.predict(X))


def test_prior_shift_on_dask_within_2e3(client, model):
    X, y = _data(30_000, seed=7)
    X_new, _ = _data(30_000, seed=8, shift=0.6)
    Xd, yd = da.from_array(X, chunks=(6000, 3)), da.from_array(y, chunks=6000)
    Xd_new = da.from_array(X_new, chunks=(6000, 3))
    remote = PriorShiftWrapper(model, n_resamples=0).fit(Xd, yd).adapt(Xd_new)
    local = PriorShiftWrapper(model, n_resamples=0).fit(X, y).adapt(X_new)
    np.testing.assert_allclose(remote.source_prior_, local.source_prior_, atol=1e-12)
    assert abs(remote.target_prior_[1] - local.target_prior_[1]) < 2e-3
    assert remote.target_prior_interval_ is None
    p = remote.predict_proba(Xd_new)
    assert isinstance(p, da.Array)
    np.testing.assert_allclose(p.compute(), remote.predict_proba(X_new))


def test_dask_input_needs_a_frozen_binary_estimator(client):
    X, y = _data(3000, seed=9)
    Xd, yd = da.from_array(X, chunks=1000), da.from_array(y, chunks=1000)
    with pytest.raises(ValueError, match="FrozenEstimator"):
        CalibrationWrapper(LogisticRegression(), method="platt").fit(Xd, yd)
    y3 = np.arange(3000) % 3
    est3 = FrozenEstimator(LogisticRegression().fit(X, y3))
    # multiclass Dask input works for named methods (tests/test_scale_multiclass.py), not "auto"
    # (on the tally path; a set of at most KEPT_ROWS rows is fitted as in memory, "auto"
    # included: tests/test_distributed_small_sets.py)
    with pytest.raises(ValueError, match="auto"):
        CalibrationWrapper(est3, method="auto").fit(Xd, da.from_array(y3, chunks=1000))
    est = FrozenEstimator(LogisticRegression().fit(X, y))
    with pytest.raises(ValueError, match="y"):
        CalibrationWrapper(est, method="platt").fit(Xd, da.from_array(y + 5, chunks=1000))
    with pytest.raises(ValueError, match="y"):
        CalibrationWrapper(est, method="platt").fit(Xd, da.from_array(y[:2000], chunks=500))
    with pytest.raises(ValueError, match="costs"):
        CostPolicyWrapper(est, costs=lambda X: None, strategy="tuned").fit(Xd, yd)
