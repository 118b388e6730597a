"""A base model refit on the labelled rows, then ``adapt`` / ``monitor`` on a Spark DataFrame:
the fold models are broadcast once with the refit model, score the rows on the executors, and
the result is the in-memory one on the same rows (see tests/test_distributed_refit.py for the
Dask twin and the reasons).

Before 4 December 2026 binary ``adapt`` of a Spark frame with such a wrapper failed ("setting an
array element with a sequence": the fold models were handed the Spark DataFrame itself), and
multiclass ``adapt`` and ``monitor`` read the refit model only. Data: scikit-learn's bundled
breast cancer and digits sets. Runs on the session-scoped ``spark`` fixture (conftest.py), one
partition per frame so that the rows keep their order.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.base import clone
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]

REFIT = "does not carry how much that refit moves"


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def _messages(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(c.message) for c in caught]


def _same(a, b, atol=1e-9):
    np.testing.assert_allclose(a.target_prior_interval_, b.target_prior_interval_, rtol=0,
                               atol=atol)
    np.testing.assert_allclose(a.target_prior_, b.target_prior_, rtol=0, atol=atol)
    assert a.shift_statistic_ == pytest.approx(b.shift_statistic_, rel=0, abs=atol)
    assert a.adaptation_weight_ == pytest.approx(b.adaptation_weight_, rel=0, abs=atol)


@pytest.fixture(scope="module")
def cancer():
    """Breast cancer, "malignant" positive: 250 labelled rows, 300 unlabelled ones resampled at
    prevalence 0.2, as named columns; a refit wrapper (3 folds)."""
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    X = pd.DataFrame(X, columns=[f"x{j}" for j in range(X.shape[1])])
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(
        X.iloc[lab], y[lab]))
    return X.iloc[lab], y[lab], X.iloc[rows].reset_index(drop=True), model


@pytest.fixture(scope="module")
def digits():
    X, y = load_digits(return_X_y=True)
    X = pd.DataFrame(X, columns=[f"p{j}" for j in range(X.shape[1])])
    order = np.random.default_rng(1).permutation(y.shape[0])
    lab, new = order[:400], order[400:800]
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(
        X.iloc[lab], y[lab]))
    return X.iloc[lab], y[lab], X.iloc[new].reset_index(drop=True), model


def test_binary_adapt_on_spark_is_the_in_memory_adapt(spark, cancer):
    X, y, X_new, model = cancer
    w = np.random.default_rng(4).uniform(0.5, 2.0, X_new.shape[0])
    frame = spark.createDataFrame(X_new.assign(w=w)).coalesce(1)
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w))
    dist, messages = _messages(lambda: copy.deepcopy(model).adapt(frame, sample_weight="w"))
    assert not [m for m in messages if REFIT in m]
    _same(dist, mem)
    # the fold models' posteriors are those of fold models rebuilt by scikit-learn
    folds = [clone(_model()).fit(X.iloc[tr], y[tr]).predict_proba(X_new)
             for tr, _ in StratifiedKFold(3, shuffle=True, random_state=0).split(X, y)]
    est = model.prior_estimator_
    direct = _quiet(lambda: est.estimate(model.estimator_.predict_proba(X_new), w,
                                         fold_proba=folds))
    assert dist.shift_statistic_ == pytest.approx(direct.shift_statistic, rel=1e-9)


def test_large_binary_adapt_on_spark_reads_the_fold_score_sums(spark, cancer, tally_path):
    # more than KEPT_ROWS rows (forced): a tally of the refit model's score, and one more pass
    # on the executors for the sums of the fold-averaged score on a grid of priors
    # (tests/test_distributed_refit_large.py); before 4 December 2026 this warned and read the
    # refit model only
    _, _, X_new, model = cancer
    w = np.random.default_rng(4).uniform(0.5, 2.0, X_new.shape[0])
    frame = spark.createDataFrame(X_new.assign(w=w)).coalesce(1)
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w))
    dist, messages = _messages(lambda: copy.deepcopy(model).adapt(frame, sample_weight="w"))
    assert not [m for m in messages if REFIT in m]
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                               rtol=0, atol=1e-6)
    assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-9)
    # and the point estimate, from a tally of every row once per fold model taken on the
    # executors in the same pass as the sums (before 4 December 2026: the refit model's tally)
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-6)


@pytest.mark.parametrize("path", ["rows", "sums"])
def test_multiclass_adapt_on_spark_is_the_in_memory_adapt(spark, digits, request, path):
    if path == "sums":  # the reductions of sets beyond KEPT_ROWS, forced on these rows
        request.getfixturevalue("tally_path")
    _, _, X_new, model = digits
    frame = spark.createDataFrame(X_new).coalesce(1)
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new))
    dist, messages = _messages(lambda: copy.deepcopy(model).adapt(frame))
    assert not [m for m in messages if REFIT in m]
    # and the refit model alone gives another shift test
    without = _quiet(lambda: model.prior_estimator_.estimate(model.estimator_.predict_proba(
        X_new)))
    if path == "rows":
        _same(dist, mem)
    else:
        # the reductions read every row once per fold model, weighted by the fold's share, as
        # in memory (since 4 December 2026; before, the refit model's posteriors: 0.002 off)
        np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-9, atol=1e-12)
        assert np.max(np.abs(without.prior - mem.target_prior_)) > 1e-3
        assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=0, abs=1e-9)
    assert abs(without.shift_statistic - dist.shift_statistic_) > 0.05


def test_monitor_on_spark_reads_the_fold_models_as_in_memory(spark, cancer):
    # the Spark table equals monitor in memory on the rows sorted by batch and, within a batch,
    # by probability (monitor_spark's canonical order)
    _, _, X_new, model = cancer
    batch = np.repeat([0, 1, 2], 100)
    frame = spark.createDataFrame(X_new.assign(batch=batch)).coalesce(1)
    dist = _quiet(lambda: model.monitor(frame, "batch"))
    p = model.estimator_.predict_proba(X_new)
    order = np.lexsort((p[:, 1], p[:, 0], batch))
    mem = _quiet(lambda: model.monitor(X_new.iloc[order], batches=batch[order]))
    for name in ("prior", "lower", "upper", "shift_statistic", "shift_pvalue"):
        np.testing.assert_allclose(dist[name], mem[name], rtol=0, atol=1e-9)


def test_add_predictions_probability_is_what_predict_proba_gives_with_fold_models(spark, cancer):
    # a wrapper whose fold models predict (predict_with="fold_models"): add_predictions'
    # "probability" column is the wrapper's own predict_proba before adapt (the fold models'
    # calibrated posteriors averaged), and "adjusted_probability" its output after adapt; the
    # column used to be the refit model's calibrated posterior, which differs from both
    from probwrap.scale import add_predictions

    X, y, X_new, _ = cancer
    wrapper = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0,
                                               predict_with="fold_models").fit(X, y))
    before = wrapper.predict_proba(X_new)[:, 1]
    refit_only = wrapper.prior_estimator_.calibrate_output(
        wrapper.estimator_.predict_proba(X_new))[:, 1]
    assert np.max(np.abs(before - refit_only)) > 1e-4  # the two readings differ here
    _quiet(lambda: wrapper.adapt(X_new))
    frame = spark.createDataFrame(X_new.assign(row=np.arange(X_new.shape[0]))).coalesce(1)
    got = add_predictions(wrapper, frame).toPandas().sort_values("row")
    np.testing.assert_allclose(got["probability"], before, rtol=1e-12)
    np.testing.assert_allclose(got["adjusted_probability"], wrapper.predict_proba(X_new)[:, 1],
                               rtol=1e-12)


def test_cells_with_a_spark_frame_are_refused_saying_why(spark, cancer):
    # Dask sets of at most 20,000 rows take adapt(cells=...) (tests/test_distributed_cells.py),
    # and a small Spark frame takes the name of its cells column
    # (tests/test_spark_adapt_parity.py); an array of cells cannot follow a Spark frame's rows
    # (they have no order), and adapt says so before any pass over the rows
    _, _, X_new, model = cancer
    frame = spark.createDataFrame(X_new).coalesce(1)
    with pytest.raises(ValueError, match="must be the name of its column of cells"):
        copy.deepcopy(model).adapt(frame, cells=np.arange(X_new.shape[0]) // 10)
