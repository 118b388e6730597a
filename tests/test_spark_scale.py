"""Spark input on one local[2] session (the session-scoped ``spark`` fixture of conftest.py):
tallies partition by partition, the wrappers' Spark path against the in-memory path on the same
rows, scoring with pandas UDFs and monitoring by a batch column.

Every test here runs a few small Spark jobs, and the first one also waits for the JVM and the
Python workers to start, so all of them are marked slow (CI runs them; the fast development
subset leaves them out). The session is started once for the whole run.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import confusion_matrix, log_loss

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.aggregated import tally_counts
from probwrap.calibration import FewClassRowsWarning
from probwrap.scale import add_predictions, tally_model, tally_scores

# PySpark's own notes about newer pandas releases (not probwrap's concern)
pytestmark = [
    # the tally / reduction path, also on few rows (conftest.py)
    pytest.mark.usefixtures("tally_path"),
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]

COLS = ["weight", "route_km", "transfers"]
COSTS = {"fp": 1.0, "fn": 6.0}


def _data(n, seed, shift=0.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3)) + shift
    logit = X @ np.array([1.0, -0.7, 0.4]) - 1.0
    y = (rng.random(n) < expit(1.4 * logit)).astype(int)  # the model below is miscalibrated
    return pd.DataFrame(X, columns=COLS).assign(damaged=y)


@pytest.fixture(scope="module")
def model():
    df = _data(2000, seed=0)
    return FrozenEstimator(LogisticRegression(C=0.05).fit(df[COLS], df["damaged"]))


def _frame(spark, df, pieces=1):
    """A Spark DataFrame of the rows of ``df`` in their order, without a shuffle: a union of
    ``pieces`` frames, each split into the session's default number of partitions (2)."""
    from functools import reduce

    cuts = np.linspace(0, len(df), pieces + 1).astype(int)
    parts = [spark.createDataFrame(df.iloc[a:b]) for a, b in zip(cuts[:-1], cuts[1:], strict=True)]
    return reduce(lambda a, b: a.union(b), parts)


def test_score_tally_matches_spark_sql_binning(spark):
    # Reference: Spark SQL itself bins the scores (floor(s / r + 1/2)) and sums the weights and
    # weighted scores per (bin, label); the per-partition tallies merged on the driver must give
    # exactly these sums (up to float rounding of the summation order).
    rng = np.random.default_rng(1)
    n, r = 30_000, 1e-3
    s = rng.normal(size=n)
    pdf = pd.DataFrame({"log_odds": s, "label": (rng.random(n) < expit(s)).astype(int),
                        "w": rng.uniform(0.5, 2.0, size=n)})
    frame = _frame(spark, pdf, 2)
    assert frame.rdd.getNumPartitions() == 4
    tally = tally_scores(frame, "label", sample_weight="w")
    from pyspark.sql import functions as F

    sql = (frame.withColumn("bin", F.floor(F.col("log_odds") / r + 0.5).cast("long"))
           .groupBy("bin", "label").agg(F.sum("w").alias("w"), F.sum(F.col("w") * F.col("log_odds"))
                                        .alias("ws")).toPandas())
    wide = sql.pivot(index="bin", columns="label", values="w").fillna(0.0).sort_index()
    np.testing.assert_array_equal(tally.bins, wide.index.to_numpy())
    np.testing.assert_allclose(tally.counts, wide[[0, 1]].to_numpy(), rtol=1e-12)
    sums = sql.groupby("bin")["ws"].sum().sort_index().to_numpy()
    np.testing.assert_allclose(tally.score_sums, sums, rtol=1e-9, atol=1e-12)
    assert tally.n_rows == n
    np.testing.assert_allclose(tally.squared_weight, np.dot(pdf["w"], pdf["w"]), rtol=1e-12)
    # and it is the in-memory tally of the same rows (consistency)
    local = tally_scores(s, pdf["label"], sample_weight=pdf["w"])
    np.testing.assert_allclose(local.counts, tally.counts, rtol=1e-12)


