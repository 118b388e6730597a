"""A Spark partition refused on the executors is read to its end, so PySpark reuses its worker.

PySpark hands a Python worker the next task only when the task read its input to the end
(``pyspark/worker.py``: otherwise the worker tells the JVM not to reuse it and exits), and a
new worker imports pandas, scikit-learn and SciPy again: 6-12 s for the next job on the shared
2-core machine (``benchmarks/spark_refused_partition.py``, docs/evidence/prior_shift_log.md).
The score tallies read the rest of a refused partition since 5 December 2026; before the same
day's change ``SparkRows.map_reduce``, ``SparkRows.persist`` and ``SparkBlocks.reduce``
stopped at the refused chunk or block, and the workers that refused exited.

Checked without timing: a block function defined here refuses its chunk with a message that
names the Python worker's process id; after the refusal and one more job, that process is still
running (a worker that is not reused exits right after its task). Chunks of 10 rows (the
executors' functions carry the module constants ``CHUNK_ROWS`` / ``PERSIST_ROWS`` with them),
so each 59-row partition has rows after the refused chunk, as a partition of several million
rows has. The users' messages are unchanged: a NaN weight in such a chunk gives the in-memory
fit's message. Data: scikit-learn's bundled wine table (a multiclass logistic regression on
every third row, the other 118 rows in the Spark frame). Runs on the session-scoped ``spark`` fixture.
"""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap.scale._spark as spark_module
from probwrap import CalibrationWrapper, PriorShiftWrapper

pytestmark = [
    pytest.mark.slow,
    pytest.mark.filterwarnings("ignore:PySpark does not yet fully support pandas"),
    pytest.mark.filterwarnings("ignore:The copy keyword is deprecated"),
]


@pytest.fixture(scope="module")
def wine():
    """A logistic regression on 60 rows of wine (every third row from the first), and the other
    118 rows (all three classes), to be put in 2 Spark partitions of 59 rows."""
    X, y = load_wine(return_X_y=True, as_frame=True)
    fit = np.arange(len(y)) % 3 == 0
    model = FrozenEstimator(make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
                            .fit(X[fit], y[fit]))
    return model, X[~fit].reset_index(drop=True), y[~fit].to_numpy()


@pytest.fixture
def small_chunks(monkeypatch):
    """Chunks (and kept blocks) of 10 rows on the executors, so a 59-row partition has rows
    after its first chunk."""
    monkeypatch.setattr(spark_module, "CHUNK_ROWS", 10)
    monkeypatch.setattr(spark_module, "PERSIST_ROWS", 10)


def _frame(spark, df):
    frame = spark.createDataFrame(df)
    assert frame.rdd.getNumPartitions() == 2
    return frame


def _refusers():
    """Block functions that refuse, naming their worker's process id. Made inside a function so
    that cloudpickle sends them by value (the executors cannot import tests/)."""

    def refuse_chunk(*_):
        raise ValueError(f"refused in Python worker {os.getpid()}")

    def convert(pdf, _payload):
        raise ValueError(f"refused in Python worker {os.getpid()}")

    def keep(Xb, yb, wb):
        return Xb.shape[0]

    return refuse_chunk, convert, keep


def _worker(exc: pytest.ExceptionInfo) -> int:
    text = str(exc.value)
    assert text.startswith("refused in Python worker "), text
    pid = int(text.rsplit(" ", 1)[1])
    assert pid != os.getpid()  # raised on an executor's Python worker, not in the driver
    return pid


def _running(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/status") as fh:
            state = next(line for line in fh if line.startswith("State:"))
    except FileNotFoundError:
        return False
    return "Z" not in state.split()[1]  # a zombie has exited


def _next_job(frame) -> int:
    """An ordinary job on every partition (its rows counted in Python)."""

    def count(batches):
        yield pd.DataFrame({"n": [sum(len(b) for b in batches)]})

    return sum(r["n"] for r in frame.mapInPandas(count, "n long").collect())


@pytest.mark.parametrize("path", ["tally", "map_reduce", "persist", "reduce"])
def test_the_worker_that_refused_a_partition_runs_the_next_task(spark, wine, small_chunks,
                                                                path):
    model, X, y = wine
    frame = _frame(spark, X.assign(wine=y))
    refuse_chunk, convert, keep = _refusers()
    rows = spark_module.SparkRows(frame, "wine", None, model)
    with pytest.raises(ValueError) as exc:
        if path == "tally":
            spark_module._tally_partitions(frame, list(frame.columns), convert, None, 2, 1e-3,
                                           0, 0, 0)
        elif path == "map_reduce":
            rows.map_reduce(refuse_chunk)
        elif path == "persist":
            parts = rows.persist(refuse_chunk)
            try:
                parts.reduce(lambda block: block)
            finally:
                parts.release()
        else:
            parts = rows.persist(keep)
            try:
                assert parts.reduce(lambda block: block) == 118  # 12 blocks of 9-10 rows
                parts.reduce(refuse_chunk)
            finally:
                parts.release()
    pid = _worker(exc)
    assert _next_job(frame) == 118
    # before: the worker left the rest of its partition unread and exited after its task
    assert _running(pid), f"the Python worker {pid} that refused a partition has exited"


def test_a_refused_chunk_gives_the_in_memory_message(spark, wine, small_chunks):
    """A NaN weight in the first chunk of the second partition: ``map_reduce`` (the first pass of
    a multiclass calibration) and ``persist`` / ``reduce`` (a multiclass prior-shift fit) raise
    the in-memory fit's message, and the job after them runs."""
    model, X, y = wine
    w = np.ones(y.shape[0])
    w[63] = np.nan  # the second partition's first chunk (rows 59-68)
    frame = _frame(spark, X.assign(wine=y, w=w))
    for make in (lambda: CalibrationWrapper(model, method="platt"),
                 lambda: PriorShiftWrapper(model, calibration="bcts")):
        with pytest.raises(ValueError) as local:
            make().fit(X, y, sample_weight=w)
        assert "sample_weight" in str(local.value)
        with pytest.raises(ValueError) as remote:
            make().fit(frame, "wine", sample_weight="w")
        assert str(remote.value) == str(local.value)
    assert _next_job(frame) == 118
