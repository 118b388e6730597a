"""The tuned cost rule on the sets of the nineteenth and twentieth sessions (and the older ones).

``CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": c}, strategy="tuned")`` fitted
on 40, 100 or 300 held-out rows; its realised cost per row on the remaining rows beside

* ``sklearn_tuned``: scikit-learn's ``TunedThresholdClassifierCV(model, scoring=cost,
  cv="prefit")`` fitted on the same rows;
* ``plugin``: ``c_fp / (c_fp + c_fn)`` on the model's own probabilities;
* ``anchor``: that plug-in cutoff on the wrapper's own calibrated probabilities (the map the
  wrapper chose on the held-out rows, ``cutoff_anchor_``; needs no cost search);
* ``least_cost``: the plain least-cost cutoff (``cost_curve_.cutoff``).

Ratios are of the mean test cost over the draws of a cell, 0.001 added to both sides
(``small_data_sweep.COST_FLOOR``). The worst cells are printed with what the held-out rows
looked like: positives, distinct scores, share of scores of exactly 0 or 1, and whether the
wrapper kept its anchor.

The sets: ``--sets old`` the binary tasks of ``small_data_sweep.py --only cost`` (with and
without ``--sets new``), ``--sets newer`` (default) bundled sets the cost sweeps had not read:
lifelines' lymph_node (death), lupus (death), stanford_heart_transplants (event) and waltons
(group), scikit-survival's GSE7390 breast-cancer expression set (distant metastasis), cgvhd
(status other than 1), veterans_lung_cancer (death within 100 days) and ACTG320 (death),
pingouin's Cleveland heart data (chi2_independence) and pairwise_corr (top-decile
neuroticism), statsmodels' nile (a low-flow year from the three before); multiclass: lifelines'
canadian_senators (how the term ended) and lymph_node (tumour grade), scikit-survival's
veterans_lung_cancer (cell type). lifelines, pingouin are used in this script only.

Run: ``python benchmarks/cost_newer_sets.py [--sets old|newer] [--seeds N] [--quick]``
(``--sets newer --seeds 3``: about 5 minutes on a quiet core; ``--sets old --seeds 1`` about
the same). ``--quick``: naive Bayes, forest and logistic regression only. Measured before and
after the exact settling test (docs/small_data.md, twenty-first session).
"""

from __future__ import annotations

import collections
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import make_scorer
from sklearn.model_selection import TunedThresholdClassifierCV

sys.path.insert(0, str(Path(__file__).parent))
sys.path.insert(0, str(Path(__file__).parent.parent))  # this checkout's probwrap, not an install
from small_data_sweep import (  # noqa: E402
    COST_FLOOR,
    COST_FN,
    COST_SIZES,
    _cost_binary_sets,
    _cost_models,
    _cost_new_binary_sets,
    _numeric,
    seed_range,
)

from probwrap import CalibrationWrapper, CostPolicyWrapper  # noqa: E402

MIN_TEST = 30  # the newer sets are small: test sets of 30-99 rows are kept (noisier)


def _frame_xy(d, target):
    X = d.drop(columns=target)
    for c in X.columns:
        if X[c].dtype.kind == "f":
            X[c] = X[c].fillna(X[c].median())
    return _numeric(X)


def newer_binary_sets():
    import lifelines.datasets as ll
    import pingouin as pg
    import sksurv.datasets as ss
    import statsmodels.api as sm

    d = ll.load_lymph_node()
    d = d.drop(columns=["diagdateb", "recdate", "deathdate", "survtime", "id"], errors="ignore")
    yield "lymph_node death", _frame_xy(d, ["censdead"]), d["censdead"].to_numpy(int)
    d = ll.load_lupus().dropna().drop(columns=["year_month_of_diagnosis",
                                            "year_month_of_last_observation"])
    yield "lupus death", _frame_xy(d, ["dead"]).astype(float), d["dead"].to_numpy(int)
    d = ll.load_stanford_heart_transplants()
    yield "stanford_heart event", _frame_xy(d, ["event", "id"]), d["event"].to_numpy(int)
    d = ll.load_waltons()
    yield "waltons miR-137", d[["T", "E"]].to_numpy(float), (d["group"] != "control").to_numpy(int)
    X, y = ss.load_breast_cancer()
    yield "GSE7390 metastasis", _numeric(X), y["e.tdm"].astype(int)
    X, y = ss.load_cgvhd()
    yield "cgvhd status!=1", _numeric(X), (y["status"] != 1).astype(int)
    X, y = ss.load_veterans_lung_cancer()
    yield "veterans death<100d", _numeric(X), (
        y["Status"] & (y["Survival_in_days"] < 100)).astype(int)
    X, y = ss.load_aids(endpoint="death")
    yield "ACTG320 death", _numeric(X), y["censor_d"].astype(int)
    d = pg.read_dataset("chi2_independence")
    yield "heart disease", _frame_xy(d, ["target"]), d["target"].to_numpy(int)
    d = pg.read_dataset("pairwise_corr")
    yield "neuroticism top decile", d[["Extraversion", "Openness", "Agreeableness",
                                       "Conscientiousness"]].to_numpy(float), (
        d["Neuroticism"] > d["Neuroticism"].quantile(0.9)).to_numpy(int)
    a = sm.datasets.nile.load_pandas().data["volume"].to_numpy(float)
    lags = np.column_stack([a[2:-1], a[1:-2], a[:-3]])
    yield "nile low flow", lags, (a[3:] < np.median(a)).astype(int)


