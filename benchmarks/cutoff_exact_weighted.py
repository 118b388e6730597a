"""Coverage of the exact cutoff range with unequal weights (Kish's effective rows).

Population: as in ``benchmarks/cutoff_interval_small.py`` — one half of statsmodels' bundled
``fair`` data and of scikit-learn's bundled ``breast_cancer`` (five weak features), scored by a
logistic regression fitted on the other half; the population's least-cost cutoffs are the range
of equally cheap cutoffs ``search_cutoff`` finds on the whole scored half (unweighted: every
population row counts once). Each draw takes ``n`` rows with replacement, row ``i`` with
probability ``q_i`` proportional to ``exp(tilt * score_i)`` (high scores oversampled, as a
review sample that favours flagged cases), and weights it ``1 / q_i`` (Hansen & Hurwitz 1943),
so the weighted cost curve of the draw estimates the population's. Printed per data set, costs,
tilt and ``n``: Kish's effective rows (median), and coverage and median width of the bootstrap
interval as returned and of the exact range (``exact_low`` / ``exact_high``), which counts the
rows between two cutoffs as Kish's effective rows since 4 December 2026 (NaN before).

Run: ``nice python benchmarks/cutoff_exact_weighted.py [--draws 200]`` (a few minutes).
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
from sklearn.model_selection import train_test_split

from probwrap.decision import cutoff_interval, search_cutoff


def main() -> None:
    import importlib.util
    from pathlib import Path

    from sklearn.linear_model import LogisticRegression

    spec = importlib.util.spec_from_file_location(
        "small", Path(__file__).with_name("cutoff_interval_small.py"))
    small = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(small)
    ap = argparse.ArgumentParser()
    ap.add_argument("--draws", type=int, default=200)
    ap.add_argument("--sizes", default="20,50")
    ap.add_argument("--tilts", default="1,3")
    args = ap.parse_args()
    sizes = [int(v) for v in args.sizes.split(",")]
    tilts = [float(v) for v in args.tilts.split(",")]
    print(f"{'data':18} {'costs':6} {'tilt':>4} {'n':>4} {'kish':>5} | {'bootstrap':>16} | "
          f"{'exact range':>16}")
    for name, X, y in small._populations():
        Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
        p = LogisticRegression(C=1.0, max_iter=5000).fit(Xa, ya).predict_proba(Xb)[:, 1]
        for costs in ({"fp": 1.0, "fn": 4.0}, {"fp": 1.0, "fn": 1.0}):
            lo, hi = search_cutoff(p, yb, costs, score_bounds=(0, 1)).interval
            for tilt in tilts:
                q = np.exp(tilt * p)
                q /= q.sum()
                rng = np.random.default_rng(0)
                for n in sizes:
                    cover = {"boot": [], "exact": []}
                    width = {"boot": [], "exact": []}
                    kish = []
                    done = 0
                    while done < args.draws:
                        idx = rng.choice(p.shape[0], n, replace=True, p=q)
                        if yb[idx].min() == yb[idx].max():
                            continue
                        w = 1.0 / q[idx]
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            ci = cutoff_interval(p[idx], yb[idx], costs, sample_weight=w,
                                                 score_bounds=(0, 1), n_resamples=200,
                                                 random_state=done)
                        kish.append(w.sum() ** 2 / (w @ w))
                        for key, (a, b) in (("boot", (ci.low, ci.high)),
                                            ("exact", (ci.exact_low, ci.exact_high))):
                            cover[key].append(a <= hi and b >= lo)
                            width[key].append(b - a)
                        done += 1
                    print(f"{name:18} fn={costs['fn']:<3g} {tilt:4g} {n:4d} "
                          f"{np.median(kish):5.1f} | "
                          + " | ".join(f"{np.mean(cover[k]):8.3f} {np.median(width[k]):7.3f}"
                                       for k in ("boot", "exact")), flush=True)


if __name__ == "__main__":
    main()
