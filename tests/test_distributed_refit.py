"""A base model refit on the labelled rows, then ``adapt`` / ``monitor`` on Dask rows: the fold
models score the rows where they live, and the result is the in-memory one on the same rows.

A PriorShiftWrapper fitted in memory on an unfitted base model keeps the cross-fitting's fold
models; its shift test and default interval compare the unlabelled rows' scores averaged over the
fold models with the labelled rows' held-out scores of the same models (DML2 of Chernozhukov et
al. 2018; tests/test_prior_shift_refit_interval.py checks the in-memory path against NumPy).
Before 4 December 2026 the Dask path did not carry it: multiclass ``adapt`` and every ``monitor``
read the refit model only (on scikit-learn's digits, 400 labelled rows, 400 unlabelled: interval
ends 0.0033 and shift statistic 4.84 against 4.67 in memory; ``monitor`` batches of 100 rows:
interval ends up to 0.0034 / 0.011 apart and statistics up to 0.48 / 0.69, breast cancer /
digits), and binary ``adapt`` scored the Dask rows with each fold model on the client.
Now the fold models go to the workers once and score every block there, in one pass with the
refit model. The fold models' posteriors are also checked against a direct rebuild with
scikit-learn's ``StratifiedKFold`` and ``clone``.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.base import clone
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

REFIT = "does not carry how much that refit moves"


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def _caught(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(c.message) for c in caught]


@pytest.fixture(scope="module")
def cancer():
    """scikit-learn's breast cancer data, "malignant" positive: 250 labelled rows, 300
    unlabelled rows resampled from the others at prevalence 0.2, a refit wrapper (3 folds)."""
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X[lab],
                                                                                  y[lab]))
    w = rng.uniform(0.5, 2.0, 300)
    return X[lab], y[lab], X[rows], w, model


@pytest.fixture(scope="module")
def digits():
    """scikit-learn's digits (ten classes): 400 labelled rows, 400 unlabelled, a refit wrapper."""
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(1).permutation(y.shape[0])
    lab, new = order[:400], order[400:800]
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X[lab],
                                                                                  y[lab]))
    return X[lab], y[lab], X[new], model


def _direct_fold_proba(X, y, X_new, seed, n_folds=3):
    """The fold models rebuilt with scikit-learn (the wrapper's folds: StratifiedKFold with
    shuffling and its random_state), each scoring the new rows."""
    return [clone(_model()).fit(X[train], y[train]).predict_proba(X_new)
            for train, _ in StratifiedKFold(n_folds, shuffle=True,
                                            random_state=seed).split(X, y)]


def _same(a, b, atol=1e-9):
    np.testing.assert_allclose(a.target_prior_interval_, b.target_prior_interval_, rtol=0,
                               atol=atol)
    np.testing.assert_allclose(a.target_prior_, b.target_prior_, rtol=0, atol=atol)
    assert a.shift_statistic_ == pytest.approx(b.shift_statistic_, rel=0, abs=atol)
    assert a.adaptation_weight_ == pytest.approx(b.adaptation_weight_, rel=0, abs=atol)


@pytest.mark.parametrize("weighted", [False, True])
def test_binary_adapt_on_dask_is_the_in_memory_adapt(cancer, monkeypatch, weighted):
    _, _, X_new, w, model = cancer
    sw = w if weighted else None
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=sw))
    # the fold models score the Dask rows on the workers, never on the client
    seen = []
    original = PriorShiftWrapper._fold_proba

    def spy(self, X):
        seen.append(type(X).__name__)
        return original(self, X)

    monkeypatch.setattr(PriorShiftWrapper, "_fold_proba", spy)
    dist, messages = _caught(lambda: copy.deepcopy(model).adapt(
        da.from_array(X_new, chunks=(70, 30)),
        sample_weight=None if sw is None else da.from_array(sw, chunks=70)))
    assert seen == []
    assert not [m for m in messages if REFIT in m]
    _same(dist, mem)


