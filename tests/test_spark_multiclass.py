"""Multiclass frozen models and costs given as a function of X on Spark (the shared ``spark``
session of conftest.py), against the in-memory wrappers on the same rows.

Data: scikit-learn's bundled digits (1797 images, 10 classes), split into thirds: the model's
training rows, the calibration (held-out) rows and test rows. The model is a strongly shrunk
logistic regression, so its probabilities are far too flat and every fit has something to do.
All tests are consistency tests (Spark against in memory) plus, where one exists, a direct
check with scikit-learn. Marked slow like every Spark test (each runs a few dozen small jobs).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.scale import add_predictions

pytestmark = [
    # the tally / reduction path, also on few rows (conftest.py)
    pytest.mark.usefixtures("tally_path"),
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


@pytest.fixture(scope="module")
def digits():
    X, y = load_digits(return_X_y=True, as_frame=True)
    part = np.arange(len(y)) % 3
    model = FrozenEstimator(LogisticRegression(C=1e-4, max_iter=1000).fit(X[part == 0],
                                                                          y[part == 0]))
    cal = X[part == 1].reset_index(drop=True)
    test = X[part == 2].reset_index(drop=True)
    return model, cal, y[part == 1].to_numpy(), test, y[part == 2].to_numpy()


def _frame(spark, df):
    """The rows of ``df`` in their order, in the session's default 2 partitions (few tasks per
    job: the iterative fits run one small job per step)."""
    return spark.createDataFrame(df)


def test_multiclass_fits_from_spark_agree_with_in_memory(spark, digits):
    model, X, y, X_test, y_test = digits
    w = np.random.default_rng(0).uniform(0.5, 2.0, size=y.shape[0])
    frame = _frame(spark, X.assign(digit=y, w=w))
    assert frame.rdd.getNumPartitions() == 2

    # calibration maps one-vs-rest from per-class tallies of the log-odds, one pass: test log
    # loss (scikit-learn's) within 1e-4 of the in-memory fit. Platt's change from binning at the
    # default 1e-3 is of second order in the bin width; isotonic regression only uses the order,
    # and with 599 rows a 1e-3 bin holding rows of both classes moves a step (1.8e-4 in log loss
    # here), so it is tallied at 1e-6, where no two rows share a bin. (Temperature scaling runs
    # the driver code of tests/test_scale_multiclass.py over the same persist / reduce steps the
    # bias-corrected scaling below uses; about 20 Spark jobs, left out for test time.)
    for method, resolution in (("platt", 1e-3), ("isotonic", 1e-6)):
        remote = CalibrationWrapper(model, method=method, tally_resolution=resolution).fit(
            frame, "digit", sample_weight="w")
        local = CalibrationWrapper(model, method=method).fit(X, y, sample_weight=w)
        assert len(remote.tally_) == 10 and remote.tally_[3].n_rows == y.shape[0]
        ll_remote = log_loss(y_test, remote.predict_proba(X_test))
        ll_local = log_loss(y_test, local.predict_proba(X_test))
        assert abs(ll_remote - ll_local) < 1e-4, (method, ll_remote, ll_local)
        assert ll_local < 0.5 * log_loss(y_test, model.predict_proba(X_test))

    # prior shift: bias-corrected temperature scaling by Newton steps over the partitions,
    # source prior and confusion matrices, then EM on unlabelled rows where digits 5-9 are rare
    remote = PriorShiftWrapper(model, calibration="bcts").fit(frame, "digit", sample_weight="w")
    local = PriorShiftWrapper(model, calibration="bcts").fit(X, y, sample_weight=w)
    # reference: the source prior is the weighted class share (NumPy's bincount)
    np.testing.assert_allclose(remote.source_prior_, np.bincount(y, weights=w) / w.sum(),
                               atol=1e-12)
    np.testing.assert_allclose(remote.confusion_matrix_, local.confusion_matrix_, atol=1e-9)
    np.testing.assert_allclose(remote.calibrator_.scale_, local.calibrator_.scale_, atol=1e-6)
    keep = (y_test < 5) | (np.random.default_rng(1).random(y_test.shape[0]) < 0.3)
    winter = X_test[keep].reset_index(drop=True)
    remote.adapt(_frame(spark, winter))
    local.adapt(winter)
    # EM as one reduction per iteration: within 2e-3 of EM on every row (in fact the same
    # iterates up to the order of additions)
    np.testing.assert_allclose(remote.target_prior_, local.target_prior_, atol=2e-3)
    assert remote.target_prior_[5:].sum() < 0.35  # the shift is seen (true share 0.25)
    assert remote.shift_statistic_ == pytest.approx(local.shift_statistic_, rel=1e-6)
    # multiclass Spark input gets the analytic interval from per-partition sums (consistency
    # test): the in-memory interval of the same EM. Measured 1e-16 apart (the same sums up to the
    # order of additions); 1e-6 leaves room for the EM's stopping point, not for a different rule
    np.testing.assert_allclose(remote.target_prior_interval_, local.target_prior_interval_,
                               atol=1e-6)

    # a 10 x 10 cost matrix (confusing a 4 with a 9 costs 5, other errors 1), plug-in rule and
    # fixed class offsets: the held-out cost is a sum over the partitions
    costs = 1.0 - np.eye(10)
    costs[4, 9] = costs[9, 4] = 5.0
    offsets = np.linspace(-0.05, 0.05, 10)
    remote = CostPolicyWrapper(model, costs=costs, strategy="fixed", cutoff=offsets).fit(
        frame, "digit", sample_weight="w")
    local = CostPolicyWrapper(model, costs=costs, strategy="fixed", cutoff=offsets).fit(
        X, y, sample_weight=w)
    assert remote.heldout_cost_ == pytest.approx(local.heldout_cost_, rel=1e-12)
    # direct reference for the plug-in rule: argmin of P @ C with scikit-learn's predict_proba
    act = np.argmin(model.predict_proba(X) @ costs, axis=1)
    bayes = CostPolicyWrapper(model, costs=costs).fit(frame, "digit", sample_weight="w")
    assert bayes.heldout_cost_ == pytest.approx(np.dot(w, costs[y, act]) / w.sum(), rel=1e-12)
    assert bayes.heldout_cost_ != remote.heldout_cost_  # the offsets change some actions


def test_multiclass_scoring_monitoring_and_costs_of_x_on_spark(spark, digits):
    model, X, y, X_test, y_test = digits
    shift = PriorShiftWrapper(model, calibration="bcts", n_resamples=0).fit(X, y)
    shift.adapt(X_test)
    rows = X_test.assign(row=np.arange(len(X_test)), week=np.arange(len(X_test)) % 2)
    scored = add_predictions(shift, _frame(spark, rows), prefix="s_").toPandas().sort_values("row")
    # one column per class, named by the class label
    names = [f"s_probability_{c}" for c in range(10)]
    adjusted = [f"s_adjusted_probability_{c}" for c in range(10)]
    np.testing.assert_allclose(scored[adjusted], shift.predict_proba(X_test), rtol=1e-12)
    np.testing.assert_allclose(
        scored[names], shift.prior_estimator_.calibrate_output(model.predict_proba(X_test)), rtol=1e-12)
    np.testing.assert_array_equal(scored["s_action"], shift.predict(X_test))

    # monitor by a batch column: each week estimated on an executor, rows in a canonical order
    table = shift.monitor(_frame(spark, rows.drop(columns="row")), "week")
    proba = model.predict_proba(X_test)
    order = np.lexsort((np.ones(len(X_test)), *proba.T[::-1], rows["week"]))
    local = shift.monitor(X_test.iloc[order], rows["week"].to_numpy()[order])
    assert table["batch"].tolist() == [0, 1] and table["prior"].shape == (2, 10)
    np.testing.assert_allclose(table["prior"], local["prior"], atol=1e-10)

    # costs given as a function of X: each row's cost of a missed "0" grows with its ink in
    # the top-left pixels (a column of the rows the model sees), evaluated inside the partitions
    def costs_of(Xb):
        ink = np.asarray(Xb[["pixel_0_2", "pixel_0_3"]], dtype=float).sum(axis=1)
        c = np.broadcast_to(1.0 - np.eye(10), (ink.shape[0], 10, 10)).copy()
        c[:, 0, 1:] = 1.0 + ink[:, None] / 4.0
        return c

    frame = _frame(spark, X.assign(digit=y))
    remote = CostPolicyWrapper(model, costs=costs_of).fit(frame, "digit")
    local = CostPolicyWrapper(model, costs=costs_of).fit(X, y)
    assert remote.heldout_cost_ == pytest.approx(local.heldout_cost_, rel=1e-12)
    # direct reference: the least expected cost per row, sum_k p_k C[k, a], with NumPy
    C = costs_of(X)
    act = np.argmin(np.einsum("nk,nka->na", model.predict_proba(X), C), axis=1)
    assert remote.heldout_cost_ == pytest.approx(C[np.arange(len(y)), y, act].mean(), rel=1e-12)
    # a model fitted on arrays receives (like costs(X)) the array of every column not named
    # as labels or weights
    on_arrays = FrozenEstimator(LogisticRegression(C=1e-4, max_iter=1000).fit(X.to_numpy(), y))

    def by_position(Xb):
        return costs_of(pd.DataFrame(Xb, columns=X.columns))

    remote_arr = CostPolicyWrapper(on_arrays, costs=by_position).fit(frame, "digit")
    local_arr = CostPolicyWrapper(on_arrays, costs=by_position).fit(X.to_numpy(), y)
    assert remote_arr.heldout_cost_ == pytest.approx(local_arr.heldout_cost_, rel=1e-12)
    got = add_predictions(remote, _frame(spark, X_test.assign(row=np.arange(len(X_test)))))
    got = got.toPandas().sort_values("row")
    np.testing.assert_array_equal(got["action"], local.predict(X_test))
    assert isinstance(got, pd.DataFrame) and "probability_9" in got.columns


def test_multiclass_adapt_on_spark_warns_of_a_share_at_the_edge_as_in_memory(spark):
    # scikit-learn's wine data, class 2 left out of the unlabelled rows: in memory adapt warns
    # BoundaryPriorWarning ("the data point there firmly"); the Spark reductions warned nothing
    # (the same code as Dask, tests/test_scale_multiclass.py). Now the same message.
    import warnings

    from sklearn.datasets import load_wine
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap.shift import BoundaryPriorWarning

    X, y = load_wine(return_X_y=True, as_frame=True)
    idx = np.random.default_rng(0).permutation(len(y))
    half = len(y) // 2
    fitted = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000))
    model = FrozenEstimator(fitted.fit(X.iloc[idx[:half]], y.iloc[idx[:half]]))
    rest = idx[half:]
    lab, new = rest[: rest.shape[0] // 2], rest[rest.shape[0] // 2:]
    new = new[y.to_numpy()[new] != 2]
    X_lab = X.iloc[lab].reset_index(drop=True)
    y_lab = y.iloc[lab].to_numpy()
    X_new = X.iloc[new].reset_index(drop=True)

    def edge(fit):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            w = fit()
        return w, [str(m.message) for m in caught if issubclass(m.category, BoundaryPriorWarning)]

    local, expected = edge(lambda: PriorShiftWrapper(model).fit(X_lab, y_lab).adapt(X_new))
    remote, got = edge(lambda: PriorShiftWrapper(model).fit(
        _frame(spark, X_lab.assign(label=y_lab)), "label").adapt(_frame(spark, X_new)))
    assert len(expected) == 1 and "firmly" in expected[0]
    assert got == expected  # was []
    np.testing.assert_allclose(remote.target_prior_, local.target_prior_, atol=1e-8)
