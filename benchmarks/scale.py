"""Scale benchmark: tallies of 10^8 lazily generated scores on Dask and on Spark.

Run ``python benchmarks/scale.py`` (10^8 rows on a Dask LocalCluster, the default) or
``--rows 20000000`` on a small machine; ``--engine spark`` runs the same steps on a local[2]
Spark session *and* on Dask, each in its own process, and prints the two side by side;
``--quick`` is 10^6 rows (10^6-row exact check). For Dask the script

1. generates labelled source scores and unlabelled target scores lazily with
   ``dask.array.random`` (class-conditional normal scores, so the true posteriors are known and
   only the class prior differs between source and target);
2. tallies both on a two-worker LocalCluster (only the tallies reach the client);
3. fits an isotonic and a Platt map, tunes a cutoff and estimates the target prior by EM from the
   tallies;
4. prints the wall time of each step and the client's peak memory (``resource.getrusage`` of the
   client process, which also hosts the scheduler, and the peak of Python allocations traced by
   ``tracemalloc``), against a target of 2 GiB;
5. checks agreement with exact in-memory fits on a subsample of the rows (10^7 by default):
   the tally of the subsample against the exact fit on the same rows, and the fit from the
   whole tally against the subsample's exact fit; the exact isotonic fit is also timed beside
   scikit-learn's ``IsotonicRegression``.

For Spark the rows are generated inside the JVM (``spark.range`` with ``rand`` / ``randn``
columns, seeded per partition, so every evaluation gives the same rows), tallied partition by
partition with ``mapInPandas`` (only the tallies reach the driver), and the subsample is the
rows with ``id`` below the subsample size, collected to the driver for the exact fits. The
driver's peak memory is reported for the Python driver process and for the JVM (which, in local
mode, also hosts the executors; its heap is capped by ``--driver-memory``).
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import resource
import sys
import time
import tracemalloc

import numpy as np
from scipy.special import expit
from sklearn.isotonic import IsotonicRegression

from probwrap.calibration import IsotonicMap, PlattMap
from probwrap.decision import search_cutoff
from probwrap.scale import tally_scores
from probwrap.shift import em_prior

MU, SIGMA = 1.0, 1.5  # class-conditional score means +-MU, standard deviation SIGMA
SOURCE_PRIOR, TARGET_PRIOR = 0.05, 0.10  # share of damaged parcels: summer vs storm season
COSTS = {"fp": 3.0, "fn": 40.0}  # inspection and repacking vs refund and reshipping


def _log_odds(z, prior):
    """Calibrated log-odds of class 1 for a class-conditional normal score ``z``."""
    return 2 * MU * z / SIGMA**2 + np.log(prior / (1 - prior))


def _make(da, rows, chunk, prior, seed):
    rng = da.random.default_rng(seed)
    y = rng.random(rows, chunks=chunk) < prior
    z = rng.normal(0.0, SIGMA, size=rows, chunks=chunk) + da.where(y, MU, -MU)
    # scores as a model trained under the source prior would output them
    return _log_odds(z, SOURCE_PRIOR), y.astype(np.int8)


def _rss_gib() -> float:
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return peak / 2**30 if sys.platform == "darwin" else peak / 2**20


def _log_loss(p, y):
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log1p(-p)))


def _cost(scores, y, cutoff):
    act = scores > cutoff
    return float((COSTS["fp"] * np.sum(act & (y == 0)) + COSTS["fn"] * np.sum(~act & (y == 1)))
                 / y.shape[0])


def _fits(tally, unlabelled, t0):
    """The fits from the tallies, with their timings (shared by both engines)."""
    t1 = time.perf_counter()
    s_rows, y_rows, w_rows = tally.to_rows()
    iso = IsotonicMap().fit(s_rows, y_rows, sample_weight=w_rows)
    t2 = time.perf_counter()
    platt = PlattMap().fit(s_rows, y_rows, sample_weight=w_rows)
    t3 = time.perf_counter()
    cut = search_cutoff(s_rows, y_rows, COSTS, sample_weight=w_rows)
    t4 = time.perf_counter()
    src_prior = tally.label_weight / tally.total_weight
    proba_t, w_t = unlabelled.to_scores(proba=True)
    em = em_prior(proba_t, src_prior, sample_weight=w_t, tol=1e-9).prior
    t5 = time.perf_counter()
    print(f"isotonic fit:     {t2 - t1:8.3f} s   Platt fit: {t3 - t2:.3f} s   "
          f"cutoff: {t4 - t3:.3f} s   EM: {t5 - t4:.3f} s")
    print(f"total wall time:  {t5 - t0:8.2f} s")
    return iso, platt, cut, em, src_prior, t5 - t0


def _agreement(s, y, s_u, src_prior, sub_tally, sub_unlabelled, whole):
    """Differences of the tally fits from exact in-memory fits on the subsample's rows."""
    iso_exact = IsotonicMap().fit(s, y)
    platt_exact = PlattMap().fit(s, y)
    cut_exact = search_cutoff(s, y, COSTS)
    em_exact = em_prior(np.column_stack([expit(-s_u), expit(s_u)]), src_prior, tol=1e-9).prior
    rows_sub = sub_tally.to_rows()
    proba_u, w_u = sub_unlabelled.to_scores(proba=True)
    fits = {
        "subsample tally": (
            IsotonicMap().fit(rows_sub[0], rows_sub[1], sample_weight=rows_sub[2]),
            PlattMap().fit(rows_sub[0], rows_sub[1], sample_weight=rows_sub[2]),
            search_cutoff(rows_sub[0], rows_sub[1], COSTS, sample_weight=rows_sub[2]),
            em_prior(proba_u, src_prior, sample_weight=w_u, tol=1e-9).prior,
        ),
        "whole tally": whole,
    }
    p_iso = iso_exact.predict(s)
    ll_iso = _log_loss(p_iso, y)
    ll_exact = _log_loss(platt_exact.predict(s), y)
    cost_exact = _cost(s, y, cut_exact.cutoff)
    header = f"{'':18s}{'iso |dp| mean':>14s}{'iso d logloss':>14s}{'Platt d logloss':>16s}"
    print(header + f"{'cutoff d cost':>14s}{'EM d prior':>12s}")
    out = {}
    for name, (i_map, p_map, c_res, em_p) in fits.items():
        p = i_map.predict(s)
        row = (float(np.mean(np.abs(p - p_iso))), _log_loss(p, y) - ll_iso,
               _log_loss(p_map.predict(s), y) - ll_exact,
               _cost(s, y, c_res.cutoff) / cost_exact - 1, float(em_p[1] - em_exact[1]))
        out[name] = row
        print(f"{name:18s}{row[0]:14.2e}{row[1]:14.2e}{row[2]:16.2e}{row[3]:14.2e}{row[4]:12.2e}")
    return out