def test_poisson_replicates_and_grouped_counts(spark):
    rng = np.random.default_rng(2)
    n, B = 20_000, 200
    pdf = pd.DataFrame({"s": rng.normal(size=n), "w": rng.uniform(0.5, 2.0, size=n)})
    t = tally_scores(_frame(spark, pdf), sample_weight="w", n_replicates=B, random_state=0)
    assert t.replicates.shape == (B, t.n_bins, 1) and not t.labelled
    totals = t.replicates.sum(axis=(1, 2))
    # Poisson(1) multipliers: each replicate total has mean sum(w) and variance sum(w^2)
    # (textbook moments of the Poisson distribution). With B = 200 the sample sd is within 15 %
    # of the true one with probability > 0.99 (its relative sd is about 1 / sqrt(2 B) = 5 %).
    sd_true = np.sqrt(np.dot(pdf["w"], pdf["w"]))
    assert abs(totals.std(ddof=1) / sd_true - 1) < 0.15
    assert abs(totals.mean() - pdf["w"].sum()) < 4 * sd_true / np.sqrt(B)
    # k-of-n counts per group: the tally of successes and failures per score bin
    g = pd.DataFrame({"score": rng.normal(size=500), "trials": rng.integers(1, 30, size=500)})
    g["successes"] = rng.binomial(g["trials"], expit(g["score"]))
    remote = tally_counts(_frame(spark, g), "successes", "trials")
    local = tally_counts(g["score"], g["successes"], g["trials"])
    np.testing.assert_array_equal(remote.bins, local.bins)
    np.testing.assert_allclose(remote.counts, local.counts)
    # reference: the tally's label totals are the plain sums of the count columns
    assert remote.label_weight.tolist() == [float((g["trials"] - g["successes"]).sum()),
                                            float(g["successes"].sum())]


def test_wrappers_fit_from_spark_agree_with_in_memory(spark, model):
    df = _data(40_000, seed=3)
    test = _data(20_000, seed=4)
    frame = _frame(spark, df, 2)
    X, y = df[COLS], df["damaged"].to_numpy()

    # the tally of the model's log-odds is the in-memory tally of the same rows
    t_spark = tally_model(model, frame, "damaged")
    t_local = tally_scores(np.log(model.predict_proba(X)) @ [-1, 1], y)
    np.testing.assert_array_equal(t_spark.bins, t_local.bins)
    np.testing.assert_allclose(t_spark.counts, t_local.counts)

    for method, tol in (("platt", 1e-4), ("isotonic", 1e-4)):
        remote = CalibrationWrapper(model, method=method).fit(frame, "damaged")
        local = CalibrationWrapper(model, method=method).fit(X, y)
        assert remote.tally_.n_rows == 40_000
        # held-out rows: the log losses (scikit-learn's log_loss) of the two fits agree within
        # 1e-4 (the tally bins scores at 1e-3 on the log-odds scale; the change of the fitted
        # map is of second order in the bin width)
        ll_remote = log_loss(test["damaged"], remote.predict_proba(test[COLS]))
        ll_local = log_loss(test["damaged"], local.predict_proba(test[COLS]))
        assert abs(ll_remote - ll_local) < tol, (method, ll_remote, ll_local)

    remote = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(frame, "damaged")
    local = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y)

    def cost(policy):  # the held-out cost of the chosen actions, from scikit-learn's matrix
        tn, fp, fn, tp = confusion_matrix(y, policy.predict(X)).ravel()
        return (COSTS["fp"] * fp + COSTS["fn"] * fn) / y.shape[0]

    # a cutoff between two bins has the exact full-data cost; within 0.1 % of the exact optimum
    assert cost(remote) <= cost(local) * 1.001
    assert abs(remote.heldout_cost_ - cost(remote)) < 1e-12

    shift = PriorShiftWrapper(model).fit(frame, "damaged")
    shift_local = PriorShiftWrapper(model).fit(X, y)
    np.testing.assert_allclose(shift.source_prior_, shift_local.source_prior_, atol=1e-12)
    winter = _data(30_000, seed=5, shift=0.4)[COLS]
    shift.adapt(_frame(spark, winter))
    shift_local.adapt(winter)
    # EM on the tally of the unlabelled rows: within 2e-3 of EM on every row
    assert abs(shift.target_prior_[1] - shift_local.target_prior_[1]) < 2e-3
    assert shift.target_prior_[1] > shift.source_prior_[1] + 0.02  # the shift is seen
    lo, hi = shift.target_prior_interval_[1]
    lo_l, hi_l = shift_local.target_prior_interval_[1]
    assert abs(lo - lo_l) < 2e-3 and abs(hi - hi_l) < 2e-3


