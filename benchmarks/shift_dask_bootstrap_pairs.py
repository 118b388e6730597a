"""Dask bootstrap interval of ``adapt`` after a refit against the in-memory one, paired by seed.

The data of ``tests/test_distributed_refit_large.py``'s ``cancer`` fixture (scikit-learn's
breast cancer, 250 labelled rows, 300 unlabelled rows at prevalence 0.2, a logistic regression
refit with 3 folds); the Dask rows are forced onto the tally path (``KEPT_ROWS = 0``), the
path of more than 20,000 rows. Per seed (``random_state`` of the wrapper: the folds and the
bootstrap) both intervals and their replicate draws (mean, spread, 2.5 / 97.5 % quantiles);
printed: the paired mean differences with their standard errors, widths and, with ``redraw``,
the coverage of the batch's share when every seed also draws new unlabelled rows.

Run: nice python benchmarks/shift_dask_bootstrap_pairs.py 200 400 percentile [OUT.csv [redraw]]
     (seeds, resamples, interval; about 2 s a seed under load)
"""

import copy
import sys
import time
import warnings

import dask
import dask.array as da
import numpy as np
import pandas as pd
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap.scale._tally as tally_module
from probwrap import PriorShiftWrapper
from probwrap.shift._estimator import PriorEstimator


def main(argv=None):
    argv = sys.argv[1:] if argv is None else list(argv)
    tally_module.KEPT_ROWS = 0
    dask.config.set(scheduler="synchronous")
    n_seeds = int(argv[0]) if len(argv) > 0 else 40
    B = int(argv[1]) if len(argv) > 1 else 400
    kind = argv[2] if len(argv) > 2 else "percentile"
    out = argv[3] if len(argv) > 3 and argv[3] != "-" else None

    X, y = load_breast_cancer(return_X_y=True)
    y = (y == 0).astype(int)
    rng = np.random.default_rng(3)
    order = rng.permutation(y.shape[0])
    lab, pool = order[:250], order[250:]
    cls = (rng.uniform(size=300) < 0.2).astype(int)
    rows = np.where(cls == 1, rng.choice(pool[y[pool] == 1], 300),
                    rng.choice(pool[y[pool] == 0], 300))
    X_new = X[rows] + rng.normal(0, 0.01, (300, X.shape[1])) * X.std(0)
    truth = cls.mean()

    captured = []
    orig = PriorEstimator.replicate_draws

    def spy(self, *a, **k):
        d, dropped = orig(self, *a, **k)
        captured.append(d[:, 1].copy())
        return d, dropped

    PriorEstimator.replicate_draws = spy
    res = []
    t0 = time.time()
    redraw = len(argv) > 4
    for s in range(n_seeds):
        if redraw:
            g = np.random.default_rng([s, 99])
            cls = (g.uniform(size=300) < 0.2).astype(int)
            rows = np.where(cls == 1, g.choice(pool[y[pool] == 1], 300),
                            g.choice(pool[y[pool] == 0], 300))
            X_new = X[rows] + g.normal(0, 0.01, (300, X.shape[1])) * X.std(0)
            truth = cls.mean()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            boot = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
                                     cv=3, interval=kind, n_resamples=B, random_state=s).fit(X[lab], y[lab])
            captured.clear()
            mem = copy.deepcopy(boot).adapt(X_new)
            dm = captured[-1] if captured else np.array([np.nan])
            captured.clear()
            dist = copy.deepcopy(boot).adapt(da.from_array(X_new, chunks=(75, 30)))
            dd = captured[-1] if captured else np.array([np.nan])
        r = dict(seed=s, truth=truth, est_m=mem.target_prior_[1], est_d=dist.target_prior_[1],
                 ml_m=mem.prior_estimate_.ml_prior[1], ml_d=dist.prior_estimate_.ml_prior[1],
                 lo_m=mem.target_prior_interval_[1][0], hi_m=mem.target_prior_interval_[1][1],
                 lo_d=dist.target_prior_interval_[1][0], hi_d=dist.target_prior_interval_[1][1],
                 mean_m=dm.mean(), sd_m=dm.std(), q025_m=np.quantile(dm, .025), q975_m=np.quantile(dm, .975),
                 mean_d=dd.mean(), sd_d=dd.std(), q025_d=np.quantile(dd, .025), q975_d=np.quantile(dd, .975),
                 nm=len(dm), nd=len(dd))
        res.append(r)
        print(s, {k: round(float(v), 4) for k, v in r.items()}, f"{time.time()-t0:.0f}s", flush=True)
    df = pd.DataFrame(res)
    if out:
        df.to_csv(out, index=False)
    print(f"\n{len(df)} seeds, B={B}, {kind}; truth {truth:.3f}")
    for a in ["est", "ml", "lo", "hi", "mean", "sd", "q025", "q975"]:
        d = df[f"{a}_d"] - df[f"{a}_m"]
        print(f"  {a:5s} memory {df[f'{a}_m'].mean():.4f} dask {df[f'{a}_d'].mean():.4f} "
              f"paired diff {d.mean():+.5f} (se {d.std() / np.sqrt(len(d)):.5f}, t {d.mean() / (d.std() / np.sqrt(len(d)) + 1e-300):+.2f})")
    print(f"  coverage memory {np.mean((df.lo_m <= df.truth) & (df.truth <= df.hi_m)):.3f} dask {np.mean((df.lo_d <= df.truth) & (df.truth <= df.hi_d)):.3f}")
    print(f"  width memory {(df.hi_m - df.lo_m).mean():.4f} dask {(df.hi_d - df.lo_d).mean():.4f}")


if __name__ == "__main__":
    main()
