"""The Spark job after a refused partition: time, and whether the refusing Python worker lives on.

PySpark reuses a Python worker for the next task only when the task read its input to the end
(``pyspark/worker.py``: otherwise the worker tells the JVM not to reuse it and exits), and a new
worker imports pandas, scikit-learn and SciPy again. For each Spark path that can refuse a
partition (bad input found on the executors), this script runs, on a ``local[2]`` session:

1. the ordinary job twice (warm workers; the second is the baseline);
2. the refused job (a NaN weight in one row of the second partition): its error's first line;
3. the ordinary job again (timed): the job that paid for new workers when the refused
   partition was left unread.

Paths, on scikit-learn's bundled wine data (178 rows, 3 classes; a logistic regression on the
even rows, the odd 89 rows held out, in 2 partitions):

- ``tally``: ``tally_scores`` of a score column (``_tally_partitions``, fixed before);
- ``map_reduce``: a multiclass ``CalibrationWrapper(method="platt")`` fit (its first pass is
  ``SparkRows.map_reduce``);
- ``persist``: a multiclass ``PriorShiftWrapper`` fit (``SparkRows.persist``; the refused block
  is raised by the first ``SparkBlocks.reduce``, which also stops there);
- ``reduce``: ``SparkBlocks.reduce`` of a block function that refuses one block;
- ``keys``: the keys of the repeated-rows check on the unlabelled rows, by their features
  (``SparkRows.key_tallies`` with ``key_block``, i.e. ``spark_key_tallies``), which refuses
  the NaN weight. Before it read the rest of a refused partition, the refusal also reached the
  driver as PySpark's ``PythonException`` (its type is printed before the message).

``--chunk-rows`` (default 20) sets the rows per chunk that ``map_reduce`` and ``persist`` hand
to their block functions (1,000,000 and 100,000 in probwrap), so that the refused row lies in
the first of a partition's three chunks, as in a partition of several million rows: with the
partition in one chunk, the input has been read to its end before the chunk is refused.

The ordinary job is one ``tally_scores`` of the clean score column (one Spark job). Worker
process ids come from ``os.getpid()`` inside the jobs; "alive" is ``/proc/<pid>`` after the
ordinary job.

    python benchmarks/spark_refused_partition.py [--quick] [--paths tally,map_reduce,...]

``--quick`` runs each path once; the default runs each path three times and prints the median.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

PATHS = ("tally", "map_reduce", "persist", "reduce", "keys")


def _session():
    from pyspark.sql import SparkSession

    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    spark = (
        SparkSession.builder.master("local[2]").appName("probwrap-refused-partition")
        .config("spark.ui.enabled", "false")
        .config("spark.ui.showConsoleProgress", "false")
        .config("spark.sql.shuffle.partitions", "2")
        .config("spark.default.parallelism", "2")
        .config("spark.driver.memory", "512m")
        .config("spark.driver.host", "127.0.0.1")
        .config("spark.driver.bindAddress", "127.0.0.1")
        .config("spark.sql.execution.arrow.pyspark.enabled", "true")
        .getOrCreate()
    )
    spark.sparkContext.setLogLevel("ERROR")
    return spark


def _data(spark):
    import numpy as np
    from sklearn.datasets import load_wine
    from sklearn.frozen import FrozenEstimator
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    X, y = load_wine(return_X_y=True, as_frame=True)
    fit = np.arange(len(y)) % 2 == 0
    model = FrozenEstimator(make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
                            .fit(X[fit], y[fit]))
    held = X[~fit].reset_index(drop=True)
    labels = y[~fit].to_numpy()
    p = model.predict_proba(held)[:, 1]
    score = np.log(p) - np.log1p(-p)
    clean = held.assign(wine=labels, w=1.0, s=score, b=(labels == 1).astype(int))
    bad = clean.copy()
    bad.loc[50, "w"] = np.nan  # a row near the start of the second partition (rows 44-88)
    # two partitions in row order (createDataFrame splits by the default parallelism)
    frames = {name: spark.createDataFrame(df) for name, df in (("clean", clean), ("bad", bad))}
    return model, frames


def _pids(frame):
    import pandas as pd

    def pid(batches):
        for _ in batches:
            pass
        yield pd.DataFrame({"pid": [os.getpid()]})

    return sorted(r["pid"] for r in frame.mapInPandas(pid, "pid long").collect())


def _ordinary(frames):
    from probwrap.scale import tally_scores

    start = time.perf_counter()
    tally_scores(frames["clean"].select("s", "b"), "b")
    return time.perf_counter() - start


def _refuse_block(block):
    raise ValueError(f"block refused in worker {os.getpid()}")


def _refused(path, model, frames):
    """Run the refused job; the first line of its error."""
    from probwrap import CalibrationWrapper, PriorShiftWrapper
    from probwrap.scale import tally_scores

    bad = frames["bad"]
    try:
        if path == "tally":
            tally_scores(bad.select("s", "b", "w"), "b", sample_weight="w")
        elif path == "map_reduce":
            CalibrationWrapper(model, method="platt").fit(
                bad.drop("s", "b"), "wine", sample_weight="w")
        elif path == "persist":
            PriorShiftWrapper(model, calibration="bcts").fit(
                bad.drop("s", "b"), "wine", sample_weight="w")
        elif path == "keys":
            from probwrap.scale._repeat_keys import key_block
            from probwrap.scale._spark import SparkRows

            SparkRows(bad.drop("s", "b", "wine"), None, "w", model).key_tallies(
                key_block, model, None, len(model.classes_), True, None)
        else:
            from probwrap.scale._multiclass import _source_block
            from probwrap.scale._spark import SparkRows

            clean = frames["clean"].drop("s", "b")
            parts = SparkRows(clean, "wine", "w", model).persist(
                _source_block, model, model.classes_)
            try:
                parts.reduce(_refuse_block)
            finally:
                parts.release()
    except Exception as exc:  # noqa: BLE001 - a refusal not turned into a ValueError is shown
        text = str(exc)
        line = text[text.find("`"):].splitlines()[0] if "`" in text else text.splitlines()[0]
        return line if isinstance(exc, ValueError) else f"{type(exc).__name__}: {line}"
    return "(no error)"


def _alive(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/status") as fh:
            return "zombie" not in fh.read()
    except FileNotFoundError:
        return False


def run(paths, repeats, chunk_rows):
    import numpy as np

    import probwrap.scale._spark as spark_module

    # rows per chunk handed to the block functions: the executors' functions take these
    # module constants with them when they are pickled on the driver
    spark_module.CHUNK_ROWS = spark_module.PERSIST_ROWS = chunk_rows
    spark = _session()
    model, frames = _data(spark)
    print(f"partitions: {frames['clean'].rdd.getNumPartitions()}", flush=True)
    for path in paths:
        base, after, lost = [], [], []
        for _ in range(repeats):
            _ordinary(frames)
            base.append(_ordinary(frames))
            before = _pids(frames["clean"])
            start = time.perf_counter()
            message = _refused(path, model, frames)
            refused = time.perf_counter() - start
            after.append(_ordinary(frames))
            lost.append(sum(not _alive(p) for p in before))
            print(f"  {path}: baseline {base[-1]:.2f} s, refused job {refused:.2f} s, "
                  f"next job {after[-1]:.2f} s, warm workers gone {lost[-1]} of {len(before)}; "
                  f"{message[:110]}", flush=True)
        print(f"{path}: median baseline {np.median(base):.2f} s, median next job "
              f"{np.median(after):.2f} s", flush=True)
    spark.stop()


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="each path once")
    parser.add_argument("--paths", default=",".join(PATHS))
    parser.add_argument("--chunk-rows", type=int, default=20,
                        help="rows per chunk on the executors (probwrap: 1,000,000 for "
                             "map_reduce, 100,000 for persist); 20 puts the refused row in the "
                             "first of three chunks, as in a partition larger than a chunk")
    args = parser.parse_args(argv)
    run(args.paths.split(","), 1 if args.quick else 3, args.chunk_rows)


if __name__ == "__main__":
    main()
