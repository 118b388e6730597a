"""``adapt(cells=...)`` on Dask rows: a set of at most 20,000 rows comes to the client and is
estimated as in memory with its cells (since 4 December 2026; before, every Dask set was refused);
more rows, an array of cells with a Spark frame (tests/test_spark_refit.py; a small frame takes
the name of its cells column, tests/test_spark_adapt_parity.py) and labelled rows kept as a tally
are refused with a message saying why.

The reference is ``adapt`` on the same rows in memory with the same cells (the cell-clustered
shift test and interval are checked against statsmodels' cluster-robust variance in
tests/test_prior_shift_cells.py). Data: scikit-learn's bundled breast cancer and digits; the
unlabelled rows come in cells of ten near-copies of one row (a unit observed ten times), so
the cells matter: the interval is wider than with every row its own unit.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")


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


def _in_cells(X, y, n_cells, seed):
    """``n_cells`` rows drawn from (X, y), each repeated ten times with noise of 0.01 standard
    deviations: the rows, and the cell of each."""
    rng = np.random.default_rng(seed)
    base = rng.choice(y.shape[0], n_cells)
    rows = np.repeat(base, 10)
    X_new = X[rows] + rng.normal(0, 0.01, (rows.shape[0], X.shape[1])) * X.std(0)
    return X_new, np.repeat(np.arange(n_cells), 10)


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    order = np.random.default_rng(3).permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    X_new, cells = _in_cells(X[pool], y[pool], 40, 5)
    return X[lab], y[lab], X_new, cells


@pytest.mark.parametrize("refit", [False, True])
def test_small_binary_dask_set_takes_cells_as_in_memory(cancer, refit):
    X, y, X_new, cells = cancer
    base = _model() if refit else FrozenEstimator(_model().fit(X[:100], y[:100]))
    model = _quiet(lambda: PriorShiftWrapper(base, cv=3, random_state=0).fit(X, y))
    w = np.random.default_rng(8).uniform(0.5, 2.0, X_new.shape[0])
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w, cells=cells))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(
        da.from_array(X_new, chunks=(100, 30)), sample_weight=da.from_array(w, chunks=100),
        cells=da.from_array(cells, chunks=100)))
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-12, atol=0)
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                               rtol=0, atol=1e-12)
    assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-12)
    # the cells count: every row its own unit gives a narrower interval, a larger statistic
    plain = _quiet(lambda: copy.deepcopy(model).adapt(X_new, sample_weight=w))
    width = np.diff(mem.target_prior_interval_[1])[0]
    assert width > 1.5 * np.diff(plain.target_prior_interval_[1])[0]
    assert plain.shift_statistic_ > 1.5 * mem.shift_statistic_


def test_small_multiclass_dask_set_takes_cells_as_in_memory():
    X, y = load_digits(return_X_y=True)
    order = np.random.default_rng(1).permutation(y.shape[0])
    lab, pool = order[:400], order[400:]
    X_new, cells = _in_cells(X[pool], y[pool], 50, 6)
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X[lab],
                                                                                  y[lab]))
    mem = _quiet(lambda: copy.deepcopy(model).adapt(X_new, cells=cells))
    dist = _quiet(lambda: copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(125, 64)),
                                                     cells=cells))
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-12, atol=1e-15)
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                               rtol=0, atol=1e-12)
    plain = _quiet(lambda: copy.deepcopy(model).adapt(X_new))
    assert plain.shift_statistic_ > 1.5 * mem.shift_statistic_


def test_cells_beyond_the_limit_or_with_a_labelled_tally_are_refused(cancer, tally_path):
    # (the limit lowered: these rows stand for more than 20,000)
    X, y, X_new, cells = cancer
    model = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(X, y))
    with pytest.raises(ValueError, match="at most 0 Dask or Spark rows.*400 rows.*keep no cells"):
        copy.deepcopy(model).adapt(da.from_array(X_new, chunks=(100, 30)), cells=cells)
    Xd, yd = load_digits(return_X_y=True)
    multi = _quiet(lambda: PriorShiftWrapper(_model(), cv=3, random_state=0).fit(Xd[:300],
                                                                                  yd[:300]))
    with pytest.raises(ValueError, match="keep no cells"):
        copy.deepcopy(multi).adapt(da.from_array(Xd[300:400], chunks=(50, 64)),
                                   cells=np.arange(100) // 5)
    frozen = FrozenEstimator(_model().fit(X[:100], y[:100]))
    tallied = _quiet(lambda: PriorShiftWrapper(frozen, random_state=0).fit(
        da.from_array(X, chunks=(100, 30)), da.from_array(y, chunks=100)))
    with pytest.raises(ValueError, match="kept as a tally.*leave `cells` out"):
        copy.deepcopy(tallied).adapt(X_new, cells=cells)
