"""Spark input: text feature columns and the model's own failures reach the user as clear
errors raised on the driver.

Before 4 December 2026 a text (Spark string) feature column holding a value that is not a number
failed inside the model on an executor ("could not convert string to float: 'n/a'", naming no
column), and a model error other than a ValueError arrived as PySpark's ``PythonException``
with the executor's traceback. Now a text feature column is checked on the driver when the model
reads it as numbers (one row scored on the driver with the column set to a word; then one Spark
aggregate counts the values Spark's ``try_cast`` cannot read as a double), and every executor
failure comes back as a ValueError naming its type. The count is checked against pandas'
``to_numeric(errors="coerce")``. Data: scikit-learn's bundled breast cancer (four columns).
"""

from __future__ import annotations

import sys
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import make_column_transformer
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder

from probwrap import CalibrationWrapper, PriorShiftWrapper

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


class _Failing(LogisticRegression):
    """A fitted model whose predict_proba raises a RuntimeError (not a ValueError)."""

    def predict_proba(self, X):
        raise RuntimeError("the parcel scanner model lost its weights")


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = pd.DataFrame(X[:, :4], columns=["a", "b", "c", "d"])
    return X, y


def _quiet(fn):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn()


def test_text_feature_column_is_checked_on_the_driver(spark, cancer):
    from pyspark.sql import functions as F

    X, y = cancer
    model = FrozenEstimator(LogisticRegression(max_iter=3000).fit(X, y))
    text = spark.createDataFrame(X.assign(y=y)).withColumn("b", F.col("b").cast("string"))
    # numbers held as text are read by the model as numbers: accepted, the fit of the numbers
    as_text = _quiet(lambda: PriorShiftWrapper(model).fit(text, "y"))
    np.testing.assert_allclose(as_text.source_prior_, np.bincount(y) / y.shape[0], rtol=0,
                               atol=1e-12)
    # some values that are not numbers: refused on the driver, naming the column and the count
    bad = text.withColumn("b", F.when(F.col("a") > 20, F.lit("n/a")).otherwise(F.col("b")))
    expected = int(pd.to_numeric(pd.Series(np.where(X["a"] > 20, "n/a", X["b"].astype(str))),
                                 errors="coerce").isna().sum())
    assert expected > 0
    with pytest.raises(ValueError, match=rf"column 'b' .* text .* {expected} of its values are "
                                         r"not numbers \(for example 'n/a'\)"):
        _quiet(lambda: PriorShiftWrapper(model).fit(bad, "y"))
    # a model with its own encoder for a text column is not refused
    words = X.assign(kind=np.where(X["a"] > 15, "large", "small"))
    encoded = make_pipeline(
        make_column_transformer((OneHotEncoder(handle_unknown="ignore"), ["kind"]),
                                remainder="passthrough"),
        LogisticRegression(max_iter=3000)).fit(words, y)
    fitted = _quiet(lambda: CalibrationWrapper(FrozenEstimator(encoded)).fit(
        spark.createDataFrame(words.assign(y=y)), "y"))
    assert fitted.calibrator_ is not None


def test_model_errors_of_any_type_are_raised_on_the_driver(spark, cancer):
    from pyspark import cloudpickle

    X, y = cancer
    failing = FrozenEstimator(_Failing(max_iter=3000).fit(X, y))
    frame = spark.createDataFrame(X.assign(y=y))
    # the model's class lives in this test module, which the executors cannot import: the
    # ImportError on unpickling it there comes back as a ValueError with a remedy
    with pytest.raises(ValueError, match="Spark executors .* raised ModuleNotFoundError: .*"
                                         "importable on the executors"):
        _quiet(lambda: PriorShiftWrapper(failing).fit(frame, "y"))
    # shipped by value, the model reaches the executors and raises its RuntimeError there
    module = sys.modules[__name__]
    cloudpickle.register_pickle_by_value(module)
    try:
        with pytest.raises(ValueError, match="Spark executors .* raised RuntimeError: the "
                                             "parcel scanner model lost its weights"):
            _quiet(lambda: PriorShiftWrapper(failing).fit(frame, "y"))
    finally:
        cloudpickle.unregister_pickle_by_value(module)
