"""Awkward Dask inputs that real clusters produce, against the in-memory fit of the same rows.

Data: scikit-learn's bundled breast cancer table; a logistic regression fitted on its first 200
rows is frozen, and the other 369 rows are held out. Partitions with no rows, partitions of one
class only, very uneven partitions, arrays of unknown chunk sizes and label columns of pandas'
categorical or nullable dtypes give the in-memory result (a small set is fitted from its rows:
docs/scale.md, "Small sets"). On the tally path (forced here on few rows with ``tally_path``,
the path of more than 20,000 rows) the scale of ``sample_weight`` moved the tuned cutoff
(weights 0.5-2: 0.1667, the same x1,000: 0.1762) and neither the cost nor the calibration
wrapper said what the in-memory fit says about the weights' reading; a decimal label column
(SQL ``DECIMAL``) was refused as "numbers in an object array".
"""

from __future__ import annotations

import decimal
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning

dask = pytest.importorskip("dask")
dd = pytest.importorskip("dask.dataframe")

COSTS = {"fp": 1.0, "fn": 5.0}


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


@pytest.fixture(scope="module")
def cancer():
    data = load_breast_cancer(as_frame=True)
    X, y = data.data, data.target
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, max_iter=1000))
    model.fit(X.iloc[:200], y.iloc[:200])
    return (FrozenEstimator(model), X.iloc[200:].reset_index(drop=True),
            y.iloc[200:].reset_index(drop=True))


def _frame(parts, columns):
    """A Dask DataFrame whose partitions are exactly ``parts`` (some may be empty)."""
    return dd.from_delayed([dask.delayed(p) for p in parts], meta=parts[0].iloc[:0])[columns]


def _layouts(X, y):
    """(name, Dask X, Dask y, in-memory y) for each awkward layout of the same 369 rows."""
    df = X.assign(lab=y)
    cols = list(X.columns)
    out = []
    empty = [df.iloc[:0], df.iloc[:100], df.iloc[:0], df.iloc[100:], df.iloc[:0]]
    out.append(("empty partitions", _frame(empty, cols), _frame(empty, "lab"), y))
    skewed = [df.iloc[:1], df.iloc[1:2], df.iloc[2:360], df.iloc[360:]]
    out.append(("skewed partitions", _frame(skewed, cols), _frame(skewed, "lab"), y))
    by_class = [df[df["lab"] == 0], df[df["lab"] == 1]]  # one class per partition
    out.append(("one class per partition", _frame(by_class, cols), _frame(by_class, "lab"),
                pd.concat([p["lab"] for p in by_class])))
    whole = dd.from_pandas(df, npartitions=4)
    out.append(("unknown chunk sizes", whole[cols].to_dask_array(),
                whole["lab"].to_dask_array(), y))
    for dtype in ("category", "Int64", "boolean"):
        typed = dd.from_pandas(df.assign(lab=df["lab"].astype(dtype)), npartitions=3)
        out.append((f"labels {dtype}", typed[cols], typed["lab"], y))
    return out


def _in_memory_X(name, X, y):
    if name == "one class per partition":
        return pd.concat([X[y == 0], X[y == 1]])
    return X


def test_awkward_partitions_give_the_in_memory_fit(cancer):
    model, X, y = cancer
    for name, Xd, yd, y_mem in _layouts(X, y):
        X_mem = _in_memory_X(name, X, y)
        y_mem = np.asarray(y_mem, dtype=int)
        for make in (lambda: CalibrationWrapper(model, method="isotonic"),
                     lambda: CostPolicyWrapper(model, costs=COSTS, strategy="tuned",
                                               n_resamples=0),
                     lambda: PriorShiftWrapper(model, n_resamples=0)):
            remote, local = make().fit(Xd, yd), make().fit(X_mem, y_mem)
            p_remote = np.asarray(remote.predict_proba(X))[:, 1]
            np.testing.assert_allclose(p_remote, local.predict_proba(X)[:, 1], rtol=0,
                                       atol=1e-12, err_msg=name)
            if isinstance(local, CostPolicyWrapper):
                assert remote.cutoff_ == local.cutoff_, name
            if isinstance(local, PriorShiftWrapper):
                np.testing.assert_allclose(remote.adapt(Xd).target_prior_,
                                           local.adapt(X_mem).target_prior_, atol=1e-12)


def _fit_recording(make, *args, **kwargs):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fitted = make().fit(*args, **kwargs)
    return fitted, [str(c.message) for c in caught if issubclass(c.category, WeightScaleWarning)]


