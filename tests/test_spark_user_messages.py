"""What a Spark user sees when something is wrong: errors from the schema raised on the driver
before any job, one short message for a batch the executors cannot score, the exact fit of a
small set spread unevenly over partitions, and one monitor warning per condition.

Before (PySpark 4.3, ``local[2]``, scikit-learn's breast cancer data; docs/scale.md "What a
Spark user sees"): a NaN feature, a text value in a feature column or an array column reached
the user at ``collect()`` as a ``PythonException`` of 34-35 lines (the executor's Python
traceback through probwrap and scikit-learn); a plain model's probabilities above 1 were written
to the frame; a text weight column failed inside the executors ("could not convert string to
float"); a small set with one partition of 2,950 rows among 26 was fitted from its tally without
a word (a tuned cutoff 0.108 against the in-memory 0.088 on statsmodels' ``fair`` data); and
``monitor`` printed one warning per batch to the executors' stderr, none on the driver.
Runs on the session-scoped ``spark`` fixture (conftest.py).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix
from sklearn.naive_bayes import GaussianNB

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.scale import BinnedFitWarning, add_predictions, tally_scores

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]

COLS = ["a", "b", "c", "d"]
COSTS = {"fp": 1.0, "fn": 5.0}


@pytest.fixture(scope="module")
def cancer():
    """Four features of scikit-learn's breast cancer data; a logistic regression on 300 rows
    and a Platt calibration on the other 269."""
    X, y = load_breast_cancer(return_X_y=True)
    X = pd.DataFrame(X[:, :4], columns=COLS)
    lr = LogisticRegression(max_iter=1000).fit(X.iloc[:300], y[:300])
    cal = CalibrationWrapper(FrozenEstimator(lr), method="platt").fit(X.iloc[300:], y[300:])
    return X, y, lr, cal


def _stretched(inner):
    """A fitted-looking binary classifier whose probabilities leave [0, 1] for rows with
    ``a > 20`` (a broken model; invented, for the error path only). Defined inside a function
    so that cloudpickle sends the class itself to the executors (they cannot import tests/)."""

    class Stretched:
        classes_ = np.array([0, 1])
        feature_names_in_ = np.array(COLS, dtype=object)
        n_features_in_ = 4

        def predict_proba(self, X):
            p = inner.predict_proba(X)
            big = np.asarray(X)[:, 0] > 20
            p[big] = [-0.25, 1.25]
            return p

        def predict(self, X):
            return inner.predict(X)

    return Stretched()


def _first_line(exc: BaseException) -> str:
    """The line of probwrap's message (PySpark 4: the first; 3.5: after the traceback)."""
    text = str(exc)
    return text[text.index("probwrap add_predictions:"):].splitlines()[0]


def _raises_short(frame_fn):
    """Collect the frame; return the exception, checking it is one message, not a traceback."""
    import pyspark
    from pyspark.errors import PySparkException, PythonException

    with pytest.raises(PySparkException) as info:
        frame_fn().collect()
    text = str(info.value)
    if int(pyspark.__version__.split(".")[0]) >= 4:
        # Spark's raise_error: the message alone, first, with no Python or Java traceback
        assert not isinstance(info.value, PythonException)
        assert "Traceback" not in text and "\tat org.apache" not in text
        assert text.splitlines()[0].removeprefix("[USER_RAISED_EXCEPTION] ").startswith(
            "probwrap add_predictions:")
    else:  # PySpark 3.5: the worker's traceback, one frame long
        assert isinstance(info.value, PythonException)
        assert text.count('  File "') == 1
    return info.value


# -- 1. errors -----------------------------------------------------------------------------------
def test_schema_errors_are_raised_on_the_driver_before_any_job(spark, cancer):
    from pyspark.ml.feature import VectorAssembler
    from pyspark.sql import functions as F

    X, y, lr, cal = cancer
    frame = spark.createDataFrame(X.iloc[300:340])
    # an array column, a Spark ML vector: refused by add_predictions itself (no job is run)
    arrays = frame.withColumn("b", F.array("b", "c"))
    with pytest.raises(ValueError, match=r"column\(s\) 'b' \(array\) .* hold no single number"):
        add_predictions(cal, arrays)
    vectors = VectorAssembler(inputCols=["b", "c"], outputCol="v").transform(frame)
    model_v = LogisticRegression(max_iter=1000).fit(
        X.iloc[:300].assign(v=0.0)[["a", "v"]], y[:300])
    with pytest.raises(ValueError, match="'v' \\(vector or other user-defined type\\).*"
                                         "vector_to_array"):
        add_predictions(model_v, vectors)
    # weights, scores and counts must be numbers: a text weight column failed on the
    # executors ("could not convert string to float: 'heavy'"); numeric text was accepted
    labelled = X.iloc[300:360].assign(label=y[300:360], w="1.0")
    with pytest.raises(ValueError, match=r"`sample_weight`='w' is a column of Spark type string"):
        CalibrationWrapper(FrozenEstimator(lr), method="platt").fit(
            spark.createDataFrame(labelled), "label", sample_weight="w")
    scores = spark.createDataFrame(pd.DataFrame({"s": ["0.1", "0.2"], "label": [0, 1]}))
    with pytest.raises(ValueError, match="score column 's' .* of Spark type string"):
        tally_scores(scores, "label")



