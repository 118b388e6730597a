"""``PriorShiftWrapper.monitor``'s feature check across the batches of one call: no correction
(each batch at 1 %), Holm's, or Benjamini-Hochberg's (session 29).

``monitor`` with ``feature_check_rows`` tests every batch's features against the labelled
classes mixed at the batch's maximum-likelihood shares, and warns once per call naming the
batches below 1 %. With many batches (a year of weeks) a call names an ordinary batch by chance
more and more often. This script measures how often, and what a correction across the call's
batches (statsmodels' ``multipletests``, Holm 1979, Benjamini & Hochberg 1995) costs in batches
with a real feature shift found.

Per set and repetition: a frozen logistic regression (fitted on a third of the rows), a wrapper
fitted on 150 labelled rows, and one ``monitor`` call on 24 *null* batches of 150 rows (a prior
shift only: each class's rows drawn at random from the unlabelled pool, at x0.5, x1 and x2 the
rarest class's share in turn) and 8 *shifted* batches of 150 rows (a feature shift within the
classes: ``--tilt`` of the rows, 70 % by default, from the unlabelled rows above the median of a
numeric column, the rest from below; the class shares follow). From those p-values, calls of
B = 4, 12 and 24 batches are formed with 0, 1 and B / 4 shifted batches, and each rule is
applied at 1 %: the share of calls without a shift that warn (family-wise false alarms), the
share of the named batches that are null (false discovery proportion) and the share of shifted
batches named (power).

Sets: the session-29 hunt's (``shift_real_hunt29.sets``) with at least 1,500 rows.

Run: nice python benchmarks/monitor_feature_multiplicity.py [--reps 8] [--tilt 0.7] [--quick]
Results: docs/evidence/prior_shift_log.md, "The session-29 hunt (session 29)".
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
import pandas as pd
import shift_real_hunt24 as h24
from shift_real_hunt29 import sets
from sklearn.frozen import FrozenEstimator
from statsmodels.stats.multitest import multipletests

from probwrap import PriorShiftWrapper

LEVEL = 0.01
N_NULL, N_SHIFT, SIZE, N_LAB = 24, 8, 150, 150


def one_call(X, y, rep, tilt):
    """The feature p-values of one monitor call: (null batches', shifted batches')."""
    classes = np.unique(y)
    A, B, C = h24.split3(y, rep)
    model = h24.make_model("lr").fit(X.iloc[A], y[A])
    L = h24.labelled(B, y[B], classes, N_LAB, np.random.default_rng([rep, 17]))
    U = np.setdiff1d(np.concatenate([B, C]), L)
    source = np.array([np.mean(y[U] == c) for c in classes])
    kinds, j = h24.kinds_for(source)
    rng = np.random.default_rng([rep, 23])
    parts, labels = [], []
    for i in range(N_NULL):
        shares = h24.target_shares(source, ("x0.5", "x1", "x2")[i % 3], j, rng)
        parts.append(U[h24.draw(y[U], classes, shares, SIZE, rng)])
        labels += [f"null{i}"] * SIZE
    numeric = [c for c in range(X.shape[1]) if X.iloc[U, c].nunique() > 2] or [0]
    for i in range(N_SHIFT):
        col = X.iloc[U, numeric[i % len(numeric)]].to_numpy(float)
        hi, lo = U[col > np.median(col)], U[col <= np.median(col)]
        n_hi = int(round(tilt * SIZE))
        parts.append(np.concatenate([rng.choice(hi, n_hi, replace=False),
                                     rng.choice(lo, SIZE - n_hi, replace=False)]))
        labels += [f"shift{i}"] * SIZE
    idx = np.concatenate(parts)
    psw = PriorShiftWrapper(FrozenEstimator(model), random_state=rep, feature_check_rows=2000)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw.fit(X.iloc[L], y[L])
        tab = psw.monitor(X.iloc[idx].reset_index(drop=True), batches=np.array(labels))
    p = {str(b): float(v) for b, v in zip(tab["batch"], tab["feature_pvalue"], strict=True)}
    return (np.array([p[f"null{i}"] for i in range(N_NULL)]),
            np.array([p[f"shift{i}"] for i in range(N_SHIFT)]))


def rules(p):
    """Batches named by each rule at LEVEL."""
    out = {"none": p < LEVEL}
    for how in ("holm", "fdr_bh"):
        out[how] = multipletests(p, alpha=LEVEL, method=how)[0]
    return out


def main() -> None:
    """Run the measurement and print the table."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--reps", type=int, default=8)
    ap.add_argument("--tilt", type=float, default=0.7)
    ap.add_argument("--quick", action="store_true", help="2 repetitions, two sets")
    a = ap.parse_args()
    reps = 2 if a.quick else a.reps
    t0 = time.time()
    got = []
    chosen = [(n, X, y) for n, X, y in sets() if len(y) >= 1500]
    if a.quick:
        chosen = chosen[:2]
    for name, X, y in chosen:
        for rep in range(reps):
            p0, p1 = one_call(X, y, rep, a.tilt)
            got.append((name, rep, p0, p1))
            print(f"{name[:30]:30s} rep {rep}: null p < 1 % {int(np.sum(p0 < LEVEL))} of "
                  f"{len(p0)} (smallest {np.nanmin(p0):.3g}); shifted p < 1 % "
                  f"{int(np.sum(p1 < LEVEL))} of {len(p1)}", flush=True)
    allnull = np.concatenate([g[2] for g in got])
    allnull = allnull[np.isfinite(allnull)]
    print(f"\nnull batches {len(allnull)}: p < 1 % {np.mean(allnull < 0.01):.4f}, < 5 % "
          f"{np.mean(allnull < 0.05):.4f}, < 10 % {np.mean(allnull < 0.10):.4f}; "
          f"p = 1: {np.mean(allnull >= 1 - 1e-12):.3f}")
    rows = []
    for name, rep, p0, p1 in got:
        for n_b in (4, 12, 24):
            for n_s in sorted({0, 1, n_b // 4}):
                # calls made of consecutive null batches (disjoint within a repetition)
                for c, start in enumerate(range(0, N_NULL - (n_b - n_s) + 1, n_b - n_s)):
                    # the shifted batches taken in turn, so every one of them is used
                    p = np.r_[p0[start:start + n_b - n_s], np.roll(p1, -c * n_s)[:n_s]]
                    if not np.all(np.isfinite(p)):
                        continue
                    null = np.r_[np.ones(n_b - n_s, bool), np.zeros(n_s, bool)]
                    for how, named in rules(p).items():
                        rows.append(dict(set=name, rep=rep, B=n_b, shifted=n_s, rule=how,
                                         warns=bool(named.any()),
                                         false_warn=bool((named & null).any()),
                                         named=int(named.sum()),
                                         false=int((named & null).sum()),
                                         hits=int((named & ~null).sum())))
    r = pd.DataFrame(rows)
    print("\nper call (1 % each rule): calls; share of calls naming a null batch; false share "
          "of all batches named; shifted batches named")
    for (n_b, n_s, how), g in r.groupby(["B", "shifted", "rule"], sort=False):
        named = g.named.sum()
        print(f"  B={n_b:2d} shifted={n_s:2d} {how:7s} calls {len(g):4d}  any false "
              f"{g.false_warn.mean():.3f}  false/named "
              f"{(g.false.sum() / named) if named else float('nan'):.3f}  power "
              f"{(g.hits.sum() / (n_s * len(g))) if n_s else float('nan'):.3f}")
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