def _run_spark(rows: int, sub: int, partitions: int, driver_memory: str) -> dict:
    from pyspark.sql import SparkSession
    from pyspark.sql import functions as F

    os.environ.setdefault("PYSPARK_PYTHON", sys.executable)
    tracemalloc.start()
    spark = (SparkSession.builder.master("local[2]").appName("probwrap-scale-benchmark")
             .config("spark.ui.enabled", "false").config("spark.ui.showConsoleProgress", "false")
             .config("spark.sql.shuffle.partitions", "2")
             .config("spark.driver.memory", driver_memory)
             .config("spark.sql.execution.arrow.pyspark.enabled", "true").getOrCreate())
    spark.sparkContext.setLogLevel("ERROR")
    jvm_pid = int(spark.sparkContext._jvm.java.lang.ProcessHandle.current().pid())

    def make(prior, seed):
        frame = spark.range(0, rows, 1, partitions)
        y = F.rand(seed) < prior
        z = F.randn(seed + 1000) * SIGMA + F.when(y, MU).otherwise(-MU)
        s = z * (2 * MU / SIGMA**2) + float(np.log(SOURCE_PRIOR / (1 - SOURCE_PRIOR)))
        return frame.select("id", s.alias("s"), y.cast("int").alias("y"))

    print(f"rows: {rows:.3g} labelled + {rows:.3g} unlabelled, {partitions} partitions, "
          "Spark local[2]")
    try:
        src, tgt = make(SOURCE_PRIOR, 1), make(TARGET_PRIOR, 2)
        # start-up: the Python workers start (and import NumPy, pandas, probwrap) on the first
        # job; a small warm-up job pays for that, reported apart from the tally times
        w0 = time.perf_counter()
        tally_scores(spark.range(0, 1000, 1, 2).select(F.randn(0).alias("s")))
        print(f"start-up (Python workers, first job): {time.perf_counter() - w0:.2f} s")
        t0 = time.perf_counter()
        tally = tally_scores(src.select("s", "y"), "y")
        t1 = time.perf_counter()
        unlabelled = tally_scores(tgt.select("s"))
        t2 = time.perf_counter()
        print(f"tally labelled:   {t1 - t0:8.2f} s  ({tally.n_bins} bins, "
              f"{rows / (t1 - t0) / 1e6:.2f} M rows/s)")
        print(f"tally unlabelled: {t2 - t1:8.2f} s  ({unlabelled.n_bins} bins)")
        iso, platt, cut, em, src_prior, wall = _fits(tally, unlabelled, t0)
        rss_fit = _rss_gib()
        jvm_fit = _jvm_peak_gib(jvm_pid)
        print(f"driver peak RSS:  {rss_fit:8.3f} GiB Python (traced peak "
              f"{tracemalloc.get_traced_memory()[1] / 2**30:.3f} GiB), JVM {jvm_fit:.3f} GiB "
              f"(target < 2 GiB: {'met' if max(rss_fit, jvm_fit) < 2 else 'MISSED'})")
        print(f"EM target prior:  {em[1]:.5f} (true {TARGET_PRIOR}); source prior "
              f"{src_prior[1]:.5f} (true {SOURCE_PRIOR})")
        # -- agreement with exact in-memory fits on the first `sub` rows (by id) --------------
        sub_src, sub_tgt = src.where(F.col("id") < sub), tgt.where(F.col("id") < sub)
        sub_tally = tally_scores(sub_src.select("s", "y"), "y")
        sub_unlabelled = tally_scores(sub_tgt.select("s"))
        got = sub_src.select("s", "y").toPandas()
        s, y = got["s"].to_numpy(), got["y"].to_numpy()
        s_u = sub_tgt.select("s").toPandas()["s"].to_numpy()
        print(f"\nagreement with exact in-memory fits on {sub:.3g} rows:")
        agree = _agreement(s, y, s_u, src_prior, sub_tally, sub_unlabelled,
                           (iso, platt, cut, em))
        rss_all = _rss_gib()
        print(f"driver peak RSS incl. the in-memory check: {rss_all:.3f} GiB Python, JVM "
              f"{_jvm_peak_gib(jvm_pid):.3f} GiB")
    finally:
        spark.stop()
    return {"engine": "Spark local[2]", "tally": t1 - t0, "tally_unlabelled": t2 - t1,
            "wall": wall, "memory": max(rss_fit, jvm_fit), "agree": agree}


