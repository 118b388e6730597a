"""How often does ``cutoff_interval`` cover the population's least-cost cutoff on 20-200 rows?

Population: one half of statsmodels' bundled ``fair`` data (6,366 rows; positive = any affair,
32 %) scored by a logistic regression fitted on the other half, and scikit-learn's bundled
``breast_cancer`` (569 rows) scored the same way on five weak features (a 50/50 split; the
scored half is the population). The population's least-cost cutoffs are the range of equally
cheap cutoffs that ``search_cutoff`` finds on the whole scored half. Each draw takes ``n`` rows
of the scored half without replacement and builds the 95 % interval; it covers when it meets
that range. Printed per data set, costs and ``n``: coverage of the plain bootstrap percentile
interval (the interval before the rows' own tied range was added) and of the interval as
returned now, their median widths, and the share of draws where the tied range widened it.

Run: ``nice python benchmarks/cutoff_interval_small.py [--draws 200]`` (about a minute).
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split

from probwrap.decision import cutoff_interval, search_cutoff


def _populations():
    import statsmodels.api as sm

    d = sm.datasets.fair.load_pandas().data
    X = d.drop(columns="affairs").to_numpy(float)
    y = (d["affairs"] > 0).to_numpy(int)
    yield "fair", X, y
    X, y = load_breast_cancer(return_X_y=True)
    yield "breast_cancer[:5]", X[:, :5], 1 - y


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--draws", type=int, default=200)
    ap.add_argument("--sizes", default="20,50,100,200")
    args = ap.parse_args()
    sizes = [int(v) for v in args.sizes.split(",")]
    print(f"{'data':18} {'costs':10} {'n':>4} {'cover old':>9} {'cover new':>9} "
          f"{'width old':>9} {'width new':>9} {'widened':>8}")
    for name, X, y in _populations():
        Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
        model = LogisticRegression(C=1.0, max_iter=5000).fit(Xa, ya)
        p = model.predict_proba(Xb)[:, 1]
        for costs in ({"fp": 1.0, "fn": 4.0}, {"fp": 1.0, "fn": 1.0}):
            pop = search_cutoff(p, yb, costs, score_bounds=(0, 1))
            lo, hi = pop.interval
            label = f"fn={costs['fn']:g}"
            rng = np.random.default_rng(0)
            for n in sizes:
                cov_old = cov_new = wid = 0
                w_old, w_new = [], []
                done = 0
                while done < args.draws:
                    idx = rng.choice(p.shape[0], n, replace=False)
                    if yb[idx].min() == yb[idx].max():
                        continue
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        ci = cutoff_interval(p[idx], yb[idx], costs, score_bounds=(0, 1),
                                             n_resamples=200, random_state=done)
                    a, b = np.quantile(ci.bootstrap_cutoffs, [0.025, 0.975])
                    cov_old += a <= hi and b >= lo
                    cov_new += ci.low <= hi and ci.high >= lo
                    wid += ci.widened_to_ties
                    w_old.append(b - a)
                    w_new.append(ci.high - ci.low)
                    done += 1
                d = args.draws
                print(f"{name:18} {label:10} {n:4d} {cov_old / d:9.3f} {cov_new / d:9.3f} "
                      f"{np.median(w_old):9.3f} {np.median(w_new):9.3f} {wid / d:8.3f}",
                      flush=True)


if __name__ == "__main__":
    main()
