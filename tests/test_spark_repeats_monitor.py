"""RepeatedRowsWarning and the rows-alone fields on a Spark DataFrame: ``adapt`` (a small set,
whose rows come to the driver) and ``monitor`` (each batch judged on an executor) warn exactly
when ``adapt`` / ``monitor`` on the same rows in memory do, with the same numbers (memory's
words say 'the same features and posteriors': rows in memory are grouped by their features too,
Spark rows by their posteriors alone), and the Spark
monitor table carries ``ml_prior`` and ``pseudo_rows`` with memory's values (the Dask twins and
the reasons: tests/test_repeated_rows_everywhere.py). Before 5 December 2026 neither warned on
Spark and the table lacked both fields.

Data: scikit-learn's bundled breast cancer set (five columns), batches of 60 rows drawn with
replacement from pools of 20, 40 and 240 rows and one drawn without replacement. Runs on the
session-scoped ``spark`` fixture (conftest.py), one partition per frame; few Spark jobs.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.shift import RepeatedRowsWarning

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]

POOLS = (20, 40, 240, None)  # None: rows drawn without replacement
BATCH = 60


def _draws(n_rows, seed):
    rng = np.random.default_rng(seed)
    order = rng.permutation(n_rows)
    out, start = [], 0
    for pool in POOLS:
        if pool is None:  # (the last rows: they may overlap a pool's, batches are separate)
            out.append(order[-BATCH:])
        else:
            out.append(rng.choice(order[start:start + pool], BATCH))
            start += pool
    return out


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, lab, rest = idx[:100], idx[100:240], idx[240:]
    frozen = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(frozen, n_resamples=40, random_state=0).fit(X[lab], y[lab])
    return X[rest], psw


def _repeats(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(w.message) for w in caught if issubclass(w.category, RepeatedRowsWarning)]


def _same_words(messages):
    """Memory's words, which Dask and Spark now give too: their rows are grouped by their
    features as well as their posteriors where they live (since 5 December 2026, session 25;
    before, by their posteriors alone, and the words said 'the same posteriors')."""
    for m in messages:
        assert "(the same features and posteriors; " in m
    return messages


def _frame(spark, rows, **extra):
    data = pd.DataFrame(rows, columns=[f"c{j}" for j in range(rows.shape[1])])
    for name, values in extra.items():
        data[name] = values
    return spark.createDataFrame(data).coalesce(1)


def test_spark_adapt_warns_exactly_when_memory_does(spark, cancer):
    X, psw = cancer
    decided = []
    for b in _draws(X.shape[0], seed=1):
        _, mem = _repeats(lambda b=b: copy.deepcopy(psw).adapt(X[b]))
        _, dist = _repeats(lambda b=b: copy.deepcopy(psw).adapt(_frame(spark, X[b])))
        assert dist == _same_words(mem)  # the same message, numbers and all
        decided.append(bool(mem))
    assert decided == [True, True, False, False]  # before: the Spark adapt never warned


def test_spark_monitor_warns_and_has_the_rows_alone_fields_of_memory(spark, cancer):
    X, psw = cancer
    draws = _draws(X.shape[0], seed=2)
    rows = X[np.concatenate(draws)]
    batch = np.repeat(np.arange(len(draws)), BATCH)
    dist, dist_warned = _repeats(lambda: psw.monitor(_frame(spark, rows, batch=batch), "batch"))
    # monitor_spark's canonical order: by batch, then by probability within a batch
    p = psw.estimator_.predict_proba(rows)
    order = np.lexsort((p[:, 1], p[:, 0], batch))
    mem, mem_warned = _repeats(lambda: psw.monitor(rows[order], batches=batch[order]))
    assert len(mem_warned) == 1 and dist_warned == _same_words(mem_warned)  # before: none
    assert mem_warned[0].startswith("monitor: in 3 of 4 batches (batch 0, 1, 2)")
    assert dist.dtype.names == mem.dtype.names  # before: no ml_prior, no pseudo_rows
    np.testing.assert_allclose(dist["ml_prior"], mem["ml_prior"], rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(dist["pseudo_rows"], mem["pseudo_rows"], rtol=1e-10, atol=1e-12)
    assert np.all(mem["pseudo_rows"] > 0)


def test_spark_adapt_beyond_kept_rows_judges_every_row(spark, cancer, tally_path):
    """Beyond KEPT_ROWS (forced to 0: the rows come back as a tally of binned scores) the
    Spark adapt keys every row by its features on the executors and adds the keys up with one
    groupBy (probwrap.scale._repeat_keys): rows drawn with replacement from a pool of 20 warn
    with memory's counts and observed design effect (the chance bound within 2 %: the ML
    shares of the tally's bins), weighted or not; rows drawn without replacement from neither.
    Before 5 December 2026 (session 25) a Spark set beyond 20,000 rows was not judged."""
    import re

    X, psw = cancer
    rng = np.random.default_rng(11)
    pooled, distinct = X[rng.choice(np.arange(20), 150)], X[rng.permutation(X.shape[0])[:150]]
    w = rng.uniform(0.5, 2.0, 150)
    number = r"([0-9.e+-]+)"
    for rows, weight, warned in ((pooled, None, True), (pooled, w, True),
                                 (distinct, None, False)):
        _, mem = _repeats(lambda r=rows, ww=weight: copy.deepcopy(psw).adapt(
            r, sample_weight=ww))
        extra = {} if weight is None else {"w": weight}
        _, dist = _repeats(lambda r=rows, ww=weight, e=extra: copy.deepcopy(psw).adapt(
            _frame(spark, r, **e), sample_weight=None if ww is None else "w"))
        assert bool(mem) is warned and len(dist) == len(mem)
        for d, m in zip(dist, mem, strict=True):
            head = m.split(", a design effect of ")[0]
            assert d.startswith(head)  # the counts, by features and posteriors
            pick = rf"design effect of {number} where .* at most {number} "
            (d_obs, d_exp), (m_obs, m_exp) = (re.search(pick, t).groups() for t in (d, m))
            assert d_obs == m_obs
            assert float(d_exp) == pytest.approx(float(m_exp), rel=0.02)
