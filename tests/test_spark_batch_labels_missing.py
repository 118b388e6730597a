"""A missing batch label in a Spark DataFrame is refused by ``monitor``, as in memory.

In memory ``monitor`` refuses a missing batch label (None, NaN, NA, NaT) naming its count and
first row (tests/test_batch_labels_missing_refused.py). Before, on Spark (PySpark, ``local``,
scikit-learn's breast cancer data, a batch column ``week``): a null label was refused as "The
batch column 'week' has missing values; label every row." (no count), and a NaN in a float or
double column (Spark keeps NaN apart from null, e.g. after a division by zero or in a Parquet
file) reached the executors and failed as "Batch None: on the Spark executors the model (or a
step there) raised KeyError: np.float64(nan)", naming neither the column nor the cause. Dask
input has no batch labels (each block is a batch: ``batches`` is refused for it), and a model
fitted on Dask rows monitors rows in memory through the in-memory check (pinned below).

Runs on the session-scoped ``spark`` fixture (conftest.py).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper

COLS = ["a", "b", "c", "d"]


@pytest.fixture(scope="module")
def fitted():
    X, y = load_breast_cancer(return_X_y=True)
    X = pd.DataFrame(X[:, :4], columns=COLS)
    lr = LogisticRegression(max_iter=1000).fit(X.iloc[:300], y[:300])
    shift = PriorShiftWrapper(FrozenEstimator(lr), n_resamples=0).fit(X.iloc[200:300],
                                                                      y[200:300])
    rows = X.iloc[300:].reset_index(drop=True)
    week = np.repeat(np.arange(9), 30)[: len(rows)]
    return shift, rows, week


def _frame(spark, rows, week, kind):
    from pyspark.sql import functions as F

    frame = spark.createDataFrame(rows.assign(week=week.astype(float), i=np.arange(len(rows))))
    hit = F.col("i").isin(40, 41)
    if kind == "double NaN":
        col = F.when(hit, F.lit(float("nan"))).otherwise(F.col("week"))
    elif kind == "float NaN":
        col = F.when(hit, F.lit(float("nan"))).otherwise(F.col("week")).cast("float")
    elif kind == "double null":
        col = F.when(hit, F.lit(None)).otherwise(F.col("week"))
    elif kind == "date null":
        col = F.when(hit, F.lit(None)).otherwise(
            F.date_add(F.lit("2013-01-07").cast("date"), (F.col("week") * 7).cast("int")))
    else:  # "string null"
        col = F.when(hit, F.lit(None)).otherwise(F.col("week").cast("int").cast("string"))
    return frame.withColumn("week", col).drop("i")


@pytest.mark.parametrize("kind", ["double NaN", "float NaN", "double null", "date null",
                                  "string null"])
def test_spark_monitor_refuses_a_missing_batch_label(spark, fitted, kind):
    shift, rows, week = fitted
    frame = _frame(spark, rows, week, kind)
    with pytest.raises(ValueError) as got:
        shift.monitor(frame, "week")
    assert str(got.value) == (
        "`batches`: the batch column 'week' contains 2 missing label(s) (null or NaN; a Spark "
        "DataFrame's rows have no order, so no row number can be named); give every row its "
        "batch (e.g. its date), or leave those rows out (X.dropna(subset=['week'])).")
    # the fix the message gives works: the same frame without those rows is monitored
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        table = shift.monitor(frame.dropna(subset=["week"]), "week")
    assert table["n_rows"].sum() == len(rows) - 2 and table.shape[0] == 9


def test_a_model_fitted_on_dask_rows_refuses_a_missing_label_in_memory(fitted):
    da = pytest.importorskip("dask.array")
    shift, rows, week = fitted
    X, y = load_breast_cancer(return_X_y=True)
    lr = LogisticRegression(max_iter=1000).fit(X[:300, :4], y[:300])  # on arrays, as Dask's
    tallied = PriorShiftWrapper(FrozenEstimator(lr), n_resamples=20, random_state=0).fit(
        da.from_array(X[200:300, :4], chunks=50), da.from_array(y[200:300], chunks=50))
    labels = week.astype(object)
    labels[40] = None
    with pytest.raises(ValueError, match=r"`batches` contains 1 missing label.*first at row 40"):
        tallied.monitor(rows.to_numpy(), batches=labels)
    with pytest.raises(ValueError, match=r"`batches` \(a label per row\) is not supported for "
                                         "Dask input"):
        tallied.monitor(da.from_array(rows.to_numpy(), chunks=30), batches=labels)
