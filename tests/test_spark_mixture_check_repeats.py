"""The mixture check counts repeated Spark rows by their design effect, as in memory.

The Spark twins of tests/test_mixture_check_repeats_dask.py (same data: scikit-learn's bundled
breast cancer set, batches of 300 rows drawn with replacement from pools of 30 rows per class).
``adapt`` on a small Spark DataFrame (its rows come to the driver) gives memory's mixture-check
p-value to 1e-9; ``monitor`` judges each batch on an executor, whose p-values reach the driver
only in the warning's words (two significant digits), so its one ClassMixtureMisfitWarning is
compared, word for word, with Dask's (whose p-values equal memory's to 1e-9). Before session 30
the Spark paths counted the repeated rows as independent (adapt's first batch at p = 8.0e-6
against memory's 0.063; monitor flagged batches 0, 2 and 3 where memory flags 3): both tests
fail on that code. Runs on the session-scoped ``spark`` fixture, one partition per frame.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pandas as pd
import pytest

from _data_helpers import repeated_batches
from probwrap.shift import ClassMixtureMisfitWarning, RepeatedRowsWarning

da = pytest.importorskip("dask.array")
pytest.importorskip("sklearn.frozen")

BATCH = 300  # (the batches' rows: repeated_batches)

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


@pytest.fixture(scope="module")
def cancer():
    return repeated_batches(n_batches=4)


def _frame(spark, rows, **extra):
    data = pd.DataFrame(rows, columns=[f"c{j}" for j in range(rows.shape[1])])
    for name, values in extra.items():
        data[name] = values
    return spark.createDataFrame(data).coalesce(1)


def _run(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out = fn()
    return out, caught


def test_spark_adapt_gives_memorys_mixture_pvalue(spark, cancer):
    X, psw, batches = cancer
    mem, dist = [], []
    for b in batches:
        m, _ = _run(lambda b=b: copy.deepcopy(psw).adapt(X[b]))
        d, caught = _run(lambda b=b: copy.deepcopy(psw).adapt(_frame(spark, X[b])))
        assert any(w.category is RepeatedRowsWarning for w in caught)
        mem.append(m.prior_estimate_.mixture_misfit_pvalue)
        dist.append(d.prior_estimate_.mixture_misfit_pvalue)
    # before: Spark's first batch at p = 8.0e-6 against memory's 0.063
    np.testing.assert_allclose(dist, mem, rtol=1e-9, atol=0)


def test_spark_monitor_flags_the_batches_memory_and_dask_flag(spark, cancer):
    X, psw, batches = cancer
    rows = X[np.concatenate(batches)]
    label = np.repeat(np.arange(len(batches)), BATCH)
    _, by_spark = _run(lambda: psw.monitor(_frame(spark, rows, batch=label), "batch"))
    _, by_dask = _run(lambda: psw.monitor(da.from_array(rows, chunks=BATCH)))
    _, by_memory = _run(lambda: psw.monitor(rows, batch_size=BATCH))
    spark_words = [str(w.message) for w in by_spark if w.category is ClassMixtureMisfitWarning]
    dask_words = [str(w.message) for w in by_dask if w.category is ClassMixtureMisfitWarning]
    memory_words = [str(w.message) for w in by_memory if w.category is ClassMixtureMisfitWarning]
    assert spark_words == dask_words  # batch labels, counts and the p-value's digits alike
    assert len(memory_words) == 1 and memory_words[0].startswith("In 1 of 4 batches (batch 3)")
    assert spark_words[0].startswith("PriorShiftWrapper.monitor: 1 of 4 batches (batch 3)")
    # the same words for the flagged batch as memory's (p to two digits)
    assert spark_words[0].split("first, batch 3: ")[1] == memory_words[0].split(
        "first, batch 3: ")[1]
