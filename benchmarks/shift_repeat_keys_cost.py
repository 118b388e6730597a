"""What the repeated-rows check adds to ``PriorShiftWrapper.adapt`` on many Dask rows.

Since 5 December 2026 (session 25) ``adapt`` on Dask or Spark rows beyond 20,000 judges their
repeats (``RepeatedRowsWarning``) with one more pass: a 128-bit key per row where it lives and a
shuffle of the keys into shares (``probwrap/scale/_repeat_keys.py``). This script times ``adapt``
on the same Dask rows with and without that pass (the check replaced by a no-op) and prints the
ratio, on scikit-learn's breast-cancer set (five columns, a frozen logistic regression fitted on
100 rows, 200 labelled rows) with ``--rows`` rows drawn from it with 1 % noise (all distinct: the
check finds nothing, the cost is the pass). Timings on a shared machine are noisy: take the
median of ``--repeats``.

Run: ``nice python benchmarks/shift_repeat_keys_cost.py [--rows 400000] [--chunk 50000]``.
"""

from __future__ import annotations

import argparse
import copy
import time
import warnings

import dask
import dask.array as da
import numpy as np
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=400_000)
    ap.add_argument("--chunk", type=int, default=50_000)
    ap.add_argument("--repeats", type=int, default=3)
    a = ap.parse_args()
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    idx = np.random.default_rng(0).permutation(len(y))
    fit, lab = idx[:100], idx[100:300]
    model = FrozenEstimator(LogisticRegression(max_iter=5000).fit(X[fit], y[fit]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(model, n_resamples=40, random_state=0).fit(X[lab], y[lab])
    rng = np.random.default_rng(1)
    rows = X[rng.integers(0, len(y), a.rows)] * rng.normal(1.0, 0.01, (a.rows, 5))
    Xd = da.from_array(rows, chunks=a.chunk)

    def timed(skip: bool) -> float:
        p = copy.deepcopy(psw)
        if skip:
            p._warn_repeats_where_rows_live = lambda *args, **kwargs: None
        start = time.perf_counter()
        with dask.config.set(scheduler="threads", num_workers=2), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            p.adapt(Xd)
        return time.perf_counter() - start

    without, with_check = [], []
    for _ in range(a.repeats):
        without.append(timed(True))
        with_check.append(timed(False))
    w0, w1 = float(np.median(without)), float(np.median(with_check))
    print(f"adapt on {a.rows:,} Dask rows ({a.chunk:,} a block): without the key pass "
          f"{w0:.2f} s, with it {w1:.2f} s (medians of {a.repeats}); ratio {w1 / w0:.2f}")


if __name__ == "__main__":
    main()
