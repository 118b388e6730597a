"""Small held-out sets on Spark: the in-memory fit of the same rows (see
tests/test_distributed_small_sets.py for the Dask twin and the reasons).

Before, on these rows (scikit-learn's breast cancer and wine data, 60 labelled rows), the Spark
path fitted the tally's bins: the tuned cutoff lacked the recalibrated anchor, weights summing to
1 were counted per bin (a depth-4 tree's isotonic probabilities moved by up to 0.25), and the
multiclass prior shift had no tail choice. Runs on the session-scoped ``spark`` fixture
(conftest.py), one partition per frame so that the rows keep their order.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import confusion_matrix
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]

COSTS = {"fp": 1.0, "fn": 5.0}


def _ours(caught) -> list[str]:
    """The user warnings' messages, without PySpark's own (for example its note that it does
    not yet support the installed pandas) and without resource warnings (an unclosed socket of
    the Spark session on older releases): both depend on the release, not on probwrap."""
    return sorted(str(c.message) for c in caught
                  if issubclass(c.category, UserWarning) and "pyspark" not in str(c.filename)
                  and not str(c.message).startswith("PySpark"))


def _rows(load, n_fit, n_lab, seed):
    X, y = load(return_X_y=True)
    X = pd.DataFrame(X, columns=[f"x{j}" for j in range(X.shape[1])])
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    fit, lab, new = idx[:n_fit], idx[n_fit:n_fit + n_lab], idx[n_fit + n_lab:n_fit + n_lab + 200]
    w = np.random.default_rng(seed + 1).uniform(0.5, 2.0, n_lab)
    return X.iloc[fit], y[fit], X.iloc[lab], y[lab], X.iloc[new], w / w.sum()


def _frame(spark, X, y=None, w=None):
    df = X.copy()
    if y is not None:
        df["label"] = y
    if w is not None:
        df["w"] = w
    return spark.createDataFrame(df).coalesce(1)


def test_binary_wrappers_on_spark_fit_the_rows_as_in_memory(spark):
    Xf, yf, X, y, X_new, w = _rows(load_breast_cancer, 150, 60, seed=1)
    nb = FrozenEstimator(GaussianNB().fit(Xf, yf))
    tree = FrozenEstimator(DecisionTreeClassifier(max_depth=4, random_state=0).fit(Xf, yf))
    frame = _frame(spark, X, y, w)

    mem = CostPolicyWrapper(nb, costs=COSTS, strategy="tuned").fit(X, y)
    spk = CostPolicyWrapper(nb, costs=COSTS, strategy="tuned").fit(frame, "label")
    # equal but for the last digit: the anchor's Platt map sums the rows in Spark's order
    assert spk.cutoff_ == pytest.approx(mem.cutoff_, rel=1e-12)
    p = nb.predict_proba(X)[:, 1]
    tn, fp, fn, tp = confusion_matrix(y, (p > spk.cutoff_).astype(int)).ravel()
    # held-out cost of the rule, from scikit-learn's confusion matrix
    assert spk.heldout_cost_ == pytest.approx((COSTS["fp"] * fp + COSTS["fn"] * fn) / len(y),
                                              rel=1e-12)

    with pytest.warns(UserWarning) as caught_spark:
        spk = CalibrationWrapper(tree, method="isotonic").fit(frame, "label", sample_weight="w")
    with pytest.warns(UserWarning) as caught_mem:
        mem = CalibrationWrapper(tree, method="isotonic").fit(X, y, sample_weight=w)
    np.testing.assert_allclose(spk.predict_proba(X_new), mem.predict_proba(X_new), rtol=0,
                               atol=1e-12)
    assert _ours(caught_spark) == _ours(caught_mem)

    mem = PriorShiftWrapper(nb).fit(X, y, sample_weight=w).adapt(X_new)
    spk = PriorShiftWrapper(nb).fit(frame, "label", sample_weight="w").adapt(
        _frame(spark, X_new))
    np.testing.assert_allclose(spk.target_prior_, mem.target_prior_, rtol=0, atol=1e-12)
    np.testing.assert_allclose(spk.target_prior_interval_, mem.target_prior_interval_, rtol=0,
                               atol=1e-12)


def test_multiclass_prior_shift_on_spark_keeps_the_tail_choice(spark):
    Xf, yf, X, y, X_new, w = _rows(load_wine, 50, 60, seed=6)
    model = FrozenEstimator(GaussianNB().fit(Xf, yf))
    mem = PriorShiftWrapper(model).fit(X, y, sample_weight=w).adapt(X_new)
    spk = PriorShiftWrapper(model).fit(_frame(spark, X, y, w), "label", sample_weight="w").adapt(
        _frame(spark, X_new))
    assert spk.calibrator_.tail_width_ == mem.calibrator_.tail_width_ > 0
    np.testing.assert_allclose(spk.calibrator_.scale_, mem.calibrator_.scale_, rtol=0, atol=1e-12)
    np.testing.assert_allclose(spk.target_prior_, mem.target_prior_, rtol=0, atol=1e-12)
    share = np.bincount(y, weights=w, minlength=3)  # the weighted class shares
    np.testing.assert_allclose(spk.source_prior_, share / share.sum(), rtol=1e-12)


def test_the_driver_collects_at_most_the_kept_rows_limit(spark, monkeypatch):
    # each partition sends its rows only when it holds at most KEPT_ROWS / (number of
    # partitions) of them, so the driver never holds more than KEPT_ROWS rows however many
    # partitions a frame has; here the limit is lowered to 90 rows for 60 rows in 3 partitions
    import probwrap.scale._tally as tally_module

    monkeypatch.setattr(tally_module, "KEPT_ROWS", 90)
    Xf, yf, X, y, _, _ = _rows(load_breast_cancer, 150, 60, seed=1)
    model = FrozenEstimator(GaussianNB().fit(Xf, yf))

    def parts(cuts):
        # three partitions by a range of the column "part": rows cuts[i]..cuts[i + 1] in the
        # i-th (the model reads only its own feature columns)
        part = np.searchsorted(cuts, np.arange(60), side="right") - 1
        frame = spark.createDataFrame(X.assign(label=y, part=part)).repartitionByRange(3, "part")
        assert frame.rdd.glom().map(len).collect() == np.diff(cuts).tolist()
        return frame

    even = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(parts([0, 20, 40, 60]),
                                                                        "label")
    assert even.tally_.kept_rows is not None  # 20 rows a partition <= 90 / 3
    uneven = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(parts([0, 58, 59, 60]),
                                                                          "label")
    # 58 rows in one partition > 30: left out by the first pass; the total, 60 <= 90, is then
    # known to be small, so a second pass sends every partition's rows (before: the tally path,
    # silently; tests/test_spark_user_messages.py has a total above the limit)
    assert uneven.tally_.kept_rows is not None
    mem = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y)
    assert even.cutoff_ == pytest.approx(mem.cutoff_, rel=1e-12)
    assert uneven.cutoff_ == pytest.approx(mem.cutoff_, rel=1e-12)