def test_tally_cutoff_does_not_move_with_the_weights_scale(cancer, tally_path):
    model, X, y = cancer
    w = np.random.default_rng(0).uniform(0.5, 2.0, y.shape[0])
    cols = list(X.columns)
    cutoffs, warned_remote, warned_local = [], [], []
    for scale in (1.0, 1e3, 1e-3, 1e-9):
        frame = dd.from_pandas(X.assign(lab=y, w=w * scale), npartitions=3)

        def make():
            return CostPolicyWrapper(model, costs=COSTS, strategy="tuned", n_resamples=0)

        remote, messages = _fit_recording(make, frame[cols], frame["lab"],
                                          sample_weight=frame["w"])
        _, local_messages = _fit_recording(make, X, y, sample_weight=w * scale)
        cutoffs.append(remote.cutoff_)
        warned_remote.append(any("settles the tuned rule" in m for m in messages))
        warned_local.append(any("settles the tuned rule" in m for m in local_messages))
    # docs/weights.md: scaling every weight must not move a choice (before: x1,000 gave 0.1762)
    assert cutoffs == [cutoffs[0]] * 4
    # the in-memory fit warns exactly where the weights sum to less than the rows
    assert warned_local == [False, False, True, True]
    assert warned_remote == warned_local
    # Kish's (1965) effective size of the rows, (sum w)^2 / sum w^2, is what the test counts
    kish = w.sum() ** 2 / (w @ w)
    frame = dd.from_pandas(X.assign(lab=y, w=w * 1e-3), npartitions=3)
    _, messages = _fit_recording(
        lambda: CostPolicyWrapper(model, costs=COSTS, strategy="tuned", n_resamples=0),
        frame[cols], frame["lab"], sample_weight=frame["w"])
    assert f"({kish:.4g})" in " ".join(messages)


def test_tally_calibration_warns_about_the_count_reading_as_in_memory(cancer, tally_path):
    model, X, y = cancer
    rng = np.random.default_rng(1)
    cols = list(X.columns)
    cases = {"0.5-2": rng.uniform(0.5, 2.0, y.shape[0]),
             "0.5-2 x1000": rng.uniform(0.5, 2.0, y.shape[0]) * 1e3,
             "whole 1-3": rng.integers(1, 4, y.shape[0]).astype(float),
             "whole 1-3 x4": rng.integers(1, 4, y.shape[0]) * 4.0}
    seen = {}
    for name, w in cases.items():
        frame = dd.from_pandas(X.assign(lab=y, w=w), npartitions=3)
        _, remote = _fit_recording(lambda: CalibrationWrapper(model, method="platt"),
                                   frame[cols], frame["lab"], sample_weight=frame["w"])
        _, local = _fit_recording(lambda: CalibrationWrapper(model, method="platt"), X, y,
                                  sample_weight=w)
        counted = [m for m in remote if "is read as row counts" in m]
        assert len(counted) == len([m for m in local if "is read as row counts" in m]), name
        seen[name] = counted
    assert [bool(seen[n]) for n in cases] == [True, True, False, True]
    assert "every weight is a multiple of 4" in seen["whole 1-3 x4"][0]
    total = cases["0.5-2 x1000"].sum()
    assert f"counts {total:.4g} rows" in seen["0.5-2 x1000"][0]


def test_decimal_labels_are_read_as_numbers(cancer):
    model, X, y = cancer
    D = decimal.Decimal
    labels = pd.Series([D(int(v)) for v in y], dtype=object)
    with dask.config.set({"dataframe.convert-string": False}):
        frame = dd.from_pandas(X.assign(lab=labels), npartitions=3)
        assert frame["lab"].dtype == object
        remote = CalibrationWrapper(model, method="platt").fit(frame[list(X.columns)],
                                                               frame["lab"])
        local = CalibrationWrapper(model, method="platt").fit(X, y)
        np.testing.assert_allclose(np.asarray(remote.predict_proba(X)),
                                   local.predict_proba(X), rtol=0, atol=1e-12)
        # a missing decimal is a missing label, and 0.5 a label the model does not know
        for bad, words in ((None, "NaN label"), (D("0.5"), "labels [0.5]")):
            odd = labels.copy()
            odd.iloc[7] = bad
            frame = dd.from_pandas(X.assign(lab=odd), npartitions=3)
            with pytest.raises(ValueError, match=words.replace("[", r"\[").replace("]", r"\]")):
                CalibrationWrapper(model, method="platt").fit(frame[list(X.columns)],
                                                              frame["lab"])


def test_tally_counts_names_the_dask_column_with_missing_counts(cancer):
    """Per-group counts as Dask columns: the tally is the in-memory one, and a null or NaN
    count names its column and counts the bad groups (before: "`successes` contains NaN")."""
    from probwrap.aggregated import tally_counts

    model, X, y = cancer
    s = model.decision_function(X)
    k, n = y.to_numpy() * 3.0, np.full(len(y), 3.0)
    groups = dd.from_pandas(pd.DataFrame({"s": s, "k": k, "n": n}), npartitions=3)
    t = tally_counts(groups["s"], groups["k"], groups["n"])
    np.testing.assert_allclose(t.counts, tally_counts(s, k, n).counts, rtol=1e-12)
    holes = pd.Series(k, dtype="Float64").mask((y == 0).to_numpy())  # null (pd.NA) counts
    missing = int((y == 0).sum())
    assert int(holes.isna().sum()) == missing > 0
    bad = dd.from_pandas(pd.DataFrame({"s": s, "k": holes, "n": n}), npartitions=3)
    with pytest.raises(ValueError, match=rf"`successes` \(column 'k'\) contains NaN or "
                                         rf"infinite values: {missing} of {len(y)} group"):
        tally_counts(bad["s"], bad["k"], bad["n"])
    trials = dd.from_pandas(pd.DataFrame({"s": s, "k": k, "n": np.where(y == 0, np.inf, n)}),
                            npartitions=3)
    with pytest.raises(ValueError, match=rf"`trials` \(column 'n'\) contains NaN or infinite "
                                         rf"values: {int((y == 0).sum())} of"):
        tally_counts(trials["s"], trials["k"], trials["n"])