def test_weighted_rows_tally_bootstrap_replicates_on_the_executors(spark, model):
    df = _data(20_000, seed=9)
    w = np.random.default_rng(9).uniform(0.5, 2.0, size=20_000)
    frame = _frame(spark, df.assign(w=w), 2)
    X, y = df[COLS], df["damaged"].to_numpy()
    # weighted rows: every row's own Poisson draws are tallied with it, so the interval of the
    # tuned cutoff comes from replicate tallies built where the rows live
    policy = CostPolicyWrapper(model, costs=COSTS, strategy="tuned", n_resamples=40,
                               random_state=0).fit(frame, "damaged", sample_weight="w")
    assert policy.tally_.n_replicates == 40
    np.testing.assert_allclose(policy.tally_.label_weight,
                               [w[y == 0].sum(), w[y == 1].sum()], rtol=1e-12)
    iv = policy.cutoff_interval_
    assert iv.bootstrap_cutoffs.shape == (40,) and np.unique(iv.bootstrap_cutoffs).shape[0] > 1
    assert iv.low <= policy.cost_curve_.cutoff <= iv.high  # the least-cost cutoff's interval
    local = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y, sample_weight=w)
    realised = {}
    for name, fitted in (("spark", policy), ("memory", local)):
        act = fitted.predict(X)
        realised[name] = np.dot(w, np.where(y == 1, COSTS["fn"] * (act == 0),
                                            COSTS["fp"] * (act == 1))) / w.sum()
    assert realised["spark"] <= realised["memory"] * 1.001
    # BBSE from the tallies: within 2e-3 of BBSE on every row (weighted labelled rows)
    shift = PriorShiftWrapper(model, method="bbse").fit(frame, "damaged", sample_weight="w")
    shift_local = PriorShiftWrapper(model, method="bbse").fit(X, y, sample_weight=w)
    winter = _data(20_000, seed=10, shift=0.4)[COLS]
    shift.adapt(_frame(spark, winter))
    shift_local.adapt(winter)
    assert abs(shift.target_prior_[1] - shift_local.target_prior_[1]) < 2e-3


def test_add_predictions_and_monitor_by_batch_column(spark, model):
    df = _data(30_000, seed=6)
    shift = PriorShiftWrapper(model, n_resamples=30, random_state=0).fit(df[COLS], df["damaged"])
    winter = _data(9_000, seed=7, shift=0.3)
    shift.adapt(winter[COLS])
    policy = CostPolicyWrapper(shift, costs=COSTS, strategy="bayes").fit(df[COLS], df["damaged"])

    rows = winter[COLS].assign(row=np.arange(9_000), week=np.repeat([3, 1, 2], 3000))
    wframe = _frame(spark, rows, 2)
    scored = add_predictions(policy, add_predictions(shift, wframe, prefix="shift_"))
    got = scored.toPandas().sort_values("row")
    expect_adjusted = shift.predict_proba(winter[COLS])[:, 1]
    calibrated = shift.prior_estimator_.calibrate_output(model.predict_proba(winter[COLS]))[:, 1]
    np.testing.assert_allclose(got["shift_adjusted_probability"], expect_adjusted, rtol=1e-12)
    np.testing.assert_allclose(got["shift_probability"], calibrated, rtol=1e-12)
    np.testing.assert_array_equal(got["shift_action"], shift.predict(winter[COLS]))
    np.testing.assert_allclose(got["probability"], policy.predict_proba(winter[COLS])[:, 1])
    np.testing.assert_array_equal(got["action"], policy.predict(winter[COLS]))
    assert "adjusted_probability" not in got.columns  # a cost policy adds no adjusted column
    with pytest.raises(ValueError, match="already has column"):
        add_predictions(policy, scored)

    # monitor: one batch per label of the column, in sorted label order; within a batch the
    # rows are taken by probability, so in memory the same table comes from sorted rows
    table = shift.monitor(wframe.drop("row"), "week")
    proba = model.predict_proba(winter[COLS])
    order = np.lexsort((np.ones(9_000), proba[:, 1], proba[:, 0], rows["week"]))
    local = shift.monitor(winter[COLS].iloc[order], rows["week"].to_numpy()[order])
    assert table["batch"].tolist() == [1, 2, 3] == local["batch"].tolist()
    assert table["n_rows"].tolist() == [3000] * 3
    np.testing.assert_allclose(table["prior"], local["prior"], atol=1e-10)
    np.testing.assert_allclose(table["lower"], local["lower"], atol=1e-10)
    np.testing.assert_allclose(table["upper"], local["upper"], atol=1e-10)