def _suggested(message: str) -> str:
    """The Python expression an error message suggests for turning a column into numbers."""
    import re

    found = re.search(r"for example (frame\.withColumn\(.*?\)\))", message)
    assert found, message
    return found.group(1)


def test_the_suggested_conversion_to_numbers_runs_under_ansi_mode(spark, cancer):
    # Under ANSI mode (spark.sql.ansi.enabled, Spark 4's default; set here so that PySpark 3.5
    # checks it too) Spark's plain cast raises on a value that is not a number, so the hint
    # frame.withColumn('w', F.col('w').cast('double')) failed at collect() with
    # CAST_INVALID_INPUT on the one value it was meant for. The hint now uses try_cast: the
    # value becomes null, which the fit then refuses as a missing weight (counted).
    from pyspark.sql import functions as F

    X, y, lr, cal = cancer
    labelled = X.iloc[300:360].assign(label=y[300:360], w=["1.0"] * 59 + ["heavy"])
    scores = pd.DataFrame({"s": ["0.1", "0.2", "n/a"], "label": [0, 1, 1]})
    before = spark.conf.get("spark.sql.ansi.enabled")
    spark.conf.set("spark.sql.ansi.enabled", "true")
    try:
        frame = spark.createDataFrame(labelled)
        with pytest.raises(ValueError, match="Spark type string") as info:
            CalibrationWrapper(FrozenEstimator(lr), method="platt").fit(
                frame, "label", sample_weight="w")
        code = _suggested(str(info.value))
        fixed = eval(code, {"frame": frame, "F": F})
        got = fixed.select("w").toPandas()["w"]  # old hint: SparkNumberFormatException here
        assert "try_cast(`w` AS DOUBLE)" in code
        assert got.isna().sum() == 1 and got.iloc[:59].eq(1.0).all()
        with pytest.raises(ValueError, match="`sample_weight` contains NaN"):
            CalibrationWrapper(FrozenEstimator(lr), method="platt").fit(
                fixed, "label", sample_weight="w")

        frame = spark.createDataFrame(scores)
        with pytest.raises(ValueError, match="score column 's'") as info:
            tally_scores(frame, "label")
        fixed = eval(_suggested(str(info.value)), {"frame": frame, "F": F})
        assert fixed.select("s").toPandas()["s"].isna().tolist() == [False, False, True]
        with pytest.raises(ValueError, match="1 NaN"):
            tally_scores(fixed, "label")
    finally:
        spark.conf.set("spark.sql.ansi.enabled", before)

def test_a_batch_the_executors_cannot_score_is_one_short_message(spark, cancer):
    X, y, lr, cal = cancer
    new = X.iloc[300:360]
    nan = new.copy()
    nan.iloc[3, 1] = np.nan
    scored = add_predictions(cal, spark.createDataFrame(nan))  # lazy: nothing raised yet
    exc = _raises_short(lambda: scored)
    assert _first_line(exc).startswith(
        "probwrap add_predictions: CalibrationWrapper could not score a batch of ")
    assert "Input X contains NaN." in _first_line(exc)  # scikit-learn's own message follows

    # a text column: the model's error, and which columns are text and how to cast them
    text = new.astype({"b": str})
    text.iloc[5, 1] = "n/a"
    exc = _raises_short(lambda: add_predictions(cal, spark.createDataFrame(text)))
    assert "could not convert string to float: 'n/a'" in _first_line(exc)
    assert "The feature column(s) ['b'] are text" in str(exc)
    assert "frame.withColumn('b', F.expr('try_cast(`b` AS DOUBLE)'))" in str(exc)

    # probabilities outside [0, 1] on new rows: the wrapper's own check, and for a plain model
    # (whose probabilities were written to the frame) the same check by add_predictions
    small = X.iloc[300:].a <= 20
    policy = CostPolicyWrapper(FrozenEstimator(_stretched(lr)), costs=COSTS).fit(
        X.iloc[300:][small], y[300:][small])
    assert (new.a > 20).any()
    for model, who in [(policy, "CostPolicyWrapper"), (_stretched(lr), "Stretched")]:
        exc = _raises_short(lambda m=model: add_predictions(m, spark.createDataFrame(new)))
        line = _first_line(exc)
        assert line.startswith(f"probwrap add_predictions: {who} could not score a batch of ")
        assert "returned values from -0.25 to 1.25 from predict_proba" in line
        assert "probabilities must lie in [0, 1]" in line
    # rows the model can score are unchanged by the error column
    good = new[new.a <= 20]
    got = add_predictions(_stretched(lr), spark.createDataFrame(good)).toPandas()
    np.testing.assert_allclose(got["probability"], lr.predict_proba(good)[:, 1], rtol=1e-12)
    assert list(got.columns) == [*COLS, "probability", "action"]


