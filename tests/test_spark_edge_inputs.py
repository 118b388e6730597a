"""Awkward Spark inputs, in one test on the shared session: a decimal (SQL ``DECIMAL``) label
column, 20 rows spread over 8 partitions (most of them empty), and null scores given to
``tally_scores`` and ``tally_counts`` (and null or NaN counts given to ``tally_counts``).

Before 5 December 2026 a ``DecimalType`` label column was refused by every wrapper as "numbers
in an object array" (and by ``tally_scores`` as "dtype object"), and a null score was reported
as a NaN at an index within one chunk of a partition, naming no column. Now decimal labels are
read as their numbers (the fit equals the in-memory fit of the integer labels), and a null
score or count names its column. Data: scikit-learn's bundled breast cancer table (five
columns); a logistic regression fitted on its first 200 rows, held out on the rest.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.aggregated import tally_counts
from probwrap.scale import tally_scores

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


def test_decimal_labels_sparse_partitions_and_null_scores(spark):
    from pyspark.sql import functions as F
    from pyspark.sql import types as T

    data = load_breast_cancer(as_frame=True)
    cols = list(data.feature_names[:5])
    X, y = data.data[cols], data.target.to_numpy()
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=1000))
    frozen = FrozenEstimator(model.fit(X.iloc[:200], y[:200]))
    Xh, yh = X.iloc[200:].reset_index(drop=True), y[200:]
    frame = spark.createDataFrame(Xh.assign(lab=yh.astype(int)))
    decimal_frame = frame.withColumn("lab", F.col("lab").cast(T.DecimalType(10, 0)))
    assert isinstance(decimal_frame.schema["lab"].dataType, T.DecimalType)

    def make():
        return CostPolicyWrapper(frozen, costs={"fp": 1.0, "fn": 5.0}, strategy="tuned",
                                 n_resamples=0)

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        remote = make().fit(decimal_frame, "lab")
        local = make().fit(Xh, yh)
        assert remote.cutoff_ == local.cutoff_
        np.testing.assert_allclose(remote.predict_proba(Xh), local.predict_proba(Xh),
                                   rtol=0, atol=1e-12)
        # 20 rows in 8 partitions: several partitions are empty
        small = spark.createDataFrame(Xh.iloc[:20].assign(lab=yh[:20].astype(int)))
        small = small.repartition(8)
        assert small.rdd.getNumPartitions() == 8
        remote = CalibrationWrapper(frozen, method="platt").fit(small, "lab")
        local = CalibrationWrapper(frozen, method="platt").fit(Xh.iloc[:20], yh[:20])
        np.testing.assert_allclose(remote.predict_proba(Xh), local.predict_proba(Xh),
                                   rtol=0, atol=1e-12)

    # tally_scores: decimal label indices are read as numbers, a null score names its column
    s = model.decision_function(Xh)
    scores = spark.createDataFrame(pd.DataFrame({"s": s, "lab": yh.astype(int)}))
    t = tally_scores(scores.withColumn("lab", F.col("lab").cast(T.DecimalType(5, 0))), "lab")
    ref = tally_scores(s, yh)
    np.testing.assert_array_equal(t.bins, ref.bins)
    np.testing.assert_allclose(t.counts, ref.counts, rtol=1e-12)
    nulls = scores.withColumn("s", F.when(F.col("lab") == 0, F.lit(None)).otherwise(F.col("s")))
    with pytest.raises(ValueError, match=r"Spark column 's' has \d+ NaN or null value"):
        tally_scores(nulls, "lab")
    # the same for the score column of per-group counts
    counts = spark.createDataFrame(pd.DataFrame({"s": s, "k": yh * 3.0, "n": np.full(369, 3.0)}))
    t = tally_counts(counts, "k", "n")
    np.testing.assert_allclose(t.counts, tally_counts(s, yh * 3.0, np.full(369, 3.0)).counts)
    nulls = counts.withColumn("s", F.when(F.col("k") == 0, F.lit(None)).otherwise(F.col("s")))
    with pytest.raises(ValueError, match=r"Spark column 's' has \d+ NaN or null value"):
        tally_counts(nulls, "k", "n")
    # a null or NaN count names its Spark column and counts its rows (before: "`successes`
    # contains NaN"); one partition, so the count is that of the whole column
    zeros = int(np.sum(yh == 0))
    for col, name, bad in (("k", "successes", F.lit(None)), ("n", "trials", F.lit(float("nan")))):
        holes = counts.withColumn(col, F.when(F.col("k") == 0, bad).otherwise(F.col(col)))
        with pytest.raises(ValueError, match=rf"`{name}`: the Spark column '{col}' has {zeros} "
                                             r"NaN, null or infinite value\(s\)"):
            tally_counts(holes.coalesce(1), "k", "n")