def test_spark_input_errors_name_the_argument(spark, model):
    df = _data(500, seed=8)
    frame = spark.createDataFrame(df)
    with pytest.raises(ValueError, match="name of one of its columns"):
        CalibrationWrapper(model).fit(frame, df["damaged"].to_numpy())
    with pytest.raises(ValueError, match="is not a column"):
        CalibrationWrapper(model).fit(frame, "broken")
    with pytest.raises(ValueError, match="FrozenEstimator"):
        CalibrationWrapper(LogisticRegression()).fit(frame, "damaged")
    fitted = CalibrationWrapper(model, method="platt").fit(df[COLS], df["damaged"])
    with pytest.raises(ValueError, match="add_predictions"):
        fitted.predict_proba(frame)
    with pytest.raises(ValueError, match="batch_size"):
        PriorShiftWrapper(model).fit(df[COLS], df["damaged"]).monitor(frame, batch_size=100)
    three = FrozenEstimator(LogisticRegression().fit(df[COLS], np.arange(500) % 3))
    with pytest.raises(ValueError, match=r"no \(positively weighted\) rows of class 2;"):
        PriorShiftWrapper(three).fit(frame, "damaged")  # a multiclass model, class 2 never seen
    with pytest.raises(ValueError, match="one column besides"):
        tally_scores(frame, "damaged")


# -- awkward input (docs/scale.md "Awkward input on Dask and Spark"; Dask: test_edges_distributed)
def _extreme_warnings(record):
    return [r for r in record if "reaches" in str(r.message)]


def test_extreme_weights_on_spark_give_the_fit_of_the_divided_weights(spark, model):
    # 1e300 stopped PriorShiftWrapper with an OverflowError, 2**-1000 gave "1e-298 effective
    # rows": each chunk is now tallied divided by its power of two and the partitions aligned,
    # bit for bit the fit on the divided weights, one WeightScaleWarning per call
    df = _data(1200, seed=20)
    u = np.random.default_rng(21).uniform(1.0, 1.9, size=len(df))
    u[0] = 1.9  # the largest weight in [1, 2): 2**-1000 * u divided by 2**-1000 is u exactly
    frames = [_frame(spark, df.assign(w=u * scale)) for scale in (2.0**-1000, 1.0)]
    fitted = []
    for frame in frames:
        with warnings.catch_warnings(record=True) as rec:
            warnings.simplefilter("always")
            shift = PriorShiftWrapper(model, n_resamples=20, random_state=0).fit(
                frame, "damaged", sample_weight="w").adapt(frame, sample_weight="w")
        fitted.append((shift, len(_extreme_warnings(rec))))
    (extreme, n_extreme), (plain, n_plain) = fitted
    assert (n_extreme, n_plain) == (2, 0)  # one from fit, one from adapt
    np.testing.assert_array_equal(extreme.target_prior_, plain.target_prior_)
    np.testing.assert_array_equal(extreme.target_prior_interval_, plain.target_prior_interval_)
    # multiclass one-vs-rest maps (per-class tallies) at 1e300: the in-memory fit, which
    # divides the weights alike, up to the bins (as test_spark_multiclass.py: 1e-3)
    three = FrozenEstimator(LogisticRegression().fit(df[COLS], np.arange(len(df)) % 3))
    labels = df.assign(cls=np.arange(len(df)) % 3, w=u * 1e300).drop(columns="damaged")
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        remote = CalibrationWrapper(three, method="platt").fit(
            _frame(spark, labels), "cls", sample_weight="w")
        local = CalibrationWrapper(three, method="platt").fit(
            labels[COLS], labels["cls"], sample_weight=labels["w"])
    assert len(_extreme_warnings(rec)) == 2  # one each
    np.testing.assert_allclose(remote.predict_proba(df[COLS]), local.predict_proba(df[COLS]),
                               atol=1e-3)


