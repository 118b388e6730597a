"""A count table passed as Dask rows and fitted from their tally (session 27) reads its
whole-number weights as cases, as the same table in memory does.

In memory, ``CalibrationWrapper(method="auto")`` scores a count table's cases one by one
(session 26); from a tally of Dask or Spark rows (more than ``KEPT_ROWS`` rows; forced here
with the ``tally_path`` fixture) it counted the (bin, class) rows by Kish's (1965) effective
size of their weights and the rows of each class, so the same table got standard errors about
half as large or twice as large as in memory and the few-class-rows counts of its rows, not
its cases. The tally knows the rows' shared whole factor, total weight and rows of positive
weight, which is all the count-table rule needs (``tally_is_count_table``). The reference is the
in-memory fit of the same rows; the tally bins the scores, so losses agree to about 1e-3.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper

pytestmark = pytest.mark.usefixtures("tally_path")

da = pytest.importorskip("dask.array")


def _table(seed=3, n=4000):
    """An invented parcel table: three route features, damaged or not, each row a cell seen
    1-6 times (a frozen model fitted on other parcels, miscalibrated by a slope of 1.5). The
    features are on a grid of 0.5 (about 14 values a column), so the rows repeated by their
    counts are not copies of a row (``copied_case_cells``): in memory a row's cases are then
    split among auto's folds, as a tally, which cannot see the features, splits them (with
    continuous features the in-memory fit keeps them together since session 27). On a grid of
    0.1 (the table before session 28) the cases share whole rows about ten times as often as
    three independent columns of 60 values give them, which reads as copies of a row since
    session 28 (``_whole_rows_beyond_chance``)."""
    rng = np.random.default_rng(seed)
    X = np.round(2.0 * rng.normal(size=(n, 3))) / 2.0
    logit = X @ np.array([1.0, -0.7, 0.4]) - 1.0
    y = (rng.random(n) < expit(1.5 * logit)).astype(int)
    w = rng.integers(1, 7, size=n).astype(float)
    Xf = rng.normal(size=(3000, 3))
    yf = (rng.random(3000) < expit(Xf @ np.array([1.0, -0.7, 0.4]) - 1.0)).astype(int)
    return FrozenEstimator(LogisticRegression().fit(Xf, yf)), X, y, w


def _fit(model, X, y, w):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return CalibrationWrapper(model, method="auto", random_state=0).fit(X, y,
                                                                          sample_weight=w)


def test_auto_on_a_tallied_count_table_counts_its_cases(client):
    model, X, y, w = _table()
    mem = _fit(model, X, y, w)
    tal = _fit(model, da.from_array(X, chunks=(1000, 3)), da.from_array(y, chunks=1000),
               da.from_array(w, chunks=1000))
    assert tal.method_ == mem.method_
    assert set(tal.method_scores_) == set(mem.method_scores_)
    for name, (loss, se) in mem.method_scores_.items():
        assert tal.method_scores_[name][0] == pytest.approx(loss, abs=2e-3)
        if se > 0:  # (before: the tally's standard errors came from Kish's size of its rows)
            assert tal.method_scores_[name][1] == pytest.approx(se, rel=0.25)


def test_scaled_count_table_tally_keeps_the_relative_reading(client):
    """The same table times 3 is not a count table (every weight a multiple of 3): in memory
    and from the tally it keeps the relative reading, and the tally is not read as cases."""
    from probwrap._heldout import HeldOutClassifierBase  # noqa: F401
    from probwrap.scale._dask import tally_is_count_table

    model, X, y, w = _table()
    cw = CalibrationWrapper(model, method="auto", random_state=0)
    ho = cw._fit_heldout(da.from_array(X, chunks=(1000, 3)), da.from_array(y, chunks=1000),
                         da.from_array(3 * w, chunks=1000))
    assert ho.from_tally and not ho.tally_cases
    assert not tally_is_count_table(cw.tally_)
    ho = cw._fit_heldout(da.from_array(X, chunks=(1000, 3)), da.from_array(y, chunks=1000),
                         da.from_array(w, chunks=1000))
    assert ho.from_tally and ho.tally_cases
    np.testing.assert_array_equal(ho.weighted_class_rows, np.bincount(y, weights=w))


@pytest.mark.slow
@pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas")
def test_spark_tally_of_a_count_table_counts_its_cases(spark):
    """The same on a Spark DataFrame (weights and label named as its columns)."""
    pytest.importorskip("pyspark")
    model, X, y, w = _table()
    cols = ["x0", "x1", "x2"]
    df = pd.DataFrame(X, columns=cols).assign(damaged=y, w=w)
    named = FrozenEstimator(LogisticRegression().fit(
        pd.DataFrame(X[:10], columns=cols), np.r_[0, 1].repeat(5)))
    named.estimator.coef_ = model.estimator.coef_.copy()  # the same model, with column names
    named.estimator.intercept_ = model.estimator.intercept_.copy()
    mem = _fit(named, df[cols], y, w)
    tal = _fit(named, spark.createDataFrame(df), "damaged", "w")
    assert tal.tally_.n_rows == y.shape[0]
    assert tal.method_ == mem.method_
    for name, (loss, se) in mem.method_scores_.items():
        assert tal.method_scores_[name][0] == pytest.approx(loss, abs=2e-3)
        if se > 0:
            assert tal.method_scores_[name][1] == pytest.approx(se, rel=0.25)