def test_binary_fold_posteriors_are_the_direct_fold_models(cancer):
    # the shift statistic of the Dask adapt is PriorEstimator.estimate with the fold posteriors
    # of fold models rebuilt by scikit-learn, and another one without them
    X, y, X_new, _, model = cancer
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(70, 30))))
    est = model.prior_estimator_
    proba = model.estimator_.predict_proba(X_new)
    direct = _quiet(lambda: est.estimate(proba, fold_proba=_direct_fold_proba(X, y, X_new, 0),
                                         random_state=0))
    without = _quiet(lambda: est.estimate(proba, random_state=0))
    assert dist.shift_statistic_ == pytest.approx(direct.shift_statistic, rel=1e-9)
    np.testing.assert_allclose(dist.target_prior_interval_, direct.interval, atol=1e-9)
    assert abs(direct.shift_statistic - without.shift_statistic) > 1e-3
    assert np.max(np.abs(direct.interval - without.interval)) > 1e-4


@pytest.mark.parametrize("weighted", [False, True])
@pytest.mark.parametrize("path", ["rows", "sums"])
def test_multiclass_adapt_on_dask_is_the_in_memory_adapt(digits, request, path, weighted):
    # "rows": a small set, whose rows come to the client with their fold posteriors; "sums":
    # the reductions of larger sets (forced on these rows), one more pass for the sums of the
    # fold-averaged scores
    if path == "sums":
        request.getfixturevalue("tally_path")
    X, y, X_new, model = digits
    sw = np.random.default_rng(7).uniform(0.5, 2.0, X_new.shape[0]) if weighted else None
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=sw))
    dist, messages = _caught(lambda: copy.deepcopy(model).adapt(
        da.from_array(X_new, chunks=(100, 64)),
        sample_weight=None if sw is None else da.from_array(sw, chunks=100)))
    assert not [m for m in messages if REFIT in m]
    est = model.prior_estimator_
    proba = model.estimator_.predict_proba(X_new)
    direct = _quiet(lambda: est.estimate(proba, sw,
                                         fold_proba=_direct_fold_proba(X, y, X_new, 0)))
    without = _quiet(lambda: est.estimate(proba, sw))
    if path == "rows":
        _same(dist, mem)
        np.testing.assert_allclose(dist.prior_estimate_.ml_interval,
                                   mem.prior_estimate_.ml_interval, atol=1e-9)
    else:
        # the reductions read every row once per fold model, weighted by the fold's share, as
        # the in-memory estimate does since 4 December 2026 (docs/evidence/prior_shift_log.md, "The point
        # estimate after a refit"); before, they read the refit model's posteriors
        # (tests/test_distributed_refit_large.py)
        np.testing.assert_allclose(dist.prior_estimate_.ml_prior, mem.prior_estimate_.ml_prior,
                                   rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-9, atol=1e-12)
        assert np.max(np.abs(without.prior - mem.target_prior_)) > 1e-3
        assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=0, abs=1e-9)
    # the fold models made the difference: the refit model alone gives another test
    assert dist.shift_statistic_ == pytest.approx(direct.shift_statistic, rel=1e-9)
    assert abs(without.shift_statistic - direct.shift_statistic) > 0.05


def test_monitor_on_dask_reads_the_fold_models_as_in_memory(cancer, digits):
    fields = ("prior", "lower", "upper", "shift_statistic", "shift_pvalue", "class_shift_score")
    for X_new, model, width in ((cancer[2], cancer[4], 30), (digits[2], digits[3], 64)):
        mem = _quiet(lambda m=model, x=X_new: m.monitor(x, batch_size=100))
        dist = _quiet(lambda m=model, x=X_new, d=width: m.monitor(
            da.from_array(x, chunks=(100, d))))
        for name in fields:
            np.testing.assert_allclose(dist[name], mem[name], rtol=0, atol=1e-9)
        # and each batch is adapt on its rows (which carries the fold models)
        first = _quiet(lambda m=model, x=X_new: copy.deepcopy(m).adapt(x[:100]))
        np.testing.assert_allclose(dist["shift_statistic"][0], first.shift_statistic_, atol=1e-9)


