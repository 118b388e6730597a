"""``PriorShiftWrapper.adapt`` on a Spark DataFrame beyond 20,000 rows (forced on few rows with
``tally_path``) gives what adapt on the same rows in memory gives, where the two used to
differ (the Dask twins: tests/test_distributed_no_shift_harm.py,
tests/test_distributed_refit_large.py). Runs on the session-scoped ``spark`` fixture
(conftest.py), one partition per frame so that the rows keep their order. Data:
scikit-learn's bundled digits.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper
from probwrap.shift import NoShiftHarmWarning

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


def _adapted(psw, X):
    psw = copy.deepcopy(psw)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        psw.adapt(X)
    return psw, [str(w.message) for w in caught if issubclass(w.category, NoShiftHarmWarning)]


def test_large_multiclass_spark_warns_of_no_shift_harm_as_in_memory(spark, tally_path):
    # digits 0, 1 and 2, pixel columns 20-29, a frozen Gaussian naive Bayes; thirds at random
    # (seed 5): 179 labelled and 179 unlabelled rows with no shift. In memory p = 0.22, 35 % of
    # the move applied, predicted no-shift harm 5.3 %: NoShiftHarmWarning. Before 4 December
    # 2026 the multiclass Spark sums did not give null_move_ratio and never warned
    X, y = load_digits(return_X_y=True)
    X, y = X[y < 3][:, 20:30], y[y < 3]
    a, b, c = np.array_split(np.random.default_rng(5).permutation(y.shape[0]), 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        # (no interval: fewer Spark jobs; the warning does not read it)
        psw = PriorShiftWrapper(FrozenEstimator(GaussianNB().fit(X[a], y[a])), n_resamples=0,
                                random_state=0).fit(X[b], y[b])
    mem, caught = _adapted(psw, X[c])
    frame = spark.createDataFrame(pd.DataFrame(X[c])).coalesce(1)
    dist, dist_caught = _adapted(psw, frame)
    assert dist.prior_estimate_.n_rows == c.shape[0]
    assert dist.prior_estimate_.null_move_ratio == pytest.approx(
        mem.prior_estimate_.null_move_ratio, rel=1e-10)
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-10)
    assert len(dist_caught) == len(caught) == 1
    assert dist_caught[0] == caught[0]


def test_large_binary_spark_bootstrap_reads_the_fold_models(spark, tally_path):
    # a base model refit on 250 labelled breast-cancer rows (3 folds), a percentile bootstrap
    # interval, 300 unlabelled rows forced onto the tally path: the pass on the executors that
    # tallies every row once per fold model also draws that tally's Poisson replicates (one
    # draw per row, shared by its fold copies), so the estimate and the shift test are
    # memory's and the interval is memory's up to the bootstrap's noise. Before 4 December
    # 2026 they read the refit model's tally, with a warning (0.2658 against 0.2687)
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    X_new = pd.DataFrame(X[rows] + rng.normal(0, 0.01, (300, X.shape[1])) * X.std(0),
                         columns=[f"x{j}" for j in range(X.shape[1])])
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        boot = PriorShiftWrapper(model, cv=3, interval="percentile", n_resamples=200,
                                 random_state=0).fit(
            pd.DataFrame(X[lab], columns=X_new.columns), y[lab])
        mem = copy.deepcopy(boot).adapt(X_new)
    frame = spark.createDataFrame(X_new).coalesce(1)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        dist = copy.deepcopy(boot).adapt(frame)
    assert not [w for w in caught if "refit" in str(w.message)]
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=1e-6, atol=0)
    assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-9)
    (lo_m, hi_m), (lo_d, hi_d) = mem.target_prior_interval_[1], dist.target_prior_interval_[1]
    assert abs(lo_d - lo_m) < 0.2 * (hi_m - lo_m) and abs(hi_d - hi_m) < 0.2 * (hi_m - lo_m)


@pytest.fixture(scope="module")
def cells_data():
    """Breast cancer, "malignant" positive: 250 labelled rows; 30 cells of ten near-copies of
    one other row each (noise of 0.01 standard deviations), cells named by strings, weights
    0.5-2; a frozen and a refit (3 folds) wrapper."""
    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    cols = [f"x{j}" for j in range(X.shape[1])]
    rng = np.random.default_rng(8)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    rows = np.repeat(rng.choice(pool, 30), 10)
    X_new = pd.DataFrame(X[rows] + rng.normal(0, 0.01, (300, X.shape[1])) * X.std(0),
                         columns=cols)
    cell = np.array([f"site-{i // 10}" for i in range(300)])
    w = rng.uniform(0.5, 2.0, 300)
    Xl = pd.DataFrame(X[lab], columns=cols)

    def model():
        return make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        refit = PriorShiftWrapper(model(), cv=3, random_state=0).fit(Xl, y[lab])
        frozen = PriorShiftWrapper(FrozenEstimator(model().fit(Xl, y[lab])),
                                   random_state=0).fit(Xl, y[lab])
    return X_new, cell, w, frozen, refit


def test_small_spark_frame_takes_a_cells_column_as_in_memory(spark, cells_data):
    # adapt(frame, cells="site") on a frame of at most 20,000 rows: the rows come to the client
    # with their cells (and a refit model's fold posteriors) from one pass and adapt runs as in
    # memory. Before 4 December 2026 every Spark frame with cells was refused. Reference: adapt
    # on the same rows in memory with the same cells (the clustered test and interval are
    # checked against statsmodels in tests/test_prior_shift_cells.py)
    X_new, cell, w, frozen, refit = cells_data
    frame = spark.createDataFrame(X_new.assign(site=cell, w=w)).coalesce(1)
    for model in (frozen, refit):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            mem = copy.deepcopy(model).adapt(X_new, sample_weight=w, cells=cell)
            dist = copy.deepcopy(model).adapt(frame, sample_weight="w", cells="site")
            alone = copy.deepcopy(model).adapt(X_new, sample_weight=w)
        np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=0, atol=1e-12)
        np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                                   rtol=0, atol=1e-12)
        assert dist.shift_statistic_ == pytest.approx(mem.shift_statistic_, rel=1e-12)
        # the cells mattered: ten near-copies a cell widen the interval
        width = np.diff(mem.target_prior_interval_[1])[0]
        assert width > 1.5 * np.diff(alone.target_prior_interval_[1])[0]


def test_spark_cells_beyond_the_limit_are_refused(spark, cells_data, tally_path):
    # more than KEPT_ROWS rows (forced: 0) are read as tallies and sums that keep no cells:
    # refused after one count of the rows, with the limit named
    X_new, cell, _, frozen, _ = cells_data
    frame = spark.createDataFrame(X_new.assign(site=cell)).coalesce(1)
    with pytest.raises(ValueError, match="at most 0 Dask or Spark rows"):
        copy.deepcopy(frozen).adapt(frame, cells="site")
    with pytest.raises(ValueError, match="not a column of the Spark DataFrame"):
        copy.deepcopy(frozen).adapt(frame, cells="district")


def test_small_multiclass_spark_frame_takes_a_cells_column_as_in_memory(spark):
    # three classes (digits 0-2, ten pixel columns, a frozen naive Bayes; 179 unlabelled rows
    # in cells of up to ten consecutive rows, cells as integers): adapt as in memory
    X, y = load_digits(return_X_y=True)
    X, y = X[y < 3][:, 20:30], y[y < 3]
    a, b, c = np.array_split(np.random.default_rng(5).permutation(y.shape[0]), 3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(FrozenEstimator(GaussianNB().fit(X[a], y[a])),
                                random_state=0).fit(X[b], y[b])
        cell = np.arange(c.shape[0]) // 10
        mem = copy.deepcopy(psw).adapt(X[c], cells=cell)
        frame = spark.createDataFrame(pd.DataFrame(X[c]).assign(unit=cell)).coalesce(1)
        dist = copy.deepcopy(psw).adapt(frame, cells="unit")
    np.testing.assert_allclose(dist.target_prior_, mem.target_prior_, rtol=0, atol=1e-12)
    np.testing.assert_allclose(dist.target_prior_interval_, mem.target_prior_interval_,
                               rtol=0, atol=1e-12)
    assert dist.shift_pvalue_ == pytest.approx(mem.shift_pvalue_, rel=1e-12)
