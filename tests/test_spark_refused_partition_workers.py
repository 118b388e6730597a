"""A Spark partition refused on the executors is read to its end, so PySpark reuses its worker.

PySpark hands a Python worker the next task only when the task read its input to the end
(``pyspark/worker.py``: otherwise the worker tells the JVM not to reuse it and exits), and a
new worker imports pandas, scikit-learn and SciPy again: 6-12 s for the next job on the shared
2-core machine (``benchmarks/spark_refused_partition.py``, docs/evidence/prior_shift_log.md).
The score tallies read the rest of a refused partition since 5 December 2026; before the same
day's changes ``SparkRows.map_reduce``, ``SparkRows.persist``, ``SparkBlocks.reduce`` and the
keys of the repeated-rows check (``spark_key_tallies``) stopped at the refused chunk or block,
and the workers that refused exited (the keys' refusal also reached the user as PySpark's
``PythonException`` with a Java stack trace, not the in-memory ValueError).

Checked without timing: a block function defined here refuses its chunk with a message that
names the Python worker's process id; after the refusals on every path and one more job, each of
those processes is still running (a worker that is not reused exits right after its task, so one
job after all the refusals checks them all, and costs one job instead of one per path). Chunks
of 10 rows (the
executors' functions carry the module constants ``CHUNK_ROWS`` / ``PERSIST_ROWS`` with them),
so each 59-row partition has rows after the refused chunk, as a partition of several million
rows has. The users' messages are unchanged: a NaN weight in such a chunk gives the in-memory
fit's message (and, for the keys, the message of the same key function on the rows in memory). Data: scikit-learn's bundled wine table (a multiclass logistic regression on
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
from probwrap.scale._repeat_keys import key_block

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


PATHS = ("tally", "map_reduce", "persist", "reduce", "keys")


def _refuse(spark_frame, model, path: str) -> None:
    """One refusal on ``path``: a chunk (or kept block) refused in each partition's worker."""
    refuse_chunk, convert, keep = _refusers()
    rows = spark_module.SparkRows(spark_frame, "wine", None, model)
    if path == "tally":
        spark_module._tally_partitions(spark_frame, list(spark_frame.columns), convert, None, 2,
                                       1e-3, 0, 0, 0)
    elif path == "map_reduce":
        rows.map_reduce(refuse_chunk)
    elif path == "persist":
        parts = rows.persist(refuse_chunk)
        try:
            parts.reduce(lambda block: block)
        finally:
            parts.release()
    elif path == "reduce":
        parts = rows.persist(keep)  # kept blocks (of 9-10 rows) refused when reduced
        try:
            parts.reduce(refuse_chunk)
        finally:
            parts.release()
    else:  # the keys of the repeated-rows check (unlabelled rows)
        unlabelled = spark_module.SparkRows(spark_frame.drop("wine"), None, None, model)
        unlabelled.key_tallies(refuse_chunk)


def test_the_workers_that_refused_a_partition_run_the_next_task(spark, wine, small_chunks):
    model, X, y = wine
    frame = _frame(spark, X.assign(wine=y))
    refused = {}
    for path in PATHS:
        with pytest.raises(ValueError) as exc:
            _refuse(frame, model, path)
        refused[path] = _worker(exc)
    assert _next_job(frame) == 118
    # before: the workers left the rest of their partitions unread and exited after their tasks
    exited = {path: pid for path, pid in refused.items() if not _running(pid)}
    assert not exited, f"the Python workers that refused a partition have exited: {exited}"


def test_a_refused_chunk_gives_the_in_memory_message(spark, wine, small_chunks):
    """A NaN weight in the first chunk of the second partition: ``map_reduce`` (the first pass of
    a multiclass calibration), ``persist`` / ``reduce`` (a multiclass prior-shift fit) and the
    keys of the repeated-rows check raise the in-memory message, and the job after them runs."""
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
    with pytest.raises(ValueError) as local:
        key_block(model, None, 3, True, None, X, w)
    assert "sample_weight" in str(local.value)
    rows = spark_module.SparkRows(frame.drop("wine"), None, "w", model)
    with pytest.raises(ValueError) as remote:  # before: PySpark's PythonException
        rows.key_tallies(key_block, model, None, 3, True, None)
    assert str(remote.value) == str(local.value)
    assert _next_job(frame) == 118