def test_on_a_dask_cluster_the_models_are_one_object_of_the_graph(cancer, digits, client):
    # on a real (in-process) distributed cluster: the same results; the models travel as one
    # key of the graph that every block's task reads
    from probwrap.scale._dask import DaskRows

    _, _, X_new, _, model = cancer
    mem = _quiet(lambda: model.monitor(X_new, batch_size=60))
    with dask.config.set(scheduler=client):
        dist = _quiet(lambda: model.monitor(da.from_array(X_new, chunks=(60, 30))))
        adapted = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new,
                                                                          chunks=(60, 30))))
        multi = _quiet(lambda: copy.deepcopy(digits[3]).adapt(da.from_array(digits[2],
                                                                            chunks=(100, 64))))
    np.testing.assert_allclose(dist["upper"], mem["upper"], rtol=0, atol=1e-9)
    np.testing.assert_allclose(dist["shift_statistic"], mem["shift_statistic"], rtol=0,
                               atol=1e-9)
    _same(adapted, _quiet(lambda: copy.deepcopy(model).adapt(X_new)))
    _same(multi, _quiet(lambda: copy.deepcopy(digits[3]).adapt(digits[2])))
    scorer = model._fold_scorer()
    shared = DaskRows(da.from_array(X_new, chunks=(60, 30)), None, None).shared(scorer)
    assert len(shared.__dask_graph__()) == 1


def test_large_binary_sets_do_not_warn_for_any_interval(cancer, tally_path):
    # more than KEPT_ROWS two-class rows (forced here) come back as a tally of the refit
    # model's score: the score interval reads the fold models' score sums, and a bootstrap
    # interval Poisson replicates of the rows once per fold model taken in the same pass
    # (tests/test_distributed_refit_large.py); before 4 December 2026 the bootstrap one warned
    X, y, X_new, _, _ = cancer
    boot = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, interval="percentile",
                                            n_resamples=50, random_state=0).fit(X, y))
    _, messages = _caught(lambda: copy.deepcopy(boot).adapt(
        da.from_array(X_new, chunks=(70, 30))))
    assert not [m for m in messages if REFIT in m]
    _, messages = _caught(lambda: copy.deepcopy(cancer[4]).adapt(
        da.from_array(X_new, chunks=(70, 30))))
    assert not [m for m in messages if REFIT in m]


@pytest.mark.parametrize("kind", [dict(method="bbse"), dict(interval="bca", n_resamples=60)])
def test_multiclass_bootstrap_or_other_methods_carry_the_refit(digits, kind):
    # before 4 December 2026 these warned that the interval left the refit out, though a small
    # set's rows came to the client with their fold posteriors and the in-memory estimate read
    # them (its bootstrap resamples the fold models' posteriors): the result is the in-memory
    # one exactly, and no warning
    X, y, X_new, _ = digits
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0, **kind).fit(X, y))
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new))
    dist, messages = _caught(lambda: copy.deepcopy(model).adapt(
        da.from_array(X_new, chunks=(100, 64))))
    assert not [m for m in messages if REFIT in m]
    _same(dist, mem, atol=1e-12)


def test_frozen_model_on_dask_is_unchanged(cancer):
    # a model fitted elsewhere: no fold models, nothing sent beyond the model, and the result
    # of the Dask path is the in-memory one exactly (as before)
    X, y, X_new, _, _ = cancer
    frozen = FrozenEstimator(_model().fit(X[:100], y[:100]))
    model = _quiet(lambda: PriorShiftWrapper(frozen, random_state=0).fit(X[100:], y[100:]))
    assert model._fold_scorer() is None
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(70, 30))))
    np.testing.assert_array_equal(dist.target_prior_interval_, mem.target_prior_interval_)
    assert dist.shift_statistic_ == mem.shift_statistic_


def test_a_fold_without_a_class_is_placed_as_in_memory():
    # digits with a single labelled row of class 9: the fold model whose training part lacks
    # it has nine columns, placed among the ten (class 9 at probability 0) on the workers as
    # in memory (probwrap._heldout.fold_columns)
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(2).permutation(y.shape[0])
    lab = np.concatenate([[i for i in order if y[i] == 9][:1],
                          [i for i in order if y[i] != 9][:300]])
    new = np.array([i for i in order if i not in set(lab)][:300])
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X[lab],
                                                                                  y[lab]))
    assert sorted(len(c) for _, c in model._fold_models) == [9, 10, 10]
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X[new]))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X[new], chunks=(100, 64))))
    _same(dist, mem)