def test_bad_labels_and_weights_on_spark_raise_the_in_memory_error(spark, model):
    # a ValueError raised on an executor came back as PySpark's PythonException around a Java
    # stack trace; it is now raised on the driver as the in-memory ValueError
    df = _data(400, seed=22)
    text = df.assign(damaged=np.where(df["damaged"] == 1, "yes", "no").astype(object))
    text.loc[7, "damaged"] = None
    text_model = FrozenEstimator(LogisticRegression().fit(df[COLS], text["damaged"].fillna("no")))
    missing = r"1 missing label\(s\) \(None or NaN; first at row 7"
    with pytest.raises(ValueError, match=missing):
        CalibrationWrapper(text_model, method="platt").fit(text[COLS], text["damaged"])
    with pytest.raises(ValueError, match=missing):  # one partition: the row of the frame
        CalibrationWrapper(text_model, method="platt").fit(
            spark.createDataFrame(text).coalesce(1), "damaged")
    nan_weight = df.assign(w=np.where(np.arange(400) == 3, np.nan, 1.0))
    with pytest.raises(ValueError, match="`sample_weight` contains NaN or infinite values"):
        PriorShiftWrapper(model, n_resamples=0).fit(_frame(spark, nan_weight), "damaged",
                                                    sample_weight="w")
    with pytest.raises(ValueError, match="zero for every row; at least one weight must be"):
        CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(
            _frame(spark, df.assign(w=0.0)), "damaged", sample_weight="w")
    # a multiclass cost rule on one class was fitted without a word
    three = FrozenEstimator(LogisticRegression().fit(df[COLS], np.arange(400) % 3))
    with pytest.raises(ValueError, match="`y` contains only 1 class"):
        CostPolicyWrapper(three).fit(_frame(spark, df.assign(damaged=0)), "damaged")


def test_empty_and_single_row_partitions_on_spark(spark, model):
    df = _data(300, seed=23)
    local = PriorShiftWrapper(model, n_resamples=0).fit(df[COLS], df["damaged"])
    # 6 partitions by label: at least 4 of them empty
    frame = spark.createDataFrame(df).repartition(6, "damaged")
    remote = PriorShiftWrapper(model, n_resamples=0).fit(frame, "damaged")
    np.testing.assert_allclose(remote.source_prior_, local.source_prior_, rtol=1e-12)
    few = pd.concat([df[df['damaged'] == 0].iloc[:3], df[df['damaged'] == 1].iloc[:3]])
    single = spark.createDataFrame(few).repartition(6)
    with pytest.warns(FewClassRowsWarning):
        got = CalibrationWrapper(model, method="platt").fit(single, "damaged")
    with pytest.warns(FewClassRowsWarning):
        want = CalibrationWrapper(model, method="platt").fit(few[COLS], few["damaged"])
    np.testing.assert_allclose(got.predict_proba(df[COLS]), want.predict_proba(df[COLS]),
                               atol=1e-3)
    with pytest.raises(ValueError, match="has no rows"):
        CalibrationWrapper(model, method="platt").fit(frame.where("weight > 100"), "damaged")


def test_monitor_on_spark_with_extreme_and_zero_weights(spark, model):
    # each batch is estimated with its weights divided by their power of two (one warning), and
    # a batch whose weights are all zero is the in-memory ValueError, not a PythonException
    df = _data(600, seed=24)
    shift = PriorShiftWrapper(model, n_resamples=0).fit(df[COLS], df["damaged"])
    rows = df[COLS].assign(week=np.arange(600) // 200,
                           w=np.random.default_rng(25).uniform(1.0, 2.0, size=600))
    plain = shift.monitor(spark.createDataFrame(rows), "week", sample_weight="w")
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        huge = shift.monitor(spark.createDataFrame(rows.assign(w=rows["w"] * 1e300)), "week",
                             sample_weight="w")
    assert len(_extreme_warnings(rec)) == 1
    np.testing.assert_allclose(huge["prior"], plain["prior"], rtol=0, atol=1e-12)
    zero = rows.assign(w=np.where(rows["week"] == 1, 0.0, rows["w"]))
    with pytest.raises(ValueError, match="Batch 1: `sample_weight` is zero for every row"):
        shift.monitor(spark.createDataFrame(zero), "week", sample_weight="w")