def newer_multiclass_sets():
    import lifelines.datasets as ll
    import sksurv.datasets as ss

    d = ll.load_canadian_senators()
    d = d[d["reason"].isin(["Death", "Resignation", "Retirement"])]
    X = _numeric(d[["Political Affiliation at Appointment", "Province / Territory",
                    "Appointed on the advice of"]])
    yield "canadian_senators end", np.column_stack([X, d["diff_days"].to_numpy(float)]), (
        d["reason"].to_numpy())
    d = ll.load_lymph_node()
    d = d.drop(columns=["diagdateb", "recdate", "deathdate", "id"], errors="ignore")
    yield "lymph_node grade", _frame_xy(d, ["grade"]), d["grade"].to_numpy(int)
    X, y = ss.load_veterans_lung_cancer()
    yield "veterans celltype", _numeric(X.drop(columns="Celltype")), X["Celltype"].to_numpy(str)


def _realised(y, act, c_fn) -> float:
    act = np.asarray(act).astype(int)
    return float(np.mean((act == 1) & (y == 0)) + c_fn * np.mean((act == 0) & (y == 1)))


def binary_sweep(sets, seeds, quick):
    rules = ["settled", "least_cost", "sklearn_tuned", "plugin", "anchor"]
    cells: dict = collections.defaultdict(lambda: collections.defaultdict(list))
    info: dict = collections.defaultdict(list)
    for dname, X, y in sets:
        X = np.asarray(X, float)
        y = np.asarray(y, int)
        for seed in seeds:
            rng = np.random.default_rng(100 + seed)
            idx = rng.permutation(len(y))
            n_fit = min(len(idx) // 3, 600)
            fit_rows, rest = idx[:n_fit], idx[n_fit:]
            for mname, model in _cost_models(False, seed):
                if quick and mname in ("svm_margins", "boosting"):
                    continue
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model.fit(X[fit_rows], y[fit_rows])
                margins = not hasattr(model, "predict_proba")
                for n in COST_SIZES:
                    if len(rest) - n < MIN_TEST:
                        continue
                    h_rows = rest[rng.choice(len(rest), n, replace=False)]
                    t_rows = np.setdiff1d(rest, h_rows)
                    Xh, yh, Xt, yt = X[h_rows], y[h_rows], X[t_rows], y[t_rows]
                    if np.bincount(yh, minlength=2).min() < 3:
                        continue
                    for c_fn in COST_FN:
                        costs = {"fp": 1.0, "fn": c_fn}
                        inner = FrozenEstimator(model)
                        if margins:
                            inner = CalibrationWrapper(inner, method="platt")
                        out = {}
                        with warnings.catch_warnings():
                            warnings.simplefilter("ignore")
                            cp = CostPolicyWrapper(inner, costs=costs, strategy="tuned",
                                                   random_state=seed).fit(Xh, yh)
                            out["settled"] = _realised(yt, cp.predict(Xt), c_fn)
                            pt = cp.estimator_.predict_proba(Xt)[:, 1]
                            out["least_cost"] = _realised(yt, pt > cp.cost_curve_.cutoff, c_fn)
                            out["anchor"] = _realised(yt, pt > cp.cutoff_anchor_, c_fn)
                            scorer = make_scorer(
                                lambda yy, pp, c=c_fn: -_realised(np.asarray(yy), pp, c))
                            sk = TunedThresholdClassifierCV(
                                model, scoring=scorer, cv="prefit", refit=False).fit(Xh, yh)
                            out["sklearn_tuned"] = _realised(yt, sk.predict(Xt), c_fn)
                            if margins:
                                pm = CostPolicyWrapper(inner, costs=costs).fit(Xh, yh)
                                out["plugin"] = _realised(yt, pm.predict(Xt), c_fn)
                            else:
                                out["plugin"] = _realised(
                                    yt, model.predict_proba(Xt)[:, 1] > 1 / (1 + c_fn), c_fn)
                            ph = cp.estimator_.predict_proba(Xh)[:, 1]
                        key = (dname, mname, n, c_fn)
                        for r in rules:
                            cells[key][r].append(out[r])
                        info[key].append(dict(
                            pos=int(yh.sum()), distinct=int(np.unique(ph).size),
                            exact01=float(np.mean((ph == 0) | (ph == 1))),
                            kept=bool(cp.cutoff_ == cp.cutoff_anchor_),
                            map=cp.cutoff_anchor_map_, cut=round(float(cp.cutoff_), 4),
                            anchor=round(float(cp.cutoff_anchor_), 4),
                            plug=round(1 / (1 + c_fn), 4), n_test=len(yt)))
            print(f"  {dname} seed {seed} done", flush=True)
    return cells, info


def report_binary(cells, info, mines=("settled", "least_cost")):
    others = ("sklearn_tuned", "plugin", "anchor")
    print("\nTest cost over another rule's (geometric mean | worst cell)")
    for mine in mines:
        print(f" {mine}")
        for n in COST_SIZES + ("all",):
            keys = [k for k in cells if n == "all" or k[2] == n]
            if not keys:
                continue
            line = f"  n={n!s:>4} ({len(keys):3d} cells)"
            for other in others:
                r = np.array([(np.mean(cells[k][mine]) + COST_FLOOR)
                              / (np.mean(cells[k][other]) + COST_FLOOR) for k in keys])
                line += f"  vs {other}: {np.exp(np.mean(np.log(r))):5.3f} | {r.max():5.2f}"
            print(line)
    for other in others:
        keys = list(cells)
        r = np.array([(np.mean(cells[k]["settled"]) + COST_FLOOR)
                      / (np.mean(cells[k][other]) + COST_FLOOR) for k in keys])
        print(f"\n worst cells, settled vs {other}:")
        for i in np.argsort(-r)[:6]:
            k = keys[i]
            costs = " ".join(f"{rr}={np.mean(v):.3f}" for rr, v in cells[k].items())
            print(f"  {r[i]:.2f} {k} {costs}")
            for d in info[k]:
                print(f"      {d}")


def multiclass_sweep(sets, seeds, quick):
    cells: dict = collections.defaultdict(lambda: collections.defaultdict(list))
    for dname, X, y in sets:
        X = np.asarray(X, float)
        classes, y = np.unique(y, return_inverse=True)
        k = len(classes)
        C = (1 - np.eye(k)) * (1 + np.arange(k))[:, None]
        for seed in seeds:
            rng = np.random.default_rng(seed)
            idx = rng.permutation(len(y))
            n_fit = min(len(y) // 3, 600)
            fit, rest = idx[:n_fit], idx[n_fit:]
            for mname, model in _cost_models(False, seed):
                if quick and mname in ("svm_margins", "boosting"):
                    continue
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    model.fit(X[fit], y[fit])
                inner = FrozenEstimator(model)
                if not hasattr(model, "predict_proba"):
                    inner = CalibrationWrapper(inner, method="temperature")
                for n in COST_SIZES:
                    if len(rest) - n < MIN_TEST:
                        continue
                    h = rest[rng.choice(len(rest), n, replace=False)]
                    t = np.setdiff1d(rest, h)
                    if len(np.unique(y[h])) < k:
                        continue
                    out = {}
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        for strat in ("tuned", "bayes"):
                            cp = CostPolicyWrapper(inner, costs=C, strategy=strat).fit(X[h], y[h])
                            out[strat] = C[y[t], cp.predict(X[t])].mean()
                        out["argmax"] = C[y[t], model.predict(X[t])].mean()
                    for r, v in out.items():
                        cells[(dname, mname, n)][r].append(v)
            print(f"  (multiclass) {dname} seed {seed} done", flush=True)
    print("\nMulticlass, errors on class j cost j + 1: tuned over bayes / argmax")
    for n in COST_SIZES:
        keys = [c for c in cells if c[2] == n]
        if not keys:
            continue
        line = f"  n={n:4d} ({len(keys):3d} cells)"
        for other in ("bayes", "argmax"):
            r = np.array([(np.mean(cells[c]["tuned"]) + COST_FLOOR)
                          / (np.mean(cells[c][other]) + COST_FLOOR) for c in keys])
            line += f"  vs {other}: {np.exp(np.mean(np.log(r))):5.3f} | {r.max():5.2f}"
            worst = keys[int(np.argmax(r))]
            line += f" {worst}"
        print(line)


def main(argv):
    quick = "--quick" in argv
    seeds = seed_range(argv, 2)
    which = argv[argv.index("--sets") + 1] if "--sets" in argv else "newer"
    if which == "old":
        sets = list(_cost_binary_sets(False)) + list(_cost_new_binary_sets(False))
        multi = []
    else:
        sets = list(newer_binary_sets())
        multi = list(newer_multiclass_sets())
    cells, info = binary_sweep(sets, seeds, quick)
    report_binary(cells, info)
    if multi:
        multiclass_sweep(multi, seeds, quick)


if __name__ == "__main__":
    main(sys.argv[1:])
