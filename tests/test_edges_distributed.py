"""Awkward input on the Dask path: the same answer, error or warning as in memory.

Weights far from 1 (2**+-1000, 1e+-300) are divided by a power of two block by block, and the
blocks' units aligned when they are summed; the result must be bit for bit the fit on the
rescaled weights (the same floats in every sum), with one WeightScaleWarning per call, as in
memory. The other inputs (labels mixing numbers and text, missing labels, numbers in object
arrays, one class, a class without held-out rows, constant scores, zero / negative / NaN
weights, empty partitions, single-row blocks) must give the in-memory wrapper's error or
warning, or its result (consistency tests; the in-memory paths themselves are checked against
outside references in their own test files). The rows of docs/scale.md "Awkward input on Dask
and Spark" are these tests.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.special import expit
from sklearn.base import clone
from sklearn.dummy import DummyClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.calibration import FewClassRowsWarning, WeightScaleWarning
from probwrap.scale import tally_scores

# the tally / reduction path, also on few rows (conftest.py)
pytestmark = pytest.mark.usefixtures("tally_path")

da = pytest.importorskip("dask.array")
dd = pytest.importorskip("dask.dataframe")
pytest.importorskip("distributed")

COLS = ["weight", "route_km", "transfers"]
N = 2000


def _data(n, seed, k=2, shift=0.0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n, 3)) + shift
    if k == 2:
        y = (rng.random(n) < expit(X @ np.array([1.0, -0.7, 0.4]) - 1.0)).astype(int)
    else:
        logits = X @ np.array([[1.0, 0.0, -1.0], [0.0, 1.0, -1.0], [0.5, 0.5, 0.0]])
        y = np.argmax(logits + rng.gumbel(size=(n, 3)), axis=1)
    return X, y


@pytest.fixture(scope="module")
def binary():
    X, y = _data(1500, seed=0)
    return FrozenEstimator(LogisticRegression().fit(X, y))


@pytest.fixture(scope="module")
def three():
    X, y = _data(1500, seed=0, k=3)
    return FrozenEstimator(LogisticRegression().fit(X, y))


def _dask(*arrays, chunks=1000):
    return [da.from_array(a, chunks=(chunks,) + a.shape[1:]) for a in arrays]


def _weights(seed):
    """Weights in [1, 1.9] (largest in [1, 2): dividing 2**e * u by the power of two of its
    largest entry gives u back exactly; summing to more than the rows, so the maps keep them
    as row frequencies)."""
    u = np.random.default_rng(seed).uniform(1.0, 1.9, size=N)
    u[0] = 1.9
    return u


def _scale_warnings(record):
    """The warnings that weights were divided by a power of two (not the maps' own warnings that
    weights summing to fewer than the rows are rescaled to Kish's size, as in memory)."""
    return [r for r in record
            if issubclass(r.category, WeightScaleWarning) and "reaches" in str(r.message)]


def _relative(w):
    """The weights the wrappers work with: divided by the power of two of the largest (the
    in-memory rule, probwrap._heldout.rescale_extreme_weights)."""
    return w / math.ldexp(1.0, math.frexp(float(w.max()))[1] - 1)


# -- weights far from 1 ---------------------------------------------------------------------------
def test_tally_aligns_blocks_of_very_different_weight_scales(client):
    # blocks of weights near 2**600, 2**-300 and 1: each block is tallied in its own power of
    # two, and the merge brings them to the largest one; the same floats as tallying the
    # weights divided by 2**600 in memory, chunk for chunk (bit for bit)
    rng = np.random.default_rng(1)
    s = rng.normal(size=3 * 700)
    y = (rng.random(s.shape[0]) < expit(s)).astype(int)
    u = rng.uniform(1.0, 1.9, size=s.shape[0])
    w = u * np.repeat([2.0**600, 2.0**-300, 1.0], 700)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        remote = tally_scores(*_dask(s, y, chunks=700), sample_weight=da.from_array(w, chunks=700))
    assert len(_scale_warnings(rec)) == 1 and "2**600" in str(_scale_warnings(rec)[0].message)
    local = tally_scores(s, y, sample_weight=w / 2.0**600, chunk_size=700)
    assert remote.weight_unit == 2.0**600 and local.weight_unit == 1.0
    np.testing.assert_array_equal(remote.bins, local.bins)
    np.testing.assert_array_equal(remote.counts, local.counts)
    np.testing.assert_array_equal(remote.score_sums, local.score_sums)
    # the sum of squares underflows for the 2**-900 rows in both, and is finite (it was inf)
    assert remote.squared_weight == local.squared_weight and np.isfinite(remote.effective_rows)


@pytest.mark.parametrize("scale", [2.0**1000, 2.0**-1000, 1e300, 1e-300])
def test_prior_shift_fit_and_adapt_with_extreme_weights(client, binary, scale):
    # 1e300 stopped fit/adapt with an OverflowError; 1e-300 gave a [0, 1] interval from
    # "6e-298 effective rows". Now: the fit on the relative weights, bit for bit, with one
    # WeightScaleWarning from fit and one from adapt.
    X, y = _data(N, seed=2)
    X_new, _ = _data(N, seed=3, shift=0.4)
    w = _weights(4) * scale
    Xd, yd, Xn = _dask(X, y, X_new)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        model = PriorShiftWrapper(binary, n_resamples=30, random_state=0)
        model.fit(Xd, yd, sample_weight=da.from_array(w, chunks=1000))
        assert len(_scale_warnings(rec)) == 1
        model.adapt(Xn, sample_weight=da.from_array(w, chunks=1000))
        assert len(_scale_warnings(rec)) == 2
    rel = _relative(w)
    if scale in (2.0**1000, 2.0**-1000):
        np.testing.assert_array_equal(rel, _weights(4))  # the relative weights are u itself
    plain = PriorShiftWrapper(binary, n_resamples=30, random_state=0).fit(
        Xd, yd, sample_weight=da.from_array(rel, chunks=1000)
    ).adapt(Xn, sample_weight=da.from_array(rel, chunks=1000))
    np.testing.assert_array_equal(model.source_prior_, plain.source_prior_)
    np.testing.assert_array_equal(model.target_prior_, plain.target_prior_)
    np.testing.assert_array_equal(model.target_prior_interval_, plain.target_prior_interval_)
    assert model.shift_statistic_ == plain.shift_statistic_
    # and the in-memory wrapper on the same extreme weights (which rescales them alike): equal
    # up to the tally's bins of 1e-3 on the log-odds (as tests/test_scale_dask.py: 2e-3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", WeightScaleWarning)
        local = PriorShiftWrapper(binary, n_resamples=30, random_state=0).fit(
            X, y, sample_weight=w).adapt(X_new, sample_weight=w)
    np.testing.assert_allclose(model.source_prior_, local.source_prior_, atol=1e-12)
    assert abs(model.target_prior_[1] - local.target_prior_[1]) < 2e-3


def test_bootstrap_replicates_with_extreme_weights(client, binary):
    # the Poisson replicate tallies carry the same power of two as the counts: the percentile
    # interval of the prior and the cutoff's bootstrap interval are those of the relative weights
    X, y = _data(N, seed=27)
    w = _weights(28)
    Xd, yd = _dask(X, y)
    got = []
    for scale in (2.0**-1000, 1.0):
        wd = da.from_array(w * scale, chunks=1000)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", WeightScaleWarning)
            shift = PriorShiftWrapper(binary, interval="percentile", n_resamples=30,
                                      random_state=0).fit(Xd, yd, sample_weight=wd)
            shift.adapt(Xd, sample_weight=wd)
            policy = CostPolicyWrapper(binary, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned",
                                       n_resamples=30, random_state=0).fit(Xd, yd,
                                                                           sample_weight=wd)
        ci = policy.cutoff_interval_
        got.append((shift.target_prior_interval_.tolist(), policy.cutoff_, ci.low, ci.high))
    assert got[0] == got[1]


@pytest.mark.parametrize("scale", [2.0**1000, 1e-300])
@pytest.mark.parametrize("kind", ["calibration", "cost"])
def test_binary_wrappers_with_extreme_weights(client, binary, scale, kind):
    X, y = _data(N, seed=5)
    w = _weights(6) * scale
    Xd, yd = _dask(X, y)

    def make():
        if kind == "calibration":
            return CalibrationWrapper(binary, method="platt")
        return CostPolicyWrapper(binary, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned")

    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        model = make().fit(Xd, yd, sample_weight=da.from_array(w, chunks=1000))
    assert len(_scale_warnings(rec)) == 1
    plain = make().fit(Xd, yd, sample_weight=da.from_array(_relative(w), chunks=1000))
    np.testing.assert_array_equal(model.predict_proba(X), plain.predict_proba(X))
    if kind == "cost":
        assert model.cutoff_ == plain.cutoff_ and model.heldout_cost_ == plain.heldout_cost_


@pytest.mark.slow  # four multiclass fits twice, many passes over the blocks: about 5 s
@pytest.mark.parametrize("scale", [2.0**-1000, 1e300])
def test_multiclass_wrappers_with_extreme_weights(client, three, scale):
    # 1e300 gave temperature scaling a flat output ("end of the search range"), 1e-300 a
    # ZeroDivisionError in the multiclass prior shift
    X, y = _data(N, seed=7, k=3)
    X_new, _ = _data(N, seed=8, k=3, shift=0.4)
    w = _weights(9) * scale
    rel = _relative(w)
    Xd, yd, Xn = _dask(X, y, X_new)

    def fitted(weights):
        wd = da.from_array(weights, chunks=1000)
        return (CalibrationWrapper(three, method="temperature").fit(Xd, yd, sample_weight=wd),
                CalibrationWrapper(three, method="platt").fit(Xd, yd, sample_weight=wd),
                CostPolicyWrapper(three).fit(Xd, yd, sample_weight=wd),
                PriorShiftWrapper(three, n_resamples=50, random_state=0).fit(
                    Xd, yd, sample_weight=wd).adapt(Xn, sample_weight=wd))

    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        extreme = fitted(w)
    assert len(_scale_warnings(rec)) == 5  # one per fit, and one from adapt
    plain = fitted(rel)
    for a, b in zip(extreme[:2], plain[:2], strict=True):
        np.testing.assert_array_equal(a.predict_proba(X), b.predict_proba(X))
    assert extreme[2].heldout_cost_ == plain[2].heldout_cost_
    assert extreme[3].target_prior_.tolist() == plain[3].target_prior_.tolist()
    np.testing.assert_array_equal(extreme[3].target_prior_interval_,
                                  plain[3].target_prior_interval_)


def test_monitor_with_extreme_weights(client, binary):
    X, y = _data(N, seed=10)
    X_new, _ = _data(3 * 1000, seed=11, shift=0.3)
    model = PriorShiftWrapper(binary, n_resamples=0).fit(X, y)
    w = np.random.default_rng(12).uniform(0.5, 2.0, size=3000)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        table = model.monitor(*_dask(X_new), sample_weight=da.from_array(w * 1e300, chunks=1000))
    assert len(_scale_warnings(rec)) == 1
    # each batch's estimate does not depend on the scale of its weights: the in-memory table of
    # the weights as given (ordinary ones), batch by batch
    local = model.monitor(X_new, batch_size=1000, sample_weight=w)
    np.testing.assert_allclose(table["prior"], local["prior"], rtol=0, atol=1e-12)


# -- labels ----------------------------------------------------------------------------------------
def _mixed(y):
    out = y.astype(object)
    out[5] = str(out[5])
    return out


def _nan(y):
    out = y.astype(float)
    out[7] = np.nan
    return out


LABEL_CASES = {
    # whichever block fails first, the message names the mixing (a block holding only the
    # numbers of the mixed labels says they may mix with text in other blocks)
    "numbers mixed with text": (_mixed, "mixes label types"),
    "NaN label": (_nan, r"1 NaN label\(s\) \(first at row 7"),
    "None label": (None, r"1 missing label\(s\) \(None or NaN; first at row 9"),
    "numbers in an object array": (lambda y: y.astype(object), "numbers in an object array"),
}


@pytest.mark.parametrize("case", list(LABEL_CASES))
@pytest.mark.parametrize("k", [2, 3])
def test_bad_labels_get_the_in_memory_message(client, binary, three, case, k):
    # Dask gave NumPy's bare "'<' not supported between instances of 'int' and 'str'" for
    # mixed and None labels, "labels [nan] that the estimator does not know" for NaN, and
    # accepted numbers in an object array that the in-memory wrappers refuse
    X, y = _data(N, seed=13, k=k)
    model = binary if k == 2 else three
    make, message = LABEL_CASES[case]
    bad = None if make is None else make(y)
    if case == "None label":  # text labels and a model of text classes, one label missing
        names = np.array(["damaged", "intact", "lost"][:k], dtype=object)
        model = FrozenEstimator(LogisticRegression().fit(X, names[y].astype(str)))
        bad = names[y]
        bad[9] = None
    for wrapper in (CalibrationWrapper(model, method="platt"), CostPolicyWrapper(model),
                    PriorShiftWrapper(model, n_resamples=0)):
        with pytest.raises(ValueError, match=message.split("|")[0]):
            clone(wrapper).fit(X, bad)
        Xd = da.from_array(X, chunks=(1000, 3))
        with pytest.raises(ValueError, match=message):
            wrapper.fit(Xd, da.from_array(bad, chunks=1000))


def test_nullable_and_categorical_label_columns_of_a_dask_dataframe(client, binary):
    X, y = _data(N, seed=14)
    df = pd.DataFrame(X, columns=COLS)
    model = FrozenEstimator(LogisticRegression().fit(df, y))
    frame = dd.from_pandas(df.assign(y=pd.array(y, dtype="Int64")), npartitions=2)
    expected = CalibrationWrapper(model, method="platt").fit(df, y).predict_proba(df)
    for column in (frame["y"], frame["y"].astype("category"), frame["y"].astype("boolean")):
        # (True/False against classes 0/1: equal as numbers, as in memory)
        got = CalibrationWrapper(model, method="platt").fit(frame[COLS], column)
        np.testing.assert_allclose(got.predict_proba(df), expected, atol=1e-3)
    missing = df.assign(y=pd.array(np.where(np.arange(N) == 1200, None, y), dtype="Int64"))
    frame = dd.from_pandas(missing, npartitions=2)
    # the second partition's row 200 (row 1200 of the frame)
    with pytest.raises(ValueError, match=r"NaN label\(s\) \(first at row 200 of its block"):
        CalibrationWrapper(model, method="platt").fit(frame[COLS], frame["y"])


@pytest.mark.parametrize("k", [2, 3])
def test_one_class_is_refused_as_in_memory(client, binary, three, k):
    # a multiclass Dask fit went ahead on one class (temperature, cost rule) without a word
    X, _ = _data(N, seed=15, k=k)
    model = binary if k == 2 else three
    Xd = da.from_array(X, chunks=(1000, 3))
    yd = da.zeros(N, chunks=1000, dtype=int)
    for wrapper in (CalibrationWrapper(model, method="temperature" if k == 3 else "platt"),
                    CostPolicyWrapper(model), PriorShiftWrapper(model, n_resamples=0)):
        with pytest.raises(ValueError, match="`y` contains only 1 class"):
            clone(wrapper).fit(X, np.zeros(N, int))
        with pytest.raises(ValueError, match="`y` contains only 1 class"):
            wrapper.fit(Xd, yd)


@pytest.mark.filterwarnings("ignore:CalibrationWrapper. no one-vs-rest map can be fitted")
@pytest.mark.parametrize("method", ["temperature", "platt"])
def test_a_class_without_held_out_rows_warns_as_in_memory(client, three, method):
    X, y = _data(N, seed=16, k=3)
    y[y == 2] = 1
    Xd, yd = _dask(X, y)
    for make in (lambda: CalibrationWrapper(three, method=method), lambda: CostPolicyWrapper(three)):
        with pytest.warns(UserWarning, match="class\\(es\\) 2 of the frozen model have no held-out"):
            local = make().fit(X, y)
        with pytest.warns(UserWarning, match="class\\(es\\) 2 of the frozen model have no held-out"):
            remote = make().fit(Xd, yd)
        np.testing.assert_allclose(remote.predict_proba(X), local.predict_proba(X), atol=2e-3)


def test_few_rows_of_a_class_warn_with_the_row_count(client, binary, three):
    # the Dask fit counted tally rows (a bin and class each), or nothing at all (prior shift)
    X, y = _data(N, seed=17)
    y[np.flatnonzero(y == 1)[3:]] = 0  # 3 positive rows
    Xd, yd = _dask(X, y)
    with pytest.warns(FewClassRowsWarning, match=r"\(1: 3 rows\)"):
        CalibrationWrapper(binary, method="platt").fit(Xd, yd)
    with pytest.warns(UserWarning, match=r"fewer than 5 labelled rows \(1: 3\)"):
        PriorShiftWrapper(binary, n_resamples=0).fit(Xd, yd)
    X3, y3 = _data(N, seed=18, k=3)
    y3[np.flatnonzero(y3 == 2)[2:]] = 1
    Xd3, yd3 = _dask(X3, y3)
    with pytest.warns(FewClassRowsWarning, match=r"\(2: 2 rows\)"):
        CalibrationWrapper(three, method="temperature").fit(Xd3, yd3)
    with pytest.warns(UserWarning, match=r"fewer than 5 labelled rows \(2: 2\)"):
        PriorShiftWrapper(three, n_resamples=0).fit(Xd3, yd3)


def test_constant_scores_give_no_few_rows_warning(client):
    # a model with one score for every row: the tally has one bin, so two tally rows; the
    # Dask fit warned of "fewer than 5 held-out rows (0: 1 row, 1: 1 row)" for 2000 rows
    X, y = _data(N, seed=19)
    model = FrozenEstimator(DummyClassifier(strategy="prior").fit(X, y))
    with warnings.catch_warnings():
        warnings.simplefilter("error", FewClassRowsWarning)
        remote = CalibrationWrapper(model, method="platt").fit(*_dask(X, y))
    local = CalibrationWrapper(model, method="platt").fit(X, y)
    np.testing.assert_allclose(remote.predict_proba(X[:5]), local.predict_proba(X[:5]), atol=1e-9)


# -- weights ------------------------------------------------------------------------------------
WEIGHT_CASES = {
    "negative": (lambda w: np.where(np.arange(N) == 4, -1.0, w), "must be non-negative; got a minimum of -1"),
    "NaN": (lambda w: np.where(np.arange(N) == 4, np.nan, w), "contains NaN or infinite values"),
    "all zero": (lambda w: 0.0 * w, "zero for every row; at least one weight must be positive"),
    "one class weighted": (None, "Only one class has a positive `sample_weight`"),
}


@pytest.mark.parametrize("case", list(WEIGHT_CASES))
@pytest.mark.parametrize("k", [2, 3])
def test_bad_weights_get_the_in_memory_message(client, binary, three, case, k):
    X, y = _data(N, seed=20, k=k)
    model = binary if k == 2 else three
    make, message = WEIGHT_CASES[case]
    w = (y == 0).astype(float) if make is None else make(np.ones(N))
    Xd, yd = _dask(X, y)
    wd = da.from_array(w, chunks=1000)
    for wrapper in (CalibrationWrapper(model, method="platt"), CostPolicyWrapper(model),
                    PriorShiftWrapper(model, n_resamples=0)):
        with pytest.raises(ValueError, match=message):
            clone(wrapper).fit(X, y, sample_weight=w)
        with pytest.raises(ValueError, match=message):
            wrapper.fit(Xd, yd, sample_weight=wd)
    if case in ("negative", "all zero"):
        fitted = PriorShiftWrapper(model, n_resamples=0).fit(Xd, yd)
        with pytest.raises(ValueError, match=message):
            fitted.adapt(Xd, sample_weight=wd)


def test_zero_weights_on_some_rows_match_leaving_them_out(client, binary):
    X, y = _data(N, seed=21)
    w = np.ones(N)
    w[:700] = 0.0
    Xd, yd = _dask(X, y)
    a = PriorShiftWrapper(binary, n_resamples=0).fit(Xd, yd, sample_weight=da.from_array(w, 1000))
    b = PriorShiftWrapper(binary, n_resamples=0).fit(*_dask(X[700:], y[700:], chunks=300))
    np.testing.assert_array_equal(a.source_prior_, b.source_prior_)
    np.testing.assert_allclose(a.predict_proba(X), b.predict_proba(X), rtol=1e-12)


# -- partitions ------------------------------------------------------------------------------
@pytest.mark.parametrize("k", [2, 3])
def test_empty_partitions_are_left_out(client, binary, three, k):
    # a multiclass prior-shift fit stopped with "`proba` is empty"; binary tallies with
    # "`scores` is empty" from the tally of the empty block
    X, y = _data(N, seed=22, k=k)
    model = binary if k == 2 else three
    df = pd.DataFrame(X, columns=COLS).assign(y=y, row=np.arange(N))
    frame = dd.from_pandas(df, npartitions=4)
    frame = frame[frame["row"] < 900]  # partitions 3 and 4 are empty
    kept = df[df["row"] < 900]
    for make in (lambda: CalibrationWrapper(model, method="platt"),
                 lambda: PriorShiftWrapper(model, n_resamples=0)):
        remote = make().fit(frame[COLS].to_dask_array(lengths=True), frame["y"].to_dask_array(
            lengths=True))
        local = make().fit(kept[COLS].to_numpy(), kept["y"].to_numpy())
        np.testing.assert_allclose(remote.predict_proba(X[:50]), local.predict_proba(X[:50]),
                                   atol=2e-3)
    fitted = PriorShiftWrapper(model, n_resamples=0).fit(X, y)
    empty = dd.from_pandas(pd.DataFrame(X, columns=COLS), npartitions=2)
    with pytest.raises(ValueError, match="`X` has no rows"):
        fitted.adapt(empty[empty["weight"] > 100].to_dask_array(lengths=True))


@pytest.mark.filterwarnings("ignore:.*fewer than 5")
def test_single_row_blocks_give_the_in_memory_result(client, binary, three):
    X, y = _data(8, seed=25)
    local = PriorShiftWrapper(binary, n_resamples=0).fit(X, y)
    remote = PriorShiftWrapper(binary, n_resamples=0).fit(*_dask(X, y, chunks=1))
    np.testing.assert_allclose(remote.source_prior_, local.source_prior_, rtol=1e-12)
    X3, y3 = _data(8, seed=25, k=3)
    local3 = CalibrationWrapper(three, method="temperature").fit(X3, y3)
    remote3 = CalibrationWrapper(three, method="temperature").fit(*_dask(X3, y3, chunks=1))
    assert remote3.calibrator_.temperature_ == pytest.approx(local3.calibrator_.temperature_,
                                                             rel=1e-9)


def test_monitor_leaves_out_an_empty_block_with_a_warning(client, binary):
    X, y = _data(N, seed=25)
    X_new, _ = _data(2000, seed=26, shift=0.3)
    model = PriorShiftWrapper(binary, n_resamples=0).fit(X, y)
    blocks = da.concatenate([da.from_array(X_new, chunks=(1000, 3)),
                             da.from_array(np.empty((0, 3)), chunks=(1, 3))])
    blocks = blocks.rechunk({0: (1000, 0, 1000)})
    with pytest.warns(UserWarning, match=r"block\(s\) \[1\] of `X` have no rows"):
        table = model.monitor(blocks)
    assert table["batch"].tolist() == [0, 2]
    local = model.monitor(X_new, batch_size=1000)
    np.testing.assert_allclose(table["prior"], local["prior"], atol=1e-12)


@pytest.mark.parametrize("k", [2, 3])
def test_few_labelled_rows_warn_on_dask_as_in_memory(client, binary, three, k):
    # an interval of the class priors on fewer than 100 labelled rows draws the in-memory
    # FewLabelledRowsWarning on the Dask paths too (tallied labelled rows, binary Poisson
    # replicates, multiclass analytic interval from block sums); 150 rows do not
    from probwrap.shift import FewLabelledRowsWarning

    model = binary if k == 2 else three
    X_new, _ = _data(N, seed=21, k=k)
    for n_lab, expected in ((60, True), (150, False)):
        X, y = _data(n_lab, seed=20, k=k)
        for fit_rows in ((X, y), _dask(X, y, chunks=40)):
            wrapper = PriorShiftWrapper(model, n_resamples=30, random_state=0)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                wrapper.fit(*fit_rows)
            # unlabelled rows on Dask, and in memory after a Dask fit (the tallied Poisson
            # interval)
            for X_adapt in (_dask(X_new)[0], X_new):
                with warnings.catch_warnings(record=True) as caught:
                    warnings.simplefilter("always")
                    wrapper.adapt(X_adapt)
                few = [c for c in caught if issubclass(c.category, FewLabelledRowsWarning)]
                assert len(few) == expected, (n_lab, type(fit_rows[0]).__name__,
                                              type(X_adapt).__name__)


def test_multiclass_dask_fit_gives_the_interval_to_unlabelled_rows_in_memory(client, three):
    # a three-class fit on Dask rows kept n_resamples=0 on its estimator, so unlabelled rows
    # passed in memory afterwards got target_prior_interval_ None while Dask ones got the
    # analytic interval; now the four combinations of fit and adapt input agree
    X, y = _data(600, seed=20, k=3)
    X_new, _ = _data(N, seed=21, k=3)
    got = []
    for fit_rows in ((X, y), _dask(X, y, chunks=200)):
        wrapper = PriorShiftWrapper(three, n_resamples=30, random_state=0).fit(*fit_rows)
        for X_adapt in (X_new, _dask(X_new)[0]):
            wrapper.adapt(X_adapt)
            assert wrapper.target_prior_interval_ is not None
            got.append((wrapper.target_prior_, wrapper.target_prior_interval_))
    for prior, interval in got[1:]:
        np.testing.assert_allclose(prior, got[0][0], rtol=0, atol=1e-9)
        np.testing.assert_allclose(interval, got[0][1], rtol=0, atol=1e-9)
