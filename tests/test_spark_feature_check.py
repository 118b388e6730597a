"""PriorShiftWrapper(feature_check_rows=...) and Spark rows: refused by name at fit and at adapt
(the feature check runs on rows in memory only; session 27); monitor runs without it and says so
(session 28). Before any Spark job runs."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


def test_spark_rows_are_refused_by_name(spark):
    X, y = load_breast_cancer(return_X_y=True)
    X = pd.DataFrame(X[:, :4], columns=["a", "b", "c", "d"])
    frame = spark.createDataFrame(X.iloc[300:360])
    wrapper = PriorShiftWrapper(GaussianNB(), random_state=0, feature_check_rows=100)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        wrapper.fit(X.iloc[:300], y[:300])
    assert wrapper._feature_sample[0].shape == (100, 4)
    with pytest.raises(ValueError, match="`feature_check_rows` is set, but adapt got Dask or Spark"):
        wrapper.adapt(frame)
    # monitor gives its table and says it does not run the check there (session 28)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        table = wrapper.monitor(
            spark.createDataFrame(X.iloc[300:360].assign(week=np.arange(60) // 30)), "week")
    assert table.shape[0] == 2 and "feature_pvalue" not in table.dtype.names
    assert any("not run on Dask or Spark rows" in str(w.message) for w in caught)
    # off (the default), the same Spark rows adapt as before
    plain = PriorShiftWrapper(GaussianNB(), random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        plain.fit(X.iloc[:300], y[:300]).adapt(frame)
    assert np.isfinite(plain.target_prior_).all() and plain.feature_check_ is None