# -- 2. small sets: the rows, also spread unevenly; a warning where the tally is still used -----
def _uneven(spark, df, big, n_parts):
    """``df`` in ``n_parts`` partitions: its first ``big`` rows in one, the rest two by two."""
    part = np.r_[np.zeros(big, int), 1 + np.arange(len(df) - big) // 2]
    frame = spark.createDataFrame(df.assign(part=part)).repartitionByRange(n_parts, "part")
    sizes = frame.rdd.glom().map(len).collect()
    assert max(sizes) == big and len(sizes) == n_parts
    return frame


def test_a_small_set_spread_unevenly_is_fitted_on_its_rows(spark, cancer, monkeypatch):
    X, y, lr, _ = cancer
    nb = FrozenEstimator(GaussianNB().fit(X.iloc[:300], y[:300]))
    lab, y_lab = X.iloc[300:], y[300:]
    # 269 rows, 240 of them in one of 16 partitions: more than 20,000 / 16 = 1,250 rows is
    # what the first pass leaves out, so the limit is lowered to 2,000 (share 125 rows)
    import probwrap.scale._tally as tally_module

    monkeypatch.setattr(tally_module, "KEPT_ROWS", 2000)
    frame = _uneven(spark, lab.assign(label=y_lab), 240, 16)
    spk = CostPolicyWrapper(nb, costs=COSTS, strategy="tuned").fit(frame, "label")
    mem = CostPolicyWrapper(nb, costs=COSTS, strategy="tuned").fit(lab, y_lab)
    assert spk.tally_.kept_rows is not None
    assert spk.cutoff_ == mem.cutoff_
    p = nb.predict_proba(lab)[:, 1]
    tn, fp, fn, tp = confusion_matrix(y_lab, (p > spk.cutoff_).astype(int)).ravel()
    assert spk.heldout_cost_ == pytest.approx((COSTS["fp"] * fp + COSTS["fn"] * fn) / len(y_lab),
                                              rel=1e-12)
    # Spark Connect (number of partitions unknown: no rows in the first pass): the same
    import probwrap.scale._spark as spark_module

    monkeypatch.setattr(spark_module, "_kept_rows_share", lambda frame: 0)
    connect = CostPolicyWrapper(nb, costs=COSTS, strategy="tuned").fit(
        spark.createDataFrame(lab.assign(label=y_lab)), "label")
    assert connect.cutoff_ == mem.cutoff_ and connect.tally_.kept_rows is not None
    # the multiclass first pass alike, still without rows in the first pass (wine, three
    # classes, isotonic one-vs-rest)
    Xw, yw = load_wine(return_X_y=True)
    Xw = pd.DataFrame(Xw, columns=[f"x{j}" for j in range(13)])
    nb3 = FrozenEstimator(GaussianNB().fit(Xw.iloc[::2], yw[::2]))
    rest, y_rest = Xw.iloc[1::2], yw[1::2]
    mem3 = CalibrationWrapper(nb3, method="isotonic").fit(rest, y_rest)
    spk3 = CalibrationWrapper(nb3, method="isotonic").fit(
        spark.createDataFrame(rest.assign(label=y_rest)), "label")
    np.testing.assert_allclose(spk3.predict_proba(Xw), mem3.predict_proba(Xw), rtol=0, atol=1e-12)


def test_the_driver_still_collects_at_most_the_limit(spark, cancer, monkeypatch):
    # beyond the limit no second pass runs: 269 rows against a limit of 200, fitted from the
    # tally, and without a BinnedFitWarning (not a small set)
    X, y, lr, _ = cancer
    import probwrap.scale._tally as tally_module

    monkeypatch.setattr(tally_module, "KEPT_ROWS", 200)
    frame = _uneven(spark, X.iloc[300:].assign(label=y[300:]), 240, 16)
    with warnings.catch_warnings():
        warnings.simplefilter("error", BinnedFitWarning)
        fitted = CostPolicyWrapper(FrozenEstimator(lr), costs=COSTS, strategy="tuned").fit(
            frame, "label")
    assert fitted.tally_.kept_rows is None and fitted.tally_.n_rows == 269


def test_a_small_multiclass_set_with_clip_is_fitted_on_its_rows(spark):
    # with `clip` given the multiclass calibration had no pass bringing a small set's rows, so
    # it was fitted from one-vs-rest tallies with a BinnedFitWarning (Platt on 89 wine rows:
    # probabilities up to 0.11 from the in-memory fit); now one pass brings them (also spread
    # over partitions) and the fit is the in-memory fit, without the warning
    Xw, yw = load_wine(return_X_y=True)
    Xw = pd.DataFrame(Xw, columns=[f"x{j}" for j in range(13)])
    nb3 = FrozenEstimator(GaussianNB().fit(Xw.iloc[::2], yw[::2]))
    frame = spark.createDataFrame(Xw.iloc[1::2].assign(label=yw[1::2])).repartition(3)
    with warnings.catch_warnings():
        warnings.simplefilter("error", BinnedFitWarning)
        spk = CalibrationWrapper(nb3, method="platt", clip=1e-6).fit(frame, "label")
    mem = CalibrationWrapper(nb3, method="platt", clip=1e-6).fit(Xw.iloc[1::2], yw[1::2])
    np.testing.assert_allclose(spk.predict_proba(Xw), mem.predict_proba(Xw), rtol=0, atol=1e-12)


# -- 3. monitor: one warning per condition for the whole table ---------------------------------
def test_spark_monitor_warns_once_per_condition_naming_the_batches(spark, cancer):
    X, y, lr, _ = cancer
    shift = PriorShiftWrapper(FrozenEstimator(lr), n_resamples=0).fit(X.iloc[200:300],
                                                                      y[200:300])
    rows = X.iloc[300:].iloc[:250]
    week = np.r_[np.repeat(np.arange(10), 20), np.full(50, 10)]  # ten of 20 rows, one of 50
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        table = shift.monitor(spark.createDataFrame(rows.assign(week=week)), "week")
    ours = [r for r in rec if "Only" in str(r.message) or "monitor" in str(r.message)]
    assert len(ours) == 1  # was ten, on the executors' stderr only
    assert issubclass(ours[0].category, UserWarning)
    message = str(ours[0].message)
    assert message.startswith("PriorShiftWrapper.monitor: 10 of 11 batches (batch 0, 1, 2, 3, "
                              "4, ...) warned alike; first, batch 0: Only 20 effective")
    assert ours[0].filename == __file__  # raised at the caller's line
    # the first batch's own message is the in-memory one
    with pytest.warns(UserWarning) as mem:
        shift.monitor(rows.iloc[:20], batch_size=20)
    assert message.endswith(str(mem[0].message))
    assert table["n_rows"].tolist() == [20] * 10 + [50]


def test_costs_get_the_in_memory_checks_on_spark_rows(spark, cancer, monkeypatch):
    # (session 28, tests/test_distributed_cost_checks.py for Dask) through the tallies: a
    # cost DataFrame of other labels gets the in-memory message word for word; costs(X) is
    # called on the first rows (at most 1,000) to learn the actions, and its shape error says so
    import probwrap.scale._tally as tally_module

    monkeypatch.setattr(tally_module, "KEPT_ROWS", 0)
    X, y, lr, _ = cancer
    frame = spark.createDataFrame(X.assign(label=y))
    model = FrozenEstimator(lr)
    bad = pd.DataFrame([[0.0, 1.0], [5.0, 0.0]], index=["benign", "malignant"])
    with pytest.raises(ValueError) as memory:
        CostPolicyWrapper(model, costs=bad, strategy="tuned").fit(X, y)
    with pytest.raises(ValueError) as remote:
        CostPolicyWrapper(model, costs=bad, strategy="tuned").fit(frame, "label")
    assert str(remote.value) == str(memory.value)
    assert "rows are labelled ['benign', 'malignant'], not the classes [0, 1]" in str(
        memory.value)
    with pytest.raises(ValueError) as remote:
        CostPolicyWrapper(model, costs=lambda Xb: np.array([[0.0, 1.0], [5.0, 0.0]])).fit(
            frame, "label")
    assert str(remote.value).startswith(
        "`costs(X)` must have shape (569, 2, 'n_actions') (one cost matrix per row); got "
        "shape (2, 2). (`costs` is called on the Dask or Spark rows block by block, here on a "
        "block of 569 rows")
