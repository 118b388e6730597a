"""Scale benchmark: tallies of 10^8 lazily generated scores on a Dask LocalCluster.

Run ``python benchmarks/scale.py`` (10^8 rows, the default) or ``--rows 20000000`` on a small
machine. The script

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
"""

from __future__ import annotations

import argparse
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


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=float, default=1e8, help="rows per data set (1e8)")
    parser.add_argument("--subsample", type=float, default=1e7, help="rows of the exact check")
    parser.add_argument("--chunk", type=float, default=2e6, help="rows per Dask block")
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args(argv)
    rows, chunk = int(args.rows), int(args.chunk)
    sub = int(min(args.subsample, rows))

    import dask
    import dask.array as da
    from distributed import Client, LocalCluster

    tracemalloc.start()
    cluster = LocalCluster(n_workers=args.workers, threads_per_worker=1, processes=True,
                           host="127.0.0.1", dashboard_address=None)
    client = Client(cluster)
    print(f"rows: {rows:.3g} labelled + {rows:.3g} unlabelled, blocks of {chunk:.3g}, "
          f"{args.workers} workers")
    try:
        s_src, y_src = _make(da, rows, chunk, SOURCE_PRIOR, seed=1)
        s_tgt, _ = _make(da, rows, chunk, TARGET_PRIOR, seed=2)

        t0 = time.perf_counter()
        tally = tally_scores(s_src, y_src)
        t1 = time.perf_counter()
        unlabelled = tally_scores(s_tgt)
        t2 = time.perf_counter()
        s_rows, y_rows, w_rows = tally.to_rows()
        iso = IsotonicMap().fit(s_rows, y_rows, sample_weight=w_rows)
        t3 = time.perf_counter()
        platt = PlattMap().fit(s_rows, y_rows, sample_weight=w_rows)
        t4 = time.perf_counter()
        cut = search_cutoff(s_rows, y_rows, COSTS, sample_weight=w_rows)
        t5 = time.perf_counter()
        src_prior = tally.label_weight / tally.total_weight
        proba_t, w_t = unlabelled.to_scores(proba=True)
        em = em_prior(proba_t, src_prior, sample_weight=w_t, tol=1e-9).prior
        t6 = time.perf_counter()
        rss_fit = _rss_gib()
        traced_fit = tracemalloc.get_traced_memory()[1] / 2**30

        print(f"tally labelled:   {t1 - t0:8.2f} s  ({tally.n_bins} bins, "
              f"{rows / (t1 - t0) / 1e6:.1f} M rows/s)")
        print(f"tally unlabelled: {t2 - t1:8.2f} s  ({unlabelled.n_bins} bins)")
        print(f"isotonic fit:     {t3 - t2:8.3f} s   Platt fit: {t4 - t3:.3f} s   "
              f"cutoff: {t5 - t4:.3f} s   EM: {t6 - t5:.3f} s")
        print(f"total wall time:  {t6 - t0:8.2f} s")
        print(f"client peak RSS:  {rss_fit:8.3f} GiB  (traced Python peak {traced_fit:.3f} GiB; "
              f"target < 2 GiB: {'met' if rss_fit < 2 else 'MISSED'})")
        print(f"EM target prior:  {em[1]:.5f} (true {TARGET_PRIOR}); source prior "
              f"{src_prior[1]:.5f} (true {SOURCE_PRIOR})")

        # -- agreement with exact in-memory fits on a subsample ---------------------------------
        s, y = dask.compute(s_src[:sub], y_src[:sub])
        s_u = s_tgt[:sub].compute()
        t7 = time.perf_counter()
        iso_exact = IsotonicMap().fit(s, y)
        t8 = time.perf_counter()
        IsotonicRegression(out_of_bounds="clip").fit(s, y)
        t9 = time.perf_counter()
        platt_exact = PlattMap().fit(s, y)
        cut_exact = search_cutoff(s, y, COSTS)
        em_exact = em_prior(np.column_stack([expit(-s_u), expit(s_u)]), src_prior,
                            tol=1e-9).prior
        sub_tally = tally_scores(s, y)
        rows_sub = sub_tally.to_rows()
        iso_sub = IsotonicMap().fit(rows_sub[0], rows_sub[1], sample_weight=rows_sub[2])
        platt_sub = PlattMap().fit(rows_sub[0], rows_sub[1], sample_weight=rows_sub[2])
        cut_sub = search_cutoff(rows_sub[0], rows_sub[1], COSTS, sample_weight=rows_sub[2])
        proba_u, w_u = tally_scores(s_u).to_scores(proba=True)
        em_sub = em_prior(proba_u, src_prior, sample_weight=w_u, tol=1e-9).prior

        p_iso = iso_exact.predict(s)
        ll_exact = _log_loss(platt_exact.predict(s), y)
        cost_exact = _cost(s, y, cut_exact.cutoff)
        print(f"\nexact in-memory fits on {sub:.3g} rows: IsotonicMap {t8 - t7:.2f} s, "
              f"scikit-learn IsotonicRegression {t9 - t8:.2f} s "
              f"(ratio {(t9 - t8) / (t8 - t7):.2f})")
        header = f"{'':22s}{'isotonic |dp| mean':>20s}{'Platt d log loss':>18s}"
        print(header + f"{'cutoff d cost':>15s}{'EM d prior':>12s}")
        for name, i_map, p_map, c_res, em_p in (
            ("subsample tally", iso_sub, platt_sub, cut_sub, em_sub),
            ("whole tally", iso, platt, cut, em),
        ):
            d_iso = float(np.mean(np.abs(i_map.predict(s) - p_iso)))
            d_ll = _log_loss(p_map.predict(s), y) - ll_exact
            d_cost = _cost(s, y, c_res.cutoff) / cost_exact - 1
            print(f"{name:22s}{d_iso:20.2e}{d_ll:18.2e}{d_cost:15.2e}{em_p[1] - em_exact[1]:12.2e}")
        print(f"client peak RSS incl. the in-memory check: {_rss_gib():.3f} GiB")
    finally:
        client.close()
        cluster.close()


if __name__ == "__main__":
    main()
