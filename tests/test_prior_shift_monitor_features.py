"""PriorShiftWrapper(feature_check_rows=...).monitor: the feature check batch by batch (session
28). Before, only adapt ran it; monitor's table had no feature fields and no batch was named.

Breast-cancer rows (scikit-learn's bundled set), 200 labelled; monitored batches of 60 rows
drawn without replacement from the other rows: by class at the labelled benign share times 0.5
and 1.4 (prior shift holds: only the share moved), and from the rows of mean texture above its
median at the labelled share itself (the features moved, the class share did not).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.shift import FeatureMixtureMisfit, FeatureMixtureMisfitWarning

BC = load_breast_cancer(as_frame=True)
X_BC, Y_BC = BC.data, BC.target.to_numpy()
TEXTURE = X_BC["mean texture"].to_numpy()
HIGH_TEXTURE = TEXTURE > np.median(TEXTURE)


def _fitted(seed, feature_check_rows=2000):
    rng = np.random.default_rng(seed)
    idx = rng.permutation(Y_BC.size)
    lab, pool = idx[:200], idx[200:]
    wrapper = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)),
                                random_state=seed, feature_check_rows=feature_check_rows)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X_BC.iloc[lab], Y_BC[lab])
    return wrapper, Y_BC[lab].mean(), pool, rng


def _by_class(rng, pool, share, size=60):
    n1 = int(round(min(0.95, share) * size))
    return np.concatenate([rng.choice(pool[Y_BC[pool] == 1], n1, replace=False),
                           rng.choice(pool[Y_BC[pool] == 0], size - n1, replace=False)])


def _batches(seed):
    wrapper, share, pool, rng = _fitted(seed)
    moved = _by_class(rng, pool[HIGH_TEXTURE[pool]], share)  # features moved, share did not
    rest = np.setdiff1d(pool, moved)
    low = _by_class(rng, rest, 0.5 * share)
    high = _by_class(rng, np.setdiff1d(rest, low), 1.4 * share)
    rows = np.concatenate([low, moved, high])
    return wrapper, rows, np.repeat(["low share", "texture", "high share"], 60), moved


def _monitor(wrapper, X, batches, **kw):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(X, batches, **kw)
    return table, [w for w in caught if issubclass(w.category, FeatureMixtureMisfitWarning)]


def test_monitor_names_the_batch_whose_features_moved_not_the_share_only_batches():
    # 10 seeded draws. The texture batch keeps the labelled class share (its rows come from
    # a subgroup); the other two moved only the share. Measured: the texture batch flagged in
    # 10 of 10 draws (combined p below 1e-6 in each, while its shift test gave p = 0.46-0.93:
    # the share did not move), the share-only batches in 0 of 20 (smallest p 0.11; their
    # shift tests p <= 0.006).
    moved_flagged, share_only_flagged = 0, 0
    for seed in range(10):
        wrapper, rows, labels, _ = _batches(seed)
        table, fired = _monitor(wrapper, X_BC.iloc[rows], labels)
        assert {"feature_pvalue", "feature_check"} <= set(table.dtype.names)
        p = dict(zip(table["batch"].tolist(), table["feature_pvalue"].tolist(), strict=True))
        assert all(isinstance(r, FeatureMixtureMisfit) for r in table["feature_check"])
        moved_flagged += p["texture"] < 0.01
        share_only_flagged += (p["low share"] < 0.01) + (p["high share"] < 0.01)
        if p["texture"] < 0.01:
            assert len(fired) == 1  # once per call, naming the batch and its column
            msg = str(fired[0].message)
            assert msg.startswith("PriorShiftWrapper.monitor: in ")
            assert "(batch texture)" in msg or "batch texture" in msg
            assert "low share" not in msg and "high share" not in msg
            assert "mean texture (new rows higher" in msg
            assert fired[0].filename == __file__
    assert moved_flagged >= 9
    assert share_only_flagged <= 1


def test_a_batch_gets_what_adapt_gets_on_its_rows():
    # each batch is checked as adapt checks its rows: the same shares (the batch's maximum-
    # likelihood estimate), the same draw of at most feature_check_rows rows, the same result
    wrapper, rows, labels, moved = _batches(3)
    table, _ = _monitor(wrapper, X_BC.iloc[rows], labels)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.adapt(X_BC.iloc[moved])
    got = table["feature_check"][list(table["batch"]).index("texture")]
    np.testing.assert_allclose(got.prior, wrapper.feature_check_.prior, rtol=1e-10)
    assert got.combined_pvalue == pytest.approx(wrapper.feature_check_.combined_pvalue,
                                                rel=1e-10)
    assert got.flagged_columns == wrapper.feature_check_.flagged_columns


def test_off_by_default_and_with_cells_the_table_is_as_before():
    rng = np.random.default_rng(0)
    idx = rng.permutation(Y_BC.size)
    plain = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)),
                              random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain.fit(X_BC.iloc[idx[:200]], Y_BC[idx[:200]])
    table, fired = _monitor(plain, X_BC.iloc[idx[200:320]], None, batch_size=60)
    assert "feature_pvalue" not in table.dtype.names and fired == []
    wrapper, rows, labels, _ = _batches(1)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(X_BC.iloc[rows], labels, cells=np.arange(rows.size) // 2)
    assert np.all(np.isnan(table["feature_pvalue"]))
    assert any("not run with `cells`" in str(w.message) for w in caught)
    assert not any(issubclass(w.category, FeatureMixtureMisfitWarning) for w in caught)


def test_a_batch_too_small_to_check_is_named_and_left_nan():
    # a batch of one row cannot be split into the check's two folds: NaN, and said
    wrapper, rows, labels, _ = _batches(2)
    rows, labels = np.append(rows, rows[0]), np.append(labels, "single")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(X_BC.iloc[rows], labels)
    i = list(table["batch"]).index("single")
    assert np.isnan(table["feature_pvalue"][i]) and table["feature_check"][i] is None
    assert any("could not run on 1 of 4 batches (batch single" in str(w.message)
               for w in caught)


def test_dask_monitor_says_it_does_not_run_the_check(client):
    da = pytest.importorskip("dask.array")
    wrapper, rows, _, _ = _batches(0)
    X = da.from_array(X_BC.to_numpy()[rows], chunks=(60, -1))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(X)
    assert table.shape[0] == 3 and "feature_pvalue" not in table.dtype.names
    assert any("not run on Dask or Spark rows" in str(w.message) for w in caught)