def _jvm_peak_gib(pid: int) -> float:
    """Peak resident memory (VmHWM) of the Spark JVM, from /proc (NaN where unavailable)."""
    try:
        with open(f"/proc/{pid}/status") as fh:
            for line in fh:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 2**20
    except OSError:
        pass
    return float("nan")


def _in_child(engine: str, args: argparse.Namespace) -> dict:
    """Run one engine in a fresh (non-daemonic) process, so each reports its own peak memory."""
    ctx = multiprocessing.get_context("spawn")
    queue = ctx.Queue()
    child = ctx.Process(target=_child_main, args=(engine, vars(args), queue))
    child.start()
    result = queue.get()
    child.join()
    if isinstance(result, str):
        raise RuntimeError(f"the {engine} run failed:\n{result}")
    return result


def _child_main(engine: str, opts: dict, queue) -> None:
    import traceback

    try:
        queue.put(_run_engine(engine, opts))
    except BaseException:
        queue.put(traceback.format_exc())
    sys.stdout.flush()


def _run_engine(engine: str, opts: dict) -> dict:
    rows = int(opts["rows"])
    sub = int(min(opts["subsample"], rows))
    if engine == "spark":
        return _run_spark(rows, sub, int(opts["partitions"]), opts["driver_memory"])
    return _run_dask(rows, int(opts["chunk"]), int(opts["workers"]), sub)


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--engine", choices=("dask", "spark"), default="dask",
                        help="dask; or spark (runs Spark and Dask, prints them side by side)")
    parser.add_argument("--rows", type=float, default=1e8, help="rows per data set (1e8)")
    parser.add_argument("--subsample", type=float, default=1e7, help="rows of the exact check")
    parser.add_argument("--quick", action="store_true", help="1e6 rows, 1e6-row exact check")
    parser.add_argument("--chunk", type=float, default=2e6, help="rows per Dask block")
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--partitions", type=int, default=None,
                        help="Spark partitions (default: one per 2e6 rows, at least 2)")
    parser.add_argument("--driver-memory", default="1g", help="Spark driver (JVM) heap")
    args = parser.parse_args(argv)
    if args.quick:
        args.rows, args.subsample = 1e6, 1e6
    if args.partitions is None:
        args.partitions = max(2, int(args.rows // 2e6))
    if args.engine == "dask":
        _run_engine("dask", vars(args))
        return
    results = []
    for engine in ("spark", "dask"):
        print(f"=== {engine} ===", flush=True)
        results.append(_in_child(engine, args))
    print(f"\n=== side by side: {args.rows:.3g} rows per data set ===")
    print(f"{'':16s}{'tally s':>9s}{'total s':>9s}{'peak GiB':>10s}{'iso d logloss':>15s}"
          f"{'Platt d logloss':>17s}{'cutoff d cost':>15s}{'EM d prior':>12s}")
    for r in results:
        a = r["agree"]["whole tally"]
        print(f"{r['engine']:16s}{r['tally']:9.2f}{r['wall']:9.2f}{r['memory']:10.3f}"
              f"{a[1]:15.2e}{a[2]:17.2e}{a[3]:15.2e}{a[4]:12.2e}")


def _run_dask(rows: int, chunk: int, workers: int, sub: int) -> dict:
    import dask
    import dask.array as da
    from distributed import Client, LocalCluster

    tracemalloc.start()
    cluster = LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address=None)
    client = Client(cluster)
    print(f"rows: {rows:.3g} labelled + {rows:.3g} unlabelled, blocks of {chunk:.3g}, "
          f"{workers} workers")
    try:
        s_src, y_src = _make(da, rows, chunk, SOURCE_PRIOR, seed=1)
        s_tgt, _ = _make(da, rows, chunk, TARGET_PRIOR, seed=2)

        t0 = time.perf_counter()
        tally = tally_scores(s_src, y_src)
        t1 = time.perf_counter()
        unlabelled = tally_scores(s_tgt)
        t2 = time.perf_counter()
        print(f"tally labelled:   {t1 - t0:8.2f} s  ({tally.n_bins} bins, "
              f"{rows / (t1 - t0) / 1e6:.1f} M rows/s)")
        print(f"tally unlabelled: {t2 - t1:8.2f} s  ({unlabelled.n_bins} bins)")
        iso, platt, cut, em, src_prior, wall = _fits(tally, unlabelled, t0)
        rss_fit = _rss_gib()
        traced_fit = tracemalloc.get_traced_memory()[1] / 2**30
        print(f"client peak RSS:  {rss_fit:8.3f} GiB  (traced Python peak {traced_fit:.3f} GiB; "
              f"target < 2 GiB: {'met' if rss_fit < 2 else 'MISSED'})")
        print(f"EM target prior:  {em[1]:.5f} (true {TARGET_PRIOR}); source prior "
              f"{src_prior[1]:.5f} (true {SOURCE_PRIOR})")

        # -- agreement with exact in-memory fits on a subsample ---------------------------------
        s, y = dask.compute(s_src[:sub], y_src[:sub])
        s_u = s_tgt[:sub].compute()
        t7 = time.perf_counter()
        IsotonicMap().fit(s, y)
        t8 = time.perf_counter()
        IsotonicRegression(out_of_bounds="clip").fit(s, y)
        t9 = time.perf_counter()
        print(f"\nexact in-memory fits on {sub:.3g} rows: IsotonicMap {t8 - t7:.2f} s, "
              f"scikit-learn IsotonicRegression {t9 - t8:.2f} s "
              f"(ratio {(t9 - t8) / (t8 - t7):.2f})")
        agree = _agreement(s, y, s_u, src_prior, tally_scores(s, y), tally_scores(s_u),
                           (iso, platt, cut, em))
        print(f"client peak RSS incl. the in-memory check: {_rss_gib():.3f} GiB")
    finally:
        client.close()
        cluster.close()
    return {"engine": "Dask 2 workers", "tally": t1 - t0, "tally_unlabelled": t2 - t1,
            "wall": wall, "memory": rss_fit, "agree": agree}


if __name__ == "__main__":
    main()
