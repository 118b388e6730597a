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

``--compare`` instead prints, on the same draws (20, 50 and 100 rows by default), coverage and
median width of the interval as returned and of four other ways to build it, each also made to
contain the rows' own tied range: (1) m-out-of-n bootstrap (resamples of m = max(10, n / 2)
rows, the spread of their cutoffs around the rows' own scaled by (m / n)^(1/3), the cube-root
rate of an argmin of a step function; Kim & Pollard 1990, Annals of Statistics 18, 191-219;
Politis & Romano 1994 for subsampling); (2) the cutoffs whose excess cost over the least one
stays below the 95 % bootstrap quantile of the largest centred cost difference to any other
cutoff (a test of "this cutoff is best" inverted, least favourable null); (3) the same with the
quantile of the resamples' own regret of the rows' best cutoff; (4) exact binomial tests: a
cutoff is kept unless, for some other cutoff, the rows scoring between the two hold a share of
positives that rejects (one-sided, level 5 %) the share fp / (fp + fn) at which the two cost
the same (scipy.stats.binom), i.e. unless the rows show another cutoff cheaper; below 100
rows this is ``exact_low`` / ``exact_high`` of the returned interval (checked equal here). About
four minutes.
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


def _other_intervals(p, y, costs, seed, n_resamples=200, level=0.95):
    """The four alternatives of ``--compare`` (module docstring), each as (low, high)."""
    from scipy.stats import binom

    from probwrap.decision._cutoff import _pick_optimum, _prepare
    from probwrap.decision._cutoff_rows import _RowCosts, _SortedRows

    _, yi, _, matrix, _ = _prepare(p, y, costs, None)
    rows = _SortedRows(p, (0.0, 1.0))
    rc = _RowCosts(matrix, yi, None)
    d_sorted = (rc.c0 - rc.c1)[rows.order]
    c1 = rc.c1[rows.order]
    n = p.shape[0]
    everywhere = np.ones(rows.lower.shape[0], dtype=bool)
    total, _, weight = rows.curve(d_sorted, float(c1.sum()), None)
    cost = total / weight
    best, c_hat, tie_lo, tie_hi, _ = _pick_optimum(cost, rows.lower, rows.upper, everywhere)
    rng = np.random.RandomState(seed)
    m = max(10, n // 2)
    boot_cost = np.empty((n_resamples, cost.shape[0]))
    small = np.empty(n_resamples)
    for b in range(n_resamples):
        cs = np.bincount(rng.randint(0, n, size=n), minlength=n).astype(float)
        t, _, wt = rows.curve(d_sorted * cs, float(c1 @ cs), cs)
        boot_cost[b] = t / wt
        cm = np.bincount(rng.randint(0, n, size=m), minlength=n).astype(float)
        t, _, wt = rows.curve(d_sorted * cm, float(c1 @ cm), cm)
        small[b] = _pick_optimum(t / wt, rows.lower, rows.upper, everywhere)[1]
    a = (1.0 - level) / 2.0

    def hull(keep):
        keep = np.flatnonzero(keep)
        return (min(rows.lower[keep.min()], tie_lo), max(rows.upper[keep.max()], tie_hi))

    out = {}
    r = (m / n) ** (1.0 / 3.0)
    dl, dh = np.quantile(small - c_hat, [a, 1.0 - a])
    out["m of n"] = (min(c_hat - dh * r, tie_lo), max(c_hat - dl * r, tie_hi))
    moved = boot_cost - cost
    worst = np.quantile(moved - moved.min(axis=1, keepdims=True), level, axis=0)
    out["sup test"] = hull(cost - cost.min() <= worst + 1e-12)
    regret = boot_cost[:, best] - boot_cost.min(axis=1)
    out["regret"] = hull(cost - cost.min() <= np.quantile(regret, level) + 1e-12)
    ys = yi[rows.order].astype(float)
    pos = np.concatenate([[0.0], np.cumsum(ys)[rows.ends]])
    cnt = np.concatenate([[0.0], (rows.ends + 1).astype(float)])
    even = float(costs["fp"]) / (float(costs["fp"]) + float(costs["fn"]))
    k = cnt[None, :] - cnt[:, None]  # rows between decision j (row) and j' (column)
    hits = pos[None, :] - pos[:, None]
    # j below j': j acts on the rows between, no worse while their share is >= even
    up = np.where(k > 0, binom.cdf(hits, np.maximum(k, 1), even), 1.0)
    # j above j': j does not act on them, no worse while their share is <= even
    down = np.where(k < 0, binom.sf(-hits - 1, np.maximum(-k, 1), even), 1.0)
    out["exact"] = hull(np.minimum(up, down).min(axis=1) >= 1.0 - level)
    return out


def compare(draws: int, sizes: list[int]) -> None:
    """Coverage and median width of the returned interval and the four alternatives."""
    names = ("as returned", "m of n", "sup test", "regret", "exact")
    print(f"{'data':18} {'costs':7} {'n':>4} | " + " | ".join(f"{m:>16}" for m in names))
    print(f"{'':18} {'':7} {'':>4} | " + " | ".join(f"{'cover':>8} {'width':>7}" for _ in names))
    for name, X, y in _populations():
        Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
        p = LogisticRegression(C=1.0, max_iter=5000).fit(Xa, ya).predict_proba(Xb)[:, 1]
        for costs in ({"fp": 1.0, "fn": 4.0}, {"fp": 1.0, "fn": 1.0}):
            lo, hi = search_cutoff(p, yb, costs, score_bounds=(0, 1)).interval
            rng = np.random.default_rng(0)
            for n in sizes:
                cover = {m: [] for m in names}
                width = {m: [] for m in names}
                done = 0
                while done < draws:
                    idx = rng.choice(p.shape[0], n, replace=False)
                    if yb[idx].min() == yb[idx].max():
                        continue
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        ci = cutoff_interval(p[idx], yb[idx], costs, score_bounds=(0, 1),
                                             n_resamples=200, random_state=done)
                    found = {"as returned": (ci.low, ci.high),
                             **_other_intervals(p[idx], yb[idx], costs, done)}
                    if np.isfinite(ci.exact_low):  # below 100 rows the library gives it too
                        assert np.allclose(found["exact"], (ci.exact_low, ci.exact_high))
                    for m, (a, b) in found.items():
                        cover[m].append(a <= hi and b >= lo)
                        width[m].append(b - a)
                    done += 1
                print(f"{name:18} fn={costs['fn']:<4g} {n:4d} | " + " | ".join(
                    f"{np.mean(cover[m]):8.3f} {np.median(width[m]):7.3f}" for m in names),
                    flush=True)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--draws", type=int, default=200)
    ap.add_argument("--sizes", default="20,50,100,200")
    ap.add_argument("--compare", action="store_true")
    args = ap.parse_args()
    sizes = [int(v) for v in args.sizes.split(",")]
    if args.compare:
        compare(args.draws, [v for v in sizes if v <= 100])
        return
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
